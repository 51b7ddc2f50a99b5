"""Monitoring styles and interruptions (methods document, #monitoring and #interruptions).

Every expected figure is worked by hand from the rules the methods document states:

- ``each``: a check of ``monitoring_s`` per occurrence when told of it, an interaction and
  an interruption of the monitor;
- ``periodic`` n a day: n looks of ``monitoring_s`` a day, on the person's own initiative,
  interactions that never interrupt;
- ``exception``: a check per flag of the automation (none without a stated reliability);
- ``continuous`` share s: s times the task's expected run, no interaction, no
  interruption;
- the default: ``each`` where the feedback is an alert, otherwise ``periodic`` once a day.

The simulated checks (Poisson looks over the awake day, continuous attention over the
drawn run) are compared with the hand-worked expectations within 4 standard errors, the
usual sampling-error band.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from allocation.core import load_study, read_study
from allocation.core.analysis import analyse_plan
from allocation.core.simulation import day_timeline, simulate
from allocation.core.writing import study_to_json

from .studies import PAT, PUMP, SAM, analyse, leaf, study_data

#: Pat asleep 23:00-07:00 (8 h), awake latency [10, 20, 60] s.
SLEEPING_PAT = {**PAT, "asleep": ["23:00", "07:00"], "response_s": {"awake": [10, 20, 60]}}
AGENTS = [SLEEPING_PAT, SAM, PUMP]

#: The pump does T twice a day (08:00 and 02:00, the second while Pat sleeps); Pat is
#: accountable, each check 42 s; T lasts [30, 60, 90] s, mean 60 s.
TWICE = leaf("T", duration_s=[30, 60, 90], occurs={"times": ["08:00", "02:00"]})


def watched(monitoring=None, **assignment):
    item = {"automation": "pump", "accountable": "pat", **assignment}
    if monitoring is not None:
        item["monitoring"] = monitoring
    return study_data([TWICE], {"T": item}, agents=AGENTS, assumptions={"monitoring_s": 42})


def pat_of(document):
    return analyse_plan(read_study(document), "p").people["pat"]


def test_each_check_costs_every_occurrence_and_interrupts_at_night_too():
    # 2 occurrences x 42 s = 84 s; 2 interactions, both interruptions (Pat is told of
    # each); the 02:00 one falls in Pat's asleep window: 1 night interruption.
    pat = pat_of(watched("each"))
    assert pat.burden_s_per_day == pytest.approx(84)
    assert pat.monitoring_s_per_day == pytest.approx(84)
    assert pat.interactions_per_day == pytest.approx(2)
    assert pat.interruptions_per_day == pytest.approx(2)
    assert pat.night_interruptions_per_day == pytest.approx(1)


def test_periodic_looks_cost_per_day_and_never_interrupt():
    # 3 looks a day x 42 s = 126 s, whatever the task's 2 occurrences; 3 interactions,
    # no interruption.
    pat = pat_of(watched({"style": "periodic", "per_day": 3}))
    assert pat.burden_s_per_day == pytest.approx(126)
    assert pat.interactions_per_day == pytest.approx(3)
    assert pat.interruptions_per_day == 0
    assert pat.night_interruptions_per_day == 0


def test_continuous_attention_is_a_share_of_the_run_without_interactions():
    # share 0.25 x mean run 60 s = 15 s per occurrence, 30 s a day; no interaction.
    pat = pat_of(watched({"style": "continuous", "share": 0.25}))
    assert pat.burden_s_per_day == pytest.approx(30)
    assert pat.monitoring_s_per_day == pytest.approx(30)
    assert pat.interactions_per_day == 0
    assert pat.interruptions_per_day == 0


def test_exception_monitoring_costs_nothing_without_flags():
    # Flags are the automation's false alerts and detected failures; no assignment
    # states a reliability, so there are none: nothing a day.
    pat = pat_of(watched("exception"))
    assert (pat.burden_s_per_day, pat.interactions_per_day) == (0, 0)


@pytest.mark.parametrize(
    ("feedback", "burden", "night"),
    [
        # No feedback or a display: periodic once a day, 42 s, no interruption.
        (None, 42, 0),
        ("display", 42, 0),
        # An alert tells Pat of each occurrence: as `each` above.
        ("alert", 84, 1),
        ("alert_confirm", 84, 1),
    ],
)
def test_the_default_style_follows_the_feedback(feedback, burden, night):
    extra = {"feedback": feedback} if feedback else {}
    pat = pat_of(watched(**extra))
    assert pat.burden_s_per_day == pytest.approx(burden)
    assert pat.night_interruptions_per_day == pytest.approx(night)


def test_overnight_automatic_work_no_longer_wakes_the_accountable_person():
    """The trial's symptom: automatic fills and drains overnight (every hour from 00:30 to
    06:30, 7 a night), the patient accountable, feedback on the display. Checked at
    every occurrence (revision 1), that was 7 night interruptions; kept in watch once a
    day (the default), none; only an alert-driven check interrupts, at the moment of
    the alert, 7 a night."""
    hours = [f"{h:02d}:30" for h in range(7)]
    task = leaf("F", duration_s=[30, 60, 90], occurs={"times": hours})
    for monitoring, night in ((None, 0), ("each", 7)):
        item = {"automation": "pump", "accountable": "pat", "feedback": "display"}
        if monitoring:
            item["monitoring"] = monitoring
        document = study_data([task], {"F": item}, agents=AGENTS)
        assert pat_of(document).night_interruptions_per_day == pytest.approx(night)


def test_a_person_doing_work_the_automation_starts_is_interrupted_not_the_one_who_starts():
    # Sam does T (started by the automation: interrupted twice a day); Pat is
    # accountable and looks once a day (periodic default): not interrupted.
    document = study_data(
        [TWICE],
        {"T": {"human": "sam", "accountable": "pat", "initiator": "automation"}},
        agents=AGENTS,
        assumptions={"monitoring_s": 42},
    )
    people = analyse_plan(read_study(document), "p").people
    assert people["sam"].interruptions_per_day == pytest.approx(2)
    assert people["pat"].interruptions_per_day == 0
    assert people["pat"].interactions_per_day == pytest.approx(1)


def test_looks_go_with_a_task_that_occurs():
    # A task with no way of occurring has nothing to look at: no looks.
    task = leaf("Q")
    result = analyse(
        [task],
        {"Q": {"automation": "pump", "accountable": "pat"}},
        assumptions={"monitoring_s": 42},
    )
    assert result.people["pat"].burden_s_per_day == 0


@pytest.mark.parametrize(
    "monitoring",
    [
        "each",
        {"style": "periodic", "per_day": 3},
        {"style": "continuous", "share": 0.25},
    ],
)
def test_the_simulation_draws_what_the_analysis_expects(monitoring):
    document = watched(monitoring)
    study = read_study(document)
    pat = analyse_plan(study, "p").people["pat"]
    run = simulate(study, "p", days=400, seed=5)
    for figure, expected in (
        ("burden_s", pat.burden_s_per_day),
        ("monitoring_s", pat.monitoring_s_per_day),
        ("interactions", pat.interactions_per_day),
        ("interruptions", pat.interruptions_per_day),
        ("night_interruptions", pat.night_interruptions_per_day),
    ):
        values = run.figures["pat"][figure]
        error = values.std(ddof=1) / np.sqrt(values.size)
        assert abs(values.mean() - expected) <= 4 * error + 1e-9, (figure, values.mean())


def test_periodic_looks_fall_in_the_awake_day():
    # Looks are the person's own initiative: every one drawn starts between 07:00 and
    # 23:00, Pat's awake day (20 looks a day, so some 20 on the day shown).
    study = read_study(watched({"style": "periodic", "per_day": 20}))
    day = day_timeline(study, "p", seed=3, day=1, days=3).to_json()
    looks = [s["start"] for s in day["people"]["pat"]["segments"] if s["kind"] == "monitoring"]
    assert len(looks) > 5
    assert all(7 * 3600 <= start < 23 * 3600 for start in looks), looks


@pytest.mark.parametrize(
    ("monitoring", "path", "words"),
    [
        ("weekly", "", "not a monitoring style"),
        ({"style": "periodic"}, "", "needs per_day"),
        ({"style": "periodic", "per_day": 2000}, ".per_day", "at most 1440"),
        ({"style": "periodic", "per_day": 0}, ".per_day", "more than 0"),
        ({"style": "continuous", "share": 1.5}, ".share", "at most 1"),
        ({"style": "each", "share": 0.5}, ".share", "goes only with the style continuous"),
        ({"style": "glance"}, ".style", "must be one of"),
    ],
)
def test_a_bad_monitoring_is_refused_with_its_path(monitoring, path, words):
    problems = load_study(watched(monitoring)).errors
    where = "$.plans[0].assignments.T.monitoring" + path
    assert [p.path for p in problems] == [where], problems
    assert words in problems[0].message


@pytest.mark.parametrize(
    "monitoring",
    [
        "each",
        "exception",
        {"style": "periodic", "per_day": 2},
        {"style": "continuous", "share": 0.5},
    ],
)
def test_monitoring_is_written_back_as_read(monitoring):
    study = read_study(watched(monitoring))
    written = json.loads(json.dumps(study_to_json(study)))
    assert written["plans"][0]["assignments"]["T"]["monitoring"] == monitoring
