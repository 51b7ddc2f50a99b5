"""A monitoring style in one sheet cell and back (allocation.core.monitoring)."""

from __future__ import annotations

import pytest

from allocation.core.monitoring import monitoring_cell, parse_monitoring_cell

CASES = [
    ("each", "each"),
    ("exception", "exception"),
    ("periodic 2", {"style": "periodic", "per_day": 2}),
    ("periodic 0.5", {"style": "periodic", "per_day": 0.5}),
    ("continuous 0.25", {"style": "continuous", "share": 0.25}),
]


@pytest.mark.parametrize(("text", "value"), CASES)
def test_a_cell_reads_as_the_study_file_writes_and_back(text, value):
    assert parse_monitoring_cell(text) == value
    assert monitoring_cell(value) == text


def test_the_default_is_an_empty_cell():
    assert monitoring_cell(None) == ""


@pytest.mark.parametrize(
    ("text", "words"),
    [
        ("weekly", "is not a monitoring style"),
        ("each 2", "each takes no amount"),
        ("periodic", "periodic needs one amount"),
        ("continuous half", "'half' is not a number"),
    ],
)
def test_a_bad_cell_says_what_to_write(text, words):
    with pytest.raises(ValueError, match=words):
        parse_monitoring_cell(text)
