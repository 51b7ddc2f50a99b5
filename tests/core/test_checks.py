"""Cross-reference checks of a study (allocation.core.checks), through ``load_study``.

Each test starts from the valid home-heating test study (the ``make_study`` fixture),
changes one thing, and asserts the exact JSON path and part of the message.
Expected paths, messages and cycles are worked out by hand from the changed study.
"""

from __future__ import annotations

import re
from typing import Any

import pytest

from allocation.core.fileformat import LoadResult, load_study


def assert_problem(result: LoadResult, path: str, fragment: str, level: str = "error") -> None:
    """``result`` has a problem of ``level`` at exactly ``path`` whose message has ``fragment``."""
    found = [
        p for p in result.problems if p.path == path and p.level == level and fragment in p.message
    ]
    listing = "\n".join(f"  {p.level}: {p}" for p in result.problems) or "  (no problems)"
    assert found, f"expected {level} at {path} containing {fragment!r}; got:\n{listing}"


def leaf(task_id: str, **extra: Any) -> dict[str, Any]:
    """A leaf task under G1 with a duration and a severity (so it draws no warnings)."""
    return {
        "id": task_id,
        "parent": "G1",
        "title": f"Task {task_id}",
        "duration_s": 10,
        "severity": 1,
        **extra,
    }


def allocate_everywhere(data: dict[str, Any], *task_ids: str) -> None:
    for plan in data["plans"]:
        for task_id in task_ids:
            plan["assignments"][task_id] = {"human": "resident"}


def cycle_in(message: str) -> list[str]:
    """The tasks of an ``A -> B -> C -> A`` cycle named in a message, without the repeat."""
    match = re.search(r"circle: ([^;]+)", message)
    assert match, message
    names = match[1].split(" -> ")
    assert names[0] == names[-1], message
    return names[:-1]


def test_the_example_has_no_cross_reference_problems(make_study):
    assert load_study(make_study()).problems == []


# -- duplicate ids -------------------------------------------------------------------


@pytest.mark.parametrize(
    ("name", "index", "path", "first"),
    [
        ("agents", 0, "$.agents[2].id", "$.agents[0]"),
        ("events", 0, "$.events[1].id", "$.events[0]"),
        ("tasks", 2, "$.tasks[3].id", "$.tasks[2]"),
        ("plans", 0, "$.plans[2].id", "$.plans[0]"),
    ],
)
def test_a_repeated_id_is_an_error_naming_the_first_use(make_study, name, index, path, first):
    data = make_study()
    data[name].append(dict(data[name][index]))
    repeated = data[name][index]["id"]
    assert_problem(load_study(data), path, f"repeats the id {repeated!r} already used at {first}")


def test_a_repeated_mode_id_within_a_plan_is_an_error(make_study):
    data = make_study()
    data["plans"][1]["modes"]["states"][1]["id"] = "schedule"
    assert_problem(
        load_study(data),
        "$.plans[1].modes.states[1].id",
        "repeats the id 'schedule' already used at $.plans[1].modes.states[0]",
    )


def test_the_same_id_may_name_an_agent_a_task_and_a_plan(make_study):
    data = make_study()
    data["plans"][0]["id"] = "resident"
    data["events"][0]["id"] = "T1"
    data["tasks"][1]["occurs"]["event"] = "T1"
    assert load_study(data).ok


# -- references to things the study does not have ------------------------------------


@pytest.mark.parametrize(
    ("key", "path"),
    [
        ("human", "$.plans[1].assignments.T2.human"),
        ("automation", "$.plans[1].assignments.T2.automation"),
        ("accountable", "$.plans[1].assignments.T2.accountable"),
    ],
)
def test_a_reference_to_a_missing_agent_is_an_error(make_study, key, path):
    data = make_study()
    data["plans"][1]["assignments"]["T2"][key] = "nobody"
    assert_problem(
        load_study(data), path, "names the agent 'nobody', which the study does not have"
    )


def test_a_reference_to_a_missing_agent_in_a_mode_override_is_an_error(make_study):
    data = make_study()
    data["plans"][1]["modes"]["states"][1]["overrides"]["T2"]["human"] = "nobody"
    assert_problem(
        load_study(data),
        "$.plans[1].modes.states[1].overrides.T2.human",
        "names the agent 'nobody'",
    )


