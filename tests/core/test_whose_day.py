"""Whose night: a rate names the person whose awake or asleep time it follows (``of``),
version 1 files are upgraded without changing a figure, and no figure depends on the
order of the agents in the file.

The shares below are worked by hand: occurrences at a rate spread evenly over the
part of the day they follow, so the share that falls in a window is the overlap's
length over the part's length.
"""

from __future__ import annotations

import copy
import json
import random
from typing import Any

import pytest

from allocation.core.analysis.plan import analyse_plan, prepare
from allocation.core.analysis.report import analysis_json
from allocation.core.fileformat import load_study, read_study
from allocation.core.synthetic import synthetic_study
from allocation.core.writing import study_to_json
from allocation.examples import example_paths


def _study(version: int, **rules: dict[str, Any]) -> dict[str, Any]:
    """Two sleepers: the person 22:00-06:00, the partner 00:00-08:00; one task per rule."""
    return {
        "format": "baton.study",
        "version": version,
        "study": {"id": "night", "title": "Whose night", "scale": "sv10"},
        "agents": [
            {"id": "person", "name": "Person", "kind": "human", "asleep": ["22:00", "06:00"]},
            {"id": "partner", "name": "Partner", "kind": "human", "asleep": ["00:00", "08:00"]},
        ],
        "events": [],
        "tasks": [
            {"id": task_id, "title": task_id, "occurs": occurs, "duration_s": 60, "severity": 2}
            for task_id, occurs in rules.items()
        ],
        "links": [],
        "plans": [
            {
                "id": "p",
                "name": "Plan",
                "assignments": {task_id: {"human": "person"} for task_id in rules},
            }
        ],
    }


def _asleep_shares(document: dict[str, Any]) -> dict[str, dict[str, float]]:
    result = load_study(document)
    assert result.errors == [], result.errors
    analysis = analyse_plan(result.study, "p")
    return {task_id: figures.asleep_share for task_id, figures in analysis.tasks.items()}


def test_a_rate_follows_the_night_it_names():
    shares = _asleep_shares(
        _study(
            2,
            A={"per_day": 2, "when": "asleep", "of": "partner"},
            B={"per_day": 2, "when": "awake", "of": "person"},
            C={"per_day": 3},
        )
    )
    # A: evenly over the partner's 00:00-08:00; 00:00-06:00 of it is the person's night.
    assert shares["A"]["partner"] == pytest.approx(1.0)
    assert shares["A"]["person"] == pytest.approx(6 / 8)
    # B: evenly over the person's awake 06:00-22:00; 06:00-08:00 of it the partner sleeps.
    assert shares["B"]["person"] == pytest.approx(0.0)
    assert shares["B"]["partner"] == pytest.approx(2 / 16)
    # C: no "when" is "any" in version 2: evenly over the day, 8 h of 24 in each night.
    assert shares["C"]["person"] == pytest.approx(8 / 24)
    assert shares["C"]["partner"] == pytest.approx(8 / 24)


@pytest.mark.parametrize(
    ("occurs", "path"),
    [
        ({"per_day": 2, "when": "asleep"}, "$.tasks[0].occurs.of"),
        ({"per_day": 2, "when": "awake"}, "$.tasks[0].occurs.of"),
        ({"every_days": 7}, "$.tasks[0].occurs.of"),
    ],
)
def test_with_two_sleepers_a_version_2_rate_must_say_whose(occurs, path):
    result = load_study(_study(2, A=occurs))
    assert [(p.path, p.level) for p in result.errors] == [(path, "error")]
    assert "person, partner each have an asleep window" in result.errors[0].message


def test_of_names_a_human_of_the_study():
    document = _study(2, A={"per_day": 2, "when": "asleep", "of": "nobody"})
    result = load_study(document)
    assert [p.path for p in result.errors] == ["$.tasks[0].occurs.of"]
    document = _study(2, A={"times": ["08:00"], "of": "person"})
    assert [p.path for p in load_study(document).errors] == ["$.tasks[0].occurs.of"]


def test_a_version_1_file_is_upgraded_as_version_1_meant_it_with_a_warning():
    """Version 1: a rate without "when" follows the awake day, and the night is the first
    listed sleeper's."""
    old = _study(1, A={"per_day": 2, "when": "asleep"}, B={"per_day": 2})
    result = load_study(old)
    assert result.errors == []
    assert [p.path for p in result.warnings] == [
        "$.tasks[0].occurs.when",
        "$.tasks[1].occurs.per_day",
    ]
    assert "taken as the day and night of 'person'" in result.warnings[0].message
    written = study_to_json(result.study)
    assert written["version"] == 2
    assert written["tasks"][0]["occurs"] == {"per_day": 2, "when": "asleep", "of": "person"}
    assert written["tasks"][1]["occurs"] == {"per_day": 2, "when": "awake", "of": "person"}
    # The upgraded file reads back without a problem and gives the figures worked by hand:
    # A evenly over the person's 22:00-06:00 (the partner sleeps 00:00-06:00 of it).
    shares = _asleep_shares(written)
    assert shares["A"]["person"] == pytest.approx(1.0)
    assert shares["A"]["partner"] == pytest.approx(6 / 8)
    assert shares["B"]["person"] == pytest.approx(0.0)


def test_a_version_1_file_with_one_sleeper_needs_no_name():
    old = _study(1, A={"per_day": 2})
    old["agents"][1].pop("asleep")
    result = load_study(old)
    assert result.problems == []
    assert study_to_json(result.study)["tasks"][0]["occurs"] == {"per_day": 2, "when": "awake"}


def _normal(value: Any) -> Any:
    """The analysis with lists of records and names in a fixed order and numbers to 9
    significant digits, so that only the figures are compared."""
    if isinstance(value, dict):
        return {key: _normal(item) for key, item in value.items()}
    if isinstance(value, list):
        items = [_normal(item) for item in value]
        if items and all(isinstance(item, dict | str) for item in items):
            return sorted(items, key=lambda item: json.dumps(item, sort_keys=True))
        return items
    if isinstance(value, float):
        return float(f"{value:.9g}")
    return value


def _figures(document: dict[str, Any]) -> list[Any]:
    study = read_study(document)
    graph = prepare(study)
    return [
        _normal(analysis_json(analyse_plan(study, plan.id, graph=graph))) for plan in study.plans
    ]


DOCUMENTS = [
    *(
        pytest.param(json.loads(path.read_text(encoding="utf-8")), id=path.stem)
        for path in example_paths()
    ),
    pytest.param(synthetic_study(tasks=150, links=400, events=8, plans=2, seed=3), id="synthetic"),
]


@pytest.mark.parametrize("document", DOCUMENTS)
def test_no_figure_depends_on_the_order_of_the_agents(document):
    before = _figures(document)
    shuffled = copy.deepcopy(document)
    for seed in range(3):
        random.Random(seed).shuffle(shuffled["agents"])
        assert _figures(shuffled) == before, (
            f"agents in the order {[a['id'] for a in shuffled['agents']]}"
        )
