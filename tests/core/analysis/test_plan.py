"""Whole-plan analysis (allocation.core.analysis.plan) and the analysis file
(…analysis.report, ``baton.analysis`` version 1), on the three example studies.

The keys the analysis file promises are written out here; the cautions are the README's
words ("Cautions"). The plausibility checks on the insulin example follow from what its
plans are (invented examples): the full loop takes work off the person that injections
leave with them, and only plans with a mode map hand tasks over between modes.
"""

from __future__ import annotations

import json
import math
from functools import cache
from pathlib import Path

import pytest

from allocation.core import Study, read_study
from allocation.core.analysis import (
    PlanAnalysis,
    analyse_plan,
    analysis_json,
    prepare,
    text_report,
)
from allocation.examples import example_paths

from .studies import PUMP, analyse, leaf

#: The keys the analysis file must have (more are allowed, never fewer).
TOP_KEYS = {
    "format",
    "version",
    "study",
    "plan",
    "people",
    "tasks",
    "handovers",
    "coherence",
    "findings",
    "interfaces",
}
PERSON_KEYS = {
    "burden_s_per_day",
    "interactions_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "monitoring_s_per_day",
    "failures_per_day",
    "escalations_per_day",
}
TASK_KEYS = {
    "category",
    "principal",
    "person_s",
    "expected_s",
    "typical_s",
    "occurrences_per_day",
    "awareness",
    "degrees",
    "monitoring",
}
DEGREE_KEYS = {"acquisition", "analysis", "decision", "action"}
HANDOVER_KEYS = {
    "source",
    "from_task",
    "to_task",
    "from_agent",
    "to_agent",
    "per_day",
    "time_ratio",
    "likelihood",
    "severity",
    "risk",
    "band",
    "likelihood_band",
    "frequency_per_year",
    "frequency_band",
}
COHERENCE_KEYS = {"cut_ratio", "modularity"}
FINDING_KEYS = {"kind", "severity", "tasks", "modes", "events", "message"}

#: Sentences of the cautions every export carries, as the README's "Cautions" gives them.
CAUTION_SENTENCES = (
    "Baton supports human-factors analysis; it does not replace usability engineering with "
    "representative users (IEC 62366-1), risk management (ISO 14971), clinical judgement, or "
    "the applicable regulations and local codes.",
    "Its figures are model estimates under stated assumptions.",
    "It gives no treatment or dosing advice.",
    "Example studies are invented.",
)


@cache
def example_study(name: str) -> Study:
    path = next(path for path in example_paths() if path.name == name)
    return read_study(json.loads(Path(path).read_text(encoding="utf-8")))


@cache
def analysed(name: str, plan_id: str) -> PlanAnalysis:
    return analyse_plan(example_study(name), plan_id)


EXAMPLE_PLANS = [
    (path.name, plan["id"])
    for path in example_paths()
    for plan in json.loads(path.read_text(encoding="utf-8"))["plans"]
]


def test_there_are_three_examples_with_plans():
    assert len({name for name, _plan in EXAMPLE_PLANS}) == 3
    assert len(EXAMPLE_PLANS) >= 6


@pytest.mark.parametrize(("name", "plan_id"), EXAMPLE_PLANS)
def test_every_example_plan_gives_the_design_analysis_file(name, plan_id):
    study = example_study(name)
    output = analysis_json(analysed(name, plan_id))

    assert TOP_KEYS - set(output) == set()
    assert (output["format"], output["version"]) == ("baton.analysis", 2)
    assert (output["study"], output["plan"]) == (study.id, plan_id)

    assert set(output["people"]) == {agent.id for agent in study.humans}
    for person in output["people"].values():
        assert PERSON_KEYS - set(person) == set()
    assert set(output["tasks"]) == {task.id for task in study.leaves}
    for task in output["tasks"].values():
        assert TASK_KEYS - set(task) == set()
        assert set(task["degrees"]) == DEGREE_KEYS
        assert all(0 <= d <= 1 for d in task["degrees"].values())
    for handover in output["handovers"]:
        assert HANDOVER_KEYS - set(handover) == set()
        assert handover["source"] in {"link", "shared", "mode", "failure", "escalation"}
        assert handover["band"] in {"acceptable", "review", "unacceptable"}
        assert 0 <= handover["likelihood"] <= 1
    assert COHERENCE_KEYS - set(output["coherence"]) == set()
    for finding in output["findings"]:
        assert FINDING_KEYS - set(finding) == set()
        assert isinstance(finding["message"], str) and finding["message"]

    text = json.dumps(output, allow_nan=False)
    assert json.loads(text)["plan"] == plan_id


