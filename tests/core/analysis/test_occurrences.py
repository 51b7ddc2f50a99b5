"""Occurrences per day (allocation.core.analysis.occurrences) and when in the day they
fall (allocation.core.analysis.timeofday); methods document, #occurrences and #time-of-day.

The small cases are worked by hand. The Monte Carlo check simulates days with numpy (the
reference): Poisson counts for rate events, Bernoulli draws for each link and event
probability, and compares the mean count per day of each task with the analytic figure
within four standard errors.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.analysis.timeofday import (
    DayShare,
    asleep_intervals,
    awake_intervals,
)
from allocation.core.model import Agent

from .studies import analyse, leaf


def per_day(tasks, assignments=None, **kwargs: Any) -> dict[str, float]:
    """Occurrences per day of every leaf task under plan ``p``."""
    result = analyse(tasks, assignments, **kwargs)
    return {task_id: figures.per_day for task_id, figures in result.tasks.items()}


def link(source: str, target: str, probability: float | None = None) -> dict[str, Any]:
    data = {"from": source, "to": target, "kind": "precedes"}
    if probability is not None:
        data["probability"] = probability
    return data


# -- how a task occurs by itself -----------------------------------------------------


def test_fixed_times_count_once_each():
    counts = per_day(
        [leaf("T", occurs={"times": ["08:00", "12:30", "18:00:30"], "jitter_s": 300})]
    )
    assert counts["T"] == 3


def test_a_rate_per_day_is_its_mean():
    assert per_day([leaf("T", occurs={"per_day": 4.5, "when": "any"})])["T"] == 4.5


def test_every_n_days_is_one_nth_per_day():
    assert per_day([leaf("T", occurs={"every_days": 3})])["T"] == pytest.approx(1 / 3)


def test_an_event_task_occurs_with_its_probability_each_time_the_event_happens():
    # Hand-worked: the event happens twice a day; the task 0.4 of those times: 0.8.
    events = [{"id": "e", "name": "E", "times": ["07:30", "19:30"]}]
    counts = per_day(
        [leaf("T", occurs={"event": "e", "probability": 0.4}), leaf("U", occurs={"event": "e"})],
        events=events,
    )
    assert counts["T"] == pytest.approx(0.8)
    assert counts["U"] == pytest.approx(2)


def test_an_event_with_a_rate_passes_its_rate_on():
    # Hand-worked: 2.5 per day, all of them start T.
    events = [{"id": "e", "name": "E", "per_day": 2.5}]
    assert per_day([leaf("T", occurs={"event": "e"})], events=events)["T"] == 2.5


def test_every_n_days_event():
    events = [{"id": "e", "name": "E", "every_days": 4}]
    assert per_day([leaf("T", occurs={"event": "e"})], events=events)["T"] == pytest.approx(0.25)


# -- chains --------------------------------------------------------------------------


def test_a_chain_multiplies_the_probabilities_along_its_links():
    """Event 2 a day; R on the event with probability 0.5; R -> S with 0.4.

    R = 2 * 0.5 = 1; S = 2 * (0.5 * 0.4) = 0.4.
    """
    events = [{"id": "e", "name": "E", "per_day": 2}]
    tasks = [leaf("R", occurs={"event": "e", "probability": 0.5}), leaf("S")]
    counts = per_day(tasks, events=events, links=[link("R", "S", 0.4)])
    assert counts == pytest.approx({"R": 1.0, "S": 0.4})


def test_a_task_with_two_predecessors_in_a_chain_uses_the_noisy_or():
    """R at 09:00 (certain in its happening); R -> A (0.5), R -> B (1), A -> C (0.6),
    B -> C (0.5).

    P(C) = 1 - (1 - P(A)*0.6) * (1 - P(B)*0.5) = 1 - (1 - 0.3) * (1 - 0.5)
         = 1 - 0.7 * 0.5 = 0.65 per day.
    (Exact here: given R, the two paths draw independently.)
    """
    tasks = [leaf("R", occurs={"times": ["09:00"]}), leaf("A"), leaf("B"), leaf("C")]
    links = [link("R", "A", 0.5), link("R", "B"), link("A", "C", 0.6), link("B", "C", 0.5)]
    counts = per_day(tasks, links=links)
    assert counts == pytest.approx({"R": 1.0, "A": 0.5, "B": 1.0, "C": 0.65})


def test_a_task_reached_from_two_triggers_adds_them_up():
    """P at 08:00 and 20:00 (2 a day) -> S; Q 1.5 a day -> S with 0.5.

    S = 2 * 1 + 1.5 * 0.5 = 2.75 per day.
    """
    tasks = [
        leaf("P", occurs={"times": ["08:00", "20:00"]}),
        leaf("Q", occurs={"per_day": 1.5}),
        leaf("S"),
    ]
    result = analyse(tasks, links=[link("P", "S"), link("Q", "S", 0.5)])
    assert result.occurrences.per_day["S"] == pytest.approx(2.75)
    assert result.occurrences.from_trigger["S"] == pytest.approx(
        {"schedule:P": 2.0, "schedule:Q": 0.75}
    )


def test_a_task_that_does_not_apply_stops_its_chain():
    """R (08:00) -> A -> B, and X (12:00) -> B. With A not applicable, A does not occur,
    B hears nothing from R's chain and occurs once a day, from X."""
    tasks = [
        leaf("R", occurs={"times": ["08:00"]}),
        leaf("A"),
        leaf("B"),
        leaf("X", occurs={"times": ["12:00"]}),
    ]
    links = [link("R", "A"), link("A", "B"), link("X", "B")]
    assert per_day(tasks, links=links) == pytest.approx({"R": 1, "A": 1, "B": 2, "X": 1})
    off = {"A": {"applies": False, "rationale": "Not done in this plan."}}
    assert per_day(tasks, off, links=links) == pytest.approx({"R": 1, "A": 0, "B": 1, "X": 1})


