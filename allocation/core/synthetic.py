"""Seeded synthetic studies of any size, for benchmarks and scale tests.

The studies are valid by construction and shaped like real inventories: goals of about
twenty leaf tasks, ``precedes`` links mostly between nearby tasks of the same goal (so
chains stay local, as they do in real workflows), a share of tasks started by events and
schedules, and plans that mix person, device and shared assignments, some with a mode
map. The content is meaningless on purpose; it is for measuring, not for review.
"""

from __future__ import annotations

import random
from typing import Any

from .reading import FORMAT_NAME, FORMAT_VERSION
from .vocabulary import CHANNELS, CUES, STAGES, VACP_ANCHORS

__all__ = ["long_chain_study", "synthetic_study"]

_CAPABILITIES = ("judgement", "sensing", "dosing", "alerting", "handling", "recording")


def _agents() -> list[dict[str, Any]]:
    agents = [
        {
            "id": "person",
            "name": "Person",
            "kind": "human",
            "capabilities": list(_CAPABILITIES),
            "asleep": ["23:00", "07:00"],
            "response_s": {"awake": [5, 30, 300], "asleep": [120, 600, 1800]},
        },
        {
            "id": "helper",
            "name": "Helper",
            "kind": "human",
            "capabilities": ["judgement", "handling"],
            "asleep": ["23:30", "06:30"],
            "response_s": {"awake": [10, 60, 600], "asleep": [300, 900, 3600]},
        },
    ]
    for index in range(4):
        agents.append(
            {
                "id": f"device-{index}",
                "name": f"Device {index}",
                "kind": "automation",
                "capabilities": list(_CAPABILITIES[index % 3 : index % 3 + 4]),
                "response_s": {"any": [0.5, 1, 3]},
            }
        )
    return agents


def _events(rng: random.Random, count: int) -> list[dict[str, Any]]:
    events = []
    for index in range(count):
        event: dict[str, Any] = {"id": f"E{index}", "name": f"Event {index}"}
        if index % 3 == 0:
            event["times"] = [f"{rng.randrange(6, 22):02d}:{rng.choice((0, 15, 30, 45)):02d}"]
            event["jitter_s"] = rng.choice((0, 600, 1800))
        else:
            event["per_day"] = round(rng.uniform(0.05, 4.0), 2)
            event["when"] = rng.choice(("awake", "awake", "asleep", "any"))
            if event["when"] != "any":
                event["of"] = "person"  # two people sleep: a rate says whose day it follows
        events.append(event)
    return events


def _demands(rng: random.Random) -> dict[str, float]:
    return {channel: rng.choice(VACP_ANCHORS[channel])[0] for channel in CHANNELS}


def _occurs(rng: random.Random, events: list[dict[str, Any]]) -> dict[str, Any]:
    roll = rng.random()
    if roll < 0.45 and events:
        occurs: dict[str, Any] = {"event": rng.choice(events)["id"]}
        if rng.random() < 0.3:
            occurs["probability"] = round(rng.uniform(0.2, 1.0), 2)
        return occurs
    if roll < 0.7:
        return {"per_day": round(rng.uniform(0.1, 6.0), 2), "when": "awake", "of": "person"}
    if roll < 0.85:
        return {"times": [f"{rng.randrange(7, 22):02d}:00"], "jitter_s": 900}
    return {"every_days": rng.choice((2, 3, 7, 30)), "of": "person"}


def _assignment(rng: random.Random, scale: str) -> dict[str, Any]:
    roll = rng.random()
    device = f"device-{rng.randrange(4)}"
    human = rng.choice(("person", "person", "person", "helper"))
    if roll < 0.35:
        return {"human": human}
    if roll < 0.6:
        assignment: dict[str, Any] = {"automation": device}
        if rng.random() < 0.3:
            assignment["accountable"] = human
        return assignment
    if scale == "sv10" and rng.random() < 0.5:
        levels: Any = {stage: rng.randint(1, 10) for stage in STAGES}
    else:
        levels = rng.randint(2, 9)
    return {
        "human": human,
        "automation": device,
        "levels": levels,
        "feedback": rng.choice(CUES),
        "initiator": rng.choice(("human", "automation")),
        "status": rng.choice(("proposed", "agreed", "open")),
    }


