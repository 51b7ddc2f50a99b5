"""Differences between two study files (allocation.core.difference), on hand-made pairs:
each pair changes one thing of the home-heating test study (``tests/core/conftest.py``),
and the expected changes are written out by hand."""

from __future__ import annotations

import copy

import pytest

from allocation.core.difference import Change, HeadlineRow, study_difference

from .conftest import HOME_HEATING


@pytest.fixture
def before() -> dict:
    return copy.deepcopy(HOME_HEATING)


@pytest.fixture
def after() -> dict:
    return copy.deepcopy(HOME_HEATING)


def changes(before, after) -> list[tuple]:
    return [
        (c.kind, c.key, c.change, c.field, c.before, c.after)
        for c in study_difference(before, after).changes
    ]


def plan(document, plan_id):
    return next(item for item in document["plans"] if item["id"] == plan_id)


def test_the_same_study_has_no_differences(before, after):
    assert study_difference(before, after).same


def test_task_added_removed_and_changed(before, after):
    task = {"id": "T3", "parent": "G1", "title": "Check the room", "duration_s": 5}
    after["tasks"].append(task)
    after["tasks"][2]["duration_s"] = [3, 12, 20]
    after["tasks"][2]["demands"]["visual"] = 3.7
    assert changes(before, after) == [
        ("tasks", "T2", "changed", "duration_s", [3, 10, 20], [3, 12, 20]),
        ("tasks", "T2", "changed", "demands.visual", 4.0, 3.7),
        ("tasks", "T3", "added", "", None, task),
    ]
    assert changes(after, before)[-1] == ("tasks", "T3", "removed", "", task, None)


def test_a_number_written_as_a_float_is_no_change(before, after):
    after["tasks"][2]["duration_s"] = [3.0, 10.0, 20.0]
    assert changes(before, after) == []


def test_link_removed_added_and_changed(before, after):
    link = before["links"][0]
    after["links"][0]["lag_s"] = [0, 120]
    assert changes(before, after) == [
        ("links", "T1 precedes T2", "changed", "lag_s", [0, 60], [0, 120])
    ]
    after["links"] = [{"from": "T1", "to": "T2", "kind": "triggers"}]
    assert changes(before, after) == [
        ("links", "T1 triggers T2", "added", "", None, after["links"][0]),
        ("links", "T1 precedes T2", "removed", "", link, None),
    ]


def test_assignment_changed_added_and_removed(before, after):
    auto = plan(after, "auto")["assignments"]
    auto["T2"]["levels"] = 6
    auto["T2"]["feedback"] = "alert"
    del auto["T2"]["rationale"]
    del plan(after, "manual")["assignments"]["T1"]
    assert changes(before, after) == [
        ("assignments", "manual / T1", "removed", "", {"human": "resident"}, None),
        ("assignments", "auto / T2", "changed", "levels", 7, 6),
        ("assignments", "auto / T2", "changed", "feedback", "display", "alert"),
        (
            "assignments",
            "auto / T2",
            "changed",
            "rationale",
            "Set-back saves energy without effort.",
            None,
        ),
    ]


def test_levels_per_stage_are_compared_stage_by_stage(before, after):
    stages = {"acquisition": 7, "analysis": 7, "decision": 5, "action": 7}
    plan(before, "auto")["assignments"]["T2"]["levels"] = dict(stages)
    plan(after, "auto")["assignments"]["T2"]["levels"] = {**stages, "decision": 6}
    assert changes(before, after) == [
        ("assignments", "auto / T2", "changed", "levels.decision", 5, 6)
    ]


def test_assumption_and_risk_policy(before, after):
    after["study"]["assumptions"] = {"monitoring_s": 12, "supervision_s": {"7": 4}}
    before["study"]["assumptions"] = {"supervision_s": {"7": 3}}
    after["study"]["risk_policy"] = {"review": 6}
    after["study"]["title"] = "Heating"
    assert changes(before, after) == [
        ("study", "study", "changed", "title", "Home heating schedule", "Heating"),
        ("assumptions", "monitoring_s", "added", "", None, 12),
        ("assumptions", "supervision_s", "changed", "7", 3, 4),
        ("risk_policy", "review", "added", "", None, 6),
    ]


def test_mode_changed_added_and_its_override(before, after):
    modes = plan(after, "auto")["modes"]
    modes["states"][1]["indication"] = "hand symbol"
    modes["states"][1]["overrides"]["T2"]["human"] = "visitor"
    away = {"id": "away", "name": "Away"}
    modes["states"].append(away)
    modes["initial"] = "hold"
    assert changes(before, after) == [
        ("modes", "auto", "changed", "initial", "schedule", "hold"),
        ("modes", "auto / hold", "changed", "indication", "clock symbol", "hand symbol"),
        ("modes", "auto / hold", "changed", "overrides.T2.human", "resident", "visitor"),
        ("modes", "auto / away", "added", "", None, away),
    ]


def test_transition_changed_and_removed(before, after):
    transitions = plan(after, "auto")["modes"]["transitions"]
    transitions[0]["cue"] = "display"
    gone = transitions.pop(1)
    assert changes(before, after) == [
        (
            "transitions",
            "auto / schedule → hold on dial turned",
            "changed",
            "cue",
            "none",
            "display",
        ),
        ("transitions", "auto / hold → schedule on next period", "removed", "", gone, None),
    ]


def test_mode_map_and_plan_added_or_removed_are_one_change_each(before, after):
    removed = plan(after, "auto").pop("modes")
    extra = {"id": "spare", "name": "Spare", "assignments": {"T1": {"human": "resident"}}}
    after["plans"].append(extra)
    plan(after, "manual")["name"] = "By hand"
    assert changes(before, after) == [
        ("plans", "manual", "changed", "name", "Resident does it", "By hand"),
        ("plans", "spare", "added", "", None, extra),
        ("modes", "auto", "removed", "", removed, None),
    ]


def test_changes_group_and_count_by_kind(before, after):
    after["tasks"][2]["title"] = "Lower it"
    after["tasks"][2]["severity"] = 3
    after["tasks"].append({"id": "T3", "parent": "G1", "title": "x", "duration_s": 5})
    plan(after, "auto")["assignments"]["T2"]["levels"] = 6
    difference = study_difference(before, after)
    assert list(difference.by_kind()) == ["tasks", "assignments"]
    counts = difference.counts()
    assert dict(counts["tasks"]) == {"added": 1, "removed": 0, "changed": 1}
    assert dict(counts["assignments"]) == {"added": 0, "removed": 0, "changed": 1}


def test_headline_figures_before_and_after_per_plan(before, after):
    difference = study_difference(
        before,
        after,
        headlines_before={"manual": {"burden_s_per_day": 100.0, "findings": 2}},
        headlines_after={
            "manual": {"burden_s_per_day": 80.0, "findings": 2},
            "x": {"findings": 1},
        },
    )
    assert difference.headlines == [
        HeadlineRow("manual", "burden_s_per_day", 100.0, 80.0),
        HeadlineRow("manual", "findings", 2, 2),
        HeadlineRow("x", "findings", None, 1),
    ]
    assert difference.headlines[0].change == -20.0
    assert difference.headlines[2].change is None
    assert isinstance(difference.changes, list) and not difference.changes
    assert Change("tasks", "T1", "added").field == ""