def test_a_root_that_does_not_apply_stops_its_whole_chain():
    tasks = [leaf("R", occurs={"times": ["08:00"]}), leaf("A")]
    off = {"R": {"applies": False, "rationale": "Not done in this plan."}}
    assert per_day(tasks, off, links=[link("R", "A")]) == {"R": 0.0, "A": 0.0}


def test_informs_links_carry_no_occurrences():
    tasks = [leaf("R", occurs={"times": ["08:00"]}), leaf("A", occurs={"per_day": 2})]
    links = [{"from": "R", "to": "A", "kind": "informs"}]
    assert per_day(tasks, links=links) == {"R": 1.0, "A": 2.0}


# -- Monte Carlo: numpy as the reference ---------------------------------------------

MC_EVENTS = [
    {"id": "e1", "name": "Rate event", "per_day": 3, "when": "any"},
    {"id": "e2", "name": "Timed event", "times": ["08:00", "20:00"], "jitter_s": 600},
]
MC_TASKS = [
    leaf("A", occurs={"event": "e1", "probability": 0.7}),
    leaf("B"),
    leaf("C"),
    leaf("D"),
    leaf("F", occurs={"event": "e2"}),
    leaf("G"),
    leaf("H", occurs={"per_day": 1.5, "when": "any"}),
    leaf("I"),
    leaf("J"),
]
#: Tree-shaped within each trigger; J is reached from two triggers (through B and G).
MC_LINKS = [
    link("A", "B", 0.5),
    link("A", "C", 0.8),
    link("C", "D", 0.3),
    link("F", "G", 0.25),
    link("H", "I", 0.6),
    link("B", "J"),
    link("G", "J"),
]


