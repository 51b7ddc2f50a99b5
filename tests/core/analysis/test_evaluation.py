"""A plan edited one task at a time gives the analysis file a fresh analysis gives.

The property: over random sequences of edits to generated studies (seeded synthetic
studies, with a mode map, events, shared stages), an evaluation brought up to date after
each edit and a fresh analysis of the edited study file, read back from its JSON, agree
in every figure of the analysis file, exactly. The edits are the ones the plan editor
and the allocation search make: a new holder, shared levels, a task not done (with or
without its chain going on), an automation that fails, people asked in turn, a duration
of the plan's own, the assignment removed; and a task's own figures changed.
"""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from allocation.core import load_study
from allocation.core.analysis import analyse_plan, prepare
from allocation.core.analysis.coherence import coherence
from allocation.core.analysis.evaluation import PlanEvaluation
from allocation.core.synthetic import synthetic_study

PEOPLE = ("person", "helper")
DEVICES = ("device-0", "device-1", "device-2", "device-3")
STAGES = ("acquisition", "analysis", "decision", "action")


@st.composite
def assignments(draw) -> dict | None:
    """An assignment as the study file writes it (``None``: none at all)."""
    person = draw(st.sampled_from(PEOPLE))
    device = draw(st.sampled_from(DEVICES))
    kind = draw(st.integers(0, 8))
    if kind == 0:
        return None
    if kind == 1:
        return {"human": person}
    if kind == 2:
        return {"automation": device, "accountable": person}
    if kind == 3:
        levels = draw(
            st.one_of(
                st.integers(2, 9),
                st.fixed_dictionaries({stage: st.integers(1, 10) for stage in STAGES}),
            )
        )
        return {
            "human": person,
            "automation": device,
            "levels": levels,
            "feedback": draw(st.sampled_from(("alert", "display", "none"))),
            "initiator": draw(st.sampled_from(("human", "automation"))),
        }
    if kind == 4:
        return {"applies": False}
    if kind == 5:
        return {"applies": False, "pass_through": True}
    if kind == 6:
        return {
            "automation": device,
            "accountable": person,
            "reliability": {
                "fails_per_1000": draw(st.sampled_from((0.5, 5, 40))),
                "detected_by": draw(st.sampled_from(("alert", "display", "none"))),
                "fallback": draw(st.sampled_from(PEOPLE)),
                "false_alerts_per_day": draw(st.sampled_from((0, 0.3))),
            },
        }
    if kind == 7:
        return {
            "human": list(draw(st.permutations(PEOPLE))),
            "escalate_after_s": draw(st.sampled_from((60, 600))),
            "feedback": "alert",
        }
    low = draw(st.integers(5, 60))
    return {"human": person, "duration_s": [low, 2 * low, 5 * low]}


@st.composite
def task_changes(draw) -> dict:
    """New values for some of a leaf task's own figures."""
    change: dict = {}
    if draw(st.booleans()):
        low = draw(st.integers(5, 300))
        change["duration_s"] = [low, 2 * low, 4 * low]
    if draw(st.booleans()):
        change["window_s"] = draw(st.sampled_from((None, 120, 1800, 7200)))
    if draw(st.booleans()):
        change["severity"] = draw(st.integers(1, 5))
    return change


def analysis_file(result) -> str:
    return json.dumps(result.to_json(), sort_keys=True, allow_nan=False)


def apply_edit(document: dict, plan_id: str, edit: tuple) -> tuple[dict, str]:
    """The study file with one edit made, and the task it touched."""
    changed = copy.deepcopy(document)
    kind, task_id, value = edit
    if kind == "assign":
        plan = next(p for p in changed["plans"] if p["id"] == plan_id)
        if value is None:
            plan["assignments"].pop(task_id, None)
        else:
            plan["assignments"][task_id] = value
    else:
        task = next(t for t in changed["tasks"] if t["id"] == task_id)
        for key, new in value.items():
            if new is None:
                task.pop(key, None)
            else:
                task[key] = new
    return changed, task_id


@settings(
    max_examples=25,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
@given(seed=st.integers(0, 10_000), plan_index=st.sampled_from((0, 1)), data=st.data())
def test_edits_keep_the_analysis_equal_to_a_fresh_one(seed, plan_index, data):
    document = synthetic_study(tasks=36, links=90, events=4, plans=2, seed=seed)
    study = load_study(document).study
    plan_id = study.plans[plan_index].id
    leaves = [task.id for task in study.leaves]
    evaluation = PlanEvaluation(study, plan_id)
    assert analysis_file(evaluation.analysis()) == analysis_file(analyse_plan(study, plan_id))
    for _step in range(data.draw(st.integers(1, 8))):
        task_id = data.draw(st.sampled_from(leaves))
        if data.draw(st.integers(0, 4)):
            edit = ("assign", task_id, data.draw(assignments()))
        else:
            edit = ("task", task_id, data.draw(task_changes()))
        changed, task_id = apply_edit(document, plan_id, edit)
        loaded = load_study(changed)
        if not loaded.ok:
            continue  # an edit the study checks refuse never reaches the evaluation
        document, study = changed, loaded.study
        if edit[0] == "assign":
            evaluation.reassign(task_id, study.plan(plan_id).assignments.get(task_id))
        else:
            evaluation.retask(study.task(task_id))
        fresh = analyse_plan(study, plan_id, graph=prepare(study))
        assert analysis_file(evaluation.analysis()) == analysis_file(fresh), edit
        assert evaluation.headline() == fresh.headline(), edit


def test_an_unknown_task_is_refused():
    study = load_study(synthetic_study(tasks=20, links=40, events=2, plans=1, seed=1)).study
    evaluation = PlanEvaluation(study, study.plans[0].id)
    with pytest.raises(KeyError):
        evaluation.reassign("no-such-task", None)


@pytest.mark.parametrize("seed", range(5))
def test_coherence_agrees_with_networkx(seed):
    """Modularity against networkx's own (Newman 2006), cut ratio by hand: the share of
    link weight between tasks of different holders."""
    nx = pytest.importorskip("networkx")
    rng = np.random.default_rng(seed)
    tasks = [f"t{i}" for i in range(30)]
    holders = {task: rng.choice(["pat", "sam", "pump", None]) for task in tasks}
    links = [
        (tasks[a], tasks[b], float(rng.choice([0.0, rng.uniform(0.01, 5)])))
        for a, b in rng.integers(0, 30, size=(80, 2))
    ]
    result = coherence(holders, links)
    graph = nx.Graph()
    held = {task: holder for task, holder in holders.items() if holder is not None}
    graph.add_nodes_from(held)
    total = crossing = 0.0
    for source, target, weight in links:
        if source in held and target in held and weight > 0 and source != target:
            total += weight
            crossing += weight * (held[source] != held[target])
            previous = graph.get_edge_data(source, target, {}).get("weight", 0.0)
            graph.add_edge(source, target, weight=previous + weight)
    groups = [{t for t in held if held[t] == holder} for holder in set(held.values())]
    expected = nx.community.modularity(graph, groups, weight="weight") if total else 0.0
    assert result.modularity == pytest.approx(expected, abs=1e-12)
    assert result.cut_ratio == pytest.approx(crossing / total if total else 0.0, abs=1e-12)
    assert result.groups == len(groups)
    assert math.isclose(result.link_weight, total, rel_tol=1e-12)
