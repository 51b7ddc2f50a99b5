"""Mode-map verification (allocation.core.analysis.modecheck; methods document, #mode-check).

The expected findings and witnesses are worked by hand from the composition rules of
Degani & Heymann (2002) as the methods document states them: a state is (actual,
believed), the belief a set of modes; the person starts knowing the initial mode; their
own actions move the belief to its image under the action; a noticed change into a mode
makes them believe every mode with its indication; alerts are always noticed, changes
with no cue never, display changes either way. An action whose transitions all lead to
one mode is accepted without effect in that mode. The reachable composed states are also
checked against a brute-force enumeration of event sequences written here independently
of the breadth-first search, and on a 50-mode map against networkx reachability.
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


def S(*modes):  # noqa: N802 - a belief, written as in the working
    return frozenset(modes)


def test_missed_display_gives_error_state_and_refused_action():
    # By hand. Every 'pause' leads to Standby, every 'resume' and 'restart' to
    # Automatic, so Standby accepts 'pause' and Automatic 'resume' and 'restart' without
    # effect. (A,{A}) -signal lost-> (M,{M}) noticed or (M,{A}) missed; (A,{A}) -pause->
    # (S,{S}); (M,{M}) -restart-> (A,{A}); (S,{S}) -resume-> (A,{A}); (M,{A}) -restart->
    # (A,{A}) (Pat believes Automatic, where 'restart' is accepted). In (M,{A}) Pat
    # believes Automatic (pump holds T1) while Manual has Pat hold T1: an error state;
    # 'pause' and 'resume', which Automatic accepts, are refused by Manual. Automatic
    # and Standby look alike and differ only in 'restart' (accepted in Automatic alone).
    findings = check(base())
    assert keys(findings) == [
        ("ambiguous_indication", ("A", "S"), (), ("restart",), 1),
        ("error_state", ("M", "A"), ("T1",), ("signal lost",), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "pause"), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "resume"), 5),
    ]
    error = findings[1]
    assert error.message == (
        "After 'signal lost' (shown only on the display, which may go unnoticed), the "
        "person can believe the device is in Automatic while it is in Manual: T1 (Dose "
        "insulin) is held by Pat in Manual and by Pump in Automatic. This depends on a "
        "change shown only passively going unnoticed."
    )
    assert set(explore(base()).states) == {
        ("A", S("A")),
        ("M", S("M")),
        ("M", S("A")),
        ("S", S("S")),
    }


def test_alert_removes_the_branch_and_its_findings():
    # With an alert Pat always notices: (M,{A}) is never reached.
    assert keys(check(base("alert"))) == [
        ("ambiguous_indication", ("A", "S"), (), ("restart",), 1),
    ]
    assert set(explore(base("alert")).states) == {("A", S("A")), ("M", S("M")), ("S", S("S"))}


def test_uncued_change_unforeseen_transition_and_certain_error_state():
    findings = check(base("none"))
    assert keys(findings) == [
        ("uncued_change", ("A", "M"), ("T1",), ("signal lost",), 5),
        ("ambiguous_indication", ("A", "S"), (), ("restart",), 1),
        ("error_state", ("M", "A"), ("T1",), ("signal lost",), 5),
        ("unforeseen_transition", ("A", "M"), ("T1",), ("signal lost",), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "pause"), 5),
        ("refused_action", ("M", "A"), ("T1",), ("signal lost", "resume"), 5),
    ]
    assert findings[2].message.startswith("After 'signal lost' (not shown at all), ")
    assert findings[2].message.endswith("No unnoticed display change is needed for this.")


def test_uncued_change_needs_a_change_of_holder():
    # Standby -> Automatic with no cue: the holders are the same, so no uncued change;
    # the transition is still unforeseen, with the path to Standby as witness.
    extra = (Transition("S", "A", "timeout", "schedule", "none"),)
    findings = check(base("alert", extra_transitions=extra))
    # By hand: (S,{S}) -timeout-> (A,{S}), the same holders (no error state). Pat may
    # try 'resume' or 'pause' (Standby accepts 'pause' without effect); Automatic
    # accepts both ('resume' without effect, every 'resume' leading to Automatic), so
    # no action is refused (before 'resume' counted as refused here).
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
    findings: dict = {}
    for f in check(base("none")):
        findings.setdefault(f.kind, f)
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
            "believed_set": ["A"],
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
    assert moments[0].holders == (("T1", "pump", ("pump",)),)
    assert moments[1].holders == (("T1", "pat", ("pump",)),)
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
    assert keys(ambiguous) == [("ambiguous_indication", ("A", "S"), ("T1",), ("restart",), 5)]
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
    # Cues do not change what is done in a mode: in the example file Suspended marks T104
    # (basal pulse, severity 4) and Warm-up T604 (overnight watch, severity 4) as not
    # done, so both plans keep those two unheld tasks, and only those.
    assert [
        (f.kind, f.modes, f.tasks) for f in after.findings if f.kind in MODE_FINDING_KINDS
    ] == [
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


def person_rules(modes: ModeMap):
    """The composition's one-step rule, written here from the methods document's words
    (independently of the module): ``"*"`` spelt out with overrides, actions accepted
    without effect where all their transitions lead, beliefs as sets."""
    ids = [m.id for m in modes.states]
    own = {(t.source, t.trigger) for t in modes.transitions if t.source != "*"}
    edges = []
    for t in modes.transitions:
        sources = [m for m in ids if (m, t.trigger) not in own] if t.source == "*" else [t.source]
        edges += [(source, t) for source in sources]

    def accepts(mode_id, trigger):
        """Where the person's action leads from a mode ([] when it is refused)."""
        leads = [
            t.target for s, t in edges if s == mode_id and t.by == "human" and t.trigger == trigger
        ]
        if leads:
            return leads
        everywhere = {t.target for _, t in edges if t.by == "human" and t.trigger == trigger}
        return [mode_id] if everywhere == {mode_id} else []

    def look(mode_id):
        shown = (modes.by_id[mode_id].indication or "").strip().casefold()
        if not shown:
            return frozenset({mode_id})
        return frozenset(
            m.id for m in modes.states if (m.indication or "").strip().casefold() == shown
        )

    triggers = {t.trigger for _, t in edges if t.by == "human"}

    def successors(actual, believed):
        for trigger in triggers:
            offered = [mode_id for mode_id in believed if accepts(mode_id, trigger)]
            if not offered:
                continue
            image = frozenset(x for mode_id in believed for x in accepts(mode_id, trigger))
            for target in accepts(actual, trigger):
                yield target, image
        for source, t in edges:
            if source != actual or t.by == "human":
                continue
            if t.cue != "none":
                yield t.target, look(t.target)
            if t.cue in ("none", "display", "on_request"):
                yield t.target, believed

    return successors, accepts