def simulate_days(days: int, seed: int) -> dict[str, np.ndarray]:
    """Counts per day of each task of the Monte Carlo study, drawn with numpy."""
    rng = np.random.default_rng(seed)

    def per_day_counts(day: np.ndarray, happened: np.ndarray) -> np.ndarray:
        return np.bincount(day, weights=happened, minlength=days)

    def draw(parent: np.ndarray, probability: float) -> np.ndarray:
        return parent & (rng.random(parent.shape) < probability)

    # e1: Poisson(3) happenings a day; A with 0.7; A -> B 0.5, A -> C 0.8, C -> D 0.3.
    n1 = rng.poisson(3.0, days)
    day1 = np.repeat(np.arange(days), n1)
    a = rng.random(day1.size) < 0.7
    b = draw(a, 0.5)
    c = draw(a, 0.8)
    d = draw(c, 0.3)
    # e2: exactly 2 happenings a day; F always; F -> G 0.25.
    day2 = np.repeat(np.arange(days), 2)
    f = np.ones(day2.size, dtype=bool)
    g = draw(f, 0.25)
    # H: Poisson(1.5) a day; H -> I 0.6.
    n3 = rng.poisson(1.5, days)
    day3 = np.repeat(np.arange(days), n3)
    h = np.ones(day3.size, dtype=bool)
    i = draw(h, 0.6)
    counts = {
        "A": per_day_counts(day1, a),
        "B": per_day_counts(day1, b),
        "C": per_day_counts(day1, c),
        "D": per_day_counts(day1, d),
        "F": per_day_counts(day2, f),
        "G": per_day_counts(day2, g),
        "H": per_day_counts(day3, h),
        "I": per_day_counts(day3, i),
    }
    counts["J"] = counts["B"] + counts["G"]
    return counts


def test_analytic_occurrences_agree_with_a_monte_carlo_simulation():
    """numpy as the reference: 20 000 simulated days, seed fixed; each task's mean count
    per day within 4 standard errors of the analytic figure."""
    analytic = per_day(MC_TASKS, links=MC_LINKS, events=MC_EVENTS)
    days = 20_000
    simulated = simulate_days(days, seed=20240607)
    for task_id, counts in simulated.items():
        mean = counts.mean()
        standard_error = counts.std(ddof=1) / np.sqrt(days)
        assert abs(analytic[task_id] - mean) <= 4 * standard_error + 1e-12, (
            task_id,
            analytic[task_id],
            mean,
            standard_error,
        )


def test_the_monte_carlo_study_figures_by_hand():
    """The same study by hand: A = 3*0.7 = 2.1, B = 1.05, C = 1.68, D = 0.504,
    F = 2, G = 0.5, H = 1.5, I = 0.9, J = B + G = 1.55."""
    analytic = per_day(MC_TASKS, links=MC_LINKS, events=MC_EVENTS)
    assert analytic == pytest.approx(
        {
            "A": 2.1,
            "B": 1.05,
            "C": 1.68,
            "D": 0.504,
            "F": 2,
            "G": 0.5,
            "H": 1.5,
            "I": 0.9,
            "J": 1.55,
        }
    )


# -- when in the day ------------------------------------------------------------------

SLEEPER = Agent("pat", "Pat", "human", asleep=("23:00", "07:00"))
HOUR = 3600


def test_the_asleep_window_wraps_midnight():
    # 23:00-24:00 and 00:00-07:00; awake 07:00-23:00.
    assert sorted(asleep_intervals(SLEEPER)) == [(0.0, 7 * HOUR), (23 * HOUR, 24 * HOUR)]
    assert awake_intervals(SLEEPER) == [(7 * HOUR, 23 * HOUR)]
    assert asleep_intervals(Agent("x", "X", "human")) == []
    assert awake_intervals(Agent("x", "X", "human")) == [(0.0, 24 * HOUR)]


