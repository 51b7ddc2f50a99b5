"""Shape checks of the study file (allocation.core.reading), through ``load_study``.

Each test starts from the valid home-heating test study (the ``make_study`` fixture),
changes one thing, and asserts the exact JSON path and part of the message of the problem
reported. The expected paths and messages are worked out by hand from
allocation/core/FORMAT.md.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.errors import Problem
from allocation.core.fileformat import LoadResult, load_study, load_study_text, read_study
from allocation.core.writing import study_to_json

Mutation = Callable[[dict[str, Any]], None]


def _walk(data: Any, where: tuple) -> Any:
    for key in where:
        data = data[key]
    return data


def setting(*where: Any, value: Any) -> Mutation:
    """A change that sets the value at ``where`` (keys and list indexes) to ``value``."""

    def mutate(data: dict[str, Any]) -> None:
        _walk(data, where[:-1])[where[-1]] = value

    return mutate


def dropping(*where: Any) -> Mutation:
    """A change that removes the key (or list item) at ``where``."""

    def mutate(data: dict[str, Any]) -> None:
        del _walk(data, where[:-1])[where[-1]]

    return mutate


def assert_problem(result: LoadResult, path: str, fragment: str, level: str = "error") -> None:
    """``result`` has a problem of ``level`` at exactly ``path`` whose message has ``fragment``."""
    found = [
        p for p in result.problems if p.path == path and p.level == level and fragment in p.message
    ]
    listing = "\n".join(f"  {p.level}: {p}" for p in result.problems) or "  (no problems)"
    assert found, f"expected {level} at {path} containing {fragment!r}; got:\n{listing}"


def load_changed(make_study: Callable, *changes: Mutation) -> LoadResult:
    data = make_study()
    for change in changes:
        change(data)
    return load_study(data)


# -- the file as a whole -------------------------------------------------------------


def test_the_unchanged_example_reads_without_problems(make_study):
    result = load_study(make_study())
    assert result.ok
    assert result.problems == []


def test_text_that_is_not_json_is_reported_with_line_and_column():
    # Line 3 is '  "version": ,' and the value is missing at the comma, column 14.
    result = load_study_text('{\n  "format": "baton.study",\n  "version": ,\n}')
    assert result.study is None
    assert result.problems == [
        Problem("$", "the file is not valid JSON: Expecting value at line 3, column 14")
    ]


def test_bytes_that_are_not_utf8_are_reported():
    result = load_study_text(b'{"format": "baton.\xff"}')
    assert result.study is None
    assert_problem(result, "$", "not UTF-8")


def test_json_nested_too_deeply_is_reported_not_raised():
    result = load_study_text("[" * 100_000)
    assert result.study is None
    assert_problem(result, "$", "nested too deeply")


def test_a_key_given_twice_in_one_object_is_reported():
    """JSON parsers keep only the last of two equal keys; Baton refuses the file instead."""
    result = load_study_text('{"format": "baton.study", "tasks": [{"id": "T1", "id": "T2"}]}')
    assert result.study is None
    assert_problem(result, "$", 'a key appears twice in one object: "id"')


@pytest.mark.parametrize(
    ("value", "described"),
    [([], "a list"), ("study", "text"), (3, "a number"), (None, "null"), (True, "true or false")],
)
def test_a_value_that_is_not_an_object_is_not_a_study(value, described):
    result = load_study(value)
    assert result.study is None
    assert result.problems == [Problem("$", f"must be an object, not {described}")]


def test_a_wrong_format_name_is_an_error(make_study):
    result = load_changed(make_study, setting("format", value="baton.plan"))
    assert_problem(result, "$.format", 'must be "baton.study", not "baton.plan"')


@pytest.mark.parametrize("version", [3, 0, "1", "2", True, None, [1]])
def test_a_version_other_than_1_or_2_is_an_error(make_study, version):
    result = load_changed(make_study, setting("version", value=version))
    assert_problem(result, "$.version", "must be 2 (or 1, upgraded as it is read)")


# -- keys ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("where", "path"),
    [
        pytest.param(("colour",), "$.colour", id="top-level"),
        pytest.param(("study", "colour"), "$.study.colour", id="study"),
        pytest.param(("agents", 0, "colour"), "$.agents[0].colour", id="agent"),
        pytest.param(("events", 0, "colour"), "$.events[0].colour", id="event"),
        pytest.param(("tasks", 1, "colour"), "$.tasks[1].colour", id="task"),
        pytest.param(("tasks", 1, "occurs", "colour"), "$.tasks[1].occurs.colour", id="occurs"),
        pytest.param(("tasks", 1, "demands", "smell"), "$.tasks[1].demands.smell", id="demands"),
        pytest.param(("tasks", 1, "split", "rest"), "$.tasks[1].split.rest", id="split"),
        pytest.param(("links", 0, "colour"), "$.links[0].colour", id="link"),
        pytest.param(("plans", 0, "colour"), "$.plans[0].colour", id="plan"),
        pytest.param(
            ("plans", 0, "assignments", "T1", "who"),
            "$.plans[0].assignments.T1.who",
            id="assignment",
        ),
        pytest.param(("plans", 1, "modes", "colour"), "$.plans[1].modes.colour", id="mode-map"),
        pytest.param(
            ("plans", 1, "modes", "states", 0, "colour"),
            "$.plans[1].modes.states[0].colour",
            id="mode",
        ),
        pytest.param(
            ("plans", 1, "modes", "transitions", 0, "colour"),
            "$.plans[1].modes.transitions[0].colour",
            id="transition",
        ),
        pytest.param(
            ("agents", 0, "response_s", "tired"), "$.agents[0].response_s.tired", id="response"
        ),
        pytest.param(
            ("study", "risk_policy", "colour"), "$.study.risk_policy.colour", id="risk-policy"
        ),
        pytest.param(("tasks", 1, "my key"), '$.tasks[1]["my key"]', id="key-needing-quotes"),
    ],
)
def test_an_unknown_key_is_an_error_at_its_own_path(make_study, where, path):
    result = load_changed(make_study, setting(*where, value=1))
    assert_problem(result, path, "is not a known key here (known: ")


def test_the_unknown_key_message_lists_the_known_keys(make_study):
    result = load_changed(make_study, setting("tasks", 1, "colour", value="red"))
    [problem] = [p for p in result.problems if p.path == "$.tasks[1].colour"]
    assert "duration_s" in problem.message
    assert "window_s" in problem.message


@pytest.mark.parametrize(
    ("where", "path"),
    [
        pytest.param(("study",), "$.study", id="study"),
        pytest.param(("tasks",), "$.tasks", id="tasks"),
        pytest.param(("study", "title"), "$.study.title", id="study-title"),
        pytest.param(("study", "scale"), "$.study.scale", id="study-scale"),
        pytest.param(("agents", 0, "kind"), "$.agents[0].kind", id="agent-kind"),
        pytest.param(("agents", 0, "id"), "$.agents[0].id", id="agent-id"),
        pytest.param(("events", 0, "name"), "$.events[0].name", id="event-name"),
        pytest.param(("tasks", 1, "title"), "$.tasks[1].title", id="task-title"),
        pytest.param(("links", 0, "kind"), "$.links[0].kind", id="link-kind"),
        pytest.param(("links", 0, "to"), "$.links[0].to", id="link-to"),
        pytest.param(("plans", 0, "assignments"), "$.plans[0].assignments", id="assignments"),
        pytest.param(("plans", 1, "modes", "initial"), "$.plans[1].modes.initial", id="initial"),
        pytest.param(
            ("plans", 1, "modes", "transitions"), "$.plans[1].modes.transitions", id="transitions"
        ),
        pytest.param(
            ("plans", 1, "modes", "states", 0, "name"),
            "$.plans[1].modes.states[0].name",
            id="mode-name",
        ),
        pytest.param(
            ("plans", 1, "modes", "transitions", 0, "cue"),
            "$.plans[1].modes.transitions[0].cue",
            id="transition-cue",
        ),
    ],
)
def test_a_missing_required_key_is_an_error_at_its_path(make_study, where, path):
    result = load_changed(make_study, dropping(*where))
    assert_problem(result, path, "is missing")


def test_an_assignment_naming_nobody_is_an_error(make_study):
    result = load_changed(make_study, setting("plans", 0, "assignments", "T1", value={}))
    assert_problem(
        result, "$.plans[0].assignments.T1", "must name a human, an automation, or both"
    )


def test_an_assignment_may_say_its_task_does_not_apply(make_study):
    not_done = {"applies": False, "rationale": "No thermostat app in this plan.", "status": "open"}
    data = make_study()
    data["plans"][0]["assignments"]["T1"] = not_done
    assert load_study(data).ok
    assert study_to_json(read_study(data)) == data


@pytest.mark.parametrize("value", [True, "false", 0, None])
def test_applies_can_only_be_false(make_study, value):
    result = load_changed(
        make_study, setting("plans", 0, "assignments", "T1", "applies", value=value)
    )
    assert_problem(
        result, "$.plans[0].assignments.T1.applies", "can only be false (a task applies unless"
    )


@pytest.mark.parametrize("key", ["human", "levels", "feedback"])
def test_an_assignment_that_does_not_apply_names_no_one(make_study, key):
    data = make_study()
    data["plans"][1]["assignments"]["T2"]["applies"] = False
    result = load_study(data)
    assert_problem(
        result, f"$.plans[1].assignments.T2.{key}", "goes only with a task that applies"
    )


# -- types ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("where", "value", "path", "fragment"),
    [
        pytest.param(
            ("tasks", 1, "duration_s"),
            "5",
            "$.tasks[1].duration_s",
            "must be a number, not text",
            id="string-for-number",
        ),
        pytest.param(
            ("tasks", 1, "duration_s"),
            [2, "5", 30],
            "$.tasks[1].duration_s[1]",
            "must be a number, not text",
            id="string-in-range",
        ),
        pytest.param(
            ("agents", 0, "capabilities"),
            3,
            "$.agents[0].capabilities",
            "must be a list, not a number",
            id="number-for-list",
        ),
        pytest.param(("tasks",), 3, "$.tasks", "must be a list, not a number", id="tasks-number"),
        pytest.param(
            ("tasks", 1, "window_s"),
            True,
            "$.tasks[1].window_s",
            "must be a number, not true or false",
            id="bool-for-number",
        ),
        pytest.param(
            ("tasks", 1, "severity"),
            True,
            "$.tasks[1].severity",
            "must be a whole number from 1 to 5, not True",
            id="bool-for-integer",
        ),
        pytest.param(
            ("tasks", 1, "title"), None, "$.tasks[1].title", "must be text, not null", id="null"
        ),
        pytest.param(
            ("tasks", 1, "needs", 0),
            7,
            "$.tasks[1].needs[0]",
            "must be text, not a number",
            id="number-in-strings",
        ),
        pytest.param(
            ("tasks", 1, "occurs"),
            "leave",
            "$.tasks[1].occurs",
            "must be an object, not text",
            id="text-for-object",
        ),
        pytest.param(
            ("plans", 0, "assignments"),
            [],
            "$.plans[0].assignments",
            "must be an object mapping task ids to assignments, not a list",
            id="list-for-assignments",
        ),
        pytest.param(
            ("tasks", 1, "window_s"),
            math.inf,
            "$.tasks[1].window_s",
            "must be a finite number",
            id="infinity",
        ),
        pytest.param(
            ("tasks", 1, "window_s"),
            10**400,
            "$.tasks[1].window_s",
            "must be a finite number",
            id="int-too-large-for-a-float",
        ),
    ],
)
def test_a_value_of_the_wrong_type_is_an_error(make_study, where, value, path, fragment):
    result = load_changed(make_study, setting(*where, value=value))
    assert_problem(result, path, fragment)


@pytest.mark.parametrize(
    ("where", "path"),
    [
        (("tasks", 1, "title"), "$.tasks[1].title"),
        (("study", "title"), "$.study.title"),
        (("agents", 0, "capabilities", 0), "$.agents[0].capabilities[0]"),
    ],
)
def test_blank_text_is_an_error(make_study, where, path):
    result = load_changed(make_study, setting(*where, value="  "))
    assert_problem(result, path, "must not be blank (leave an optional key out instead)")


@pytest.mark.parametrize(
    ("where", "path"),
    [
        pytest.param(("agents", 0, "kind"), "$.agents[0].kind", id="agent-kind"),
        pytest.param(("study", "scale"), "$.study.scale", id="scale"),
        pytest.param(("links", 0, "kind"), "$.links[0].kind", id="link-kind"),
        pytest.param(
            ("plans", 1, "assignments", "T2", "feedback"),
            "$.plans[1].assignments.T2.feedback",
            id="feedback",
        ),
        pytest.param(
            ("plans", 1, "assignments", "T2", "initiator"),
            "$.plans[1].assignments.T2.initiator",
            id="initiator",
        ),
        pytest.param(
            ("plans", 1, "assignments", "T2", "status"),
            "$.plans[1].assignments.T2.status",
            id="status",
        ),
        pytest.param(
            ("plans", 1, "modes", "transitions", 0, "by"),
            "$.plans[1].modes.transitions[0].by",
            id="by",
        ),
        pytest.param(
            ("plans", 1, "modes", "transitions", 0, "cue"),
            "$.plans[1].modes.transitions[0].cue",
            id="cue",
        ),
    ],
)
def test_a_word_outside_its_vocabulary_is_an_error(make_study, where, path):
    result = load_changed(make_study, setting(*where, value="robot"))
    assert_problem(result, path, "must be one of ")
    assert_problem(result, path, 'not "robot"')


def test_an_unknown_when_is_an_error(make_study):
    result = load_changed(
        make_study,
        setting(
            "events", 0, value={"id": "leave", "name": "Leave", "per_day": 2, "when": "lunch"}
        ),
    )
    assert_problem(result, "$.events[0].when", 'must be one of awake, asleep, any, not "lunch"')


# -- ids -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("value", "fragment"),
    [
        ("T 1", "'T 1' is not a valid id"),
        ("-T1", "'-T1' is not a valid id"),
        ("", "'' is not a valid id"),
        ("T" * 65, "is not a valid id"),
        ("T1\n", "'T1\\n' is not a valid id"),
        ("Tä", "'Tä' is not a valid id"),
        (7, "must be an id (text), not a number"),
    ],
)
def test_an_invalid_task_id_is_an_error(make_study, value, fragment):
    result = load_changed(make_study, setting("tasks", 1, "id", value=value))
    assert_problem(result, "$.tasks[1].id", fragment)


def test_an_id_of_64_characters_is_valid(make_study):
    data = make_study()
    data["study"]["id"] = "s" * 64
    assert load_study(data).ok


@pytest.mark.parametrize(
    ("where", "path"),
    [
        (("agents", 0, "id"), "$.agents[0].id"),
        (("events", 0, "id"), "$.events[0].id"),
        (("plans", 0, "id"), "$.plans[0].id"),
        (("study", "id"), "$.study.id"),
        (("links", 0, "from"), "$.links[0].from"),
        (("tasks", 2, "parent"), "$.tasks[2].parent"),
        (("tasks", 1, "occurs", "event"), "$.tasks[1].occurs.event"),
        (("plans", 1, "assignments", "T2", "human"), "$.plans[1].assignments.T2.human"),
        (("plans", 1, "modes", "initial"), "$.plans[1].modes.initial"),
        (("plans", 1, "modes", "states", 0, "id"), "$.plans[1].modes.states[0].id"),
        (("plans", 1, "modes", "transitions", 0, "to"), "$.plans[1].modes.transitions[0].to"),
    ],
)
def test_every_id_and_reference_must_be_a_valid_id(make_study, where, path):
    result = load_changed(make_study, setting(*where, value="no good"))
    assert_problem(result, path, "'no good' is not a valid id")


def test_an_invalid_task_id_as_an_assignment_key_is_an_error(make_study):
    result = load_changed(
        make_study, setting("plans", 0, "assignments", "T 1", value={"human": "resident"})
    )
    assert_problem(result, '$.plans[0].assignments["T 1"]', "'T 1' is not a valid id")


# -- levels --------------------------------------------------------------------------


@pytest.mark.parametrize("level", [0, 11, -1])
def test_a_level_out_of_1_to_10_is_an_error(make_study, level):
    result = load_changed(
        make_study, setting("plans", 1, "assignments", "T2", "levels", value=level)
    )
    assert_problem(
        result, "$.plans[1].assignments.T2.levels", f"must be from 1 to 10, not {level}"
    )


def test_a_fractional_level_is_an_error(make_study):
    result = load_changed(
        make_study, setting("plans", 1, "assignments", "T2", "levels", value=7.5)
    )
    assert_problem(
        result, "$.plans[1].assignments.T2.levels", "must be a whole number from 1 to 10, not 7.5"
    )


def test_a_per_stage_level_out_of_range_is_an_error_at_its_stage(make_study):
    levels = {"acquisition": 10, "analysis": 8, "decision": 11, "action": 1}
    result = load_changed(
        make_study, setting("plans", 1, "assignments", "T2", "levels", value=levels)
    )
    assert_problem(
        result, "$.plans[1].assignments.T2.levels.decision", "must be from 1 to 10, not 11"
    )


def test_per_stage_levels_must_give_every_stage(make_study):
    levels = {"acquisition": 10, "analysis": 8, "decision": 5}
    result = load_changed(
        make_study, setting("plans", 1, "assignments", "T2", "levels", value=levels)
    )
    assert_problem(result, "$.plans[1].assignments.T2.levels.action", "is missing")


# -- times of day --------------------------------------------------------------------


@pytest.mark.parametrize(
    "clock", ["25:00", "7:00", "noon", "12:60", "08:15:60", "08:15\n", "٠٨:١٥", "08-15", ""]
)
@pytest.mark.parametrize(
    ("where", "path"),
    [
        (("events", 0, "times", 0), "$.events[0].times[0]"),
        (("agents", 0, "asleep", 1), "$.agents[0].asleep[1]"),
    ],
)
def test_a_malformed_time_of_day_is_an_error(make_study, where, path, clock):
    result = load_changed(make_study, setting(*where, value=clock))
    assert_problem(result, path, f"{clock!r} is not a time of day")


def test_a_malformed_time_in_a_task_schedule_is_an_error(make_study):
    result = load_changed(make_study, setting("tasks", 1, "occurs", value={"times": ["7:30"]}))
    assert_problem(result, "$.tasks[1].occurs.times[0]", "'7:30' is not a time of day")


def test_a_time_of_day_that_is_not_text_is_an_error(make_study):
    result = load_changed(make_study, setting("events", 0, "times", 0, value=815))
    assert_problem(
        result, "$.events[0].times[0]", 'must be a time of day as "HH:MM", not a number'
    )


def test_times_with_seconds_and_the_edges_of_the_day_are_valid(make_study):
    result = load_changed(
        make_study, setting("events", 0, "times", value=["00:00", "08:15:30", "23:59:59"])
    )
    assert result.ok, result.problems


def test_an_empty_list_of_times_is_an_error(make_study):
    result = load_changed(make_study, setting("events", 0, "times", value=[]))
    assert_problem(result, "$.events[0].times", "must list at least one time of day")


def test_an_asleep_window_must_have_two_different_times(make_study):
    result = load_changed(make_study, setting("agents", 0, "asleep", value=["23:00", "23:00"]))
    assert_problem(result, "$.agents[0].asleep", "must not start and end at the same time")
    result = load_changed(make_study, setting("agents", 0, "asleep", value=["23:00"]))
    assert_problem(result, "$.agents[0].asleep", "must be [from, to] as two times of day")


# -- numbers and ranges --------------------------------------------------------------


@pytest.mark.parametrize(
    ("where", "value", "path", "fragment"),
    [
        (("tasks", 1, "duration_s"), -1, "$.tasks[1].duration_s", "must be at least 0, not -1"),
        (
            ("tasks", 1, "duration_s"),
            [-2, 5, 30],
            "$.tasks[1].duration_s[0]",
            "must be at least 0, not -2",
        ),
        (("events", 0, "jitter_s"), -5, "$.events[0].jitter_s", "must be at least 0, not -5"),
        (("links", 0, "lag_s"), [-10, 60], "$.links[0].lag_s[0]", "must be at least 0, not -10"),
        (
            ("agents", 0, "response_s", "awake"),
            [20, -60, 300],
            "$.agents[0].response_s.awake[1]",
            "must be at least 0, not -60",
        ),
        (
            ("plans", 1, "assignments", "T2", "duration_s"),
            -0.5,
            "$.plans[1].assignments.T2.duration_s",
            "must be at least 0, not -0.5",
        ),
        (
            ("tasks", 1, "demands", "auditory"),
            -1,
            "$.tasks[1].demands.auditory",
            "must be at least 0, not -1",
        ),
    ],
)
def test_a_negative_number_is_an_error(make_study, where, value, path, fragment):
    result = load_changed(make_study, setting(*where, value=value))
    assert_problem(result, path, fragment)


@pytest.mark.parametrize(
    ("where", "value", "path"),
    [
        (("tasks", 1, "window_s"), 0, "$.tasks[1].window_s"),
        (("study", "bin_s"), 0, "$.study.bin_s"),
        (("tasks", 1, "occurs"), {"per_day": 0}, "$.tasks[1].occurs.per_day"),
        (("tasks", 1, "occurs"), {"every_days": -1}, "$.tasks[1].occurs.every_days"),
        (
            ("plans", 1, "modes", "transitions", 1, "per_day"),
            0,
            "$.plans[1].modes.transitions[1].per_day",
        ),
    ],
)
def test_a_number_that_must_be_positive_cannot_be_zero_or_less(make_study, where, value, path):
    result = load_changed(make_study, setting(*where, value=value))
    assert_problem(result, path, "must be more than 0, not ")


@pytest.mark.parametrize(
    ("where", "value", "path", "fragment"),
    [
        (("tasks", 1, "occurs"), {"per_day": 2e6}, "$.tasks[1].occurs.per_day", "at most 1e+06"),
        (
            ("tasks", 1, "occurs"),
            {"every_days": 1e-9},
            "$.tasks[1].occurs.every_days",
            "at least 1e-06",
        ),
        (
            ("plans", 1, "modes", "transitions", 1, "per_day"),
            5e6,
            "$.plans[1].modes.transitions[1].per_day",
            "at most 1e+06",
        ),
    ],
)
def test_a_rate_above_a_million_a_day_is_an_error(make_study, where, value, path, fragment):
    """Nothing in a study happens more than a million times a day; beyond that the figures
    would overflow, so the reader refuses it as a likely typing mistake."""
    result = load_changed(make_study, setting(*where, value=value))
    assert_problem(result, path, fragment)


def test_an_inverted_range_is_an_error(make_study):
    result = load_changed(make_study, setting("tasks", 1, "duration_s", value=[30, 5, 2]))
    assert_problem(
        result, "$.tasks[1].duration_s", "must be in order min <= typical <= max, not [30, 5, 2]"
    )


def test_an_inverted_lag_is_an_error(make_study):
    result = load_changed(make_study, setting("links", 0, "lag_s", value=[60, 0]))
    assert_problem(result, "$.links[0].lag_s", "must be in order min <= max, not [60, 0]")


@pytest.mark.parametrize(
    ("where", "value", "path", "fragment"),
    [
        (
            ("tasks", 1, "duration_s"),
            [2, 5],
            "$.tasks[1].duration_s",
            "must be [min, typical, max], not a list of 2",
        ),
        (
            ("tasks", 1, "duration_s"),
            [],
            "$.tasks[1].duration_s",
            "must be [min, typical, max], not a list of 0",
        ),
        (
            ("links", 0, "lag_s"),
            [0, 30, 60],
            "$.links[0].lag_s",
            "must be [min, max], not a list of 3",
        ),
    ],
)
def test_a_range_of_the_wrong_length_is_an_error(make_study, where, value, path, fragment):
    result = load_changed(make_study, setting(*where, value=value))
    assert_problem(result, path, fragment)


def test_a_severity_outside_1_to_5_is_an_error(make_study):
    result = load_changed(make_study, setting("tasks", 1, "severity", value=6))
    assert_problem(result, "$.tasks[1].severity", "must be from 1 to 5, not 6")


def test_demands_above_7_are_an_error(make_study):
    result = load_changed(make_study, setting("tasks", 1, "demands", "visual", value=7.5))
    assert_problem(result, "$.tasks[1].demands.visual", "must be at most 7, not 7.5")


def test_a_split_that_does_not_add_up_to_1_is_an_error(make_study):
    split = {"acquisition": 0.5, "analysis": 0.3}
    result = load_changed(make_study, setting("tasks", 1, "split", value=split))
    assert_problem(result, "$.tasks[1].split", "shares must add up to 1, not 0.8")


def test_a_split_may_leave_stages_out_when_the_rest_add_up_to_1(make_study):
    split = {"decision": 0.25, "action": 0.75}
    assert load_changed(make_study, setting("tasks", 1, "split", value=split)).ok


# -- links ---------------------------------------------------------------------------


@pytest.mark.parametrize(("key", "value"), [("lag_s", [0, 60]), ("probability", 0.5)])
def test_lag_and_probability_go_only_with_precedes_links(make_study, key, value):
    link = {"from": "T1", "to": "T2", "kind": "informs", key: value}
    result = load_changed(make_study, setting("links", 0, value=link))
    assert_problem(result, f"$.links[0].{key}", 'goes only with kind "precedes"')


@pytest.mark.parametrize(("value", "fragment"), [(0, "more than 0"), (1.5, "at most 1")])
def test_a_link_probability_must_be_in_0_to_1(make_study, value, fragment):
    result = load_changed(make_study, setting("links", 0, "probability", value=value))
    assert_problem(result, "$.links[0].probability", f"must be {fragment}")


# -- how things occur ----------------------------------------------------------------


def test_a_task_that_occurs_in_two_ways_is_an_error(make_study):
    result = load_changed(
        make_study, setting("tasks", 1, "occurs", value={"event": "leave", "per_day": 2})
    )
    assert_problem(
        result, "$.tasks[1].occurs", "must occur in one way only, but gives per_day and event"
    )


def test_an_event_that_occurs_in_two_ways_is_an_error(make_study):
    result = load_changed(make_study, setting("events", 0, "per_day", value=2))
    assert_problem(
        result, "$.events[0]", "must occur in one way only, but gives times and per_day"
    )


def test_occurs_without_any_way_is_an_error(make_study):
    result = load_changed(make_study, setting("tasks", 1, "occurs", value={}))
    assert_problem(result, "$.tasks[1].occurs", "must give one way of occurring")


def test_an_event_without_any_way_is_an_error(make_study):
    result = load_changed(make_study, setting("events", 0, value={"id": "leave", "name": "Out"}))
    assert_problem(result, "$.events[0]", "must occur in one way: times, per_day or every_days")


def test_a_probability_without_an_event_is_an_error(make_study):
    result = load_changed(
        make_study, setting("tasks", 1, "occurs", value={"per_day": 2, "probability": 0.5})
    )
    assert_problem(result, "$.tasks[1].occurs.probability", "goes only with event")


def test_jitter_without_times_is_an_error(make_study):
    result = load_changed(
        make_study, setting("tasks", 1, "occurs", value={"per_day": 2, "jitter_s": 60})
    )
    assert_problem(result, "$.tasks[1].occurs.jitter_s", "goes only with times")


def test_when_without_a_rate_is_an_error(make_study):
    result = load_changed(
        make_study, setting("tasks", 1, "occurs", value={"every_days": 3, "when": "asleep"})
    )
    assert_problem(result, "$.tasks[1].occurs.when", "goes only with per_day")


@pytest.mark.parametrize(("value", "fragment"), [(0, "more than 0"), (1.01, "at most 1")])
def test_an_event_probability_must_be_in_0_to_1(make_study, value, fragment):
    result = load_changed(
        make_study, setting("tasks", 1, "occurs", value={"event": "leave", "probability": value})
    )
    assert_problem(result, "$.tasks[1].occurs.probability", f"must be {fragment}")


# -- assumptions and risk policy -----------------------------------------------------


def test_an_unknown_assumption_is_an_error(make_study):
    result = load_changed(make_study, setting("study", "assumptions", value={"speed_s": 3}))
    assert_problem(result, "$.study.assumptions.speed_s", "is not a known assumption (known: ")


@pytest.mark.parametrize(
    ("key", "value", "fragment"),
    [
        ("occupancy_limit", 0, "must be more than 0"),
        ("channel_limit", -7, "must be more than 0"),
        ("monitoring_s", -1, "must be at least 0"),
        ("monitoring_s", "10", "must be a finite number"),
        ("monitoring_s", True, "must be a finite number"),
        ("occupancy_limit", math.nan, "must be a finite number"),
        ("channel_limit", math.inf, "must be a finite number"),
        ("supervision_s", 5, "must be an object mapping levels 1-10 to seconds"),
        ("supervision_s", {"11": 3}, "has the key '11'; keys are the levels '1' to '10'"),
        ("supervision_s", {"5": -1}, "seconds must be a number of at least 0"),
        ("supervision_s", {"5": math.nan}, "seconds must be a number of at least 0"),
    ],
)
def test_a_bad_assumption_value_is_an_error(make_study, key, value, fragment):
    result = load_changed(make_study, setting("study", "assumptions", value={key: value}))
    assert_problem(result, f"$.study.assumptions.{key}", fragment)


def test_assumptions_must_be_an_object(make_study):
    result = load_changed(make_study, setting("study", "assumptions", value=[]))
    assert_problem(result, "$.study.assumptions", "must be an object, not a list")


@pytest.mark.parametrize("bands", [[0.1, 0.3, 0.2, 0.5], [0.1, 0.2, 0.2, 0.5]])
def test_likelihood_bands_that_do_not_rise_are_an_error(make_study, bands):
    result = load_changed(
        make_study, setting("study", "risk_policy", value={"likelihood_bands": bands})
    )
    assert_problem(
        result, "$.study.risk_policy.likelihood_bands", "must rise strictly from band to band"
    )


def test_likelihood_bands_need_four_cut_points(make_study):
    result = load_changed(
        make_study, setting("study", "risk_policy", value={"likelihood_bands": [0.1, 0.2, 0.5]})
    )
    assert_problem(
        result,
        "$.study.risk_policy.likelihood_bands",
        "must list 4 cut points between the 5 likelihood bands",
    )


@pytest.mark.parametrize(
    ("index", "value", "fragment"),
    [(0, 0, "must be more than 0"), (3, 1, "must be less than 1"), (3, 1.5, "must be at most 1")],
)
def test_likelihood_bands_lie_strictly_between_0_and_1(make_study, index, value, fragment):
    bands = [0.01, 0.1, 0.3, 0.6]
    bands[index] = value
    result = load_changed(
        make_study, setting("study", "risk_policy", value={"likelihood_bands": bands})
    )
    assert_problem(result, f"$.study.risk_policy.likelihood_bands[{index}]", fragment)


def test_review_above_unacceptable_is_an_error(make_study):
    policy = {"review": 20, "unacceptable": 12}
    result = load_changed(make_study, setting("study", "risk_policy", value=policy))
    assert_problem(
        result, "$.study.risk_policy.review", "must not be above unacceptable (20 > 12)"
    )


def test_a_risk_score_outside_1_to_25_is_an_error(make_study):
    result = load_changed(make_study, setting("study", "risk_policy", value={"review": 26}))
    assert_problem(result, "$.study.risk_policy.review", "must be from 1 to 25, not 26")


def test_a_full_risk_policy_is_valid(make_study):
    policy = {
        "likelihood_bands": [0.01, 0.1, 0.3, 0.6],
        "review": 6,
        "unacceptable": 15,
        "note": "An example policy only.",
    }
    assert load_changed(make_study, setting("study", "risk_policy", value=policy)).ok


# -- every problem, at the right place -----------------------------------------------


def test_a_file_with_several_errors_reports_them_all(make_study):
    result = load_changed(
        make_study,
        setting("format", value="baton.plan"),
        setting("events", 0, "times", 0, value="25:00"),
        setting("tasks", 1, "duration_s", value=[30, 5, 2]),
        setting("tasks", 2, "colour", value="red"),
        setting("links", 0, "kind", value="follows"),
        setting("plans", 0, "assignments", "T1", "human", value="nobody"),
        setting("plans", 1, "assignments", "T2", "levels", value=11),
    )
    assert {p.path for p in result.errors} >= {
        "$.format",
        "$.events[0].times[0]",
        "$.tasks[1].duration_s",
        "$.tasks[2].colour",
        "$.links[0].kind",
        "$.plans[0].assignments.T1.human",
        "$.plans[1].assignments.T2.levels",
    }


def test_errors_in_the_lists_are_reported_even_when_the_study_header_is_bad(make_study):
    result = load_changed(
        make_study,
        setting("study", value="home heating"),
        setting("tasks", 1, "duration_s", value="5"),
    )
    assert not result.ok
    assert_problem(result, "$.study", "must be an object, not text")
    assert_problem(result, "$.tasks[1].duration_s", "must be a number, not text")


def test_paths_count_entries_that_could_not_be_read(make_study):
    """An entry dropped as unreadable still takes its place in the numbering."""
    data = make_study()
    data["tasks"].insert(0, "not a task")
    data["tasks"][2]["duration_s"] = [30, 5, 2]  # T1, now the third entry
    data["events"].insert(0, {"name": "no id"})
    data["events"][1]["jitter_s"] = -1
    result = load_study(data)
    assert_problem(result, "$.tasks[0]", "must be an object, not text")
    assert_problem(result, "$.tasks[2].duration_s", "must be in order min <= typical <= max")
    assert_problem(result, "$.events[0].id", "is missing")
    assert_problem(result, "$.events[1].jitter_s", "must be at least 0, not -1")


# -- bad input never raises ----------------------------------------------------------

#: Keys of the study format, so that random objects often look like parts of a study.
FORMAT_KEYS = sorted({
    "format", "version", "study", "agents", "events", "tasks", "links", "plans", "id",
    "title", "name", "scale", "bin_s", "assumptions", "risk_policy", "kind", "capabilities",
    "asleep", "response_s", "awake", "any", "times", "jitter_s", "per_day", "when",
    "every_days", "parent", "occurs", "event", "probability", "duration_s", "window_s",
    "severity", "demands", "visual", "split", "decision", "needs", "from", "to", "lag_s",
    "assignments", "modes", "initial", "states", "transitions", "overrides", "human",
    "automation", "levels", "accountable", "feedback", "likelihood_bands", "review",
    "unacceptable", "supervision_s", "monitoring_s", "occupancy_limit", "applies", "T1",
    "G1", "leave", "resident", "thermostat", "schedule", "hold",
})  # fmt: skip

SCALARS = (
    st.none()
    | st.booleans()
    | st.integers()
    | st.floats()
    | st.text(max_size=8)
    | st.sampled_from(
        [
            "T1",
            "G1",
            "leave",
            "resident",
            "thermostat",
            "hold",
            "08:15",
            "sv10",
            "ek10",
            "precedes",
            "informs",
            "human",
            "automation",
            "baton.study",
            "T1\n",
            "08:15\n",
            10**400,
            -(10**400),
        ]
    )
)
JSON_VALUES = st.recursive(
    SCALARS,
    lambda children: (
        st.lists(children, max_size=4)
        | st.dictionaries(st.sampled_from(FORMAT_KEYS) | st.text(max_size=6), children, max_size=5)
    ),
    max_leaves=30,
)


TOP_LEVEL_PARTS = ("study", "agents", "events", "tasks", "links", "plans")


def _check_result(result: LoadResult, data: Any) -> None:
    assert isinstance(result, LoadResult)
    for problem in result.problems:
        assert problem.path.startswith("$")
        assert problem.level in ("error", "warning")
        assert problem.message
    assert (result.study is None) == (not isinstance(data, dict))
    if result.ok:
        # Whatever reads without errors is written back exactly (FORMAT.md).
        assert study_to_json(read_study(data)) == data


@settings(max_examples=300, deadline=None)
@given(JSON_VALUES)
def test_any_json_value_gives_problems_never_an_exception(data):
    _check_result(load_study(data), data)


@settings(max_examples=300, deadline=None)
@given(
    st.fixed_dictionaries(
        {"format": st.just("baton.study"), "version": st.just(1)},
        optional=dict.fromkeys(TOP_LEVEL_PARTS, JSON_VALUES),
    )
)
def test_any_values_under_the_top_level_keys_give_problems_never_an_exception(data):
    _check_result(load_study(data), data)


#: Values that have caught readers out: non-finite and huge numbers, near-miss ids and times.
TRICKY = st.sampled_from(
    [math.nan, math.inf, 10**400, -1, 0, 1.5, True, "", " ", "T1\n", "08:15\n", [], {}]
)


def _places(value: Any, where: tuple = ()) -> list[tuple]:
    """Every place inside a JSON value, as key and index paths."""
    found = [where]
    if isinstance(value, dict):
        for key, item in value.items():
            found += _places(item, (*where, key))
    elif isinstance(value, list):
        for index, item in enumerate(value):
            found += _places(item, (*where, index))
    return found


@settings(max_examples=400, deadline=None)
@given(data=st.data())
def test_the_example_with_any_part_replaced_gives_problems_never_an_exception(make_study, data):
    study = make_study()
    for _ in range(data.draw(st.integers(1, 3), label="changes")):
        places = [where for where in _places(study) if where]
        where = data.draw(st.sampled_from(places), label="where")
        setting(*where, value=data.draw(TRICKY | JSON_VALUES, label="value"))(study)
    _check_result(load_study(study), study)


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60) | st.binary(max_size=60) | JSON_VALUES.map(json.dumps))
def test_any_text_gives_problems_never_an_exception(text):
    result = load_study_text(text)
    assert isinstance(result, LoadResult)


@pytest.mark.parametrize(
    ("path", "mutate", "limit"),
    [
        ("$.study.title", lambda d: d["study"].update(title="x" * 201), 200),
        ("$.agents[0].name", lambda d: d["agents"][0].update(name="x" * 201), 200),
        ("$.tasks[1].title", lambda d: d["tasks"][1].update(title="x" * 301), 300),
        ("$.plans[0].name", lambda d: d["plans"][0].update(name="x" * 201), 200),
    ],
)
def test_names_and_titles_longer_than_a_stored_study_keeps_are_refused(
    make_study, path, mutate, limit
):
    # The database columns keep 200 characters of a name or title (300 of a task title
    # or a trigger); the reader says so with the path instead of failing later.
    document = make_study()
    mutate(document)
    problems = [p for p in load_study(document).errors if p.path == path]
    assert [p.message for p in problems] == [
        f"is {limit + 1:,} characters long; at most {limit} are kept"
    ]


def test_text_with_a_nul_character_is_refused_with_its_path(make_study):
    # PostgreSQL refuses NUL in text columns (found by fuzzing the snapshot title on
    # PostgreSQL); the reader refuses it first, with the path.
    document = make_study()
    document["tasks"][1]["title"] = "Notice\x00"
    problems = [p for p in load_study(document).errors if p.path == "$.tasks[1].title"]
    assert [p.message for p in problems] == [
        "contains the NUL character (\\u0000), which text may not hold"
    ]


# -- the workload bin's bounds ---------------------------------------------------------
# Baton's own limits (allocation/core/limits.py): SIMULATION_MIN_BIN_S is 60 s and
# SIMULATION_MAX_BIN_S one day, 86,400 s; the cases sit either side of each, by hand.


@pytest.mark.parametrize(
    ("value", "fragment"),
    [
        (0.1, "a workload bin of 0.1 s is finer than the limit of 60 s (SIMULATION_MIN_BIN_S)"),
        (59.5, "a workload bin of 59.5 s is finer than the limit of 60 s"),
        (86_401, "a workload bin of 86401 s is wider than the limit of 86400 s"),
    ],
)
def test_a_workload_bin_outside_its_limits_is_refused_naming_the_limit(
    make_study, value, fragment
):
    result = load_changed(make_study, setting("study", "bin_s", value=value))
    assert_problem(result, "$.study.bin_s", fragment)
    assert result.study is None or not result.ok


@pytest.mark.parametrize("value", [60, 60.5, 900, 86_400])
def test_a_workload_bin_within_its_limits_reads(make_study, value):
    result = load_changed(make_study, setting("study", "bin_s", value=value))
    assert result.ok and result.study.bin_s == value