def brute_force(modes: ModeMap, depth: int) -> dict[tuple[str, frozenset], int]:
    """Every (actual, believed) reached by some event sequence of at most ``depth``
    events, with the fewest events needed, by enumerating the sequences one by one."""
    successors, _ = person_rules(modes)
    found: dict[tuple[str, frozenset], int] = {}

    def walk(actual, believed, length):
        found[(actual, believed)] = min(found.get((actual, believed), length), length)
        if length == depth:
            return
        for following in successors(actual, believed):
            walk(*following, length + 1)

    walk(modes.initial, frozenset({modes.initial}), 0)
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


def test_fifty_modes_error_states_counted_with_networkx():
    # A ring of 50 modes m0 -> m1 -> ... -> m49 -> m0 moved by the device, the cues
    # going alert, display, none in turn; modes m2k and m2k+1 show the same indication;
    # Pat holds T1 in every third mode (the pump elsewhere); 'home' takes the person
    # from every mode to m0 ("*"), except m7, where 'home' leads to m8; 'back' steps
    # from each even mode to the one before. The error states are counted here on a
    # product graph of (actual, belief) pairs built with this file's own rules and
    # networkx reachability, and compared with the module's error_state findings.
    import networkx as nx

    count = 50
    states = tuple(
        mode(f"m{i}", f"Mode {i}", f"i{i // 2}", BY_PERSON if i % 3 == 0 else None)
        for i in range(count)
    )
    cues = ("alert", "display", "none")
    transitions = [
        Transition(f"m{i}", f"m{(i + 1) % count}", f"tick {i}", "automation", cues[i % 3])
        for i in range(count)
    ]
    transitions.append(Transition("*", "m0", "home", "human", "display"))
    transitions.append(Transition("m7", "m8", "home", "human", "display"))
    transitions += [
        Transition(f"m{i}", f"m{i - 1}", "back", "human", "display") for i in range(2, count, 2)
    ]
    modes = ModeMap("m0", states, tuple(transitions))
    successors, _ = person_rules(modes)
    graph = nx.DiGraph()
    start = ("m0", frozenset({"m0"}))
    frontier, seen = [start], {start}
    while frontier:
        node = frontier.pop()
        for following in successors(*node):
            graph.add_edge(node, following)
            if following not in seen:
                seen.add(following)
                frontier.append(following)
    reachable = nx.descendants(graph, start) | {start}

    def pat_holds(mode_id):
        return int(mode_id[1:]) % 3 == 0

    expected = {
        (actual, believed)
        for actual, believed in reachable
        if any(pat_holds(b) != pat_holds(actual) for b in believed)
    }
    errors = [f for f in check(modes) if f.kind == "error_state"]
    assert len(errors) == len(expected)
    assert {(f.modes[0], frozenset(f.modes[1:])) for f in errors} == expected
    assert len(expected) > count  # look-alike pairs and missed changes both add states