def test_a_parent_the_study_does_not_have_is_an_error(make_study):
    data = make_study()
    data["tasks"][2]["parent"] = "G9"
    assert_problem(
        load_study(data), "$.tasks[2].parent", "names the task 'G9', which the study does not have"
    )


@pytest.mark.parametrize("key", ["from", "to"])
def test_a_link_to_a_missing_task_is_an_error(make_study, key):
    data = make_study()
    data["links"][0][key] = "T9"
    assert_problem(
        load_study(data), f"$.links[0].{key}", "names the task 'T9', which the study does not have"
    )


def test_allocating_a_missing_task_is_an_error(make_study):
    data = make_study()
    data["plans"][0]["assignments"]["T9"] = {"human": "resident"}
    assert_problem(
        load_study(data),
        "$.plans[0].assignments.T9",
        "allocates the task 'T9', which the study does not have",
    )


def test_overriding_a_missing_task_in_a_mode_is_an_error(make_study):
    data = make_study()
    data["plans"][1]["modes"]["states"][1]["overrides"]["T9"] = {"human": "resident"}
    assert_problem(
        load_study(data), "$.plans[1].modes.states[1].overrides.T9", "allocates the task 'T9'"
    )


def test_occurring_on_a_missing_event_is_an_error(make_study):
    data = make_study()
    data["tasks"][1]["occurs"]["event"] = "arrive"
    assert_problem(
        load_study(data),
        "$.tasks[1].occurs.event",
        "names the event 'arrive', which the study does not have",
    )


def test_an_initial_mode_that_is_not_a_state_is_an_error(make_study):
    data = make_study()
    data["plans"][1]["modes"]["initial"] = "manual"
    assert_problem(
        load_study(data),
        "$.plans[1].modes.initial",
        "names the mode 'manual', which is not among the states",
    )


@pytest.mark.parametrize("key", ["from", "to"])
def test_a_transition_between_modes_that_are_not_states_is_an_error(make_study, key):
    data = make_study()
    data["plans"][1]["modes"]["transitions"][1][key] = "off"
    assert_problem(
        load_study(data),
        f"$.plans[1].modes.transitions[1].{key}",
        "names the mode 'off', which is not among the states",
    )


# -- agents of the wrong kind --------------------------------------------------------


def test_a_human_field_naming_an_automation_is_an_error(make_study):
    data = make_study()
    data["plans"][0]["assignments"]["T1"] = {"human": "thermostat"}
    assert_problem(
        load_study(data), "$.plans[0].assignments.T1.human", "thermostat is automation, not human"
    )


def test_an_automation_field_naming_a_human_is_an_error(make_study):
    data = make_study()
    data["plans"][1]["assignments"]["T1"] = {"automation": "resident"}
    assert_problem(
        load_study(data),
        "$.plans[1].assignments.T1.automation",
        "resident is human, not automation",
    )


def test_an_automation_with_an_asleep_window_is_an_error(make_study):
    data = make_study()
    data["agents"][1]["asleep"] = ["23:00", "07:00"]
    assert_problem(
        load_study(data),
        "$.agents[1].asleep",
        "only a human has an asleep window; thermostat is an automation",
    )


def test_an_automation_responds_only_under_any(make_study):
    data = make_study()
    data["agents"][1]["response_s"] = {"awake": 1}
    assert_problem(
        load_study(data),
        "$.agents[1].response_s",
        'an automation has one response time, under "any"',
    )


def test_a_human_responds_either_any_or_awake_and_asleep(make_study):
    data = make_study()
    data["agents"][0]["response_s"]["any"] = 30
    assert_problem(
        load_study(data),
        "$.agents[0].response_s",
        'give either "any", or "awake" and "asleep", not both',
    )


# -- goals and leaves ----------------------------------------------------------------


