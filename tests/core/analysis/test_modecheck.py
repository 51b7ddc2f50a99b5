"""Mode-map verification (allocation.core.analysis.modecheck; methods document, #mode-check).

The expected findings and witnesses are worked by hand from the composition rules of
Degani & Heymann (2002) as the module states them: a state is (actual, believed); the
person's own actions move the belief to the target predicted from the believed mode;
alerts are always noticed, changes with no cue never, display changes either way. The
reachable composed states are also checked against a brute-force enumeration of event
sequences written here independently of the breadth-first search.
"""

from __future__ import annotations

import json
import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core import read_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.compare import compare_plans
from allocation.core.analysis.findings import WitnessStep
from allocation.core.analysis.modecheck import (
    MODE_FINDING_KINDS,
    explore,
    verify_mode_map,
    walkthrough,
)
from allocation.core.assumptions import resolve_assumptions
from allocation.core.model import Agent, Assignment, Mode, ModeMap, Plan, Study, Task, Transition
from allocation.examples import EXAMPLES_DIR

ASSUMPTIONS = resolve_assumptions({}, "sv10")
PAT = Agent("pat", "Pat", "human")
PUMP = Agent("pump", "Pump", "automation")
TASKS = (
    Task("T1", "Dose insulin", duration_s=None, severity=5),
    Task("T2", "Log the dose", severity=2),
)
BY_PERSON = {"T1": Assignment(human="pat")}


def mode(mode_id: str, name: str, indication: str | None, overrides=None) -> Mode:
    return Mode(mode_id, name, indication, overrides)


def study_with(modes: ModeMap, tasks=TASKS) -> tuple[Study, Plan]:
    """T1 held by the pump and T2 by Pat, unless a mode overrides them."""
    plan = Plan(
        "p",
        "Plan",
        {"T1": Assignment(automation="pump"), "T2": Assignment(human="pat")},
        modes,
    )
    return Study("s", "Study", "sv10", agents=(PAT, PUMP), tasks=tasks, plans=(plan,)), plan


AUTO = mode("A", "Automatic", "green")
MANUAL = mode("M", "Manual", "grey", BY_PERSON)
STANDBY = mode("S", "Standby", "green")


def base(cue: str = "display", extra_modes=(), extra_transitions=()) -> ModeMap:
    """Automatic -> Manual by the machine ('signal lost', with ``cue``); back, and to and
    from Standby, by the person."""
    return ModeMap(
        "A",
        (AUTO, MANUAL, STANDBY, *extra_modes),
        (
            Transition("A", "M", "signal lost", "automation", cue),
            Transition("M", "A", "restart", "human", "display"),
            Transition("A", "S", "pause", "human", "display"),
            Transition("S", "A", "resume", "human", "display"),
            *extra_transitions,
        ),
    )


def check(modes: ModeMap):
    study, plan = study_with(modes)
    return verify_mode_map(study, plan, ASSUMPTIONS)


def keys(findings):
    return [(f.kind, f.modes, f.tasks, f.events, f.severity) for f in findings]


def test_missed_display_gives_error_state_and_refused_action():
    # By hand: (A,A) -signal lost-> (M,M) noticed or (M,A) missed; (A,A) -pause-> (S,S);
    # (M,M) -restart-> (A,A); (S,S) -resume-> (A,A). In (M,A) Pat believes Automatic
    # (pump holds T1) while Manual has Pat hold T1: an error state; the restart action
    # is not in Pat's model of Automatic, and 'pause' is refused by Manual.
    findings = check(base())
    assert keys(findings) == [
        ("ambiguous_indication", ("A", "S"), (), ("pause", "resume"), 1),
        ("error_state", ("M", "A"), ("T1",), ("signal lost",), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "pause"), 5),
    ]
    error = findings[1]
    assert error.message == (
        "After 'signal lost' (shown only on the display, which may go unnoticed), the "
        "person can believe the device is in Automatic while it is in Manual: T1 (Dose "
        "insulin) is held by Pat in Manual and by Pump in Automatic. This depends on a "
        "change shown only passively going unnoticed."
    )
    assert set(explore(base()).states) == {("A", "A"), ("M", "M"), ("M", "A"), ("S", "S")}


