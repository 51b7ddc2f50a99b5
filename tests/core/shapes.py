"""Study files of extreme size and shape, for the size-and-shape fuzzing.

Each family draws files around one limit of ``allocation/core/limits.py``: nesting depth,
breadth (many tasks, agents, keys), long ``precedes`` chains whose every task also starts
itself, mode maps of many modes and transitions, tiny simulation bins, huge numbers and
lone surrogates in any text. :func:`run_case` takes a file through what an upload and the
study's pages do (read, check, analyse every plan) and reports its cost; the tests run
batches of cases in a child process under a time and memory cap (``tests/capped.py``).

The draws are seeded: the same seed gives the same files.
"""

from __future__ import annotations

import json
import random
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from allocation.core import limits, load_study_text
from allocation.core.analysis import analyse_plan, prepare

EXAMPLE = Path(__file__).resolve().parents[2] / "allocation" / "examples" / "home-heating.json"


def _base() -> dict[str, Any]:
    return json.loads(EXAMPLE.read_text(encoding="utf-8"))


def _scaled(rng: random.Random, limit: int) -> int:
    """A size near ``limit``: well under it, just under, at, just over, or well over."""
    return max(1, int(limit * rng.choice((0.1, 0.5, 0.99, 1.0, 1.01, 2.0))))


def _task(task_id: str, **extra: Any) -> dict[str, Any]:
    return {"id": task_id, "title": f"Step {task_id}", "duration_s": [5, 10, 20], **extra}


def _assign_all(document: dict[str, Any]) -> None:
    """Every plan assigns every leaf task, so that the analyses reach all of them."""
    parents = {task.get("parent") for task in document["tasks"]}
    leaves = [task["id"] for task in document["tasks"] if task["id"] not in parents]
    for plan in document["plans"]:
        plan["assignments"] = {task_id: {"human": "person"} for task_id in leaves}
        plan.pop("modes", None)


def _people(document: dict[str, Any]) -> None:
    document["agents"] = [
        {"id": "person", "name": "Person", "kind": "human"},
        {"id": "device", "name": "Device", "kind": "automation"},
    ]
    document["events"] = []


def depth(rng: random.Random) -> dict[str, Any] | str:
    """Nesting: arrays and objects nested to a drawn depth, in a drawn place."""
    levels = rng.choice((10, 100, 900, 1_000, 5_000, 100_000))
    opening, closing = rng.choice((("[", "]"), ('{"a":', "}")))
    nested = opening * levels + "0" + closing * levels
    where = rng.choice(("top", "description", "task", "assumptions"))
    if where == "top":
        return nested
    document = _base()
    marker = '"@@nested@@"'
    if where == "description":
        document["study"]["description"] = "@@nested@@"
    elif where == "task":
        document["tasks"][0]["notes"] = "@@nested@@"
    else:
        document["study"]["assumptions"] = {"default_response_s": "@@nested@@"}
    return json.dumps(document).replace(marker, nested)


def breadth(rng: random.Random) -> dict[str, Any]:
    """Many tasks (flat, under one goal, or as one wide object of assignments)."""
    count = _scaled(rng, getattr(limits, "STUDY_MAX_TASKS", 20_000))
    document = _base()
    _people(document)
    flat = rng.random() < 0.5
    tasks = [] if flat else [{"id": "goal", "title": "Goal"}]
    for index in range(count):
        extra: dict[str, Any] = {} if flat else {"parent": "goal"}
        if index % 50 == 0:
            extra["occurs"] = {"per_day": 1}
        tasks.append(_task(f"t{index}", **extra))
    document["tasks"] = tasks
    document["links"] = []
    _assign_all(document)
    return document


def chain(rng: random.Random) -> dict[str, Any]:
    """One long ``precedes`` chain in which every task also starts by itself."""
    limit = limits.CHAIN_ENTRIES_MAX
    # A chain of n self-starting tasks holds n(n+1)/2 task-in-chain entries.
    length = max(2, int((2 * _scaled(rng, limit)) ** 0.5))
    document = _base()
    _people(document)
    document["tasks"] = [_task(f"c{i}", occurs={"per_day": 1}) for i in range(length)]
    document["links"] = [
        {"from": f"c{i}", "to": f"c{i + 1}", "kind": "precedes"} for i in range(length - 1)
    ]
    _assign_all(document)
    return document


