"""The day simulation (allocation.core.simulation; methods document, #timeline and
#simulation).

Checked against things outside the code: scipy.stats for the Poisson counts and the
triangular durations, hand-worked timelines for occupancy and channel sums, hand-worked
sleep windows across midnight, and the analytic engine's figures (means within a few
standard errors, the usual sampling-error band).
"""

from __future__ import annotations

import json
import random

import numpy as np
import pytest
from scipy import stats

from allocation.core import read_study
from allocation.core.analysis import analyse_plan
from allocation.core.simulation import (
    CHUNK_DAYS,
    Simulation,
    SimulationCancelled,
    SimulationChunk,
    chunk_count,
    combine,
    day_timeline,
    simulate,
    simulate_chunk,
)
from allocation.core.simulation.sampling import triangular
from allocation.core.simulation.timeline import Sweep, bin_edges
from allocation.examples import EXAMPLES_DIR


def study_file(tasks, links=(), events=(), plans=None, agents=None, assumptions=None) -> dict:
    """A small study: Pat (asleep 23:00-07:00, responds in 10-60 s awake, 60-600 s asleep)
    and a pump, the given tasks under one goal."""
    return {
        "format": "baton.study",
        "version": 2,
        "study": {"id": "s", "title": "S", "scale": "sv10", "assumptions": assumptions or {}},
        "agents": agents
        or [
            {
                "id": "pat",
                "name": "Pat",
                "kind": "human",
                "asleep": ["23:00", "07:00"],
                "response_s": {"awake": [10, 30, 50], "asleep": [60, 300, 540]},
            },
            {"id": "pump", "name": "Pump", "kind": "automation"},
        ],
        "events": list(events),
        "tasks": [{"id": "G", "title": "Goal"}, *({**t, "parent": "G"} for t in tasks)],
        "links": list(links),
        "plans": plans
        or [
            {
                "id": "p",
                "name": "Plan",
                "assignments": {t["id"]: {"human": "pat"} for t in tasks},
            }
        ],
    }


# -- reproducibility ------------------------------------------------------------------