def test_alert_removes_the_branch_and_its_findings():
    # With an alert Pat always notices: (M,A) is never reached.
    assert keys(check(base("alert"))) == [
        ("ambiguous_indication", ("A", "S"), (), ("pause", "resume"), 1),
    ]
    assert set(explore(base("alert")).states) == {("A", "A"), ("M", "M"), ("S", "S")}


def test_uncued_change_unforeseen_transition_and_certain_error_state():
    findings = check(base("none"))
    assert keys(findings) == [
        ("uncued_change", ("A", "M"), ("T1",), ("signal lost",), 5),
        ("ambiguous_indication", ("A", "S"), (), ("pause", "resume"), 1),
        ("error_state", ("M", "A"), ("T1",), ("signal lost",), 5),
        ("unforeseen_transition", ("A", "M"), ("T1",), ("signal lost",), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "pause"), 5),
    ]
    assert findings[2].message.startswith("After 'signal lost' (not shown at all), ")
    assert findings[2].message.endswith("No unnoticed display change is needed for this.")


def test_uncued_change_needs_a_change_of_holder():
    # Standby -> Automatic with no cue: the holders are the same, so no uncued change;
    # the transition is still unforeseen, with the path to Standby as witness.
    extra = (Transition("S", "A", "timeout", "schedule", "none"),)
    findings = check(base("alert", extra_transitions=extra))
    # By hand: (S,S) -timeout-> (A,S), the same holders (no error state); Pat may try
    # 'resume', whose only transition leads to Automatic: Automatic accepts it without
    # effect (it already holds), so it is not refused.
    assert keys(findings)[1:] == [
        ("unforeseen_transition", ("S", "A"), (), ("pause", "timeout"), 1),
    ]
    assert findings[0].kind == "ambiguous_indication"


def test_witness_is_the_shortest_event_sequence():
    # A longer way into (M, S): pause, then from Standby the machine drops to Manual on a
    # display change; the belief stays Standby. Shortest witness: pause, drop.
    extra = (Transition("S", "M", "drop", "automation", "display"),)
    findings = check(base("alert", extra_transitions=extra))
    errors = [f for f in findings if f.kind == "error_state"]
    assert [(f.modes, f.events) for f in errors] == [(("M", "S"), ("pause", "drop"))]


def test_witnesses_give_both_modes_after_every_event():
    # By hand, base("none"): 'signal lost' is never noticed, so after it the device is
    # in Manual and Pat still believes Automatic; 'pause' is then refused.
    lost = WitnessStep("signal lost", "automation", "none", True, "M", "A")
    findings = {f.kind: f for f in check(base("none"))}
    assert findings["uncued_change"].witness == (lost,)
    assert findings["error_state"].witness == (lost,)
    assert findings["unforeseen_transition"].witness == (lost,)
    assert findings["refused_action"].witness == (
        lost,
        WitnessStep("pause", "human", "", False, "M", "A", refused=True),
    )
    # A missed display change is marked as missed on the path that needs it.
    shown = {f.kind: f for f in check(base("display"))}
    assert shown["error_state"].witness == (
        WitnessStep("signal lost", "automation", "display", True, "M", "A"),
    )
    assert findings["ambiguous_indication"].witness == ()
    assert findings["error_state"].to_json()["witness"] == [
        {
            "event": "signal lost",
            "by": "automation",
            "cue": "none",
            "missed": True,
            "refused": False,
            "actual": "M",
            "believed": "A",
        }
    ]


def test_witness_of_a_later_transition_replays_the_way_there():
    # The unforeseen 'timeout' from Standby: Pat pauses (believes Standby), then the
    # device goes back to Automatic unseen, so Pat still believes Standby.
    extra = (Transition("S", "A", "timeout", "schedule", "none"),)
    findings = check(base("alert", extra_transitions=extra))
    unforeseen = next(f for f in findings if f.kind == "unforeseen_transition")
    assert unforeseen.witness == (
        WitnessStep("pause", "human", "display", False, "S", "S"),
        WitnessStep("timeout", "schedule", "none", True, "A", "S"),
    )