@pytest.mark.parametrize(
    ("key", "value"),
    [
        ("duration_s", [1, 2, 3]),
        ("occurs", {"per_day": 1}),
        ("window_s", 60),
        ("severity", 3),
        ("demands", {"visual": 1}),
        ("split", {"decision": 1}),
        ("needs", ["judgement"]),
    ],
)
def test_a_goal_carrying_work_is_an_error(make_study, key, value):
    data = make_study()
    data["tasks"][0][key] = value
    assert_problem(
        load_study(data),
        f"$.tasks[0].{key}",
        f"task G1 is a goal (it has the sub-tasks T1, T2) and carries no work "
        f"itself; move {key} to a leaf task",
    )


@pytest.mark.parametrize("key", ["from", "to"])
def test_a_link_to_a_goal_is_an_error(make_study, key):
    data = make_study()
    data["links"][0][key] = "G1"
    assert_problem(load_study(data), f"$.links[0].{key}", "G1 is a goal; links join leaf tasks")


def test_allocating_a_goal_is_an_error(make_study):
    data = make_study()
    data["plans"][0]["assignments"]["G1"] = {"human": "resident"}
    assert_problem(
        load_study(data),
        "$.plans[0].assignments.G1",
        "G1 is a goal; only leaf tasks are allocated",
    )


# -- links ---------------------------------------------------------------------------


def test_a_link_from_a_task_to_itself_is_an_error(make_study):
    data = make_study()
    data["links"].append({"from": "T2", "to": "T2", "kind": "informs"})
    assert_problem(load_study(data), "$.links[1]", "links task T2 to itself")


def test_a_repeated_link_is_an_error_naming_the_first(make_study):
    data = make_study()
    data["links"].append({"from": "T1", "to": "T2", "kind": "precedes"})
    assert_problem(
        load_study(data), "$.links[1]", "repeats the precedes link T1 -> T2 of $.links[0]"
    )


def test_two_links_of_different_kinds_between_the_same_tasks_are_valid(make_study):
    data = make_study()
    data["links"].append({"from": "T1", "to": "T2", "kind": "informs"})
    assert load_study(data).ok


def test_a_cycle_of_precedes_links_is_an_error_naming_every_task_on_it(make_study):
    data = make_study()
    data["tasks"] += [leaf("T3"), leaf("T4")]
    allocate_everywhere(data, "T3", "T4")
    data["links"] += [
        {"from": "T2", "to": "T3", "kind": "precedes"},
        {"from": "T3", "to": "T4", "kind": "precedes"},
        {"from": "T4", "to": "T2", "kind": "precedes"},
    ]
    result = load_study(data)
    [problem] = [p for p in result.errors if "go round in a circle" in p.message]
    assert sorted(cycle_in(problem.message)) == ["T2", "T3", "T4"]
    assert problem.message.endswith("no task on it could ever start")
    # The path is that of the link from the first task named to the second.
    first, second = cycle_in(problem.message)[:2]
    index = next(
        i for i, link in enumerate(data["links"]) if (link["from"], link["to"]) == (first, second)
    )
    assert problem.path == f"$.links[{index}]"


def test_a_cycle_of_two_tasks_names_both(make_study):
    data = make_study()
    data["links"].append({"from": "T2", "to": "T1", "kind": "precedes"})
    [problem] = [p for p in load_study(data).errors if "circle" in p.message]
    assert sorted(cycle_in(problem.message)) == ["T1", "T2"]


def test_informs_links_may_go_round_in_a_circle(make_study):
    data = make_study()
    data["links"] += [{"from": "T2", "to": "T1", "kind": "informs"}]
    assert load_study(data).ok


def test_a_cycle_is_reported_even_when_another_link_names_a_missing_task(make_study):
    data = make_study()
    data["links"] += [
        {"from": "T2", "to": "T1", "kind": "precedes"},
        {"from": "T1", "to": "T9", "kind": "informs"},
    ]
    result = load_study(data)
    assert_problem(result, "$.links[2].to", "names the task 'T9'")
    assert any("go round in a circle" in p.message for p in result.errors), result.problems


# -- the hierarchy -------------------------------------------------------------------


def test_a_task_that_is_its_own_parent_is_an_error(make_study):
    data = make_study()
    data["tasks"][0]["parent"] = "G1"
    assert_problem(load_study(data), "$.tasks[0].parent", "task G1 cannot be its own parent")