@pytest.mark.parametrize(("name", "plan_id"), EXAMPLE_PLANS)
def test_daily_figures_hang_together(name, plan_id):
    """Methods, #person-time and #interruptions: monitoring is part of the burden,
    interruptions are some of the interactions, and night interruptions some of the
    interruptions. (The figures' values are checked against the simulation in
    tests/core/test_simulation.py and against hand-worked studies elsewhere.)"""
    result = analysed(name, plan_id)
    for person in result.people.values():
        assert 0 <= person.monitoring_s_per_day <= person.burden_s_per_day + 1e-9
        assert person.night_interruptions_per_day <= person.interruptions_per_day + 1e-9
        assert person.interruptions_per_day <= person.interactions_per_day + 1e-9
    assert 0 <= result.coherence.cut_ratio <= 1
    assert -0.5 <= result.coherence.modularity <= 1
    assert all(math.isfinite(value) for value in result.headline().values())


@pytest.mark.parametrize(("name", "plan_id"), EXAMPLE_PLANS)
def test_the_text_report_carries_the_cautions(name, plan_id):
    report = text_report(analysed(name, plan_id))
    for sentence in CAUTION_SENTENCES:
        assert sentence in report


def test_a_shared_graph_gives_the_same_analysis():
    study = example_study("closed-loop-insulin.json")
    graph = prepare(study)
    for plan in study.plans:
        assert analysis_json(analyse_plan(study, plan.id, graph=graph)) == analysis_json(
            analysed("closed-loop-insulin.json", plan.id)
        )


# -- plausibility on the insulin example ------------------------------------------------

INSULIN = "closed-loop-insulin.json"


def test_the_full_loop_leaves_the_person_less_to_do_than_injections():
    full = analysed(INSULIN, "full-loop").people["person"].burden_s_per_day
    injections = analysed(INSULIN, "injections").people["person"].burden_s_per_day
    assert 0 < full < injections


def test_the_full_loop_hands_over_between_modes_and_injections_do_not():
    def mode_handovers(plan_id: str) -> int:
        output = analysis_json(analysed(INSULIN, plan_id))
        return sum(handover["source"] == "mode" for handover in output["handovers"])

    assert mode_handovers("injections") == 0
    assert mode_handovers("full-loop") > 0


def test_the_analysis_file_carries_the_cautions():
    text = json.dumps(analysis_json(analysed(INSULIN, "full-loop")), allow_nan=False)
    for sentence in CAUTION_SENTENCES:
        assert sentence in text


# -- daily figures on a small study, hand-worked ---------------------------------------


def test_daily_figures_by_hand():
    """pat sleeps 23:00-07:00 and answers at [10, 20, 60] s awake, [300, 900, 3600] asleep.

    - W: on a schedule at 08:00, 12:00, 18:00, shared at levels {1, 4, 5, 7}, 60 s:
      per occurrence 115/3 s active + max(sup[5], sup[7]) (see test_involvement);
      started by the schedule: no interruption.
    - N: on an event at 03:00 +/- 10 min, pat alone, 30 s. The event interrupts, and
      even started after the typical asleep latency (03:15 +/- 10 min) it is wholly
      in the night: 1 interruption, 1 at night.
    - D: on the same kind of event at 12:00, 30 s: 1 interruption, none at night.

    burden = 3 * (115/3 + sup) + 30 + 30 = 175 + 3 * sup; interactions 5.
    """
    sleepy = {
        "id": "pat",
        "name": "Pat",
        "kind": "human",
        "asleep": ["23:00", "07:00"],
        "response_s": {"awake": [10, 20, 60], "asleep": [300, 900, 3600]},
    }
    events = [
        {"id": "night", "name": "Night alarm", "times": ["03:00"], "jitter_s": 600},
        {"id": "day", "name": "Day alarm", "times": ["12:00"], "jitter_s": 600},
    ]
    levels = {"acquisition": 1, "analysis": 4, "decision": 5, "action": 7}
    tasks = [
        leaf("W", occurs={"times": ["08:00", "12:00", "18:00"]}, duration_s=60),
        leaf("N", occurs={"event": "night"}, duration_s=30),
        leaf("D", occurs={"event": "day"}, duration_s=30),
    ]
    result = analyse(
        tasks,
        {"W": {"human": "pat", "automation": "pump", "levels": levels}},
        agents=[sleepy, PUMP],
        events=events,
    )
    table = result.assumptions["supervision_s"]
    supervision = max(table["5"], table["7"])
    pat = result.people["pat"]
    assert result.tasks["W"].person_s == pytest.approx(115 / 3 + supervision)
    assert pat.burden_s_per_day == pytest.approx(175 + 3 * supervision)
    assert pat.interactions_per_day == pytest.approx(5)
    assert pat.interruptions_per_day == pytest.approx(2)
    assert pat.night_interruptions_per_day == pytest.approx(1)
    assert pat.monitoring_s_per_day == 0
    # 8 of 24 hours asleep: the load is the burden over 16 waking hours.
    assert pat.load == pytest.approx((175 + 3 * supervision) / (16 * 3600))