def test_walkthrough_shows_who_holds_what_in_both_modes_at_every_step():
    study, plan = study_with(base("none"))
    findings = verify_mode_map(study, plan, ASSUMPTIONS)
    error = next(f for f in findings if f.kind == "error_state")
    moments = walkthrough(study, plan, ASSUMPTIONS, error)
    # By hand: at the start both are Automatic (T1 the pump's); after 'signal lost' the
    # device is Manual (T1 Pat's) while Pat believes Automatic (T1 the pump's).
    assert [(m.step and m.step.event, m.actual, m.believed) for m in moments] == [
        (None, "A", "A"),
        ("signal lost", "M", "A"),
    ]
    assert moments[0].holders == (("T1", "pump", "pump"),)
    assert moments[1].holders == (("T1", "pat", "pump"),)
    assert [m.confused for m in moments] == [False, True]
    unreachable = next(
        f
        for f in check(base(extra_modes=(mode("X", "Spare", "x"),)))
        if f.kind == "unreachable_mode"
    )
    assert walkthrough(study, plan, ASSUMPTIONS, unreachable) == []


def test_ambiguous_indication_by_holders_and_absent_when_indications_differ():
    standby = mode("S", "Standby", "green", BY_PERSON)
    modes = ModeMap("A", (AUTO, MANUAL, standby), base().transitions)
    ambiguous = [f for f in check(modes) if f.kind == "ambiguous_indication"]
    assert keys(ambiguous) == [
        ("ambiguous_indication", ("A", "S"), ("T1",), ("pause", "resume"), 5)
    ]
    distinct = ModeMap("A", (AUTO, MANUAL, mode("S", "Standby", "amber")), base().transitions)
    assert not [f for f in check(distinct) if f.kind == "ambiguous_indication"]
    blank = ModeMap(
        "A", (mode("A", "Automatic", ""), MANUAL, mode("S", "Standby", "")), base().transitions
    )
    assert not [f for f in check(blank) if f.kind == "ambiguous_indication"]


def test_unreachable_mode_and_removing_it_removes_only_its_findings():
    spare = mode("X", "Spare", "green", BY_PERSON)
    extra = (Transition("X", "A", "leave spare", "automation", "none"),)
    with_spare = check(base(extra_modes=(spare,), extra_transitions=extra))
    assert [f for f in with_spare if f.kind == "unreachable_mode"] == [
        f for f in with_spare if f.modes == ("X",)
    ]
    assert ("unreachable_mode", ("X",), (), (), 1) in keys(with_spare)
    without = check(base())
    assert without == [f for f in with_spare if "X" not in f.modes]
    assert len(with_spare) > len(without) + 1  # its uncued change and ambiguity went too


def test_no_way_back_from_a_locked_mode():
    locked = mode("L", "Locked", "red")
    extra = (Transition("A", "L", "fault", "automation", "alert"),)
    findings = check(base("alert", extra_modes=(locked,), extra_transitions=extra))
    assert [k for k in keys(findings) if k[0] == "no_way_back"] == [
        ("no_way_back", ("L",), ("T1",), ("fault",), 5)
    ]
    trapped = next(f for f in findings if f.kind == "no_way_back")
    assert trapped.witness == (WitnessStep("fault", "automation", "alert", False, "L", "L"),)
    # With a way from Locked to Manual (where Pat holds T1) there is no finding.
    out = (*extra, Transition("L", "M", "unlock", "human", "display"))
    findings = check(base("alert", extra_modes=(locked,), extra_transitions=out))
    assert not [f for f in findings if f.kind == "no_way_back"]


def test_no_way_back_leaves_out_critical_tasks_no_mode_gives_the_person():
    # T1 (severity 5) is the pump's in every mode: an allocation decision of the plan,
    # not a trap of the mode map, so no finding (the module's narrowed rule).
    modes = ModeMap("A", (AUTO, STANDBY), base().transitions[2:])
    assert not [f for f in check(modes) if f.kind == "no_way_back"]
    # No task of severity 4-5 at all: nothing to hold either.
    study, plan = study_with(modes, tasks=(TASKS[1],))
    assert not [f for f in verify_mode_map(study, plan, ASSUMPTIONS) if f.kind == "no_way_back"]


