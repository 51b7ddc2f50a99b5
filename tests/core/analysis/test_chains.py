"""Chains and deadlines (allocation.core.analysis.chains; methods document,
#chain-timing): earliest, typical and latest start and finish of each task of a chain,
against its window.

All timings are worked by hand from the rules of the methods document (a task "is ready
when all its predecessors in the chain that can occur are done, each plus its link lag
(typical = midpoint), and starts then plus the receiving holder's response latency where
the work changes hands").
"""

from __future__ import annotations

from typing import Any

import pytest

from allocation.core.analysis.chains import response_latency
from allocation.core.analysis.plan import PlanAnalysis
from allocation.core.model import Agent, Range, Study

from .studies import PAT, PUMP, analyse, leaf

CALL = {"id": "e", "name": "Call", "times": ["12:00"]}


def chain_study(
    window_s: float | None = None,
    *,
    successor: dict[str, Any] | None = None,
    root_occurs: dict[str, Any] | None = None,
    agents: list[dict[str, Any]] | None = None,
    events: list[dict[str, Any]] | None = None,
) -> PlanAnalysis:
    """R (held by pat) -> S (held by the pump), lag [60, 120]."""
    extra = {} if window_s is None else {"window_s": window_s}
    tasks = [
        leaf("R", occurs=root_occurs or {"event": "e"}, duration_s=[30, 60, 120]),
        leaf("S", duration_s=[5, 10, 20], severity=3, **extra),
    ]
    return analyse(
        tasks,
        {"R": {"human": "pat"}, "S": successor or {"automation": "pump"}},
        links=[{"from": "R", "to": "S", "kind": "precedes", "lag_s": [60, 120]}],
        events=events if events is not None else [CALL],
        agents=agents,
    )


def timings(result: PlanAnalysis, trigger: str = "e") -> dict[str, Any]:
    (chain,) = [chain for chain in result.chains if chain.trigger.id == trigger]
    return {timing.task_id: timing for timing in chain.tasks}


def test_an_event_chain_handed_from_a_person_to_an_automation():
    """The event hands R to pat (awake: no asleep window), who responds in [10, 20, 60]:

    R start  = [10, 20, 60]
    R finish = [10+30, 20+60, 60+120]           = [40, 80, 180]
    S ready  = R finish + lag [60, 90, 120]      = [100, 170, 300]
    S start  = S ready + pump latency [1, 1, 1]  = [101, 171, 301]
    S finish = S start + [5, 10, 20]             = [106, 181, 321]
    """
    tasks = timings(chain_study())
    assert tasks["R"].start.as_list() == [10, 20, 60]
    assert tasks["R"].finish.as_list() == [40, 80, 180]
    assert tasks["S"].ready.as_list() == [100, 170, 300]
    assert tasks["S"].latency.as_list() == [1, 1, 1]
    assert tasks["S"].start.as_list() == [101, 171, 301]
    assert tasks["S"].finish.as_list() == [106, 181, 321]


def test_a_schedule_root_starts_at_once():
    """R on its own schedule at 12:00: nobody has to answer a call.

    R finish = [30, 60, 120]; S ready = [90, 150, 240]; start [91, 151, 241];
    finish [96, 161, 261].
    """
    tasks = timings(chain_study(root_occurs={"times": ["12:00"]}, events=[]), "schedule:R")
    assert tasks["R"].start.as_list() == [0, 0, 0]
    assert tasks["S"].start.as_list() == [91, 151, 241]
    assert tasks["S"].finish.as_list() == [96, 161, 261]


def test_no_latency_when_the_work_stays_with_the_same_holder():
    # S held by pat too: S start = S ready = [100, 170, 300]; finish [105, 180, 320].
    tasks = timings(chain_study(successor={"human": "pat"}))
    assert tasks["S"].start.as_list() == [100, 170, 300]
    assert tasks["S"].finish.as_list() == [105, 180, 320]


