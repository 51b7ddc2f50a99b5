"""Import then export is lossless: ``study_to_json(read_study(x)) == x``.

A hypothesis strategy builds valid study files of both scales, with every optional key
present or absent at random; each must read without errors (warnings are allowed) and
be written back exactly. The shipped example studies must read without errors *and*
without warnings, and round-trip too.
"""

from __future__ import annotations

import json
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.fileformat import load_study, load_study_text, read_study
from allocation.core.vocabulary import (
    ASSIGNMENT_STATUSES,
    CHANNELS,
    CUES,
    EVENT_WHEN,
    INITIATORS,
    STAGES,
    TRANSITION_CAUSES,
)
from allocation.core.writing import study_to_json
from allocation.examples import example_paths

# -- building blocks ------------------------------------------------------------------

IDS = st.from_regex(r"[A-Za-z0-9][A-Za-z0-9._-]{0,11}", fullmatch=True)
# Text a study may hold: not blank, no NUL character (see reading.text).
TEXT = st.text(min_size=1, max_size=12).filter(lambda t: t.strip() and "\x00" not in t)
SMALL = st.integers(0, 10**6) | st.floats(0, 1e6, allow_nan=False)
POSITIVE = st.integers(1, 10**6) | st.floats(0, 1e6, exclude_min=True, allow_nan=False)
# A workload bin from a minute to a day (SIMULATION_MIN_BIN_S, SIMULATION_MAX_BIN_S).
BIN_S = st.integers(60, 86_400) | st.floats(60, 86_400, allow_nan=False)
SHARE = st.floats(0, 1, exclude_min=True)  # a probability in (0, 1]
# At most a million times a day, so every_days is at least a millionth of a day.
EVERY_DAYS = st.integers(1, 10**6) | st.floats(1e-6, 1e6, allow_nan=False)
CLOCK = st.builds(
    lambda h, m, s: f"{h:02d}:{m:02d}" if s is None else f"{h:02d}:{m:02d}:{s:02d}",
    st.integers(0, 23),
    st.integers(0, 59),
    st.none() | st.integers(0, 59),
)
RANGE = SMALL | st.lists(SMALL, min_size=3, max_size=3).map(sorted)
LAG = SMALL | st.lists(SMALL, min_size=2, max_size=2).map(sorted)
LEVEL = st.integers(1, 10)
STAGE_LEVELS = st.fixed_dictionaries(dict.fromkeys(STAGES, LEVEL))
SPLIT = st.sampled_from(
    [
        dict.fromkeys(STAGES, 0.25),
        {"decision": 1},
        {"acquisition": 0.5, "action": 0.5},
        {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1},
        {"acquisition": 0, "analysis": 0.2, "decision": 0.8},
    ]
)
DEMANDS = st.fixed_dictionaries(
    {}, optional={channel: st.integers(0, 7) | st.floats(0, 7) for channel in CHANNELS}
)


def unique_ids(draw, count: int, label: str) -> list[str]:
    return draw(st.lists(IDS, min_size=count, max_size=count, unique=True), label=label)


def with_optional(draw, required: dict[str, Any], optional: dict[str, Any]) -> dict[str, Any]:
    """``required`` plus each optional key, present or absent at random."""
    return draw(st.fixed_dictionaries(required, optional=optional))


def ways_of_occurring(events: list[str]) -> st.SearchStrategy:
    """One way of occurring, with its companion keys present or absent."""
    ways = [
        st.fixed_dictionaries(
            {"times": st.lists(CLOCK, min_size=1, max_size=3)}, optional={"jitter_s": SMALL}
        ),
        st.fixed_dictionaries(
            {"per_day": POSITIVE}, optional={"when": st.sampled_from(EVENT_WHEN)}
        ),
        st.fixed_dictionaries({"every_days": EVERY_DAYS}),
    ]
    if events:
        ways.append(
            st.fixed_dictionaries(
                {"event": st.sampled_from(events)}, optional={"probability": SHARE}
            )
        )
    return st.one_of(ways)