CHAIN = study_file(
    tasks=[
        {"id": "T1", "title": "Notice", "occurs": {"event": "e"}, "duration_s": [10, 20, 30]},
        {"id": "T2", "title": "Act", "duration_s": [30, 60, 90], "window_s": 150},
        {
            "id": "T3",
            "title": "Check",
            "occurs": {"per_day": 3, "when": "any"},
            "duration_s": 40,
            "demands": {"visual": 5, "cognitive": 4},
        },
    ],
    links=[{"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 60]}],
    events=[{"id": "e", "name": "Event", "per_day": 6, "when": "any"}],
    plans=[
        {
            "id": "p",
            "name": "Plan",
            "assignments": {
                "T1": {"automation": "pump"},
                "T2": {"human": "pat"},
                "T3": {"human": "pat"},
            },
        }
    ],
)


def test_same_seed_same_result_and_other_seeds_differ():
    study = read_study(CHAIN)
    first = simulate(study, "p", days=120, seed=7)
    again = simulate(study, "p", days=120, seed=7)
    other = simulate(study, "p", days=120, seed=8)
    assert first.to_json() == again.to_json()
    assert first.to_json()["figures"] != other.to_json()["figures"]
    assert Simulation.from_json(first.to_json()).summary() == first.summary()


def test_chunks_in_any_order_give_the_same_run():
    study = read_study(CHAIN)
    days = 2 * CHUNK_DAYS + 7
    whole = simulate(study, "p", days=days, seed=11)
    parts = [
        SimulationChunk.from_json(
            simulate_chunk(study, "p", seed=11, chunk=k, days=days).to_json()
        )
        for k in range(chunk_count(days))
    ]
    random.Random(0).shuffle(parts)
    assert combine(study, "p", seed=11, days=days, chunks=parts).to_json() == whole.to_json()
    with pytest.raises(ValueError, match="needs chunks 0 to 2 once each"):
        combine(study, "p", seed=11, days=days, chunks=parts[:2])


def test_progress_is_reported_and_can_cancel():
    study = read_study(CHAIN)
    seen = []
    simulate(study, "p", days=CHUNK_DAYS + 1, seed=1, progress=lambda d, n: seen.append((d, n)))
    assert seen == [(CHUNK_DAYS, CHUNK_DAYS + 1), (CHUNK_DAYS + 1, CHUNK_DAYS + 1)]
    with pytest.raises(SimulationCancelled):
        simulate(study, "p", days=CHUNK_DAYS + 1, seed=1, progress=lambda d, n: False)


@pytest.mark.parametrize(("days", "seed"), [(0, 1), (-3, 1), (10, -1), (1.5, 1)])
def test_bad_days_or_seed_are_refused_with_a_clear_message(days, seed):
    with pytest.raises(ValueError, match="days must|seed must"):
        simulate(read_study(CHAIN), "p", days=days, seed=seed)


# -- distributions against scipy.stats --------------------------------------------------


def test_daily_counts_of_a_poisson_event_follow_scipy_poisson():
    # T3 occurs 3 times a day by a Poisson rate: its daily interactions are Poisson(3)
    # (scipy.stats.poisson); a chi-square test on the counts 0..6+ at the 0.001 level.
    study = read_study(
        study_file(
            tasks=[
                {
                    "id": "T3",
                    "title": "Check",
                    "occurs": {"per_day": 3, "when": "any"},
                    "duration_s": 5,
                }
            ]
        )
    )
    counts = simulate(study, "p", days=2000, seed=3).figures["pat"]["interactions"]
    observed = np.bincount(counts.astype(int), minlength=8)[:7].astype(float)
    observed[6] += counts[counts > 6].size
    expected = stats.poisson(3).pmf(np.arange(7)) * counts.size
    expected[6] = stats.poisson(3).sf(5) * counts.size
    assert stats.chisquare(observed, expected).pvalue > 0.001
    assert counts.var(ddof=1) == pytest.approx(3, rel=0.15)  # Poisson: variance = mean


def test_triangular_draws_follow_scipy_triang():
    # scipy.stats.triang(c, loc, scale) with c = (mode - low) / (high - low).
    rng = np.random.default_rng(5)
    drawn = triangular(rng, 10.0, 20.0, 60.0, 20_000)
    assert stats.kstest(drawn, stats.triang(0.2, loc=10, scale=50).cdf).pvalue > 0.001
    arrays = triangular(rng, np.full(20_000, 10.0), np.full(20_000, 20.0), np.full(20_000, 60.0))
    assert stats.kstest(arrays, stats.triang(0.2, loc=10, scale=50).cdf).pvalue > 0.001
    assert np.array_equal(triangular(rng, 4.0, 4.0, 4.0, 3), [4.0, 4.0, 4.0])


# -- occupancy and channels, by hand ----------------------------------------------------


def test_occupancy_and_channel_sums_on_a_hand_worked_timeline():
    # Two stretches: [0, 600) with visual 4, [300, 900) with visual 5, one [1000, 1100)
    # with visual 1. Bins of 900 s: bin 0 holds 600 + 600 = 1200 s of work -> 1.333;
    # bin 1 holds 100 s -> 0.111. Visual: 4, then 9 from 300 to 600 (above 7 for 300 s),
    # then 5, then 1.
    start = np.array([0.0, 300.0, 1000.0])
    end = np.array([600.0, 900.0, 1100.0])
    weights = np.array([[1.0, 1.0, 1.0], [4.0, 5.0, 1.0]])
    sweep = Sweep.of(start, end, weights)
    edges = np.array([0.0, 900.0, 1800.0])
    assert np.diff(sweep.integral(0, edges)) / 900 == pytest.approx([1200 / 900, 100 / 900])
    assert np.diff(sweep.above(1, 7.0, edges)) == pytest.approx([300.0, 0.0])
    assert sweep.peaks(1, edges) == pytest.approx([9.0, 1.0])
    # A stretch that ends as another starts does not overlap it.
    touching = Sweep.of(np.array([0.0, 100.0]), np.array([100.0, 200.0]), np.ones((1, 2)) * 6)
    assert touching.peaks(0, np.array([0.0, 300.0])) == pytest.approx([6.0])


def test_bins_of_a_day_that_do_not_divide_it():
    edges, per_day = bin_edges(0, 1, 7 * 3600)
    assert per_day == 4 and np.diff(edges)[-1] == pytest.approx(86400 - 3 * 7 * 3600)


def test_night_interruptions_count_across_midnight():
    # Events at 23:30, 06:30 and 12:00 each start a task Pat does: Pat sleeps 23:00-07:00,
    # so by hand two of the three interruptions a day fall at night.
    study = read_study(
        study_file(
            tasks=[{"id": "T1", "title": "Respond", "occurs": {"event": "e"}, "duration_s": 60}],
            events=[{"id": "e", "name": "Alarm", "times": ["23:30", "06:30", "12:00"]}],
        )
    )
    figures = simulate(study, "p", days=5, seed=1).figures["pat"]
    assert figures["interruptions"].tolist() == [3.0] * 5
    assert figures["night_interruptions"].tolist() == [2.0] * 5
    # And the analytic engine agrees, by the same hand count.
    assert analyse_plan(study, "p").people["pat"].night_interruptions_per_day == pytest.approx(2)


def test_peak_and_overload_of_concurrent_demands_in_a_day():
    # Two fixed tasks overlap from 08:00:30 to 08:01:00 (both 60 s, visual 4 each): the
    # visual channel reaches 8, above 7 for 30 s (by hand); occupancy's 08:00 bin holds
    # 120 s of work in 900 s.
    study = read_study(
        study_file(
            tasks=[
                {
                    "id": "A",
                    "title": "A",
                    "occurs": {"times": ["08:00"]},
                    "duration_s": 60,
                    "demands": {"visual": 4},
                },
                {
                    "id": "B",
                    "title": "B",
                    "occurs": {"times": ["08:00:30"]},
                    "duration_s": 60,
                    "demands": {"visual": 4},
                },
            ]
        )
    )
    figures = simulate(study, "p", days=2, seed=1).figures["pat"]
    assert figures["peak_visual"].tolist() == [8.0, 8.0]
    assert figures["overload_s_visual"] == pytest.approx([30.0, 30.0])
    assert figures["peak_occupancy"] == pytest.approx([120 / 900] * 2)
    day = day_timeline(study, "p", seed=1, day=1, days=2).to_json()
    pat = day["people"]["pat"]
    assert [(s["task"], s["start"]) for s in pat["segments"]][0] == ("A", 8 * 3600.0)
    assert len(pat["occupancy"]) == 96
    assert pat["occupancy"][32] == pytest.approx(120 / 900)
    assert max(level for _t, level in pat["channels"]["visual"]) == 8.0


# -- agreement with the analytic engine -------------------------------------------------

#: Each person's simulated daily figure and the analytic figure that is its expectation.
EXPECTATIONS = (
    ("burden_s", "burden_s_per_day"),
    ("interactions", "interactions_per_day"),
    ("interruptions", "interruptions_per_day"),
    ("night_interruptions", "night_interruptions_per_day"),
    ("monitoring_s", "monitoring_s_per_day"),
    ("failures", "failures_per_day"),
    ("escalations", "escalations_per_day"),
)
#: Figures that count things a day: a rare one may be drawn on no day of a run.
COUNTS = ("interactions", "interruptions", "night_interruptions", "failures", "escalations")


def assert_expectations_agree(study, plan_id: str, days: int, seed: int) -> None:
    """Every person's simulated mean of each daily figure lies within 4 standard errors
    (the usual sampling-error band) of the analytic figure, its expectation. A count of
    rare things may be drawn on no day at all (a sample error of 0): its error is at
    least the Poisson one of its expectation, sqrt(expected / days)."""
    run = simulate(study, plan_id, days=days, seed=seed)
    people = analyse_plan(study, plan_id).people
    for human, person in people.items():
        for figure, analytic in EXPECTATIONS:
            values = run.figures[human][figure]
            expected = getattr(person, analytic)
            error = values.std(ddof=1) / np.sqrt(values.size)
            if figure in COUNTS:
                error = max(error, np.sqrt(max(expected, 0.0) / values.size))
            assert abs(values.mean() - expected) <= 4 * error + 1e-9, (
                plan_id,
                human,
                figure,
                values.mean(),
                expected,
                error,
            )


def test_a_skewed_duration_counts_at_its_triangular_mean():
    # Hand-worked: one task, duration [60, 120, 420] s, done by Pat twice a day. The
    # triangular distribution's mean is (a + b + c) / 3 = (60 + 120 + 420) / 3 = 200 s
    # (Evans, Hastings & Peacock 2000, ch. 40; scipy.stats.triang with c = (120 - 60) /
    # (420 - 60) = 1/6, loc 60, scale 360 gives the same), so the expected time a day is
    # 2 x 200 = 400 s, not 2 x 120 = 240 s at the typical duration.
    assert stats.triang(1 / 6, loc=60, scale=360).mean() == pytest.approx(200)
    study = read_study(
        study_file(
            tasks=[
                {
                    "id": "T1",
                    "title": "Check",
                    "occurs": {"times": ["09:00", "17:00"]},
                    "duration_s": [60, 120, 420],
                }
            ]
        )
    )
    analysis = analyse_plan(study, "p")
    assert analysis.people["pat"].burden_s_per_day == pytest.approx(400)
    task = analysis.to_json()["tasks"]["T1"]
    assert task["expected_s"] == pytest.approx(200)
    assert task["typical_s"] == pytest.approx(120)
    assert task["person_s"] == pytest.approx(200)
    # The simulation draws the durations: its mean day is 400 s within 4 standard errors.
    values = simulate(study, "p", days=2000, seed=9).figures["pat"]["burden_s"]
    error = values.std(ddof=1) / np.sqrt(values.size)
    assert abs(values.mean() - 400) <= 4 * error
    assert abs(values.mean() - 240) > 4 * error  # and far from the typical figure


def test_a_night_latency_that_outlasts_the_night_moves_starts_out_of_it():
    # Hand-worked: an event 6 times a day, evenly over the whole day, hands T1 to Pat, who
    # sleeps 23:00-07:00 (28,800 s of 86,400) and responds in [10, 30, 50] s awake (mean
    # 30 s) and [600, 1800, 6000] s asleep (mean (600 + 1800 + 6000) / 3 = 2,800 s, the
    # triangular mean). A start is at night when the work arrives asleep and the asleep
    # latency still ends before 07:00, or arrives awake within the awake latency before
    # 23:00; arrivals are uniform over the day, so the chance is (28,800 - 2,800 + 30) /
    # 86,400 = 0.30127 and night interruptions are 6 x 0.30127 = 1.8076 a day (not 6 / 3 =
    # 2: the long night latency pushes some starts past 07:00).
    document = study_file(
        tasks=[{"id": "T1", "title": "Respond", "occurs": {"event": "e"}, "duration_s": 60}],
        events=[{"id": "e", "name": "Alarm", "per_day": 6, "when": "any"}],
    )
    document["agents"][0]["response_s"] = {"awake": [10, 30, 50], "asleep": [600, 1800, 6000]}
    study = read_study(document)
    expected = 6 * (28_800 - 2_800 + 30) / 86_400
    assert analyse_plan(study, "p").people["pat"].night_interruptions_per_day == pytest.approx(
        expected
    )
    values = simulate(study, "p", days=3000, seed=13).figures["pat"]["night_interruptions"]
    error = values.std(ddof=1) / np.sqrt(values.size)
    assert abs(values.mean() - expected) <= 4 * error
    assert abs(values.mean() - 2.0) > 4 * error


@pytest.mark.parametrize("example", ["closed-loop-insulin", "driver-support", "home-heating"])
def test_the_examples_expectations_agree_with_the_simulation(example):
    # The example studies have skewed durations and latencies (e.g. a bolus [5, 15, 60] s,
    # a person's night latency [60, 600, 3600] s) and mode maps; every plan's analytic
    # daily figures are expectations and agree with 1,500 simulated days.
    study = read_study(json.loads((EXAMPLES_DIR / f"{example}.json").read_text("utf-8")))
    for plan in study.plans:
        assert_expectations_agree(study, plan.id, days=1500, seed=21)


def skewed_study(seed: int) -> dict:
    """A generated study with skewed ranges: a tree of tasks below an event that occurs
    while Pat is awake, asleep or at any time, with durations such as [1, 2, 30] and
    latencies with long right tails, each task Pat's, the pump's or shared."""
    rng = np.random.default_rng(seed)
    count = int(rng.integers(4, 7))
    tasks, links, assignments = [], [], {}
    for i in range(count):
        low = float(rng.choice([1, 5, 20, 60]))
        typical = low * float(rng.choice([1.5, 2, 3]))
        high = typical * float(rng.choice([5, 10, 15]))
        task = {"id": f"T{i}", "title": f"Task {i}", "duration_s": [low, typical, high]}
        if i == 0:
            task["occurs"] = {"event": "e"}
        else:
            source = int(rng.integers(0, i))  # one predecessor each: a tree
            lag = float(rng.choice([0, 60, 600, 1800]))
            links.append(
                {
                    "from": f"T{source}",
                    "to": f"T{i}",
                    "kind": "precedes",
                    "lag_s": [0, lag],
                    "probability": float(rng.choice([1.0, 0.5])),
                }
            )
        tasks.append(task)
        who = rng.choice(["human", "automation", "shared"])
        if who == "human":
            assignments[f"T{i}"] = {"human": "pat"}
        elif who == "automation":
            assignments[f"T{i}"] = {"automation": "pump", "accountable": "pat"}
        else:
            assignments[f"T{i}"] = {
                "human": "pat",
                "automation": "pump",
                "levels": int(rng.integers(2, 10)),
            }
    when = str(rng.choice(["awake", "asleep", "any"]))
    return study_file(
        tasks=tasks,
        links=links,
        events=[{"id": "e", "name": "Event", "per_day": 6, "when": when}],
        plans=[{"id": "p", "name": "Plan", "assignments": assignments}],
        agents=[
            {
                "id": "pat",
                "name": "Pat",
                "kind": "human",
                "asleep": ["23:00", "07:00"],
                "response_s": {"awake": [5, 10, 300], "asleep": [60, 120, 3600]},
            },
            {
                "id": "pump",
                "name": "Pump",
                "kind": "automation",
                "response_s": {"any": [1, 2, 30]},
            },
        ],
    )


@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5, 6])
def test_generated_skewed_studies_expectations_agree_with_the_simulation(seed):
    # Skewed durations, lags and latencies: the typical value is far from the mean, so
    # figures at typical values would miss by many standard errors.
    assert_expectations_agree(read_study(skewed_study(seed)), "p", days=1500, seed=seed)


