"""A task not done cuts the tasks only it starts; ``pass_through`` keeps the chain going
(methods document, #finding-chain-cut and #occurrences).

Every expected figure is worked by hand: the chains are tiny, each link's probability
and lag stated, every task 10 s of Pat's time; the simulation is compared with the
hand-worked chance of missing a window within 4 binomial standard errors.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.simulation import simulate
from allocation.core.writing import study_to_json

from .studies import SAM, leaf, study_data

#: Pat answers at once, so only the lags move a chain's timing.
PAT = {"id": "pat", "name": "Pat", "kind": "human", "response_s": {"awake": [0, 0, 0]}}
AGENTS = [PAT, SAM]


def chain(b_assignment, *, fork_probability=None, window_s=None):
    """A at 08:00 starts B (lag 60-120 s), B starts C (lag 30 s); with a fork, A also
    starts D (probability ``fork_probability``), D starts C."""
    tasks = [
        leaf("A", occurs={"times": ["08:00"]}),
        leaf("B"),
        leaf("C", **({"window_s": window_s} if window_s else {})),
    ]
    links = [
        {"from": "A", "to": "B", "kind": "precedes", "lag_s": [60, 120]},
        {"from": "B", "to": "C", "kind": "precedes", "lag_s": [30, 30]},
    ]
    if fork_probability is not None:
        tasks.append(leaf("D"))
        links += [
            {"from": "A", "to": "D", "kind": "precedes", "probability": fork_probability},
            {"from": "D", "to": "C", "kind": "precedes"},
        ]
    return study_data(tasks, {"B": b_assignment}, agents=AGENTS, links=links)


NOT_DONE = {"applies": False, "rationale": "not in this plan"}


def cuts(result):
    return [f for f in result.findings if f.kind == "chain_cut"]


def test_a_task_not_done_cuts_the_tasks_only_it_starts():
    # B not done: C, reached only through B, never happens (1 a day lost, 10 s each).
    result = analyse_plan(read_study(chain(NOT_DONE)), "p")
    assert result.tasks["C"].per_day == 0
    (found,) = cuts(result)
    assert found.tasks == ("B", "C")
    assert "C (1 a day fewer)" in found.message
    assert "about 10 s a day" in found.message


def test_a_task_also_reached_another_way_keeps_those_occurrences():
    # D always follows A and leads to C: C still happens once a day, nothing is cut.
    result = analyse_plan(read_study(chain(NOT_DONE, fork_probability=1)), "p")
    assert result.tasks["C"].per_day == pytest.approx(1)
    assert cuts(result) == []


def test_a_probable_other_way_keeps_part_of_them():
    # D follows A half the time: C happens 0.5 a day instead of 1; lost 0.5 x 10 s = 5 s.
    result = analyse_plan(read_study(chain(NOT_DONE, fork_probability=0.5)), "p")
    assert result.tasks["C"].per_day == pytest.approx(0.5)
    (found,) = cuts(result)
    assert found.tasks == ("B", "C")
    assert "C (0.5 a day fewer)" in found.message and "about 5 s a day" in found.message


def test_pass_through_keeps_the_chain_going_after_both_lags():
    """B not done, its chain going on: C happens once a day and starts after the lag into
    B (60-120 s, mean 90) and out of it (30 s), with B taking no time: 120 s after A's
    finish on average; nothing is cut and nobody spends time on B."""
    result = analyse_plan(read_study(chain({**NOT_DONE, "pass_through": True})), "p")
    assert result.tasks["C"].per_day == pytest.approx(1)
    assert cuts(result) == []
    (timing,) = result.chains
    by_task = {t.task_id: t for t in timing.tasks}
    assert by_task["C"].start.mean - by_task["A"].finish.mean == pytest.approx(120)
    assert result.people["pat"].burden_s_per_day == pytest.approx(20)


def test_the_simulation_waits_for_both_lags_too():
    """C's window is 140 s from the chain's start. A takes 10 s, then the lag U(60, 120)
    into B, B no time, 30 s out of it, C 10 s: C finishes at 10 + U + 30 + 10 = 50 + U,
    after 140 s when U > 90, on half the days (U uniform). Pat's day: A and C, 20 s."""
    study = read_study(chain({**NOT_DONE, "pass_through": True}, window_s=140))
    summary = simulate(study, "p", days=400, seed=4).summary()
    (chained,) = summary["chains"]
    expected = 0.5
    error = np.sqrt(expected * (1 - expected) / chained["happenings"])
    assert abs(chained["missed_share"] - expected) <= 4 * error
    run = simulate(study, "p", days=50, seed=4)
    assert run.figures["pat"]["burden_s"] == pytest.approx(np.full(50, 20.0))


@pytest.mark.parametrize(
    ("assignment", "path", "words"),
    [
        ({"human": "pat", "pass_through": True}, ".pass_through", 'goes only with "applies"'),
        ({**NOT_DONE, "pass_through": False}, ".pass_through", "can only be true"),
    ],
)
def test_a_misplaced_pass_through_is_refused_with_its_path(assignment, path, words):
    problems = load_study(chain(assignment)).errors
    assert [p.path for p in problems] == ["$.plans[0].assignments.B" + path]
    assert words in problems[0].message


def test_pass_through_is_written_back_as_read():
    study = read_study(chain({**NOT_DONE, "pass_through": True}))
    written = json.loads(json.dumps(study_to_json(study)))["plans"][0]["assignments"]["B"]
    assert written == {**NOT_DONE, "pass_through": True}


def test_work_passing_across_a_task_not_done_is_a_handover():
    # A is Pat's, C Sam's, B not done with its chain going on: the work passes from Pat
    # to Sam across B once a day, a handover along the links A -> B -> C.
    document = chain({**NOT_DONE, "pass_through": True})
    document["plans"][0]["assignments"]["C"] = {"human": "sam"}
    result = analyse_plan(read_study(document), "p")
    (handover,) = result.handovers
    site = handover.site
    assert (site.from_task, site.to_task, site.from_agent, site.to_agent) == (
        "A",
        "C",
        "pat",
        "sam",
    )
    assert site.per_day == pytest.approx(1)
    assert site.trigger == "precedes through B"


def test_a_mode_cannot_let_a_chain_go_on():
    document = chain({"human": "pat"})
    document["plans"][0]["modes"] = {
        "initial": "m",
        "states": [
            {"id": "m", "name": "M", "overrides": {"B": {**NOT_DONE, "pass_through": True}}}
        ],
        "transitions": [],
    }
    problems = load_study(document).errors
    assert [p.path for p in problems] == ["$.plans[0].modes.states[0].overrides.B.pass_through"]