# -- the parts of a study ------------------------------------------------------------


@st.composite
def agents(draw) -> list[dict[str, Any]]:
    count = draw(st.integers(0, 4), label="agents")
    result = []
    for agent_id in unique_ids(draw, count, "agent ids"):
        kind = draw(st.sampled_from(["human", "automation"]), label="kind")
        optional: dict[str, Any] = {
            "capabilities": st.lists(TEXT, max_size=3),
            "notes": TEXT,
        }
        if kind == "human":
            optional["asleep"] = st.lists(CLOCK, min_size=2, max_size=2, unique=True)
            optional["response_s"] = st.fixed_dictionaries(
                {}, optional={"awake": RANGE, "asleep": RANGE}
            ) | st.fixed_dictionaries({"any": RANGE})
        else:
            optional["response_s"] = st.fixed_dictionaries({"any": RANGE})
        required = {"id": st.just(agent_id), "name": TEXT, "kind": st.just(kind)}
        result.append(with_optional(draw, required, optional))
    return result


@st.composite
def events(draw) -> list[dict[str, Any]]:
    count = draw(st.integers(0, 3), label="events")
    result = []
    for event_id in unique_ids(draw, count, "event ids"):
        way = draw(ways_of_occurring([]), label="way")
        extra = with_optional(draw, {"id": st.just(event_id), "name": TEXT}, {"notes": TEXT})
        result.append({**extra, **way})
    return result


@st.composite
def tasks(draw, event_ids: list[str]) -> tuple[list[dict[str, Any]], list[str]]:
    """Tasks in a random hierarchy; returns them in a random file order, and the leaves."""
    count = draw(st.integers(1, 8), label="tasks")
    ids = unique_ids(draw, count, "task ids")
    # A task's parent comes earlier in this list, so the hierarchy has no cycle.
    parents = [None] + [
        draw(st.none() | st.sampled_from(ids[:index]), label="parent") for index in range(1, count)
    ]
    goals = {parent for parent in parents if parent is not None}
    result, leaves = [], []
    for task_id, parent in zip(ids, parents, strict=True):
        required = {"id": st.just(task_id), "title": TEXT}
        if parent is not None:
            required["parent"] = st.just(parent)
        if task_id in goals:
            result.append(with_optional(draw, required, {"notes": TEXT}))
            continue
        leaves.append(task_id)
        optional = {
            "occurs": ways_of_occurring(event_ids),
            "duration_s": RANGE,
            "window_s": POSITIVE,
            "severity": st.integers(1, 5),
            "demands": DEMANDS,
            "split": SPLIT,
            "needs": st.lists(TEXT, max_size=3),
            "notes": TEXT,
        }
        result.append(with_optional(draw, required, optional))
    return draw(st.permutations(result), label="task order"), leaves


@st.composite
def links(draw, leaves: list[str]) -> list[dict[str, Any]]:
    """Precedes links going forward in a random order of the leaves, informs links anywhere."""
    if len(leaves) < 2:
        return []
    order = draw(st.permutations(leaves), label="precedence order")
    pairs = st.tuples(st.integers(0, len(leaves) - 1), st.integers(0, len(leaves) - 1))
    chosen: dict[tuple[str, str, str], dict[str, Any]] = {}
    for a, b in draw(st.lists(pairs, max_size=8), label="precedes"):
        if a != b:
            source, target = order[min(a, b)], order[max(a, b)]
            required = {
                "from": st.just(source),
                "to": st.just(target),
                "kind": st.just("precedes"),
            }
            optional = {"lag_s": LAG, "probability": SHARE, "notes": TEXT}
            chosen[(source, target, "precedes")] = with_optional(draw, required, optional)
    for a, b in draw(st.lists(pairs, max_size=4), label="informs"):
        if a != b:
            source, target = leaves[a], leaves[b]
            required = {"from": st.just(source), "to": st.just(target), "kind": st.just("informs")}
            chosen[(source, target, "informs")] = with_optional(draw, required, {"notes": TEXT})
    return draw(st.permutations(list(chosen.values())), label="link order")