def test_modes_hand_work_over_in_the_share_of_the_day_the_analysis_gives():
    # A mode map: 'auto' (T4 the pump's) and 'manual' (T4 Pat's), 2 changes a day each
    # way: half the day in each (the analytic share), so Pat handles about half of T4's 4
    # a day, within sampling error.
    document = study_file(
        tasks=[
            {
                "id": "T4",
                "title": "Routine",
                "occurs": {"per_day": 4, "when": "any"},
                "duration_s": 60,
            }
        ],
        plans=[
            {
                "id": "p",
                "name": "Plan",
                "assignments": {"T4": {"automation": "pump"}},
                "modes": {
                    "initial": "auto",
                    "states": [
                        {"id": "auto", "name": "Auto"},
                        {"id": "manual", "name": "Manual", "overrides": {"T4": {"human": "pat"}}},
                    ],
                    "transitions": [
                        {
                            "from": "auto",
                            "to": "manual",
                            "trigger": "x",
                            "by": "automation",
                            "cue": "alert",
                            "per_day": 20,
                        },
                        {
                            "from": "manual",
                            "to": "auto",
                            "trigger": "y",
                            "by": "human",
                            "cue": "display",
                            "per_day": 20,
                        },
                    ],
                },
            }
        ],
    )
    study = read_study(document)
    values = simulate(study, "p", days=1500, seed=4).figures["pat"]["interactions"]
    expected = analyse_plan(study, "p").people["pat"].interactions_per_day
    error = values.std(ddof=1) / np.sqrt(values.size)
    assert expected == pytest.approx(4 * 0.5, rel=0.05)  # the Markov chain's day average
    assert abs(values.mean() - expected) <= 4 * error
    day = day_timeline(study, "p", seed=4, day=0, days=1).to_json()
    # The day opens in the mode carried over from the night before (long-run 50/50).
    assert day["modes"][0][0] == 0.0 and day["modes"][0][1] in ("auto", "manual")
    assert len(day["modes"]) > 1


