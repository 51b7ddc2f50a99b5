"""Automation that fails (methods document, #reliability).

Every expected figure is worked by hand from the rules the methods document states:
each occurrence fails with chance p = fails_per_1000 / 1000; a failed occurrence is done
whole by the fallback person at the task's own duration, as an interruption; false
alerts are f checks a day of ``monitoring_s`` for the accountable person, each an
interruption; under exception monitoring a detected failure is a check for an
accountable person who is not the fallback.

The simulation is checked against the same values within 4 standard errors, and its
daily failure counts against the Poisson distribution that thinning a Poisson process
gives (Ross 2014, Introduction to Probability Models, sec. 5.3.4: occurrences at rate
lambda, each kept with chance p, are a Poisson process at rate lambda p), by a
chi-square goodness-of-fit test (scipy.stats.chisquare).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.simulation import simulate
from allocation.core.writing import study_to_json

from .studies import PAT, PUMP, SAM, leaf, study_data

#: Pat asleep 23:00-07:00 (8 h of 24), answering in 30 s awake and asleep; Sam likewise.
PAT_ASLEEP = {**PAT, "asleep": ["23:00", "07:00"], "response_s": {"any": 30}}
SAM_30 = {**SAM, "response_s": {"any": 30}}
AGENTS = [PAT_ASLEEP, SAM_30, PUMP]

#: T happens 10 times a day (a Poisson rate over the whole day) and lasts exactly 60 s;
#: it must be done within 600 s; severity 4.
T = leaf(
    "T",
    duration_s=60,
    window_s=600,
    severity=4,
    occurs={"per_day": 10, "when": "any"},
)


def pump_study(reliability=None, plans=None, **assignment):
    item = {"automation": "pump", "accountable": "pat", **assignment}
    if reliability is not None:
        item["reliability"] = reliability
    return study_data(
        [T], {"T": item}, agents=AGENTS, plans=plans, assumptions={"monitoring_s": 10}
    )


FAILS = {"fails_per_1000": 100, "detected_by": "alert", "false_alerts_per_day": 2}


def test_failures_fall_back_to_the_accountable_person():
    # p = 0.1 of 10 a day: 1 failure a day, each the whole 60 s task for Pat: 60 s.
    # Pat also looks once a day (periodic, the default without an alert): 10 s, and
    # answers 2 false alerts of 10 s: 20 s. 90 s a day in all.
    # Interactions: 1 failure + 1 look + 2 false alerts = 4; interruptions: the failure
    # and the false alerts, 3. At night: the false alerts come at any time of the day,
    # 2 x 8/24; the failures follow T's occurrences, spread over the whole day: 1 x 8/24.
    pat = analyse_plan(read_study(pump_study(FAILS)), "p").people["pat"]
    assert pat.failures_per_day == pytest.approx(1.0)
    assert pat.burden_s_per_day == pytest.approx(90)
    assert pat.monitoring_s_per_day == pytest.approx(30)
    assert pat.interactions_per_day == pytest.approx(4)
    assert pat.interruptions_per_day == pytest.approx(3)
    assert pat.night_interruptions_per_day == pytest.approx(3 * 8 / 24, rel=0.02)


def test_a_failure_is_a_handover_with_its_own_budget_cue_and_band():
    # From the pump to Pat, 1 a day, cued by the alert. Its time budget: Pat's latency
    # 30 s plus the whole task 60 s against the 600 s window: (30 + 60) / 600 = 0.15.
    result = analyse_plan(read_study(pump_study(FAILS)), "p")
    failures = [h for h in result.handovers if h.site.source == "failure"]
    assert len(failures) == 1
    handover = failures[0]
    assert (handover.site.from_agent, handover.site.to_agent) == ("pump", "pat")
    assert handover.site.per_day == pytest.approx(1.0)
    assert handover.site.cue == "alert"
    assert handover.time_ratio == pytest.approx(0.15)
    assert handover.frequency_per_year == pytest.approx(365 * handover.likelihood)
    assert handover.to_json()["source"] == "failure"


def test_the_fallback_named_takes_it_over_and_the_accountable_checks_detected_failures():
    # Sam is the fallback; Pat stays accountable and watches by exception: she checks
    # each detected failure (1 a day) and each false alert (2 a day): 30 s, 3
    # interruptions. Sam does 1 failure a day, 60 s, 1 interruption.
    reliability = {**FAILS, "fallback": "sam"}
    people = analyse_plan(read_study(pump_study(reliability, monitoring="exception")), "p").people
    assert people["sam"].failures_per_day == pytest.approx(1.0)
    assert people["sam"].burden_s_per_day == pytest.approx(60)
    assert people["sam"].interruptions_per_day == pytest.approx(1)
    assert people["pat"].failures_per_day == 0
    assert people["pat"].burden_s_per_day == pytest.approx(30)
    assert people["pat"].interruptions_per_day == pytest.approx(3)


def test_an_undetected_failure_is_no_flag_and_a_critical_one_is_a_finding():
    # Nothing tells anyone: Pat (exception) checks only the 2 false alerts, 20 s; Sam
    # still takes the failures over (the index weighs the missing cue). T's severity 4
    # is the critical severity (default 4): a silent_failure finding.
    reliability = {**FAILS, "detected_by": "none", "fallback": "sam"}
    result = analyse_plan(read_study(pump_study(reliability, monitoring="exception")), "p")
    assert result.people["pat"].burden_s_per_day == pytest.approx(20)
    assert result.people["sam"].failures_per_day == pytest.approx(1.0)
    silent = [f for f in result.findings if f.kind == "silent_failure"]
    assert [f.tasks for f in silent] == [("T",)]
    assert silent[0].severity == 4
    handover = next(h for h in result.handovers if h.site.source == "failure")
    assert handover.factors["cue"] == pytest.approx(result.assumptions["cue_weakness"]["none"])


def test_a_failure_below_the_critical_severity_is_no_finding():
    study = pump_study({**FAILS, "detected_by": "none"})
    study["tasks"][0]["severity"] = 3
    result = analyse_plan(read_study(study), "p")
    assert not [f for f in result.findings if f.kind == "silent_failure"]


def test_plans_differ_in_their_reliability():
    # The same device: one plan fails 5 in 1,000, the other never (no reliability).
    plans = [
        {
            "id": "fails",
            "name": "Fails",
            "assignments": {
                "T": {
                    "automation": "pump",
                    "accountable": "pat",
                    "reliability": {"fails_per_1000": 5, "detected_by": "display"},
                }
            },
        },
        {"id": "never", "name": "Never", "assignments": {"T": {"automation": "pump"}}},
    ]
    study = read_study(pump_study(plans=plans))
    # 10 a day x 5 / 1,000 = 0.05 a day.
    assert analyse_plan(study, "fails").people["pat"].failures_per_day == pytest.approx(0.05)
    assert analyse_plan(study, "never").people["pat"].failures_per_day == 0
    assert analyse_plan(study, "fails").to_json()["tasks"]["T"]["failures_per_day"] == (
        pytest.approx(0.05)
    )


def test_a_shared_task_that_fails_is_done_whole_by_its_person():
    # Pat and the pump share T at level 10 on every stage (the pump does all four
    # stages, so Pat's active time is 0; supervision at level 10 is the assumption's
    # value, set to 0 here). With p = 0.5 half the occurrences are Pat's whole 60 s:
    # 10 x 0.5 x 60 = 300 s a day. The pump principally holds T and Pat is accountable:
    # she also looks once a day (periodic, the default without an alert), 10 s: 310 s.
    document = pump_study({"fails_per_1000": 500, "detected_by": "alert"}, human="pat", levels=10)
    document["study"]["assumptions"]["supervision_s"] = {str(level): 0 for level in range(1, 11)}
    pat = analyse_plan(read_study(document), "p").people["pat"]
    assert pat.burden_s_per_day == pytest.approx(310)
    assert pat.failures_per_day == pytest.approx(5)


def test_the_simulation_draws_the_failures_the_analysis_expects():
    study = read_study(pump_study({**FAILS, "fallback": "sam"}, monitoring="exception"))
    analysis = analyse_plan(study, "p")
    run = simulate(study, "p", days=800, seed=11)
    for person in ("pat", "sam"):
        expected = analysis.people[person]
        for figure, value in (
            ("failures", expected.failures_per_day),
            ("burden_s", expected.burden_s_per_day),
            ("interactions", expected.interactions_per_day),
            ("interruptions", expected.interruptions_per_day),
            ("night_interruptions", expected.night_interruptions_per_day),
        ):
            values = run.figures[person][figure]
            error = values.std(ddof=1) / np.sqrt(values.size)
            assert abs(values.mean() - value) <= 4 * error + 1e-9, (person, figure)


def test_daily_failures_are_poisson_as_thinning_says():
    # 10 a day thinned by p = 0.1: Poisson with mean 1 (Ross 2014, sec. 5.3.4). Counts
    # 0, 1, 2, 3 and 4 or more against their Poisson probabilities; the chi-square test
    # of scipy should not reject at the 0.1 % level.
    study = read_study(pump_study({**FAILS, "fallback": "sam"}))
    counts = simulate(study, "p", days=2000, seed=3).figures["sam"]["failures"].astype(int)
    observed = np.bincount(np.minimum(counts, 4), minlength=5)
    chances = stats.poisson.pmf(np.arange(4), 1.0)
    expected = np.append(chances, 1 - chances.sum()) * counts.size
    assert stats.chisquare(observed, expected).pvalue > 0.001


@pytest.mark.parametrize(
    ("reliability", "assignment", "path", "words"),
    [
        (FAILS, {"automation": None, "human": "pat"}, "", "goes only with an assignment"),
        ({"fails_per_1000": 5}, {}, "", "needs detected_by"),
        ({"fails_per_1000": 1001, "detected_by": "alert"}, {}, ".fails_per_1000", "at most 1000"),
        ({"fails_per_1000": -1, "detected_by": "alert"}, {}, ".fails_per_1000", "at least 0"),
        ({"fails_per_1000": 5, "detected_by": "beep"}, {}, ".detected_by", "must be one of"),
        ({**FAILS, "fallback": "pump"}, {}, ".fallback", "a failure falls back to a person"),
        ({**FAILS, "fallback": "kim"}, {}, ".fallback", "which the study does not have"),
        (FAILS, {"accountable": None}, "", "names none"),
        ({**FAILS, "false_alerts_per_day": 5000}, {}, ".false_alerts_per_day", "at most 1440"),
        ({"detected_by": "alert"}, {}, ".fails_per_1000", "is missing"),
    ],
)
def test_a_bad_reliability_is_refused_with_its_path(reliability, assignment, path, words):
    document = pump_study(reliability)
    item = document["plans"][0]["assignments"]["T"]
    for key, value in assignment.items():
        if value is None:
            item.pop(key)
        else:
            item[key] = value
    problems = load_study(document).errors
    where = "$.plans[0].assignments.T.reliability" + path
    assert [p.path for p in problems] == [where], problems
    assert words in problems[0].message


def test_a_reliability_that_never_fails_needs_no_cue():
    # 0 in 1,000 with false alerts only: nothing to detect, nobody to fall back to.
    document = pump_study({"fails_per_1000": 0, "false_alerts_per_day": 1})
    assert load_study(document).errors == []


@pytest.mark.parametrize(
    "reliability",
    [
        FAILS,
        {"fails_per_1000": 0.5, "detected_by": "none", "fallback": "sam"},
        {"fails_per_1000": 0},
    ],
)
def test_reliability_is_written_back_as_read(reliability):
    study = read_study(pump_study(reliability))
    written = json.loads(json.dumps(study_to_json(study)))
    assert written["plans"][0]["assignments"]["T"]["reliability"] == reliability