def synthetic_study(
    *,
    tasks: int = 1000,
    links: int = 3000,
    events: int = 20,
    plans: int = 4,
    seed: int = 0,
    scale: str = "sv10",
) -> dict[str, Any]:
    """A valid study file (decoded JSON) of about ``tasks`` tasks, seeded.

    Parameters
    ----------
    tasks, links, events, plans : int
        Sizes: tasks counts goals and leaves together; links is a target that dense
        goals may not reach when tasks are few.
    seed : int
        The same seed gives the same study.
    scale : str
        ``"sv10"`` or ``"ek10"``.
    """
    rng = random.Random(seed)
    event_list = _events(rng, events)
    # Goals of about twenty leaves each; goals and leaves add up to ``tasks``.
    goal_count = max(1, round(tasks / 21))
    leaf_total = max(goal_count, tasks - goal_count)
    task_list: list[dict[str, Any]] = []
    groups: list[list[str]] = []
    leaf_index = 0
    for goal in range(goal_count):
        goal_id = f"G{goal}"
        task_list.append({"id": goal_id, "title": f"Goal {goal}"})
        group = []
        size = leaf_total // goal_count + (1 if goal < leaf_total % goal_count else 0)
        for _ in range(size):
            task_id = f"T{leaf_index}"
            leaf_index += 1
            low = rng.uniform(1, 60)
            task: dict[str, Any] = {
                "id": task_id,
                "parent": goal_id,
                "title": f"Task {task_id}",
                "duration_s": [round(low, 1), round(low * 2, 1), round(low * 5, 1)],
                "severity": rng.randint(1, 5),
                "demands": _demands(rng),
                "needs": rng.sample(_CAPABILITIES, rng.randint(0, 2)),
            }
            if rng.random() < 0.2:
                task["window_s"] = rng.choice((60, 300, 900, 3600))
            group.append(task_id)
            task_list.append(task)
        groups.append(group)
    by_id = {task["id"]: task for task in task_list}
    link_list: list[dict[str, Any]] = []
    seen: set[tuple[str, str, str]] = set()

    def add_link(source: str, target: str, kind: str) -> None:
        if (source, target, kind) in seen:
            return
        seen.add((source, target, kind))
        link: dict[str, Any] = {"from": source, "to": target, "kind": kind}
        if kind == "precedes":
            lag = rng.choice((0, 5, 30, 120, 600))
            link["lag_s"] = [lag, lag * 3]
            if rng.random() < 0.2:
                link["probability"] = round(rng.uniform(0.2, 1.0), 2)
        link_list.append(link)

    for group in groups:
        for position, task_id in enumerate(group):
            starts_itself = position == 0 or rng.random() < 0.3
            if starts_itself:
                by_id[task_id]["occurs"] = _occurs(rng, event_list)
            else:
                add_link(group[rng.randrange(max(0, position - 4), position)], task_id, "precedes")
    leaves = [task_id for group in groups for task_id in group]
    attempts = 0
    while len(link_list) < links and attempts < links * 20:
        attempts += 1
        group = rng.choice(groups)
        if len(group) < 2:
            continue
        target = rng.randrange(1, len(group))
        source = rng.randrange(max(0, target - 6), target)
        kind = "precedes" if rng.random() < 0.85 else "informs"
        add_link(group[source], group[target], kind)
    plan_list = []
    for plan_index in range(plans):
        assignments = {task_id: _assignment(rng, scale) for task_id in leaves}
        plan: dict[str, Any] = {
            "id": f"plan-{plan_index}",
            "name": f"Plan {plan_index}",
            "assignments": assignments,
        }
        if plan_index % 2 == 1:
            plan["modes"] = _mode_map(rng, leaves, scale)
        plan_list.append(plan)
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "study": {
            "id": f"synthetic-{tasks}-{seed}",
            "title": f"Synthetic study of {tasks} tasks",
            "scale": scale,
        },
        "agents": _agents(),
        "events": event_list,
        "tasks": task_list,
        "links": link_list,
        "plans": plan_list,
    }


def _mode_map(rng: random.Random, leaves: list[str], scale: str) -> dict[str, Any]:
    names = ("normal", "degraded", "paused", "manual")
    states = []
    for name in names:
        state: dict[str, Any] = {
            "id": name,
            "name": name.title(),
            "indication": rng.choice(("green", "grey", "amber")),
        }
        if name != "normal":
            state["overrides"] = {
                task_id: _assignment(rng, scale)
                for task_id in rng.sample(leaves, min(10, len(leaves)))
            }
        states.append(state)
    transitions = []
    for name in names[1:]:
        transitions.append(
            {
                "from": "normal",
                "to": name,
                "trigger": f"enter {name}",
                "by": "automation",
                "cue": rng.choice(CUES),
                "per_day": round(rng.uniform(0.05, 1), 2),
            }
        )
        transitions.append(
            {
                "from": name,
                "to": "normal",
                "trigger": f"leave {name}",
                "by": rng.choice(("human", "automation")),
                "cue": "display",
                "per_day": round(rng.uniform(4, 48), 1),
            }
        )
    return {"initial": "normal", "states": states, "transitions": transitions}


def long_chain_study(tasks: int) -> dict[str, Any]:
    """A study with one ``precedes`` chain of ``tasks`` tasks, each with its own schedule.

    Every task is its own trigger, so the trigger of the k-th task reaches the
    ``tasks - k`` tasks after it: the chains hold ``tasks * (tasks + 1) / 2``
    task-in-chain entries in all, the worst shape for chain analysis (quadratic in the
    study's size).
    """
    ids = [f"T{index}" for index in range(tasks)]
    leaves = [
        {
            "id": task_id,
            "title": f"Step {index}",
            "duration_s": [1, 2, 3],
            "severity": 2,
            "occurs": {"every_days": 1},
        }
        for index, task_id in enumerate(ids)
    ]
    links = [
        {"from": source, "to": target, "kind": "precedes"}
        for source, target in zip(ids, ids[1:], strict=False)
    ]
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "study": {
            "id": f"long-chain-{tasks}",
            "title": f"Long chain of {tasks} tasks",
            "scale": "sv10",
        },
        "agents": _agents()[:1],
        "events": [],
        "tasks": leaves,
        "links": links,
        "plans": [
            {
                "id": "P",
                "name": "Plan",
                "assignments": {task_id: {"human": "person"} for task_id in ids},
            }
        ],
    }