def window_miss_probability() -> float:
    """The chance that CHAIN's T2 finishes more than 150 s after the event, computed
    independently of Baton by numerical convolution of the densities (scipy.stats).

    The finish is T1 (the pump's, triangular 10-20-30 s) + the lag (uniform 0-60 s) + Pat's
    latency (the work changes hands: triangular 10-30-50 s awake, 60-300-540 s asleep) +
    T2 (triangular 30-60-90 s). The event occurs evenly over the whole day, so the work
    reaches Pat while asleep (23:00-07:00) with probability 8/24 = 1/3, whatever the
    short delay before it.
    """
    step = 0.05
    grid = np.arange(0, 800, step)

    def density(distribution):
        return distribution.pdf(grid) * step

    t1 = density(stats.triang(0.5, loc=10, scale=20))
    lag = density(stats.uniform(loc=0, scale=60))
    t2 = density(stats.triang(0.5, loc=30, scale=60))
    base = np.convolve(np.convolve(t1, lag), t2)
    miss = []
    for low, mode, high in ((10, 30, 50), (60, 300, 540)):
        latency = density(stats.triang((mode - low) / (high - low), loc=low, scale=high - low))
        total = np.convolve(base, latency)
        miss.append(total[int(round(150 / step)) :].sum() / total.sum())
    return 2 / 3 * miss[0] + 1 / 3 * miss[1]