def test_a_task_waits_for_all_its_predecessors():
    """R at 12:00 (pat, 10 s) -> A (pat, [5, 50, 100]) and -> B (pat, [20, 30, 40]);
    A and B -> C. A finishes [15, 60, 110], B [30, 40, 50]; C is ready at the later of
    each: [30, 60, 110]."""
    tasks = [
        leaf("R", occurs={"times": ["12:00"]}, duration_s=10),
        leaf("A", duration_s=[5, 50, 100]),
        leaf("B", duration_s=[20, 30, 40]),
        leaf("C", duration_s=1),
    ]
    links = [
        {"from": a, "to": b, "kind": "precedes"}
        for a, b in (("R", "A"), ("R", "B"), ("A", "C"), ("B", "C"))
    ]
    result = analyse(tasks, links=links)
    chain = timings(result, "schedule:R")
    assert chain["C"].ready.as_list() == [30, 60, 110]
    assert chain["C"].finish.as_list() == [31, 61, 111]


# -- windows -------------------------------------------------------------------------


def window_findings(result: PlanAnalysis):
    return [finding for finding in result.findings if finding.kind == "window_missed"]


@pytest.mark.parametrize(
    ("window", "miss"),
    # S finishes [106, 181, 321] after the start of its chain (hand-worked above):
    # missed "always" when even the earliest finish is beyond the window, "typically"
    # when the typical one is, "possibly" when only the latest is. A finish exactly at
    # the window is in time.
    [
        (1000, None),
        (321, None),
        (300, "possibly"),
        (181, "possibly"),
        (150, "typically"),
        (106, "typically"),
        (105, "always"),
        (100, "always"),
    ],
)
def test_the_window_is_missed_when_the_finish_exceeds_it(window, miss):
    result = chain_study(window)
    assert timings(result)["S"].misses_window == miss
    found = window_findings(result)
    if miss is None:
        assert found == []
    else:
        (finding,) = found
        assert finding.tasks == ("S",)
        assert finding.events == ("e",)
        assert finding.severity == 3
        assert finding.message.startswith("S (Task S)")


def test_no_window_no_finding():
    result = chain_study(None)
    assert timings(result)["S"].misses_window is None
    assert window_findings(result) == []


# -- response latency by time of day -----------------------------------------------

SLEEPY = {
    **PAT,
    "asleep": ["23:00", "07:00"],
    "response_s": {"awake": [10, 20, 60], "asleep": [300, 900, 3600]},
}


def test_a_call_in_the_night_is_answered_at_the_asleep_latency():
    """Event at 03:00 +/- 10 min, wholly inside 23:00-07:00: R starts [300, 900, 3600]."""
    night = [{"id": "e", "name": "Call", "times": ["03:00"], "jitter_s": 600}]
    tasks = timings(chain_study(agents=[SLEEPY, PUMP], events=night))
    assert tasks["R"].start.as_list() == [300, 900, 3600]


def test_a_call_at_waking_time_mixes_the_latencies():
    """Event at 07:00 +/- 10 min: half asleep (hand-worked). Earliest is the quicker of
    the two minima, latest the slower maximum, typical the mean weighted 0.5 / 0.5:
    [min(10, 300), 0.5*20 + 0.5*900, max(60, 3600)] = [10, 460, 3600]."""
    dawn = [{"id": "e", "name": "Call", "times": ["07:00"], "jitter_s": 600}]
    tasks = timings(chain_study(agents=[SLEEPY, PUMP], events=dawn))
    assert tasks["R"].latency.as_list() == pytest.approx([10, 460, 3600])


def test_response_latency_defaults():
    """An automation without a latency answers at once; a person without one takes the
    assumption default_response_s; a person without an asleep latency answers as awake."""
    agents = (
        Agent("bot", "Bot", "automation"),
        Agent("kim", "Kim", "human"),
        Agent(
            "lee", "Lee", "human", asleep=("23:00", "07:00"), response_s={"awake": Range(3, 4, 5)}
        ),
    )
    study = Study("s", "s", "sv10", agents=agents)
    assert response_latency(study, "bot", 0.0, [5, 30, 120]).as_list() == [0, 0, 0]
    assert response_latency(study, "kim", 0.0, [5, 30, 120]).as_list() == [5, 30, 120]
    assert response_latency(study, "lee", 1.0, [5, 30, 120]).as_list() == [3, 4, 5]
    assert response_latency(study, None, 0.0, [5, 30, 120]).as_list() == [0, 0, 0]