def modes(rng: random.Random) -> dict[str, Any]:
    """A mode map of many modes and transitions, on a small study."""
    mode_count = rng.choice((2, 20, 200, 1_000))
    transitions = rng.choice((1, 100, 1_000, 5_000, 50_000))
    document = _base()
    plan = document["plans"][0]
    leaves = list(plan["assignments"])
    device = next(agent["id"] for agent in document["agents"] if agent["kind"] == "automation")
    states = [
        {
            "id": f"m{i}",
            "name": f"Mode {i}",
            "indication": f"lamp {i % 7}",
            "overrides": {leaves[i % len(leaves)]: {"automation": device}} if i % 3 == 0 else {},
        }
        for i in range(mode_count)
    ]
    moves = [
        {
            "from": f"m{rng.randrange(mode_count)}",
            "to": f"m{rng.randrange(mode_count)}",
            "trigger": f"change {i}",
            "by": rng.choice(("human", "automation")),
            "cue": rng.choice(("display", "alert", "none")),
            "per_day": 1,
        }
        for i in range(transitions)
    ]
    plan["modes"] = {"initial": "m0", "states": states, "transitions": moves}
    return document


def bins(rng: random.Random) -> dict[str, Any]:
    """Simulation bins from far too fine to the whole day."""
    document = _base()
    floor = getattr(limits, "SIMULATION_MIN_BIN_S", 60)
    document["study"]["bin_s"] = rng.choice(
        (1e-300, 1e-9, 0.1, 1, floor * 0.99, floor, floor * 1.01, 900, 86_400, 86_401)
    )
    return document


def numbers(rng: random.Random) -> dict[str, Any] | str:
    """Huge, tiny and non-finite numbers in numeric places; over-long integers."""
    document = _base()
    value = rng.choice((1e308, -1e308, 5e-324, 10**400, -(10**30), 2**63, "@@digits@@"))
    place = rng.choice(("duration", "per_day", "window", "severity", "lag", "bin"))
    task = next(task for task in document["tasks"] if "duration_s" in task)
    if place == "duration":
        task["duration_s"] = [1, value, value]
    elif place == "per_day":
        task["occurs"] = {"per_day": value}
    elif place == "window":
        task["window_s"] = value
    elif place == "severity":
        task["severity"] = value
    elif place == "lag" and document["links"]:
        document["links"][0]["lag_s"] = [0, value]
    else:
        document["study"]["bin_s"] = value
    text = json.dumps(document)
    return text.replace('"@@digits@@"', "9" * rng.choice((4_300, 4_301, 50_000)))


def surrogates(rng: random.Random) -> str:
    """A lone surrogate in a drawn string or key of a valid file."""
    document = _base()
    strings: list[tuple[Any, Any]] = []

    def walk(node: Any) -> None:
        if isinstance(node, dict):
            for key, child in node.items():
                strings.append((node, key))
                walk(child)
        elif isinstance(node, list):
            for child in node:
                walk(child)

    walk(document)
    holder, key = rng.choice(strings)
    code = rng.choice(("\\ud800", "\\udfff", "\\udbff"))
    if isinstance(holder[key], str) and rng.random() < 0.7:
        holder[key] = holder[key] + "@@lone@@"
    else:
        holder["@@lone@@" + key] = holder.pop(key)
    return json.dumps(document).replace("@@lone@@", code)


FAMILIES: dict[str, Callable[[random.Random], dict[str, Any] | str]] = {
    "depth": depth,
    "breadth": breadth,
    "chain": chain,
    "modes": modes,
    "bins": bins,
    "numbers": numbers,
    "surrogates": surrogates,
}


def cases(family: str, seed: int, count: int) -> Iterator[str]:
    """``count`` seeded files of one family, as JSON text."""
    rng = random.Random(f"{family}-{seed}")
    for _ in range(count):
        drawn = FAMILIES[family](rng)
        yield drawn if isinstance(drawn, str) else json.dumps(drawn)


def run_case(text: str) -> dict[str, Any]:
    """Read, check and analyse a file as an upload and the study's pages do.

    Returns the outcome (``"refused"`` with the first problem's path and message, or
    ``"analysed"``), the file's size and the seconds it took.
    """
    started = time.perf_counter()
    result = load_study_text(text)
    outcome: dict[str, Any] = {"bytes": len(text.encode("utf-8", "surrogatepass"))}
    if result.errors or result.study is None:
        problem = (result.errors or result.problems)[0]
        outcome.update(outcome="refused", path=problem.path, message=problem.message)
    else:
        graph = prepare(result.study)
        for plan in result.study.plans:
            analyse_plan(result.study, plan.id, graph=graph)
        outcome["outcome"] = "analysed"
    outcome["seconds"] = time.perf_counter() - started
    return outcome
