"""People asked in turn (methods document, #escalation).

The chance that a triangular latency exceeds the time allowed is checked against
``scipy.stats.triang.sf``; the rest is worked by hand from the rules the methods
document states: the first person asked keeps the task when they answer within
``escalate_after_s`` = E, otherwise the next is asked E later; the last keeps it
whatever; every call is an interruption of the person called, the calls after the first
are escalations reaching them, and each call that moves on is a handover with source
``escalation`` whose time budget counts the calls before it.

The simulation is checked against the same values within 4 standard errors, and the
daily count of escalations against the Poisson distribution that thinning gives (Ross
2014, Introduction to Probability Models, sec. 5.3.4), by scipy's chi-square test.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.escalation import triangular_exceedance
from allocation.core.simulation import simulate
from allocation.core.writing import study_to_json

from .studies import PAT, PUMP, SAM, leaf, study_data

#: Pat answers in [10, 20, 60] s, awake all day; Sam in exactly 30 s.
SAM_30 = {**SAM, "response_s": {"any": 30}}
AGENTS = [PAT, SAM_30, PUMP]
#: T: 10 a day over the whole day, exactly 60 s, within 600 s; started by the automation.
T = leaf("T", duration_s=60, window_s=600, occurs={"per_day": 10, "when": "any"})


def asked_in_turn(after=30, people=("pat", "sam"), agents=AGENTS, **extra):
    item = {"human": list(people), "escalate_after_s": after, "initiator": "automation", **extra}
    return study_data([T], {"T": item}, agents=agents)


@pytest.mark.parametrize(
    ("low", "mode", "high", "x"),
    [
        (10, 20, 60, 30),
        (10, 20, 60, 15),
        (60, 600, 3600, 300),
        (0, 0, 10, 4),
        (0, 0, 10, 0),
        (5, 9, 9, 7),
        (5, 9, 9, 9),
    ],
)
def test_the_triangular_exceedance_is_scipy_s(low, mode, high, x):
    shape = (mode - low) / (high - low)
    expected = stats.triang.sf(x, shape, loc=low, scale=high - low)
    assert triangular_exceedance(low, mode, high, x) == pytest.approx(expected)


def test_the_first_asked_keeps_what_they_answer_in_time():
    # Pat's latency exceeds 30 s with chance (60 - 30)^2 / ((60 - 10)(60 - 20)) = 0.45:
    # Pat keeps 0.55 of the 10 a day, Sam (the last) 0.45.
    # Pat: 5.5 x 60 s = 330 s; called 10 times a day, every call an interruption.
    # Sam: 4.5 x 60 s = 270 s; 4.5 calls, each an escalation and an interruption.
    people = analyse_plan(read_study(asked_in_turn()), "p").people
    pat, sam = people["pat"], people["sam"]
    assert pat.burden_s_per_day == pytest.approx(330)
    assert pat.interactions_per_day == pytest.approx(10)
    assert pat.interruptions_per_day == pytest.approx(10)
    assert pat.escalations_per_day == 0
    assert sam.burden_s_per_day == pytest.approx(270)
    assert sam.interruptions_per_day == pytest.approx(4.5)
    assert sam.escalations_per_day == pytest.approx(4.5)


def test_each_call_that_moves_on_is_a_handover_with_the_wait_in_its_budget():
    # From Pat to Sam, 4.5 a day; Sam's latency 30 s and the 60 s task against the
    # 600 s window less the 30 s Pat had: (30 + 60) / (600 - 30).
    result = analyse_plan(read_study(asked_in_turn()), "p")
    (handover,) = [h for h in result.handovers if h.site.source == "escalation"]
    assert (handover.site.from_agent, handover.site.to_agent) == ("pat", "sam")
    assert handover.site.per_day == pytest.approx(4.5)
    assert handover.time_ratio == pytest.approx(90 / 570)


def test_a_third_person_is_asked_when_the_second_does_not_answer():
    # Kim answers in exactly 10 s; Sam's 30 s exceeds 20 s always, so every call Pat
    # does not answer in 20 s goes on to Kim. Pat's chance over 20 s:
    # 1 - (20 - 10)^2 / (50 x 10) = 0.8: Pat keeps 2 a day, Kim 8; Sam is called 8
    # times a day and keeps none.
    kim = {"id": "kim", "name": "Kim", "kind": "human", "response_s": {"any": 10}}
    document = asked_in_turn(20, ("pat", "sam", "kim"), [PAT, SAM_30, kim, PUMP])
    people = analyse_plan(read_study(document), "p").people
    assert people["pat"].burden_s_per_day == pytest.approx(120)
    assert people["sam"].burden_s_per_day == 0
    assert people["sam"].interruptions_per_day == pytest.approx(8)
    assert people["sam"].escalations_per_day == pytest.approx(8)
    assert people["kim"].burden_s_per_day == pytest.approx(480)
    assert people["kim"].escalations_per_day == pytest.approx(8)


def test_a_person_off_duty_is_passed_over():
    # Pat on duty 08:00-20:00 (half the day): off duty the call goes straight on to Sam
    # (not an interruption of Pat). Of the 10 a day, Pat is on duty for 5 and keeps
    # 0.55 of them, 2.75; Sam keeps 7.25.
    pat = {**PAT, "on_duty": ["08:00", "20:00"]}
    document = asked_in_turn(agents=[pat, SAM_30, PUMP])
    people = analyse_plan(read_study(document), "p").people
    assert people["pat"].burden_s_per_day == pytest.approx(2.75 * 60)
    assert people["pat"].interruptions_per_day == pytest.approx(5)
    assert people["sam"].escalations_per_day == pytest.approx(7.25)


NIGHT = [
    {
        **PAT,
        "asleep": ["23:00", "07:00"],
        "response_s": {"awake": [10, 20, 60], "asleep": [60, 300, 900]},
    },
    {
        **SAM,
        "asleep": ["00:00", "06:00"],
        "response_s": {"awake": [20, 40, 90], "asleep": [30, 120, 600]},
    },
    PUMP,
]


@pytest.mark.parametrize(
    ("agents", "after"),
    [(AGENTS, 30), (NIGHT, 120), ([{**PAT, "on_duty": ["08:00", "20:00"]}, SAM_30, PUMP], 30)],
)
def test_the_simulation_draws_what_the_analysis_expects(agents, after):
    study = read_study(asked_in_turn(after, agents=agents))
    expected = analyse_plan(study, "p").people
    run = simulate(study, "p", days=800, seed=7)
    for person in ("pat", "sam"):
        for figure, value in (
            ("burden_s", expected[person].burden_s_per_day),
            ("interactions", expected[person].interactions_per_day),
            ("interruptions", expected[person].interruptions_per_day),
            ("night_interruptions", expected[person].night_interruptions_per_day),
            ("escalations", expected[person].escalations_per_day),
        ):
            values = run.figures[person][figure]
            error = values.std(ddof=1) / np.sqrt(values.size)
            assert abs(values.mean() - value) <= 4 * error + 1e-9, (person, figure)


def test_daily_escalations_are_poisson_as_thinning_says():
    # 10 a day, each going on to Sam with chance 0.45: Poisson with mean 4.5. Counts 0-8
    # and 9 or more against their Poisson chances; scipy's chi-square test should not
    # reject at the 0.1 % level.
    study = read_study(asked_in_turn())
    counts = simulate(study, "p", days=2000, seed=3).figures["sam"]["escalations"].astype(int)
    observed = np.bincount(np.minimum(counts, 9), minlength=10)
    chances = stats.poisson.pmf(np.arange(9), 4.5)
    expected = np.append(chances, 1 - chances.sum()) * counts.size
    assert stats.chisquare(observed, expected).pvalue > 0.001


@pytest.mark.parametrize(
    ("change", "path", "words"),
    [
        ({"escalate_after_s": None}, ".human", "needs escalate_after_s"),
        ({"human": "pat"}, ".escalate_after_s", "goes only with a human given as a list"),
        ({"human": ["pat"]}, ".human", "from 2 to 10 people"),
        ({"human": ["pat", "pat"]}, ".human[1]", "names pat a second time"),
        ({"human": ["pat", "pump"]}, ".human[1]", "pump is automation, not human"),
        ({"human": ["pat", "kim"]}, ".human[1]", "which the study does not have"),
        ({"escalate_after_s": 0}, ".escalate_after_s", "more than 0"),
        ({"escalate_after_s": 90000}, ".escalate_after_s", "at most 86400"),
    ],
)
def test_a_bad_escalation_is_refused_with_its_path(change, path, words):
    document = asked_in_turn()
    item = document["plans"][0]["assignments"]["T"]
    for key, value in change.items():
        if value is None:
            item.pop(key)
        else:
            item[key] = value
    problems = load_study(document).errors
    assert [p.path for p in problems] == ["$.plans[0].assignments.T" + path], problems
    assert words in problems[0].message


def test_people_asked_in_turn_are_written_back_as_read():
    study = read_study(asked_in_turn())
    written = json.loads(json.dumps(study_to_json(study)))["plans"][0]["assignments"]["T"]
    assert written["human"] == ["pat", "sam"]
    assert written["escalate_after_s"] == 30