@st.composite
def assignment(draw, scale: str, humans: list[str], machines: list[str], everyone: list[str]):
    kinds = ["not applicable"]
    if humans:
        kinds.append("human")
    if machines:
        kinds.append("automation")
    if humans and machines:
        kinds.append("shared")
    kind = draw(st.sampled_from(kinds), label="assignment kind")
    if kind == "not applicable":
        optional = {"status": st.sampled_from(ASSIGNMENT_STATUSES), "rationale": TEXT}
        return with_optional(draw, {"applies": st.just(False)}, optional)
    required: dict[str, Any] = {}
    if kind in ("human", "shared"):
        required["human"] = st.sampled_from(humans)
    if kind in ("automation", "shared"):
        required["automation"] = st.sampled_from(machines)
    if kind == "shared":
        required["levels"] = LEVEL | STAGE_LEVELS if scale == "sv10" else LEVEL
    optional = {
        "duration_s": RANGE,
        "accountable": st.sampled_from(everyone),
        "feedback": st.sampled_from(CUES),
        "initiator": st.sampled_from(INITIATORS),
        "status": st.sampled_from(ASSIGNMENT_STATUSES),
        "rationale": TEXT,
    }
    return with_optional(draw, required, optional)


@st.composite
def mode_map(draw, leaves: list[str], make_assignment) -> dict[str, Any]:
    count = draw(st.integers(1, 3), label="modes")
    mode_ids = unique_ids(draw, count, "mode ids")
    states = []
    for mode_id in mode_ids:
        optional: dict[str, Any] = {"indication": TEXT, "notes": TEXT}
        if leaves:
            optional["overrides"] = st.dictionaries(
                st.sampled_from(leaves), make_assignment(), max_size=2
            )
        states.append(with_optional(draw, {"id": st.just(mode_id), "name": TEXT}, optional))
    transitions = []
    for _ in range(draw(st.integers(0, 3), label="transitions")):
        required = {
            "from": st.sampled_from(mode_ids),
            "to": st.sampled_from(mode_ids),
            "trigger": TEXT,
            "by": st.sampled_from(TRANSITION_CAUSES),
            "cue": st.sampled_from(CUES),
        }
        transitions.append(with_optional(draw, required, {"per_day": POSITIVE, "notes": TEXT}))
    initial = draw(st.sampled_from(mode_ids), label="initial")
    return {"initial": initial, "states": states, "transitions": transitions}


@st.composite
def plans(draw, scale: str, agent_list: list[dict[str, Any]], leaves: list[str]):
    humans = [a["id"] for a in agent_list if a["kind"] == "human"]
    machines = [a["id"] for a in agent_list if a["kind"] == "automation"]
    everyone = humans + machines

    def make_assignment():
        return assignment(scale, humans, machines, everyone)

    count = draw(st.integers(0, 3), label="plans")
    result = []
    for plan_id in unique_ids(draw, count, "plan ids"):
        allocated = draw(st.lists(st.sampled_from(leaves), unique=True), label="allocated")
        assignments = {task_id: draw(make_assignment()) for task_id in allocated}
        optional = {"description": TEXT, "modes": mode_map(leaves, make_assignment)}
        required = {"id": st.just(plan_id), "name": TEXT, "assignments": st.just(assignments)}
        result.append(with_optional(draw, required, optional))
    return result


ASSUMPTIONS = st.fixed_dictionaries(
    {},
    optional={
        "supervision_s": st.dictionaries(st.sampled_from([str(n) for n in range(1, 11)]), SMALL),
        "monitoring_s": SMALL,
        "occupancy_limit": POSITIVE,
        "channel_limit": POSITIVE,
    },
)


