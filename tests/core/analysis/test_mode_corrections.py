"""Corrections to the mode-map check (allocation.core.analysis.modecheck; methods
document, #mode-check and #revision-2-modes), each on a small map worked by hand:

- an action accepted without effect (a transition from a mode to itself, or an action
  whose transitions all lead to the mode it is pressed in) is not refused;
- ``"from": "*"`` applies in every mode, overridden by a mode's own transition with the
  same trigger; read, written back, and honoured by the mode shares (checked against
  scipy) and the simulation's rates;
- modes with the same indication are believed together, so they can disagree with the
  device: an error state named "A or B";
- a mode where a task at or above the critical severity is held by nobody is
  ``unheld_task``; a mode where such a task is not done lacks it for ``no_way_back``;
- the critical severity comes from the study's risk policy (3 and 4 give different
  findings).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy.integrate import quad_vec
from scipy.linalg import expm

from allocation.core import dump_study_text, load_study, read_study
from allocation.core.analysis.modecheck import verify_mode_map, walkthrough
from allocation.core.analysis.modes import mode_occupancy
from allocation.core.assumptions import resolve_assumptions
from allocation.core.model import Agent, Assignment, Mode, ModeMap, Plan, Study, Task, Transition
from allocation.examples import EXAMPLES_DIR

ASSUMPTIONS = resolve_assumptions({}, "sv10")
PAT = Agent("pat", "Pat", "human")
PUMP = Agent("pump", "Pump", "automation")
TASKS = (
    Task("T1", "Dose insulin", severity=5),
    Task("T2", "Log the dose", severity=2),
    Task("T3", "Check the site", severity=3),
)
BY_PAT = Assignment(human="pat")
BY_PUMP = Assignment(automation="pump")
NOT_DONE = Assignment(applies=False)


def study_with(modes: ModeMap, policy=None) -> tuple[Study, Plan]:
    """T1 and T3 held by the pump, T2 by Pat, unless a mode overrides them."""
    plan = Plan("p", "Plan", {"T1": BY_PUMP, "T2": BY_PAT, "T3": BY_PUMP}, modes)
    study = Study(
        "s", "Study", "sv10", agents=(PAT, PUMP), tasks=TASKS, plans=(plan,), risk_policy=policy
    )
    return study, plan


def check(modes: ModeMap, policy=None):
    study, plan = study_with(modes, policy)
    return verify_mode_map(study, plan, ASSUMPTIONS)


def keys(findings, kind=None):
    return [
        (f.kind, f.modes, f.tasks, f.events) for f in findings if kind is None or f.kind == kind
    ]


# -- actions accepted without effect -----------------------------------------------------

ENGAGED = Mode("E", "Engaged", "lamp on")
STANDBY = Mode("S", "Standby", "lamp off", {"T1": BY_PAT})


def engage_map(*extra: Transition) -> ModeMap:
    """Standby -> Engaged by the person ('engage'), Engaged -> Standby by the person
    ('release'); the device also engages by itself, shown only on the display."""
    return ModeMap(
        "S",
        (STANDBY, ENGAGED),
        (
            Transition("S", "E", "engage", "human", "display"),
            Transition("E", "S", "release", "human", "display"),
            Transition("S", "E", "auto engage", "automation", "display"),
            *extra,
        ),
    )


def test_pressing_engage_while_engaged_is_not_refused():
    # By hand: (S,{S}) -auto engage, missed-> (E,{S}): an error state (T1 is Pat's in
    # Standby, the pump's in Engaged). Pat, believing Standby, presses 'engage'. Every
    # 'engage' leads to Engaged, so Engaged accepts it without effect: not refused, and
    # Pat's belief becomes the image {E}: (E,{E}). Before, this was a refused action of
    # severity 5.
    findings = check(engage_map())
    assert keys(findings, "refused_action") == []
    assert keys(findings, "error_state") == [
        ("error_state", ("E", "S"), ("T1",), ("auto engage",))
    ]
    # An explicit transition from Engaged to itself does the same.
    explicit = check(engage_map(Transition("E", "E", "engage", "human", "display")))
    assert keys(explicit, "refused_action") == []


def test_an_action_leading_to_two_modes_is_still_refused_where_not_listed():
    # 'engage' also leads from a third mode Off to Standby: its transitions no longer all
    # lead to Engaged, so Engaged does not accept it, and in (E,{S}) it is refused.
    off = Mode("O", "Off", "dark")
    modes = ModeMap(
        "S",
        (STANDBY, ENGAGED, off),
        (*engage_map().transitions, Transition("O", "S", "engage", "human", "display")),
    )
    assert keys(check(modes), "refused_action") == [
        ("refused_action", ("E", "S"), ("T1",), ("auto engage", "engage"))
    ]


# -- "from": "*" ------------------------------------------------------------------------

A, B, C = Mode("A", "Auto", "a"), Mode("B", "Boost", "b"), Mode("C", "Check", "c")


def star_map() -> ModeMap:
    return ModeMap(
        "A",
        (A, B, C),
        (
            Transition("A", "B", "boost", "human", "display", per_day=1),
            Transition("*", "C", "fault", "automation", "alert", per_day=2),
            Transition("*", "A", "stop", "human", "display"),
            Transition("B", "C", "stop", "human", "display"),
            Transition("C", "A", "clear", "automation", "alert", per_day=3),
        ),
    )


def test_star_is_every_mode_and_a_mode_of_its_own_overrides_it():
    # By hand: 'fault' from A, B and C (C to itself); 'stop' from A (to itself) and C,
    # but from B the map's own 'stop' (to C) applies.
    expanded = [(t.source, t.target, t.trigger) for t in star_map().expanded]
    assert expanded == [
        ("A", "B", "boost"),
        ("A", "C", "fault"),
        ("B", "C", "fault"),
        ("C", "C", "fault"),
        ("A", "A", "stop"),
        ("C", "A", "stop"),
        ("B", "C", "stop"),
        ("C", "A", "clear"),
    ]


def test_mode_shares_honour_star_against_scipy():
    # Generator by hand from the spelt-out rates: A->B 1, A->C 2, B->C 2, C->A 3 (C->C
    # has no effect). Share of the day = (1/T) integral of exp(Q t) from 0 to T, here
    # integrated numerically with scipy (quad_vec of scipy.linalg.expm).
    q = np.array([[-3.0, 1.0, 2.0], [0.0, -2.0, 2.0], [3.0, 0.0, -3.0]])
    integral, _ = quad_vec(lambda t: expm(q * t)[0], 0.0, 1.0)
    shares = mode_occupancy(star_map())
    assert [shares[m] for m in "ABC"] == pytest.approx(list(integral), abs=1e-9)


def test_the_simulation_rates_honour_star():
    from allocation.core.analysis import analyse_plan, prepare
    from allocation.core.simulation.tables import build_sim_plan

    study, _plan = study_with(star_map())
    graph = prepare(study)
    tables = build_sim_plan(study, analyse_plan(study, "p", graph=graph), graph)
    # Rates per day while in the row's mode, by hand as above.
    assert tables.rates.tolist() == [[0, 1, 2], [0, 0, 2], [3, 0, 0]]


def test_star_is_read_written_back_and_refused_where_it_cannot_be():
    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    index = next(i for i, plan in enumerate(document["plans"]) if plan.get("modes"))
    modes = document["plans"][index]["modes"]
    modes["transitions"].append(
        {"from": "*", "to": "frost", "trigger": "boiler fault", "by": "automation", "cue": "alert"}
    )
    study = read_study(document)
    assert study.plans[index].modes.transitions[-1].source == "*"
    assert json.loads(dump_study_text(study))["plans"][index]["modes"]["transitions"][-1] == {
        "from": "*",
        "to": "frost",
        "trigger": "boiler fault",
        "by": "automation",
        "cue": "alert",
    }
    path = f"$.plans[{index}].modes.transitions[{len(modes['transitions']) - 1}]"
    for key, bad, message in (
        ("from", "**", 'neither a mode id nor "*"'),
        ("from", 7, "must be an id"),
        ("to", "*", '"*" (every mode) is for "from" only'),
    ):
        broken = json.loads(json.dumps(document))
        broken["plans"][index]["modes"]["transitions"][-1][key] = bad
        errors = load_study(broken).errors
        assert [p.path for p in errors] == [f"{path}.{key}"], (key, bad)
        assert message in errors[0].message


# -- belief sets -------------------------------------------------------------------------

AUTO = Mode("A", "Automatic", "green")
EXERCISE = Mode("X", "Exercise", "green", {"T1": BY_PAT})
MANUAL = Mode("M", "Manual", "grey", {"T1": BY_PAT})


def look_alike_map() -> ModeMap:
    return ModeMap(
        "A",
        (AUTO, EXERCISE, MANUAL),
        (
            Transition("A", "M", "signal lost", "automation", "alert"),
            Transition("M", "A", "signal back", "automation", "alert"),
            Transition("A", "X", "exercise", "human", "display"),
            Transition("X", "A", "end exercise", "human", "display"),
        ),
    )


def test_look_alike_modes_are_believed_together_and_disagree():
    # By hand: (A,{A}) -signal lost (alert)-> (M,{M}) -signal back (alert)-> (A,{A,X}):
    # Automatic and Exercise both show green, so Pat believes "Automatic or Exercise";
    # Exercise gives T1 to Pat, Automatic to the pump: an error state, though the device
    # is in a believed mode. Before, the belief was Automatic alone and no error state
    # existed on this map (every change is alerted).
    findings = check(look_alike_map())
    errors = [f for f in findings if f.kind == "error_state"]
    assert keys(errors) == [
        ("error_state", ("A", "A", "X"), ("T1",), ("signal lost", "signal back"))
    ]
    assert "believe the device is in Automatic or Exercise while it is in Automatic" in (
        errors[0].message
    )
    assert "held by Pump in Automatic and by Pump or Pat in Automatic or Exercise" in (
        errors[0].message
    )
    # From (A,{A,X}) the belief offers 'exercise' and 'end exercise'; Automatic accepts
    # both ('end exercise' without effect: it only ever leads to Automatic): nothing
    # refused.
    assert keys(findings, "refused_action") == []
    last = errors[0].witness[-1]
    assert (last.actual, last.believed, last.believed_set) == ("A", "X", ("A", "X"))


def test_walkthrough_of_a_belief_set_shows_both_holders():
    study, plan = study_with(look_alike_map())
    error = next(f for f in verify_mode_map(study, plan, ASSUMPTIONS) if f.kind == "error_state")
    moments = walkthrough(study, plan, ASSUMPTIONS, error)
    assert [(m.actual, m.believed_set) for m in moments] == [
        ("A", ("A",)),
        ("M", ("M",)),
        ("A", ("A", "X")),
    ]
    # T1: pump in Automatic, Pat in Manual and Exercise (by hand).
    assert [m.holders for m in moments] == [
        (("T1", "pump", ("pump",)),),
        (("T1", "pat", ("pat",)),),
        (("T1", "pump", ("pump", "pat")),),
    ]
    assert [m.confused for m in moments] == [False, False, True]


# -- unheld tasks, no way back, critical severity -------------------------------------

LOCKED = Mode("L", "Locked", "red", {"T1": NOT_DONE, "T3": NOT_DONE})


def locked_map(way_out: bool) -> ModeMap:
    """Automatic, Manual (Pat holds T1 and T3) and Locked (T1 and T3 not done), entered
    on an alerted fault; with ``way_out``, Pat can unlock it to Manual."""
    manual = Mode("M", "Manual", "grey", {"T1": BY_PAT, "T3": BY_PAT})
    transitions = [
        Transition("A", "M", "take over", "human", "display"),
        Transition("M", "A", "hand back", "human", "display"),
        Transition("A", "L", "fault", "automation", "alert"),
    ]
    if way_out:
        transitions.append(Transition("L", "M", "unlock", "human", "display"))
    return ModeMap("A", (AUTO, manual, LOCKED), tuple(transitions))


def test_unheld_task_names_the_mode_and_its_critical_tasks():
    # By hand: in Locked T1 (severity 5) and T3 (severity 3) are not done; with the
    # critical severity 4 (the default) only T1 counts. Witness: 'fault'.
    findings = check(locked_map(way_out=True))
    assert keys(findings, "unheld_task") == [("unheld_task", ("L",), ("T1",), ("fault",))]
    unheld = next(f for f in findings if f.kind == "unheld_task")
    assert unheld.severity == 5
    assert "nobody holds T1 (Dose insulin)" in unheld.message
    study, plan = study_with(locked_map(way_out=True))
    moments = walkthrough(study, plan, ASSUMPTIONS, unheld)
    assert [(m.actual, m.holders) for m in moments] == [
        ("A", (("T1", "pump", ("pump",)),)),
        ("L", (("T1", None, (None,)),)),
    ]


def test_no_way_back_from_a_trap_where_the_critical_task_is_not_done():
    # By hand: Locked has no way out, and T1 is not done there; Manual gives Pat T1, so
    # T1 counts, and Locked lacks it. Before, a mode where the task is not done did not
    # lack it, and this trap gave no finding.
    assert keys(check(locked_map(way_out=False)), "no_way_back") == [
        ("no_way_back", ("L",), ("T1",), ("fault",))
    ]
    assert keys(check(locked_map(way_out=True)), "no_way_back") == []


def test_critical_severity_three_adds_the_serious_task():
    # With the critical severity 3 T3 (severity 3) is critical too: unheld in Locked
    # with T1, and the trap lacks both. With 4, only T1 (the tests above).
    policy = {"critical_severity": 3}
    assert keys(check(locked_map(way_out=True), policy), "unheld_task") == [
        ("unheld_task", ("L",), ("T1", "T3"), ("fault",))
    ]
    assert keys(check(locked_map(way_out=False), policy), "no_way_back") == [
        ("no_way_back", ("L",), ("T1", "T3"), ("fault",))
    ]
    # With 5 only T1 again; with 4 written out, the same as the default.
    assert keys(check(locked_map(way_out=True), {"critical_severity": 4})) == keys(
        check(locked_map(way_out=True))
    )


def test_a_task_not_done_in_every_mode_is_the_plans_decision():
    # T1 not done in every mode (the plan says so and no mode overrides it): no unheld
    # task (the plan's decision, not the map's).
    modes = ModeMap("A", (AUTO, Mode("B", "Other", "blue")), ())
    plan = Plan("p", "Plan", {"T1": NOT_DONE, "T2": BY_PAT, "T3": BY_PUMP}, modes)
    study = Study("s", "Study", "sv10", agents=(PAT, PUMP), tasks=TASKS, plans=(plan,))
    assert keys(verify_mode_map(study, plan, ASSUMPTIONS), "unheld_task") == []


def test_critical_severity_is_read_and_written_only_when_set():
    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    text = (EXAMPLES_DIR / "home-heating.json").read_text("utf-8")
    assert dump_study_text(read_study(document)) == text  # round trip byte-identical
    document["study"]["risk_policy"] = {"critical_severity": 3}
    written = json.loads(dump_study_text(read_study(document)))
    assert written["study"]["risk_policy"] == {"critical_severity": 3}
    for bad, message in ((0, "from 1 to 5"), (6, "from 1 to 5"), ("4", "whole number")):
        document["study"]["risk_policy"] = {"critical_severity": bad}
        errors = load_study(document).errors
        assert [p.path for p in errors] == ["$.study.risk_policy.critical_severity"]
        assert message in errors[0].message