@pytest.mark.parametrize(
    ("clock", "share"),
    [
        # 03:00 +/- 10 min lies wholly inside 23:00-07:00.
        (3 * HOUR, 1.0),
        # 07:00 +/- 10 min: the half from 06:50 to 07:00 is asleep (hand-worked).
        (7 * HOUR, 0.5),
        # 23:00 +/- 10 min: the half from 23:00 to 23:10 is asleep.
        (23 * HOUR, 0.5),
        # 00:00 +/- 10 min wraps midnight and is all asleep.
        (0, 1.0),
        # 12:00 +/- 10 min is all awake.
        (12 * HOUR, 0.0),
        # 06:55 +/- 10 min: 06:45-07:00 asleep, 15 of 20 minutes.
        (6 * HOUR + 55 * 60, 0.75),
    ],
)
def test_share_of_a_jittered_time_that_falls_asleep(clock, share):
    spread = DayShare.at_times([clock], jitter_s=600)
    assert spread.share_within(asleep_intervals(SLEEPER)) == pytest.approx(share)
    assert spread.share_within(awake_intervals(SLEEPER)) == pytest.approx(1 - share)


@settings(deadline=None, max_examples=100)
@given(
    clocks=st.lists(st.integers(min_value=0, max_value=86399), min_size=1, max_size=4),
    jitter=st.floats(min_value=0, max_value=3 * 86400, allow_nan=False),
    shift=st.floats(min_value=0, max_value=2 * 86400, allow_nan=False),
)
def test_every_occurrence_falls_somewhere_in_the_day(clocks, jitter, shift):
    """Whatever the times and jitter (even a jitter of more than half a day, which
    covers the whole day), and however far the spread is shifted, the shares add up to
    1: all of the day, and asleep plus awake."""
    spread = DayShare.at_times(clocks, jitter_s=jitter).shifted(shift)
    assert spread.share_within([(0.0, 86400.0)]) == pytest.approx(1.0)
    asleep = spread.share_within(asleep_intervals(SLEEPER))
    awake = spread.share_within(awake_intervals(SLEEPER))
    assert asleep + awake == pytest.approx(1.0)


def test_two_times_share_their_weight():
    # 03:00 (all asleep) and 12:00 (all awake), each half of the occurrences.
    spread = DayShare.at_times([3 * HOUR, 12 * HOUR], jitter_s=600)
    assert spread.share_within(asleep_intervals(SLEEPER)) == pytest.approx(0.5)


def test_a_shift_moves_the_time_across_the_window():
    # 06:30 +/- 10 min shifted by 30 min is 07:00 +/- 10 min: half asleep.
    spread = DayShare.at_times([6.5 * HOUR], jitter_s=600).shifted(1800)
    assert spread.share_within(asleep_intervals(SLEEPER)) == pytest.approx(0.5)


def test_a_rate_spread_evenly_over_the_day_is_asleep_a_third_of_the_time():
    # 8 of 24 hours asleep.
    spread = DayShare.uniform([])
    assert spread.share_within(asleep_intervals(SLEEPER)) == pytest.approx(1 / 3)


def test_a_rate_while_asleep_falls_asleep_and_one_while_awake_falls_awake():
    """Through the analysis: tasks at a rate ``when`` asleep / awake for a study whose
    person sleeps 23:00-07:00, done by an automation (no latency shifts them)."""
    agents = [
        {"id": "pat", "name": "Pat", "kind": "human", "asleep": ["23:00", "07:00"]},
        {"id": "pump", "name": "Pump", "kind": "automation"},
    ]
    tasks = [
        leaf("N", occurs={"per_day": 2, "when": "asleep"}),
        leaf("D", occurs={"per_day": 2, "when": "awake"}),
        leaf("Y", occurs={"per_day": 2, "when": "any"}),
    ]
    result = analyse(tasks, dict.fromkeys(("N", "D", "Y"), {"automation": "pump"}), agents=agents)
    assert result.tasks["N"].asleep_share["pat"] == pytest.approx(1.0)
    assert result.tasks["D"].asleep_share["pat"] == pytest.approx(0.0)
    assert result.tasks["Y"].asleep_share["pat"] == pytest.approx(1 / 3)