def test_window_misses_per_chain():
    # T2 must finish within 150 s of the event: the simulated share of missed windows
    # agrees with the probability computed by numerical convolution (scipy.stats), within
    # 4 binomial standard errors.
    expected = window_miss_probability()
    # By hand, a bracket: asleep, the latency alone is typically 300 s, so nearly every
    # asleep chain misses (1/3 of them); awake, the finish ranges 80-230 s around a mean
    # of 20 + 30 + 30 + 60 = 140 s, so fewer than half miss.
    assert 1 / 3 < expected < 1 / 3 + 2 / 3 * 0.5
    study = read_study(CHAIN)
    summary = simulate(study, "p", days=600, seed=2).summary()
    (chain,) = summary["chains"]
    assert chain["name"] == "Event"
    assert chain["tasks"][0]["task"] == "T2"
    error = np.sqrt(expected * (1 - expected) / chain["happenings"])
    assert abs(chain["missed_share"] - expected) <= 4 * error


def test_work_counts_on_the_day_it_starts_even_across_midnight_and_chunks():
    # An event at 22:00 hands T1 to the pump; T2 (Pat's) follows 4 hours later, at 02:00
    # the next day. By hand, every day has exactly one T2, at 02:00: the first day's comes
    # from the day before it, and the first day of the second chunk's from the last day of
    # the first.
    study = read_study(
        study_file(
            tasks=[
                {"id": "T1", "title": "Log", "occurs": {"event": "e"}, "duration_s": 10},
                {"id": "T2", "title": "Review", "duration_s": 60},
            ],
            links=[{"from": "T1", "to": "T2", "kind": "precedes", "lag_s": 14400}],
            events=[{"id": "e", "name": "Evening", "times": ["22:00"]}],
            plans=[
                {
                    "id": "p",
                    "name": "Plan",
                    "assignments": {"T1": {"automation": "pump"}, "T2": {"human": "pat"}},
                }
            ],
        )
    )
    days = CHUNK_DAYS + 3
    run = simulate(study, "p", days=days, seed=1)
    assert run.figures["pat"]["interactions"].tolist() == [1.0] * days
    first = day_timeline(study, "p", seed=1, day=CHUNK_DAYS, days=days).to_json()
    segments = first["people"]["pat"]["segments"]
    # One occurrence of T2, its four stages one after the other (a minute in all).
    assert [s["task"] for s in segments] == ["T2"] * 4
    assert segments[-1]["end"] - segments[0]["start"] == pytest.approx(60)
    # It starts after the pump's 10 s, the 4-hour lag and Pat's latency when the work
    # changes hands: Pat is asleep at 02:00 (60-540 s).
    assert 2 * 3600 + 10 + 60 <= segments[0]["start"] <= 2 * 3600 + 10 + 540
