"""The study objective in the file (``study.objective``) and inside Baton (the
assumptions ``objective_weights`` and ``objective_reference``)."""

from __future__ import annotations

import json

import pytest

from allocation.core import load_study, read_study
from allocation.core.assumptions import resolve_assumptions
from allocation.core.objective_file import objective_from_header, with_objective
from allocation.core.writing import study_to_json

from .analysis.studies import leaf, study_data

OBJECTIVE = {
    "weights": {"burden_s_per_day": 2.0},
    "reference": {"burden_s_per_day": {"good": 0, "poor": 3600}},
}


def document(**header):
    data = study_data([leaf("T", occurs={"times": ["08:00"]})], {"T": {"human": "pat"}})
    data["study"].update(header)
    return data


def test_the_objective_is_read_into_the_assumptions_and_written_back_in_its_place():
    study = read_study(document(objective=OBJECTIVE))
    resolved = resolve_assumptions(study.assumptions)
    assert resolved["objective_weights"]["burden_s_per_day"] == 2.0
    assert resolved["objective_reference"] == OBJECTIVE["reference"]
    written = json.loads(json.dumps(study_to_json(study)))
    assert written["study"]["objective"] == OBJECTIVE
    assert "objective_weights" not in written["study"].get("assumptions", {})
    assert read_study(written).assumptions == study.assumptions


def test_an_objective_among_the_assumptions_is_read_and_moved():
    older = document(assumptions={"objective_weights": {"burden_s_per_day": 2.0}})
    written = json.loads(json.dumps(study_to_json(read_study(older))))
    assert written["study"]["objective"] == {"weights": {"burden_s_per_day": 2.0}}
    assert "assumptions" not in written["study"]


def test_a_file_without_an_objective_is_written_as_it_was():
    plain = document(assumptions={})
    assert json.loads(json.dumps(study_to_json(read_study(plain))))["study"] == plain["study"]


@pytest.mark.parametrize(
    ("objective", "path", "words"),
    [
        ({"weights": {"burden_s_per_day": -1}}, "$.study.objective.weights", "0"),
        ({"weights": {"nonsense": 1}}, "$.study.objective.weights", "nonsense"),
        (
            {"reference": {"burden_s_per_day": {"good": 10, "poor": 5}}},
            "$.study.objective.reference",
            "must not be below good",
        ),
        ({"ranking": {}}, "$.study.objective.ranking", ""),
    ],
)
def test_a_bad_objective_is_refused_with_its_path(objective, path, words):
    problems = load_study(document(objective=objective)).errors
    assert [p.path for p in problems] == [path], problems
    assert words in problems[0].message


def test_an_objective_given_twice_is_refused():
    twice = document(
        objective={"weights": {"burden_s_per_day": 2.0}},
        assumptions={"objective_weights": {"burden_s_per_day": 1.0}},
    )
    problems = load_study(twice).errors
    assert [p.path for p in problems] == ["$.study.assumptions.objective_weights"]


def test_the_file_form_and_baton_s_form_convert_both_ways():
    inside = {"monitoring_s": 12, "objective_reference": OBJECTIVE["reference"]}
    moved = with_objective({"study": {"id": "s", "assumptions": inside}})
    assert moved["study"] == {
        "id": "s",
        "assumptions": {"monitoring_s": 12},
        "objective": {"reference": OBJECTIVE["reference"]},
    }
    assert objective_from_header(moved["study"]) == inside