def test_a_cycle_in_the_hierarchy_is_an_error_naming_its_tasks(make_study):
    data = make_study()
    data["tasks"][0]["parent"] = "G3"
    data["tasks"] += [
        {"id": "G2", "parent": "G1", "title": "Middle goal"},
        {"id": "G3", "parent": "G2", "title": "Upper goal"},
    ]
    result = load_study(data)
    [problem] = [p for p in result.errors if "hierarchy goes round" in p.message]
    assert sorted(cycle_in(problem.message)) == ["G1", "G2", "G3"]
    paths = {"G1": "$.tasks[0].parent", "G2": "$.tasks[3].parent", "G3": "$.tasks[4].parent"}
    assert problem.path == paths[cycle_in(problem.message)[0]]


# -- levels --------------------------------------------------------------------------


def test_per_stage_levels_on_an_ek10_study_are_an_error(make_study):
    data = make_study()
    data["study"]["scale"] = "ek10"
    data["plans"][1]["assignments"]["T2"]["levels"] = {
        "acquisition": 7,
        "analysis": 7,
        "decision": 5,
        "action": 3,
    }
    assert_problem(
        load_study(data),
        "$.plans[1].assignments.T2.levels",
        "the ek10 scale takes one level per assignment, not one per stage",
    )


def test_per_stage_levels_on_an_sv10_study_are_valid(make_study):
    data = make_study()
    data["plans"][1]["assignments"]["T2"]["levels"] = {
        "acquisition": 7,
        "analysis": 7,
        "decision": 5,
        "action": 3,
    }
    assert load_study(data).ok


def test_a_shared_assignment_without_levels_is_an_error(make_study):
    data = make_study()
    del data["plans"][1]["assignments"]["T2"]["levels"]
    assert_problem(
        load_study(data),
        "$.plans[1].assignments.T2",
        "shares the task between a human and an automation, so it needs levels",
    )


@pytest.mark.parametrize(
    ("assignment", "path"),
    [
        ({"human": "resident", "levels": 3}, "$.plans[0].assignments.T1.levels"),
        ({"automation": "thermostat", "levels": 10}, "$.plans[0].assignments.T1.levels"),
    ],
)
def test_levels_on_a_single_agent_assignment_are_an_error(make_study, assignment, path):
    data = make_study()
    data["plans"][0]["assignments"]["T1"] = assignment
    assert_problem(
        load_study(data), path, "levels apply only when a human and an automation share the task"
    )


# -- warnings ------------------------------------------------------------------------


def test_a_leaf_that_never_occurs_is_a_warning(make_study):
    """T1 loses its event; T2 is reached only from T1, so neither ever occurs."""
    data = make_study()
    del data["tasks"][1]["occurs"]
    result = load_study(data)
    assert result.ok
    assert_problem(result, "$.tasks[1]", "leaf task T1 never occurs", "warning")
    assert_problem(result, "$.tasks[2]", "leaf task T2 never occurs", "warning")


def test_a_leaf_reached_only_by_an_informs_link_never_occurs(make_study):
    data = make_study()
    data["links"][0] = {"from": "T1", "to": "T2", "kind": "informs"}
    result = load_study(data)
    assert result.ok
    assert [p.path for p in result.warnings] == ["$.tasks[2]"]
    assert_problem(result, "$.tasks[2]", "leaf task T2 never occurs", "warning")


def test_a_leaf_a_plan_leaves_out_is_a_warning(make_study):
    data = make_study()
    del data["plans"][0]["assignments"]["T2"]
    result = load_study(data)
    assert result.ok
    assert_problem(
        result, "$.plans[0].assignments", "plan manual does not allocate leaf task T2", "warning"
    )


def test_an_event_that_starts_no_task_is_a_warning(make_study):
    data = make_study()
    data["events"].append({"id": "arrive", "name": "Come home", "per_day": 1})
    result = load_study(data)
    assert result.ok
    assert_problem(result, "$.events[1]", "event arrive starts no task", "warning")


def test_a_leaf_without_a_duration_is_a_warning(make_study):
    data = make_study()
    del data["tasks"][2]["duration_s"]
    result = load_study(data)
    assert result.ok
    assert_problem(
        result, "$.tasks[2]", "leaf task T2 has no duration_s; it counts as 0 s", "warning"
    )


