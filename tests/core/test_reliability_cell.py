"""The reliability and people-asked-in-turn cells of the allocation table: each study-file
value written as a cell reads back as the same value (hand-written pairs)."""

from __future__ import annotations

import pytest

from allocation.core.reliability_cell import (
    parse_people_cell,
    parse_reliability_cell,
    people_cell,
    reliability_cell,
)

PAIRS = [
    ("5 in 1000", {"fails_per_1000": 5}),
    (
        "0.5 in 1000; detected by alert; fallback sam; 0.2 false alerts a day",
        {
            "fails_per_1000": 0.5,
            "detected_by": "alert",
            "fallback": "sam",
            "false_alerts_per_day": 0.2,
        },
    ),
    ("40 in 1000; detected by none", {"fails_per_1000": 40, "detected_by": "none"}),
]


@pytest.mark.parametrize(("text", "value"), PAIRS)
def test_a_reliability_cell_and_its_value_are_one_another(text, value):
    assert reliability_cell(value) == text
    assert parse_reliability_cell(text) == value


def test_the_parts_may_come_in_any_order_and_1000_with_a_comma():
    assert parse_reliability_cell("detected by display; 3 in 1,000") == {
        "fails_per_1000": 3,
        "detected_by": "display",
    }


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("often", "is not part of a reliability"),
        ("detected by alert", "gives no failures in 1,000"),
        ("5 in 1000; 6 in 1000", "gives fails_per_1000 twice"),
        ("x in 1000", "is not a number"),
    ],
)
def test_a_bad_reliability_cell_says_why(text, words):
    with pytest.raises(ValueError, match=words):
        parse_reliability_cell(text)


def test_people_asked_in_turn_are_ids_separated_by_commas():
    assert people_cell(["pat", "sam"]) == "pat, sam"
    assert parse_people_cell("pat, sam") == ["pat", "sam"]
    assert people_cell("pat") == "pat" and parse_people_cell(" pat ") == "pat"
