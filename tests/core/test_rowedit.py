"""One plan row read and checked on its own gives what reading the whole file gives.

The property: for random rows, valid and not (unknown or wrong agents, shared without
levels, per-stage levels on a one-level scale, a fallback that is a device, keys the
format does not have, values of the wrong type, the row removed), the study and its
problems after :func:`reassigned` equal those of :func:`load_study` on the changed file.
"""

from __future__ import annotations

import copy
import json
from importlib import resources

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from allocation.core import load_study
from allocation.core.rowedit import reassigned
from allocation.core.synthetic import synthetic_study

AGENTS = ("person", "helper", "device-0", "device-3", "nobody")


@st.composite
def rows(draw):
    """A row as a plan editor or a hand-edited file could send it."""
    kind = draw(st.integers(0, 9))
    agent = draw(st.sampled_from(AGENTS))
    other = draw(st.sampled_from(AGENTS))
    if kind == 0:
        return None
    if kind == 1:
        return {"human": agent}
    if kind == 2:
        return {"automation": agent, "accountable": other}
    if kind == 3:
        shared = {"human": agent, "automation": other}
        level = draw(
            st.one_of(
                st.none(),
                st.integers(0, 11),
                st.fixed_dictionaries(
                    {s: st.integers(1, 10) for s in ("acquisition", "analysis", "decision")}
                ),
            )
        )
        return shared if level is None else {**shared, "levels": level}
    if kind == 4:
        return {"applies": False, "pass_through": draw(st.booleans())}
    if kind == 5:
        return {"applies": False, "human": agent}
    if kind == 6:
        return {
            "automation": other,
            "reliability": {
                "fails_per_1000": draw(st.sampled_from((0, 5, -1))),
                "fallback": agent,
            },
        }
    if kind == 7:
        return {"human": [agent, other], "escalate_after_s": draw(st.sampled_from((0, 60)))}
    if kind == 8:
        return {"human": agent, "colour": "blue"}
    return draw(st.sampled_from(([], "person", 3, {"human": 3})))


def problems(result) -> list:
    return sorted((p.path, p.message, p.level) for p in result.problems)


def _study_files():
    example = resources.files("allocation.examples") / "closed-loop-insulin.json"
    return [
        synthetic_study(tasks=30, links=60, events=3, plans=2, seed=4),
        synthetic_study(tasks=30, links=60, events=3, plans=2, seed=5, scale="ek10"),
        json.loads(example.read_text("utf-8")),
    ]


FILES = _study_files()


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.data())
def test_a_row_checked_alone_gives_the_problems_of_the_whole_file(data):
    document = copy.deepcopy(data.draw(st.sampled_from(FILES)))
    result = load_study(document)
    for _ in range(data.draw(st.integers(1, 4))):
        plan = data.draw(st.sampled_from(document["plans"]))
        tasks = [t["id"] for t in document["tasks"]] + ["no-such-task"]
        task_id = data.draw(st.sampled_from(tasks))
        item = data.draw(rows())
        if item is None:
            plan["assignments"].pop(task_id, None)
        else:
            plan["assignments"][task_id] = item
        result = reassigned(result, plan["id"], task_id, item)
        whole = load_study(document)
        assert problems(result) == problems(whole), (task_id, item)
        assert result.study.plan(plan["id"]) == whole.study.plan(plan["id"])
        assert result.study == whole.study


def test_a_warning_an_error_hid_comes_back_with_the_error():
    """An unallocated leaf's warning is dropped while another row of the plan has an
    error (a warning above an error is not shown); it shows again once that row is right,
    as reading the whole file says."""
    document = copy.deepcopy(FILES[0])
    result = load_study(document)
    plan = document["plans"][1]
    steps = [("T3", None), ("T1", {"human": 3}), ("T1", {"applies": False})]
    for task_id, item in steps:
        if item is None:
            plan["assignments"].pop(task_id, None)
        else:
            plan["assignments"][task_id] = item
        result = reassigned(result, plan["id"], task_id, item)
        assert problems(result) == problems(load_study(document)), (task_id, item)
    unallocated = [p for p in result.problems if "does not allocate leaf task T3" in p.message]
    assert len(unallocated) == 1