def test_a_leaf_without_a_severity_is_a_warning(make_study):
    data = make_study()
    del data["tasks"][2]["severity"]
    result = load_study(data)
    assert result.ok
    assert_problem(result, "$.tasks[2]", "leaf task T2 has no severity", "warning")


def test_errors_come_before_warnings(make_study):
    data = make_study()
    del data["tasks"][2]["duration_s"]
    data["plans"][0]["assignments"]["T1"]["human"] = "nobody"
    levels = [p.level for p in load_study(data).problems]
    assert levels == sorted(levels)  # "error" < "warning"
    assert levels[0] == "error" and levels[-1] == "warning"


# -- every problem, at the right place -----------------------------------------------


def test_a_file_with_several_cross_reference_errors_reports_them_all(make_study):
    data = make_study()
    data["agents"].append({"id": "resident", "name": "Again", "kind": "human"})
    data["tasks"][0]["severity"] = 2
    data["tasks"][1]["occurs"]["event"] = "arrive"
    data["links"].append({"from": "T2", "to": "T1", "kind": "precedes"})
    data["plans"][0]["assignments"]["T1"]["human"] = "thermostat"
    data["plans"][1]["modes"]["initial"] = "off"
    result = load_study(data)
    paths = {p.path for p in result.errors}
    assert paths >= {
        "$.agents[2].id",
        "$.tasks[0].severity",
        "$.tasks[1].occurs.event",
        "$.plans[0].assignments.T1.human",
        "$.plans[1].modes.initial",
    }
    assert any("go round in a circle" in p.message for p in result.errors)


def test_cross_reference_paths_count_entries_that_could_not_be_read(make_study):
    """Entries dropped as unreadable (here, the first of every list) keep their places."""
    data = make_study()
    for name in ("agents", "events", "tasks", "links", "plans"):
        data[name].insert(0, 0)
    modes = data["plans"][2]["modes"]
    modes["states"].insert(0, "not a mode")
    modes["transitions"].insert(0, None)
    data["agents"].append({"id": "resident", "name": "Again", "kind": "human"})  # agents[3]
    data["tasks"][3]["parent"] = "G9"  # T2
    data["tasks"][1]["severity"] = 2  # G1
    data["links"].append({"from": "T1", "to": "T1", "kind": "informs"})  # links[2]
    data["plans"][2]["assignments"]["T1"]["automation"] = "resident"
    modes["states"][2]["id"] = "schedule"  # hold, now states[2]
    modes["transitions"][2]["from"] = "off"
    result = load_study(data)
    assert_problem(result, "$.agents[3].id", "already used at $.agents[1]")
    assert_problem(result, "$.tasks[3].parent", "names the task 'G9'")
    assert_problem(result, "$.tasks[1].severity", "task G1 is a goal")
    assert_problem(result, "$.links[2]", "links task T1 to itself")
    assert_problem(result, "$.plans[2].assignments.T1.automation", "resident is human")
    assert_problem(
        result, "$.plans[2].modes.states[2].id", "already used at $.plans[2].modes.states[1]"
    )
    assert_problem(result, "$.plans[2].modes.transitions[2].from", "names the mode 'off'")


def test_warning_paths_count_entries_that_could_not_be_read(make_study):
    data = make_study()
    for name in ("events", "tasks", "plans"):
        data[name].insert(0, [])
    data["events"].append({"id": "arrive", "name": "Come home", "per_day": 1})  # events[2]
    del data["tasks"][2]["occurs"]  # T1, now tasks[2]; T2 follows it, at tasks[3]
    del data["plans"][2]["assignments"]["T2"]
    result = load_study(data)
    assert_problem(result, "$.events[1]", "event leave starts no task", "warning")
    assert_problem(result, "$.events[2]", "event arrive starts no task", "warning")
    assert_problem(result, "$.tasks[2]", "leaf task T1 never occurs", "warning")
    assert_problem(result, "$.tasks[3]", "leaf task T2 never occurs", "warning")
    assert_problem(
        result, "$.plans[2].assignments", "plan auto does not allocate leaf task T2", "warning"
    )