def test_no_way_back_when_no_mode_gives_the_person_all_critical_tasks_at_once():
    # By hand: Manual gives Pat T1 (severity 5), Standby gives Pat T3 (severity 4); no
    # mode gives both, so from every reachable mode there is no way back to one.
    tasks = (*TASKS, Task("T3", "Stop delivery", severity=4))
    standby = mode("S", "Standby", "amber", {"T3": Assignment(human="pat")})
    modes = ModeMap("A", (AUTO, MANUAL, standby), base("alert").transitions)
    study, plan = study_with(modes, tasks=tasks)
    plan.assignments["T3"] = Assignment(automation="pump")
    findings = [f for f in verify_mode_map(study, plan, ASSUMPTIONS) if f.kind == "no_way_back"]
    assert keys(findings) == [("no_way_back", ("A", "M", "S"), ("T1", "T3"), (), 5)]
    assert findings[0].witness == ()


def test_plan_without_modes_has_none():
    study, plan = study_with(None)
    assert verify_mode_map(study, plan, ASSUMPTIONS) == []


def test_home_heating_auto_in_the_plan_analysis():
    # The 'hold' mode hands the set points to the resident and shows the same clock
    # symbol as 'schedule'; 'next period' returns to the schedule with no cue.
    study = read_study(json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8")))
    analysis = analyse_plan(study, "auto")
    mode_kinds = [
        (f.kind, f.modes, f.events)
        for f in analysis.findings
        if f.kind
        in {"uncued_change", "ambiguous_indication", "error_state", "unforeseen_transition"}
    ]
    assert ("error_state", ("schedule", "hold"), ("dial turned", "next period")) in mode_kinds
    assert ("uncued_change", ("hold", "schedule"), ("dial turned", "next period")) in mode_kinds
    # Tasks in question in the error state get the highest mode-change factor.
    awareness = analysis.tasks["T2"].awareness
    assert awareness is not None and awareness.factors["mode_change"] == 1.0


FIRST_FOUR = ("uncued_change", "ambiguous_indication", "error_state", "unforeseen_transition")


def insulin_study():
    path = EXAMPLES_DIR / "closed-loop-insulin.json"
    return read_study(json.loads(path.read_text("utf-8")))


@pytest.mark.parametrize("plan_id", ["hybrid-loop", "full-loop"])
def test_insulin_loop_plans_show_each_of_the_first_four_kinds(plan_id):
    analysis = analyse_plan(insulin_study(), plan_id)
    kinds = {f.kind for f in analysis.findings}
    assert set(FIRST_FOUR) <= kinds
    # Every error state comes with the events that reach it, each with both modes.
    errors = [f for f in analysis.findings if f.kind == "error_state"]
    assert all(f.witness and f.witness[-1].actual != f.witness[-1].believed for f in errors)


def test_the_cued_revision_removes_the_mode_findings_in_compare():
    study = insulin_study()
    before = analyse_plan(study, "hybrid-loop")
    after = analyse_plan(study, "hybrid-loop-cued")
    # Cues change what the person notices, not who holds what: the modes where a
    # critical task is held by nobody (Delivery suspended: T104; Sensor warm-up: T604,
    # both severity 4 in the example) stay, and nothing else does.
    left = [(f.kind, f.modes, f.tasks) for f in after.findings if f.kind in MODE_FINDING_KINDS]
    assert left == [
        ("unheld_task", ("suspended",), ("T104",)),
        ("unheld_task", ("warmup",), ("T604",)),
    ]
    delta = compare_plans([before, after]).delta("hybrid-loop-cued")
    removed = {f.kind for f in delta.findings_removed}
    assert set(FIRST_FOUR) <= removed
    assert not [f for f in delta.findings_added if f.kind in MODE_FINDING_KINDS]


# -- random machines: brute force, property, size ----------------------------------------

CUE_CHOICES = ("none", "on_request", "display", "alert", "alert_confirm")


def random_machine(rng: random.Random, size: int, transitions: int) -> ModeMap:
    ids = [f"m{i}" for i in range(size)]
    states = tuple(
        mode(
            mode_id,
            f"Mode {mode_id}",
            rng.choice(["a", "b", "c"]),
            BY_PERSON if rng.random() < 0.4 else None,
        )
        for mode_id in ids
    )
    edges = tuple(
        Transition(
            rng.choice(ids),
            rng.choice(ids),
            f"e{rng.randrange(4)}",
            rng.choice(["human", "automation", "event"]),
            rng.choice(CUE_CHOICES),
        )
        for _ in range(transitions)
    )
    return ModeMap("m0", states, edges)


def brute_force(modes: ModeMap, depth: int) -> dict[tuple[str, str], int]:
    """Every (actual, believed) reached by some event sequence of at most ``depth``
    events, with the fewest events needed, by enumerating the sequences one by one."""
    found: dict[tuple[str, str], int] = {}

    def walk(actual, believed, length):
        found[(actual, believed)] = min(found.get((actual, believed), length), length)
        if length == depth:
            return
        for t in modes.transitions:
            if t.source != actual:
                continue
            if t.by == "human":
                for u in modes.transitions:
                    if u.source == believed and u.by == "human" and u.trigger == t.trigger:
                        walk(t.target, u.target, length + 1)
            else:
                if t.cue != "none":
                    walk(t.target, t.target, length + 1)
                if t.cue in ("none", "display", "on_request"):
                    walk(t.target, believed, length + 1)

    walk(modes.initial, modes.initial, 0)
    return found


def depths(modes: ModeMap) -> dict[tuple[str, str], int]:
    parents = explore(modes).parents
    result = {}
    for state in parents:
        length, at = 0, state
        while parents[at] is not None:
            at = parents[at][0]
            length += 1
        result[state] = length
    return result


def test_reachable_states_match_brute_force_on_small_random_machines():
    for seed in (3, 11):
        rng = random.Random(seed)
        modes = random_machine(rng, 3, 7)
        expected = brute_force(modes, 6)
        searched = {s: d for s, d in depths(modes).items() if d <= 6}
        assert searched == expected
        assert len(expected) > 3  # the machines are not trivial


@settings(max_examples=60, deadline=None)
@given(st.integers(0, 10_000), st.integers(2, 4), st.integers(1, 8), st.data())
def test_turning_a_display_cue_into_an_alert_never_adds_a_finding(seed, size, count, data):
    modes = random_machine(random.Random(seed), size, count)
    passive = [i for i, t in enumerate(modes.transitions) if t.cue in ("display", "on_request")]
    if not passive:
        return
    index = data.draw(st.sampled_from(passive))
    changed = list(modes.transitions)
    old = changed[index]
    changed[index] = Transition(old.source, old.target, old.trigger, old.by, "alert")
    before = {(f.kind, f.modes, f.tasks) for f in check(modes)}
    alerted = ModeMap("m0", modes.states, tuple(changed))
    after = {(f.kind, f.modes, f.tasks) for f in check(alerted)}
    assert after <= before


def test_a_cue_on_an_uncued_change_can_reveal_an_error_state():
    # Not monotone for cue 'none': once Pat notices the change to M, they can act there
    # ('go' from M to N), and N's silent drop to Automatic is a new error state.
    # By hand, without the cue: (A,A) -lost-> (M,A); 'go' is not in Pat's model of A.
    states = (AUTO, MANUAL, mode("N", "Night", "blue", BY_PERSON))
    transitions = [
        Transition("A", "M", "lost", "automation", "none"),
        Transition("M", "N", "go", "human", "display"),
        Transition("N", "A", "drop", "automation", "none"),
    ]
    silent = {(f.kind, f.modes) for f in check(ModeMap("A", states, tuple(transitions)))}
    transitions[0] = Transition("A", "M", "lost", "automation", "alert")
    alerted = {(f.kind, f.modes) for f in check(ModeMap("A", states, tuple(transitions)))}
    assert ("error_state", ("A", "N")) in alerted - silent


def test_fifty_modes_and_two_hundred_transitions_against_networkx_reachability():
    """The product graph of a 50-mode, 200-transition machine built here edge by edge
    from the composition rules (Degani & Heymann 2002) and searched with networkx: the
    reachable states are exactly the check's, and the error states are exactly the
    reachable ones whose two modes differ on T1's holder (Pat where the mode overrides
    T1, the pump elsewhere)."""
    import networkx as nx

    modes = random_machine(random.Random(7), 50, 200)
    graph = nx.DiGraph()
    ids = [state.id for state in modes.states]
    for actual in ids:
        for believed in ids:
            for t in modes.transitions:
                if t.source != actual:
                    continue
                if t.by == "human":
                    for u in modes.transitions:
                        if u.source == believed and u.by == "human" and u.trigger == t.trigger:
                            graph.add_edge((actual, believed), (t.target, u.target))
                    continue
                if t.cue != "none":
                    graph.add_edge((actual, believed), (t.target, t.target))
                if t.cue in ("none", "display", "on_request"):
                    graph.add_edge((actual, believed), (t.target, believed))
    start = ("m0", "m0")
    reachable = {start} | (nx.descendants(graph, start) if start in graph else set())
    assert set(explore(modes).states) == reachable
    held_by_pat = {state.id for state in modes.states if state.overrides}
    expected_errors = {
        (actual, believed)
        for actual, believed in reachable
        if (actual in held_by_pat) != (believed in held_by_pat)
    }
    errors = {f.modes for f in check(modes) if f.kind == "error_state"}
    assert errors == expected_errors
    assert len(expected_errors) > 10  # the machine is not trivial


# -- revision 2 corrections, each on a small map worked by hand ---------------------------


def test_repeating_an_action_whose_effect_holds_is_not_refused():
    # By hand: 'engage' leads from Standby and from Automatic-off to Engaged only. Pat
    # misses the display change Standby -> Engaged and, believing Standby, presses
    # 'engage'. Engaged has no 'engage' of its own, but every 'engage' leads to Engaged,
    # so Engaged accepts it without effect: no refused action. Before the correction it
    # was refused (severity 5: T1 is Pat's in Standby, the pump's in Engaged).
    engaged = mode("E", "Engaged", "green")
    standby = mode("S", "Standby", "white", BY_PERSON)
    modes = ModeMap(
        "S",
        (standby, engaged),
        (
            Transition("S", "E", "engage", "human", "display"),
            Transition("S", "E", "auto start", "automation", "display"),
        ),
    )
    findings = check(modes)
    assert not [f for f in findings if f.kind == "refused_action"]
    # The error state (E believed S) is still there: the correction is only the refusal.
    assert [(f.kind, f.modes) for f in findings if f.kind == "error_state"] == [
        ("error_state", ("E", "S"))
    ]
    # A second 'engage' leading elsewhere (Engaged -> Standby) makes it an action with
    # an effect in Engaged, so nothing is accepted without effect there.
    toggled = ModeMap(
        "S", modes.states, (*modes.transitions, Transition("E", "S", "engage", "human", "display"))
    )
    assert not [f for f in check(toggled) if f.kind == "refused_action"]
    # A trigger leading to two modes is accepted without effect in neither: 'go' from S
    # to E, and from E to a third mode; believing S in E... E has its own 'go', so the
    # only refusal possible is in the third mode, which 'go' does not lead back into.


def test_a_transition_from_every_mode_and_its_override():
    # By hand: 'sensor lost' from "*" to Manual with an alert; Standby has its own
    # 'sensor lost' to itself, which overrides it there. The expanded map: A -> M and
    # M -> M on 'sensor lost' (the one from every mode), S -> S (Standby's own).
    star = Transition("*", "M", "sensor lost", "event", "alert")
    own = Transition("S", "S", "sensor lost", "event", "alert")
    modes = base("alert", extra_transitions=(star, own))
    lost = [t for t in modes.expanded if t.trigger == "sensor lost"]
    assert [(t.source, t.target) for t in lost] == [("A", "M"), ("M", "M"), ("S", "S")]
    # An alerted change into Manual is always noticed: no new states, no error state.
    assert set(explore(modes).states) == {("A", "A"), ("M", "M"), ("S", "S")}
    # With no cue, Manual is reached from Automatic unseen (M, A) and, without the
    # override, also from Standby (M, S); with it, Standby stays where it is.
    silent_star = Transition("*", "M", "sensor lost", "event", "none")
    with_override = base("alert", extra_transitions=(silent_star, own))
    without = base("alert", extra_transitions=(silent_star,))
    assert ("M", "S") not in set(explore(with_override).states)
    assert ("M", "S") in set(explore(without).states)
    errors = {f.modes for f in check(with_override) if f.kind == "error_state"}
    assert errors == {("M", "A")}


def test_star_round_trips_and_bad_values_are_refused_with_their_path():
    from allocation.core import load_study
    from allocation.core.writing import study_to_json

    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    plan_index = next(i for i, p in enumerate(document["plans"]) if p.get("modes"))
    transitions = document["plans"][plan_index]["modes"]["transitions"]
    first_target = transitions[0]["to"]
    transitions.append(
        {"from": "*", "to": first_target, "trigger": "power cut", "by": "event", "cue": "alert"}
    )
    result = load_study(document)
    assert result.ok, result.errors
    written = study_to_json(result.study)
    assert written["plans"][plan_index]["modes"]["transitions"][-1]["from"] == "*"
    transitions[-1] = {**transitions[-1], "to": "*"}
    refused = load_study(document)
    path = f"$.plans[{plan_index}].modes.transitions[{len(transitions) - 1}].to"
    assert [p.path for p in refused.errors] == [path]


def test_unheld_task_and_no_way_back_where_the_critical_task_is_not_done():
    # By hand: T1 (severity 5) is Pat's in Manual and the pump's in Automatic; in Off
    # (reached from Automatic by a fault, with an alert, no way out) T1 is not done.
    # Off: unheld_task (T1, 5), and no mode with Pat holding T1 is reachable from it,
    # so no_way_back (T1, 5). Before the correction, Off gave neither: T1 "not done"
    # did not count as lacking it.
    off = mode("O", "Off", "dark", {"T1": Assignment(applies=False)})
    fault = Transition("A", "O", "fault", "automation", "alert")
    findings = check(base("alert", extra_modes=(off,), extra_transitions=(fault,)))
    assert [k for k in keys(findings) if k[0] in ("unheld_task", "no_way_back")] == [
        ("unheld_task", ("O",), ("T1",), ("fault",), 5),
        ("no_way_back", ("O",), ("T1",), ("fault",), 5),
    ]
    unheld = next(f for f in findings if f.kind == "unheld_task")
    assert unheld.witness == (WitnessStep("fault", "automation", "alert", False, "O", "O"),)
    # The step-through plays it: start in Automatic, then Off with T1 held by nobody.
    study, plan = study_with(base("alert", extra_modes=(off,), extra_transitions=(fault,)))
    moments = walkthrough(study, plan, ASSUMPTIONS, unheld)
    assert [(m.actual, m.believed) for m in moments] == [("A", "A"), ("O", "O")]
    assert moments[1].holders == (("T1", None, None),)
    # A way out of Off into Manual removes no_way_back but not unheld_task.
    out = Transition("O", "M", "take over", "human", "display")
    findings = check(base("alert", extra_modes=(off,), extra_transitions=(fault, out)))
    assert {f.kind for f in findings} >= {"unheld_task"}
    assert "no_way_back" not in {f.kind for f in findings}


def test_the_critical_severity_is_the_risk_policys():
    # By hand: T3 (severity 3) is not done in Off and Pat's in Manual. At the default
    # critical severity 4 it is not critical: no unheld_task for it. At 3 it is.
    tasks = (*TASKS, Task("T3", "Check the site", severity=3))
    off = mode("O", "Off", "dark", {"T3": Assignment(applies=False)})
    manual = mode(
        "M", "Manual", "grey", {"T1": Assignment(human="pat"), "T3": Assignment(human="pat")}
    )
    modes = ModeMap(
        "A",
        (AUTO, manual, STANDBY, off),
        (
            *base("alert").transitions,
            Transition("A", "O", "fault", "automation", "alert"),
            Transition("O", "A", "reset", "human", "display"),
        ),
    )
    study, plan = study_with(modes, tasks=tasks)
    plan.assignments["T3"] = Assignment(automation="pump")

    def unheld(policy):
        changed = Study(
            study.id,
            study.title,
            study.scale,
            agents=study.agents,
            tasks=study.tasks,
            plans=study.plans,
            risk_policy=policy,
        )
        return [
            (f.kind, f.modes, f.tasks)
            for f in verify_mode_map(changed, plan, ASSUMPTIONS)
            if f.kind in ("unheld_task", "no_way_back")
        ]

    assert unheld(None) == []
    assert unheld({"critical_severity": 4}) == []
    # At 3: nobody holds T3 in Off (unheld); Off -> Automatic -> Manual, where Pat
    # holds T1 and T3, is a way back, so no no_way_back.
    assert unheld({"critical_severity": 3}) == [("unheld_task", ("O",), ("T3",))]


def test_critical_severity_is_read_with_its_path():
    from allocation.core import load_study

    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    document["study"]["risk_policy"] = {"critical_severity": 7}
    refused = load_study(document)
    assert [p.path for p in refused.errors] == ["$.study.risk_policy.critical_severity"]
    document["study"]["risk_policy"] = {"critical_severity": 3}
    assert load_study(document).ok
