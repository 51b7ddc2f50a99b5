"""Modes that keep time (methods document, #mode-share): the long-run share of the day in
each mode, transitions on events and at fixed times, and the simulation that carries the
mode across midnight.

References: the stationary distribution of a rate-driven map is the null space of its
generator's transpose (``scipy.linalg.null_space``); a map driven by fixed times is
worked by hand (its modes follow the clock); an event at a rate that moves the mode is a
rate in the generator (a Poisson process of events, Ross 2014 ch. 5), so a two-mode map
has the closed form a / (a + b). The simulated share of time in each mode is compared
with these within 4 standard errors of batch means (20 batches, as days in a row are
correlated).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.modetime import mode_time
from allocation.core.simulation import simulate

from .studies import PAT, PUMP, leaf, study_data


def mapped(transitions, states=("A", "B"), initial="A", events=None, tasks=None, overrides=None):
    plan = {
        "id": "p",
        "name": "Plan",
        "assignments": {"T": {"automation": "pump"}},
        "modes": {
            "initial": initial,
            "states": [
                {
                    "id": s,
                    "name": f"Mode {s}",
                    **({"overrides": overrides[s]} if overrides and s in overrides else {}),
                }
                for s in states
            ],
            "transitions": transitions,
        },
    }
    task = leaf("T", duration_s=60, occurs={"per_day": 1, "when": "any"})
    return study_data(tasks or [task], plans=[plan], events=events, agents=[PAT, PUMP])


def move(source, target, **how):
    return {
        "from": source,
        "to": target,
        "trigger": f"{source} to {target}",
        "by": "automation",
        "cue": "display",
        **how,
    }


def shares(document):
    study = read_study(document)
    return analyse_plan(study, "p").mode_share


def batch_error(values: np.ndarray, batches: int = 20) -> float:
    means = values[: values.size // batches * batches].reshape(batches, -1).mean(axis=1)
    return float(means.std(ddof=1) / np.sqrt(batches))


@pytest.mark.parametrize("seed", range(6))
def test_a_rate_driven_map_spends_its_stationary_share_in_each_mode(seed):
    rng = np.random.default_rng(seed)
    states = ("A", "B", "C", "D")
    rates = rng.uniform(0.2, 30, (4, 4)) * (rng.random((4, 4)) < 0.8)
    np.fill_diagonal(rates, 0)
    # Keep it irreducible: a ring A -> B -> C -> D -> A at least.
    for i in range(4):
        rates[i, (i + 1) % 4] = max(rates[i, (i + 1) % 4], 1.0)
    transitions = [
        move(states[i], states[j], per_day=float(rates[i, j]))
        for i in range(4)
        for j in range(4)
        if rates[i, j] > 0
    ]
    generator = rates - np.diag(rates.sum(axis=1))
    stationary = scipy.linalg.null_space(generator.T)[:, 0]
    stationary /= stationary.sum()
    got = shares(mapped(transitions, states))
    assert [got[s] for s in states] == pytest.approx(stationary, rel=1e-9, abs=1e-12)


def test_a_map_driven_by_the_clock_follows_it():
    # Day mode from 07:00, night mode from 22:00: 15 h and 9 h of the day; each change
    # once a day.
    document = mapped([move("A", "B", times=["22:00"]), move("B", "A", times=["07:00"])])
    got = shares(document)
    assert got == pytest.approx({"A": 15 / 24, "B": 9 / 24})
    study = read_study(document)
    timed = mode_time(study, study.plan("p").modes)
    assert timed.fires == pytest.approx((1.0, 1.0))


def test_an_event_at_a_rate_moves_the_mode_as_a_rate_would():
    # An event 4 times a day (any time) moves A to B; B goes back at 12 a day: the
    # two-mode chain with a = 4, b = 12 spends a / (a + b) = 0.25 of the day in B, and
    # the event moves it 4 x 0.75 = 3 times a day.
    events = [{"id": "bump", "name": "Bump", "per_day": 4, "when": "any"}]
    document = mapped([move("A", "B", event="bump"), move("B", "A", per_day=12)], events=events)
    assert shares(document) == pytest.approx({"A": 0.75, "B": 0.25})
    study = read_study(document)
    assert mode_time(study, study.plan("p").modes).fires == pytest.approx((3.0, 3.0))


def test_a_slow_way_back_is_a_long_run_share_not_a_day_from_midnight():
    # A -> B at 0.1 a day, back at 0.3 a day: the long-run share of B is 0.1 / 0.4 =
    # 0.25. Restarted in A each midnight (revision 2 before modes kept time) it was
    # about 0.05: the day never lasts long enough to get there.
    document = mapped([move("A", "B", per_day=0.1), move("B", "A", per_day=0.3)])
    assert shares(document)["B"] == pytest.approx(0.25)


@pytest.mark.parametrize(
    ("transitions", "events", "expected"),
    [
        ([move("A", "B", per_day=0.1), move("B", "A", per_day=0.3)], None, {"B": 0.25}),
        ([move("A", "B", times=["22:00"]), move("B", "A", times=["07:00"])], None, {"B": 9 / 24}),
        (
            [move("*", "B", event="bump"), move("B", "A", per_day=12)],
            [{"id": "bump", "name": "Bump", "per_day": 4, "when": "any"}],
            {"B": 0.25},
        ),
    ],
)
def test_the_simulation_carries_the_mode_across_midnight_and_chunks(transitions, events, expected):
    study = read_study(mapped(transitions, events=events))
    run = simulate(study, "p", days=2000, seed=4)
    for mode, share in expected.items():
        values = run.modes[mode] / 86400
        assert abs(values.mean() - share) <= 4 * batch_error(values) + 1e-9, (mode, values.mean())


def test_work_an_event_starts_happens_in_the_mode_the_event_moves_the_device_into():
    # A signal loss (2 a day) moves the device from auto to manual and starts T, which
    # the person does in manual (the pump in auto); manual goes back to auto at 48 a day.
    # The mode changes first, so every T is the person's: 2 x 60 s = 120 s a day.
    events = [{"id": "loss", "name": "Signal loss", "per_day": 2, "when": "any"}]
    task = leaf("T", duration_s=60, occurs={"event": "loss"})
    document = mapped(
        [move("auto", "manual", event="loss"), move("manual", "auto", per_day=48)],
        states=("auto", "manual"),
        initial="auto",
        events=events,
        tasks=[task],
        overrides={"manual": {"T": {"human": "pat"}}},
    )
    study = read_study(document)
    pat = analyse_plan(study, "p").people["pat"]
    assert pat.burden_s_per_day == pytest.approx(120, rel=1e-6)
    run = simulate(study, "p", days=1000, seed=2)
    values = run.figures["pat"]["burden_s"]
    error = values.std(ddof=1) / np.sqrt(values.size)
    assert abs(values.mean() - 120) <= 4 * error


@pytest.mark.parametrize(
    ("transition", "path", "words"),
    [
        (move("A", "B", per_day=2, times=["07:00"]), "", "happens in one way only"),
        (move("A", "B", times=[]), ".times", "must list from 1 to 1,440"),
        (move("A", "B", times=["25:00"]), ".times[0]", "not a time of day"),
        (move("A", "B", event="nothing"), ".event", "which the study does not have"),
    ],
)
def test_a_bad_timed_transition_is_refused_with_its_path(transition, path, words):
    problems = load_study(mapped([transition])).errors
    assert [p.path for p in problems] == ["$.plans[0].modes.transitions[0]" + path], problems
    assert words in problems[0].message


def test_a_map_whose_time_in_mode_would_cost_too_much_is_refused_with_its_path():
    # 60 modes and 1,000 times of day: 1,001 stretches x 60^3 = 216,216,000, over the
    # limit of 200,000,000 (MODE_TIME_WORK_MAX); the check says where and why.
    states = tuple(f"m{i}" for i in range(60))
    times = [f"{minute // 60:02d}:{minute % 60:02d}" for minute in range(1000)]
    transitions = [move("m0", "m1", times=times)]
    problems = load_study(mapped(transitions, states=states, initial="m0")).errors
    assert [p.path for p in problems] == ["$.plans[0].modes"]
    assert "216,216,000" in problems[0].message and "MODE_TIME_WORK_MAX" in problems[0].message