@st.composite
def risk_policies(draw) -> dict[str, Any]:
    review, unacceptable = sorted(draw(st.lists(st.integers(1, 25), min_size=2, max_size=2)))
    bands = st.lists(
        st.floats(0, 1, exclude_min=True, exclude_max=True), min_size=4, max_size=4, unique=True
    ).map(sorted)
    optional = {
        "likelihood_bands": bands,
        "review": st.just(review),
        "unacceptable": st.just(unacceptable),
        "note": TEXT,
    }
    return with_optional(draw, {}, optional)


def whose_day(draw, agent_list: list[dict[str, Any]], rules: list[dict[str, Any]]) -> None:
    """Rates name whose day they follow (``of``): at times where anyone may, always
    where several people sleep and the rate follows someone's awake or asleep time."""
    humans = [agent["id"] for agent in agent_list if agent["kind"] == "human"]
    sleepers = [agent["id"] for agent in agent_list if "asleep" in agent and agent["id"] in humans]
    for rule in rules:
        if "per_day" not in rule and "every_days" not in rule or not humans:
            continue
        follows = rule.get("when") in ("awake", "asleep") or "every_days" in rule
        if follows and len(sleepers) > 1 or draw(st.booleans(), label="of"):
            rule["of"] = draw(st.sampled_from(humans), label="of")


@st.composite
def study_files(draw, scale: str) -> dict[str, Any]:
    """A valid study file of the given scale."""
    agent_list = draw(agents())
    event_list = draw(events())
    task_list, leaves = draw(tasks([e["id"] for e in event_list]))
    header_optional = {
        "description": TEXT,
        "bin_s": BIN_S,
        "assumptions": ASSUMPTIONS,
        "risk_policy": risk_policies(),
    }
    header = with_optional(
        draw, {"id": IDS, "title": TEXT, "scale": st.just(scale)}, header_optional
    )
    rules = [*event_list, *(task["occurs"] for task in task_list if "occurs" in task)]
    whose_day(draw, agent_list, rules)
    return {
        "format": "baton.study",
        "version": 2,
        "study": header,
        "agents": agent_list,
        "events": event_list,
        "tasks": task_list,
        "links": draw(links(leaves)),
        "plans": draw(plans(scale, agent_list, leaves)),
    }


def assert_reads_and_round_trips(data: dict[str, Any]) -> None:
    result = load_study(data)
    assert result.errors == [], json.dumps(data, indent=1)
    assert study_to_json(read_study(data)) == data


@settings(max_examples=150, deadline=None)
@given(study_files("sv10"))
def test_a_valid_sv10_study_reads_without_errors_and_round_trips(data):
    assert_reads_and_round_trips(data)


@settings(max_examples=150, deadline=None)
@given(study_files("ek10"))
def test_a_valid_ek10_study_reads_without_errors_and_round_trips(data):
    assert_reads_and_round_trips(data)


@settings(max_examples=50, deadline=None)
@given(study_files("sv10") | study_files("ek10"))
def test_writing_as_json_text_and_reading_back_gives_the_same_study(data):
    text = json.dumps(study_to_json(read_study(data)))
    assert load_study_text(text).errors == []
    assert study_to_json(read_study(json.loads(text))) == data


# -- the shipped examples ------------------------------------------------------------


def test_there_are_exactly_three_example_studies():
    """Guards the test below against passing vacuously on an empty folder."""
    assert len(example_paths()) == 3, example_paths()


@pytest.mark.parametrize("path", example_paths(), ids=lambda path: path.stem)
def test_an_example_study_has_no_errors_nor_warnings_and_round_trips(path):
    result = load_study_text(path.read_bytes())
    assert result.problems == [], "\n".join(f"{p.level}: {p}" for p in result.problems)
    data = json.loads(path.read_text(encoding="utf-8"))
    assert study_to_json(read_study(data)) == data
