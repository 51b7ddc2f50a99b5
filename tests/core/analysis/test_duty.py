"""Duty hours (methods document, #duty-hours): work reaching a person off duty waits for
their next duty start, is not an interruption, and the wait counts in its timing.

Hand-worked with the rules of the methods document; the simulation is compared within
4 standard errors.
"""

from __future__ import annotations

import copy

import numpy as np
import pytest

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.duty import duty_wait, off_duty_pieces
from allocation.core.analysis.timeofday import DayShare
from allocation.core.simulation import simulate

from .studies import PUMP, leaf, study_data

HOUR = 3600.0
#: A nurse asleep 23:00-07:00, on duty 08:00-18:00, answering in 60 s when on duty.
NURSE = {
    "id": "nurse",
    "name": "Nurse",
    "kind": "human",
    "asleep": ["23:00", "07:00"],
    "on_duty": ["08:00", "18:00"],
    "response_s": {"awake": [60, 60, 60], "asleep": [600, 600, 600]},
}


def test_work_spread_over_the_day_waits_as_worked_by_hand():
    # Off duty 18:00-08:00, 14 h of 24: share 14/24; the wait falls from 14 h to 0 over
    # that stretch, on average 7 h there: 14/24 x 7 h = 4.083 h over all arrivals.
    off, mean, longest = duty_wait(DayShare.uniform([]), ("08:00", "18:00"))
    assert off == pytest.approx(14 / 24)
    assert mean == pytest.approx(14 / 24 * 7 * HOUR)
    assert longest == pytest.approx(14 * HOUR)


def test_duty_hours_across_midnight():
    # On duty 22:00-06:00: off 06:00-22:00, waiting for 22:00.
    assert off_duty_pieces(("22:00", "06:00")) == [(6 * HOUR, 22 * HOUR, 22 * HOUR)]
    # Off 00:00-08:00 (wait to 08:00) and 18:00-24:00 (wait to 08:00 the next day).
    assert off_duty_pieces(("08:00", "18:00")) == [
        (0.0, 8 * HOUR, 8 * HOUR),
        (18 * HOUR, 24 * HOUR, 32 * HOUR),
    ]


def night_call(times):
    """The pump's alarm at ``times`` calls the nurse to T (10 s) when it reaches her."""
    task = leaf("T", occurs={"event": "alarm"}, duration_s=10, window_s=1800)
    return study_data(
        [task],
        {"T": {"human": "nurse", "initiator": "automation"}},
        agents=copy.deepcopy([NURSE, PUMP]),
        events=[{"id": "alarm", "name": "Pump alarm", "times": times}],
    )


def test_an_off_duty_nurse_is_not_woken_and_the_work_waits_for_08_00():
    """At 02:00 the nurse is asleep and off duty: no interruption, no night interruption;
    the work starts at 08:00 + 60 s, six hours and a minute later, and its 30-minute
    window is missed. At 10:00 she is on duty: one interruption, started 60 s later."""
    night = analyse_plan(read_study(night_call(["02:00"])), "p")
    assert night.people["nurse"].interruptions_per_day == 0
    assert night.people["nurse"].night_interruptions_per_day == 0
    (late,) = night.chains[0].tasks
    assert late.latency.mean == pytest.approx(6 * HOUR + 60, abs=2)
    assert late.misses_window
    assert any(f.kind == "window_missed" and f.tasks == ("T",) for f in night.findings)
    day = analyse_plan(read_study(night_call(["10:00"])), "p")
    assert day.people["nurse"].interruptions_per_day == pytest.approx(1)
    (prompt,) = day.chains[0].tasks
    assert prompt.latency.mean == pytest.approx(60, abs=2)


def test_the_simulation_waits_for_duty_too():
    """Work at a rate of 3 a day spread over the whole day: on duty 10/24 of it, so
    3 x 10/24 = 1.25 interruptions a day, none at night; every drawn latency is 60 s on
    duty, or 60 s after the wait to 08:00 off duty."""
    task = leaf("T", occurs={"event": "alarm"}, duration_s=10)
    study = read_study(
        study_data(
            [task],
            {"T": {"human": "nurse", "initiator": "automation"}},
            agents=copy.deepcopy([NURSE, PUMP]),
            events=[{"id": "alarm", "name": "Pump alarm", "per_day": 3}],
        )
    )
    nurse = analyse_plan(study, "p").people["nurse"]
    assert nurse.interruptions_per_day == pytest.approx(1.25, abs=0.01)
    assert nurse.night_interruptions_per_day == 0
    run = simulate(study, "p", days=400, seed=9)
    values = run.figures["nurse"]["interruptions"]
    error = values.std(ddof=1) / np.sqrt(values.size)
    assert abs(values.mean() - nurse.interruptions_per_day) <= 4 * error
    assert run.figures["nurse"]["night_interruptions"].sum() == 0


@pytest.mark.parametrize(
    ("on_duty", "path", "words"),
    [
        (["08:00", "08:00"], "$.agents[0].on_duty", "must not start and end"),
        (["8 o'clock", "18:00"], "$.agents[0].on_duty[0]", ""),
        (["08:00"], "$.agents[0].on_duty", "must be [from, to]"),
    ],
)
def test_bad_duty_hours_are_refused_with_their_path(on_duty, path, words):
    document = night_call(["10:00"])
    document["agents"][0]["on_duty"] = on_duty
    problems = load_study(document).errors
    assert [p.path for p in problems] == [path]
    assert words in problems[0].message


def test_only_a_person_has_duty_hours():
    document = night_call(["10:00"])
    document["agents"][1]["on_duty"] = ["08:00", "18:00"]
    problems = load_study(document).errors
    assert [p.path for p in problems] == ["$.agents[1].on_duty"]


@pytest.mark.parametrize(("time", "missed"), [("02:00", 1.0), ("10:00", 0.0)])
def test_the_simulation_misses_the_window_off_duty_only(time, missed):
    # Off duty the work starts at 08:00 + 60 s, far past its 30 minutes; on duty at
    # 60 s + 10 s, well within them: every drawn day alike.
    summary = simulate(read_study(night_call([time])), "p", days=20, seed=2).summary()
    (chain,) = summary["chains"]
    assert chain["missed_share"] == missed
