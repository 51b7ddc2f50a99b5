"""Formal verification of a plan's mode map against what the person can observe (methods
document, ``#mode-check``).

The **machine** is the mode map: its modes and transitions (a transition ``"from":
"*"`` applies in every mode that has no transition of its own on the same trigger). An
action of the person whose transitions all lead to one mode is accepted without effect
in that mode (its effect already holds), so pressing it there is not refused.

The **person's model** is what they can observe of it: their own actions and the cues
of the other transitions. An ``alert`` or ``alert_confirm`` is always noticed, a change
with cue ``none`` never is, and one shown only on the ``display`` or ``on_request`` may
or may not be noticed, so the search branches both ways (tool assumption, after Sarter
& Woods 1995). The person's belief is a **set of modes**: modes that show the same
indication cannot be told apart, so after a noticed change into one of them the person
believes all of them. The person starts knowing the initial mode; after their own
action the belief is the image of the set under that action; a set offers the actions
any of its modes accepts.

The two are composed as in Degani & Heymann (2002): a state is ``(actual, belief)``,
starting at ``(initial, {initial})``. From ``(a, B)``, for each transition ``t`` of the
machine from ``a``:

- an action of the person (``by == "human"``) is taken only if ``B`` offers it; it
  leads to ``(t.target, image of B under it)``;
- any other transition leads to ``(t.target, look-alikes of t.target)`` when noticed and
  to ``(t.target, B)`` when missed.

The beliefs the search can meet are counted from the map before it
(:func:`mode_search_size`), so the composition has at most ``modes x beliefs`` states;
it is searched breadth-first, so every witness is a shortest sequence of events. The
findings (kinds as named here):

- ``uncued_change``: a transition the person does not make, with no cue, that changes
  who holds some task (an indirect mode change; Leveson et al. 1997);
- ``ambiguous_indication``: two modes that show the same indication but differ in who
  holds some task, or in where the same action of the person leads (interface
  interpretation errors and inconsistent behaviour; Leveson et al. 1997);
- ``error_state``: a reachable state where some believed mode and the actual mode
  disagree on who principally holds some task (Degani & Heymann 2002), with the shortest
  sequence of events that gets there, "how did we get into this mode?" (Sarter & Woods
  1995); a belief of several modes is named "A or B";
- ``unforeseen_transition``: a transition the machine can take from a reachable mode that
  the person cannot notice (cue ``none``), so their model does not follow it;
- ``refused_action``: an action the belief offers that the machine does not accept in
  the actual mode;
- ``unreachable_mode``: a mode no sequence of transitions reaches from the initial one;
- ``unheld_task``: a mode where a task at or above the critical severity (the study's
  risk policy, ``critical_severity``, default 4) is held by nobody; a task no mode has
  done is the plan's decision and left out (tool assumption);
- ``no_way_back``: a reachable mode from which no mode is reachable where a person
  principally holds every safety-critical task that the map ever gives to a person
  (operator authority limits; Leveson et al. 1997). Safety-critical means applicable and
  at or above the critical severity; a mode where such a task is not done lacks it. A
  critical task the plan leaves to the device in every mode is an allocation decision,
  seen on the other screens, not a trap of the mode map, so it is left out (tool
  assumption);
- ``mode_map_unchecked``: a map too large to search within ``MODE_STATES_MAX`` and
  ``MODE_STEPS_MAX`` (:func:`mode_search_size`, counted before the search); the study
  checks refuse such a map, so this is raised only for one that reaches the check
  all the same.

Every finding that an event sequence shows carries it as its ``witness``: each event
with the mode the device is then in and the mode the person then believes. For
``error_state`` and ``refused_action`` it is the path of the composed search; for the
findings about a mode or a transition (``uncued_change``, ``unforeseen_transition``,
``unheld_task``, ``no_way_back``) it is the shortest way the machine gets there, replayed
with the person noticing every change that is shown and missing those that are not
(their own action sets their belief to its image, or, when their model does not offer
it, to where it led: they see what they did; tool assumption).

A witness that needs some display (or on-request) change to go unnoticed says so. When a
state can be reached both with and without such a miss, the witness is the shortest
sequence that needs no miss (the finding then does not depend on one); otherwise it is
the shortest sequence overall (tool assumption).

References
----------
.. [1] Sarter, N. B., & Woods, D. D. (1995). How in the world did we ever get into that
   mode? Mode error and awareness in supervisory control. Human Factors, 37(1), 5-19.
.. [2] Leveson, N. G., Pinnel, L. D., Sandys, S. D., Koga, S., & Reese, J. D. (1997).
   Analyzing software specifications for mode confusion potential. Proc. Workshop on
   Human Error and System Development, Glasgow, 132-146.
.. [3] Degani, A., & Heymann, M. (2002). Formal verification of human-automation
   interaction. Human Factors, 44(1), 28-43.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

from ..limits import MODE_STATES_MAX, MODE_STEPS_MAX
from ..model import ModeMap, Plan, Study, Transition
from .findings import Finding, WitnessStep
from .involvement import involvement
from .modes import assignment_in_mode
from .risk import resolve_policy

__all__ = [
    "MODE_FINDING_KINDS",
    "Exploration",
    "Moment",
    "SearchSize",
    "Step",
    "error_state_tasks",
    "explore",
    "mode_search_size",
    "verify_mode_map",
    "walkthrough",
]

#: The finding kinds of the mode-map check, in the order they are listed.
MODE_FINDING_KINDS = (
    "uncued_change",
    "ambiguous_indication",
    "error_state",
    "unforeseen_transition",
    "refused_action",
    "unreachable_mode",
    "unheld_task",
    "no_way_back",
    "mode_map_unchecked",
)

#: Cues the person always notices, and cues they may miss (branch both ways).
NOTICED = frozenset({"alert", "alert_confirm"})
MISSABLE = frozenset({"display", "on_request"})

_MISSED_WORDS = {
    "display": "shown only on the display, which may go unnoticed",
    "on_request": "shown only when the person asks for it, which may go unnoticed",
    "none": "not shown at all",
}

#: What the person believes about the mode: the set of modes it may be in.
Belief = frozenset[str]
State = tuple[str, Belief]
#: Tasks named with their titles in a message; more are given by id only.
_NAMED = 4


@dataclass(frozen=True)
class Step:
    """One event on a path through the composition: the transition and whether the
    person missed it (always ``False`` for their own actions and for alerts)."""

    transition: Transition
    missed: bool

    @property
    def missed_display(self) -> bool:
        """Missed although it was shown: the branch that may or may not happen."""
        return self.missed and self.transition.cue in MISSABLE


@dataclass(frozen=True)
class Exploration:
    """The reachable part of the composition of machine and person's model.

    ``parents`` holds, for every reachable state, the state and step it was first
    reached from (``None`` for the initial state) in a breadth-first search of the whole
    composition; ``sure_parents`` the same for the search that never lets a display or
    on-request change go unnoticed. ``machine_parents`` is the breadth-first tree of
    the machine alone (every transition taken, whatever the person believes).
    """

    initial: State
    parents: dict[State, tuple[State, Step] | None]
    sure_parents: dict[State, tuple[State, Step] | None]
    machine_parents: dict[str, tuple[str, Transition] | None]
    ordered: Callable[[Belief], tuple[str, ...]]

    @property
    def states(self) -> list[State]:
        """The reachable states in breadth-first order."""
        return list(self.parents)

    def path(self, state: State) -> tuple[tuple[Step, ...], bool]:
        """The witness of a reachable state and whether it depends on a missed display.

        The shortest path that needs no display change to go unnoticed, if there is one;
        else the shortest path overall.
        """
        trail, depends = self.trail(state)
        return tuple(step for step, _ in trail), depends

    def trail(self, state: State) -> tuple[tuple[tuple[Step, State], ...], bool]:
        """Like :meth:`path`, each step with the composed state it leads to."""
        sure = state in self.sure_parents
        tree = self.sure_parents if sure else self.parents
        trail: list[tuple[Step, State]] = []
        while (parent := tree[state]) is not None:
            before, step = parent
            trail.append((step, state))
            state = before
        return tuple(reversed(trail)), not sure

    def witness(
        self, state: State, pick: Callable[[str, Belief], str], refused: str | None = None
    ) -> tuple[WitnessStep, ...]:
        """The witness of a reachable state as events with both modes after each (the
        belief as the mode ``pick`` names, with the whole set); with ``refused``, ending
        in that action of the person, which the device refuses."""
        trail, _ = self.trail(state)
        steps = [
            WitnessStep(
                step.transition.trigger,
                step.transition.by,
                step.transition.cue,
                step.missed,
                actual,
                pick(actual, believed),
                believed_set=self.ordered(believed),
            )
            for step, (actual, believed) in trail
        ]
        if refused is not None:
            actual, believed = state
            steps.append(
                WitnessStep(
                    refused,
                    "human",
                    "",
                    False,
                    actual,
                    pick(actual, believed),
                    refused=True,
                    believed_set=self.ordered(believed),
                )
            )
        return tuple(steps)

    def machine_path(self, mode: str) -> tuple[Transition, ...]:
        """The shortest sequence of transitions from the initial mode to ``mode``."""
        steps: list[Transition] = []
        while (parent := self.machine_parents[mode]) is not None:
            mode, transition = parent
            steps.append(transition)
        return tuple(reversed(steps))


def _outgoing(modes: ModeMap) -> dict[str, list[Transition]]:
    """Transitions from each mode in file order (``"from": "*"`` spelt out), leaving out
    ones naming unknown modes, and with each action of the person accepted without
    effect where its effect already holds: a trigger whose transitions all lead to one
    mode is accepted in that mode itself, leaving it there (methods document,
    ``#mode-check``)."""
    out: dict[str, list[Transition]] = {mode.id: [] for mode in modes.states}
    for transition in modes.expanded:
        if transition.source in out and transition.target in out:
            out[transition.source].append(transition)
    targets: dict[str, dict[str, Transition]] = {}
    for transitions in out.values():
        for transition in transitions:
            if transition.by == "human":
                targets.setdefault(transition.trigger, {}).setdefault(
                    transition.target, transition
                )
    # Each mode's own actions, gathered once: a map of many triggers stays linear.
    offered = {
        mode_id: {t.trigger for t in transitions if t.by == "human"}
        for mode_id, transitions in out.items()
    }
    for trigger, leading in targets.items():
        if len(leading) != 1:
            continue
        ((target, example),) = leading.items()
        if trigger not in offered[target]:
            out[target].append(replace(example, source=target, per_day=None))
    return out


def _actions(out: dict[str, list[Transition]]) -> dict[str, dict[str, list[str]]]:
    """Per mode, each action of the person and the modes it leads to (file order)."""
    actions: dict[str, dict[str, list[str]]] = {}
    for mode_id, transitions in out.items():
        table: dict[str, list[str]] = {}
        for transition in transitions:
            if transition.by == "human":
                targets = table.setdefault(transition.trigger, [])
                if transition.target not in targets:
                    targets.append(transition.target)
        actions[mode_id] = table
    return actions


def _look_alike(modes: ModeMap) -> dict[str, Belief]:
    """Per mode, the modes that show the same indication (itself alone when its
    indication is blank or its own): what the person believes after noticing a change
    into it."""
    shown: dict[str, list[str]] = {}
    for mode in modes.states:
        key = (mode.indication or "").strip().casefold()
        if key:
            shown.setdefault(key, []).append(mode.id)
    result = {}
    for mode in modes.states:
        key = (mode.indication or "").strip().casefold()
        result[mode.id] = frozenset(shown[key]) if key else frozenset({mode.id})
    return result


class _Person:
    """The person's model: what they believe after each event, as a set of modes."""

    def __init__(self, modes: ModeMap, out, actions):
        self.actions = actions
        self.looks = _look_alike(modes)
        self._images: dict[tuple[Belief, str], Belief] = {}
        self._offers: dict[Belief, tuple[str, ...]] = {}
        self._offered: dict[Belief, frozenset[str]] = {}
        self.order = {mode.id: i for i, mode in enumerate(modes.states)}

    def offers(self, belief: Belief) -> tuple[str, ...]:
        """The actions any mode of the set accepts, in map order."""
        if belief not in self._offers:
            triggers: dict[str, None] = {}
            for mode_id in self.ordered(belief):
                triggers.update(dict.fromkeys(self.actions[mode_id]))
            self._offers[belief] = tuple(triggers)
        return self._offers[belief]

    def accepts(self, belief: Belief, trigger: str) -> bool:
        """Whether some mode of the set accepts the action (a set, so a map of many
        actions stays linear)."""
        if belief not in self._offered:
            self._offered[belief] = frozenset(self.offers(belief))
        return trigger in self._offered[belief]

    def image(self, belief: Belief, trigger: str) -> Belief:
        """Where the person believes their action leads: the image of the set."""
        key = (belief, trigger)
        if key not in self._images:
            self._images[key] = frozenset(
                target for mode_id in belief for target in self.actions[mode_id].get(trigger, ())
            )
        return self._images[key]

    def ordered(self, belief: Belief) -> tuple[str, ...]:
        return tuple(sorted(belief, key=self.order.__getitem__))


def _successors(
    state: State,
    out: dict[str, list[Transition]],
    person: _Person,
    allow_missed_display: bool,
):
    """The steps out of a composed state and the states they lead to."""
    actual, believed = state
    for transition in out[actual]:
        if transition.by == "human":
            if person.accepts(believed, transition.trigger):
                yield (
                    Step(transition, False),
                    (
                        transition.target,
                        person.image(believed, transition.trigger),
                    ),
                )
        elif transition.cue in NOTICED:
            yield Step(transition, False), (transition.target, person.looks[transition.target])
        elif transition.cue in MISSABLE:
            yield Step(transition, False), (transition.target, person.looks[transition.target])
            if allow_missed_display:
                yield Step(transition, True), (transition.target, believed)
        else:
            yield Step(transition, True), (transition.target, believed)


@dataclass(frozen=True)
class SearchSize:
    """The most the check of a mode map may have to search, counted from the map before
    the search: ``beliefs`` the sets of modes the person can believe (every set the
    person's model alone can reach, :func:`mode_search_size`; at least this many when
    ``complete`` is false, the count having stopped past a limit), ``states`` pairs of
    actual mode and belief (modes x beliefs) and ``steps``, for every belief, every
    transition with each way it can go."""

    modes: int
    transitions: int
    states: int
    steps: int
    beliefs: int = 0
    complete: bool = True
    #: Pairs of modes with the same indication, each compared for shared indications.
    pairs: int = 0

    @property
    def over(self) -> bool:
        """Over ``MODE_STATES_MAX`` (states, or pairs of look-alike modes) or
        ``MODE_STEPS_MAX``."""
        return max(self.states, self.pairs) > MODE_STATES_MAX or self.steps > MODE_STEPS_MAX

    def refusal(self) -> str:
        """Why the map is too large to check, naming the sizes and the limits."""
        least = "" if self.complete else "at least "
        return (
            f"the mode map has {self.modes:,} modes and {self.transitions:,} transitions, "
            f"and the person can hold {least}{self.beliefs:,} different beliefs about the "
            f"mode (sets of modes they cannot tell apart): its check would search "
            f"{least}{self.states:,} states (modes x beliefs, at least modes x modes; the "
            "limit is "
            f"{MODE_STATES_MAX:,}, MODE_STATES_MAX) and take {least}{self.steps:,} steps "
            f"(every transition from every belief, each way it can go; the limit is "
            f"{MODE_STEPS_MAX:,}, MODE_STEPS_MAX)"
            + (
                f", and compare {self.pairs:,} pairs of modes with the same indication "
                f"(the limit is {MODE_STATES_MAX:,}, MODE_STATES_MAX)"
                if self.pairs > MODE_STATES_MAX
                else ""
            )
            + ". Split the map, or merge modes that differ in nothing the person must know"
        )


def mode_search_size(modes: ModeMap) -> SearchSize:
    """The most states and steps :func:`explore` and the findings may take for a map.

    The beliefs are counted first, on the person's model alone: the initial mode, the
    set of look-alike modes of every mode a shown change leads into, and every image of
    a belief under an action it offers, until no new set appears. The composed search
    reaches no other belief, so ``modes x beliefs`` bounds its states; the count is
    at least ``modes x modes``, which bounds the pairs of modes compared for shared
    indications (and the mode shares' matrices) as before. From a state
    each transition out of the actual mode gives one step (an action of the person, an
    alert, a change with no cue) or two (a change shown only passively: noticed or
    missed), so ``beliefs x`` the ways of all transitions bounds its steps. The count of
    beliefs stops as soon as either bound passes its limit, so it costs no more than
    the search it guards (the size is then marked incomplete).

    Parameters
    ----------
    modes : ModeMap

    Returns
    -------
    SearchSize
    """
    count = len(modes.states)
    out = _outgoing(modes)
    ways = sum(
        2 if t.by != "human" and t.cue in MISSABLE else 1 for moves in out.values() for t in moves
    )
    shown: dict[str, int] = {}
    for mode in modes.states:
        key = (mode.indication or "").strip().casefold()
        if key:
            shown[key] = shown.get(key, 0) + 1
    pairs = sum(k * (k - 1) // 2 for k in shown.values())
    if modes.initial not in out:
        return SearchSize(count, len(modes.transitions), count * count, ways, 1, True, pairs)
    person = _Person(modes, out, _actions(out))
    start: list[Belief] = [frozenset({modes.initial})]
    start += [
        person.looks[t.target]
        for moves in out.values()
        for t in moves
        if t.by != "human" and t.cue != "none"
    ]
    seen = set(start)
    queue = deque(dict.fromkeys(start))
    complete = True
    while queue:
        if max(len(seen), count) * count > MODE_STATES_MAX or len(seen) * ways > MODE_STEPS_MAX:
            complete = False
            break
        belief = queue.popleft()
        for trigger in person.offers(belief):
            image = person.image(belief, trigger)
            if image not in seen:
                seen.add(image)
                queue.append(image)
    beliefs = len(seen)
    # The pairs of modes (compared for shared indications; the mode shares' matrices)
    # stay bounded as modes x modes, so the states count at least that many.
    return SearchSize(
        count,
        len(modes.transitions),
        count * max(count, beliefs),
        beliefs * ways,
        beliefs,
        complete,
        pairs,
    )


def _search(initial: State, out, person: _Person, allow_missed_display: bool):
    parents: dict[State, tuple[State, Step] | None] = {initial: None}
    queue = deque([initial])
    while queue:
        state = queue.popleft()
        for step, following in _successors(state, out, person, allow_missed_display):
            if following not in parents:
                parents[following] = (state, step)
                queue.append(following)
    return parents


def explore(modes: ModeMap) -> Exploration:
    """Search the composition of a mode map with the person's model breadth-first.

    Parameters
    ----------
    modes : ModeMap
        The machine; its initial mode must be one of its modes.

    Returns
    -------
    Exploration
        Its states are pairs of the actual mode and the belief, a frozenset of modes.
    """
    out = _outgoing(modes)
    person = _Person(modes, out, _actions(out))
    initial = (modes.initial, frozenset({modes.initial}))
    machine: dict[str, tuple[str, Transition] | None] = {modes.initial: None}
    queue = deque([modes.initial])
    while queue:
        mode = queue.popleft()
        for transition in out[mode]:
            if transition.target not in machine:
                machine[transition.target] = (mode, transition)
                queue.append(transition.target)
    return Exploration(
        initial,
        _search(initial, out, person, True),
        _search(initial, out, person, False),
        machine,
        person.ordered,
    )


def _replayed(
    initial: str, transitions, person: _Person, pick: Callable[[str, Belief], str]
) -> tuple[WitnessStep, ...]:
    """A sequence of the machine's transitions with the person's belief after each: they
    notice every change that is shown and miss those with no cue, and after their own
    action believe where their model says it leads, or where it did lead when their model
    does not offer it (module docstring)."""
    believed: Belief = frozenset({initial})
    steps = []
    for t in transitions:
        missed = t.by != "human" and t.cue not in NOTICED | MISSABLE
        if t.by == "human":
            image = person.image(believed, t.trigger)
            believed = image or frozenset({t.target})
        elif not missed:
            believed = person.looks[t.target]
        steps.append(
            WitnessStep(
                t.trigger,
                t.by,
                t.cue,
                missed,
                t.target,
                pick(t.target, believed),
                believed_set=person.ordered(believed),
            )
        )
    return tuple(steps)


def error_state_tasks(findings: list[Finding]) -> frozenset[str]:
    """The tasks whose holder is in question in some error state."""
    return frozenset(task for f in findings if f.kind == "error_state" for task in f.tasks)


class _Checker:
    """The holders of every mode and the words of the findings for one plan."""

    def __init__(self, study: Study, plan: Plan, modes: ModeMap, assumptions: dict[str, Any]):
        self.study = study
        self.plan = plan
        self.modes = modes
        self.critical = int(resolve_policy(study.risk_policy)["critical_severity"])
        self.leaves = [task.id for task in study.leaves]
        leaf_set = set(self.leaves)
        # Only overridden tasks can differ between modes; the rest hold the plan's holder,
        # made as a question needs it (most tasks are never asked about).
        self.assumptions = assumptions
        self.base: dict[str, tuple[str | None, bool]] = {}
        self.overridden: dict[str, dict[str, tuple[str | None, bool]]] = {
            mode.id: {
                task_id: self._holder(task_id, mode.id, assumptions)
                for task_id in (mode.overrides or {})
                if task_id in leaf_set
            }
            for mode in self.modes.states
        }
        self._differences: dict[tuple[str, str], tuple[str, ...]] = {}
        self._holders: dict[Belief, dict[str, set[str | None]]] = {}

    def _holder(self, task_id: str, mode: str | None, assumptions) -> tuple[str | None, bool]:
        """The principal holder of a task in a mode, and whether the task applies."""
        assignment = assignment_in_mode(self.plan, mode, task_id)
        involved = involvement(self.study, self.study.task(task_id), assignment, assumptions)
        return involved.principal, involved.applies

    def holder(self, mode: str, task_id: str) -> tuple[str | None, bool]:
        held = self.overridden[mode].get(task_id)
        return held if held is not None else self.base_holder(task_id)

    def base_holder(self, task_id: str) -> tuple[str | None, bool]:
        """The plan's own holder of a task, and whether it applies."""
        if task_id not in self.base:
            self.base[task_id] = self._holder(task_id, None, self.assumptions)
        return self.base[task_id]

    def differences(self, first: str, second: str) -> tuple[str, ...]:
        """Tasks held differently in two modes, in task-file order."""
        key = (first, second) if first <= second else (second, first)
        if key not in self._differences:
            touched = set(self.overridden[first]) | set(self.overridden[second])
            self._differences[key] = tuple(
                task_id
                for task_id in self.leaves
                if task_id in touched
                and self.holder(first, task_id)[0] != self.holder(second, task_id)[0]
            )
        return self._differences[key]

    def believed_differences(self, actual: str, believed: Belief) -> tuple[str, ...]:
        """Tasks some mode of the belief holds differently from the actual mode."""
        if len(believed) == 1:
            (mode_id,) = believed
            return self.differences(actual, mode_id)
        # Per belief once, the holders its modes give each task some mode overrides, so
        # each state costs one pass over those tasks, not one per believed mode.
        if believed not in self._holders:
            holders: dict[str, set[str | None]] = {}
            for mode_id in believed:
                for task_id in self.overridden[mode_id]:
                    holders.setdefault(task_id, set())
            for task_id, found in holders.items():
                found.update(self.holder(mode_id, task_id)[0] for mode_id in believed)
            self._holders[believed] = holders
        holders = self._holders[believed]
        touched = set(holders) | set(self.overridden[actual])
        differing = set()
        for task_id in touched:
            here = self.holder(actual, task_id)[0]
            there = holders.get(task_id, {self.base_holder(task_id)[0]})
            if there != {here}:
                differing.add(task_id)
        return tuple(task_id for task_id in self.leaves if task_id in differing)

    def pick(self, actual: str, believed: Belief) -> str:
        """The mode of a belief to show alone: the first (map order) that disagrees with
        the actual mode on a holder, else the actual mode if believed, else the first."""
        ordered = [mode.id for mode in self.modes.states if mode.id in believed]
        for mode_id in ordered:
            if self.differences(actual, mode_id):
                return mode_id
        return actual if actual in believed else ordered[0]

    def ordered(self, believed: Belief) -> tuple[str, ...]:
        return tuple(mode.id for mode in self.modes.states if mode.id in believed)

    def belief_name(self, believed: Belief) -> str:
        """A belief in words: its modes joined by "or" (methods document)."""
        return " or ".join(self.mode_name(mode_id) for mode_id in self.ordered(believed))

    def severity(self, tasks) -> int:
        return max((self.study.task(task_id).severity or 1 for task_id in tasks), default=1)

    # -- words ------------------------------------------------------------------------

    def mode_name(self, mode_id: str) -> str:
        return self.modes.by_id[mode_id].name

    def holder_name(self, mode: str, task_id: str) -> str:
        principal, applies = self.holder(mode, task_id)
        if not applies or principal is None:
            return "nobody (it is not done)"
        agent = self.study.agents_by_id.get(principal)
        return agent.name if agent else principal

    def task_label(self, task_id: str) -> str:
        return f"{task_id} ({self.study.task(task_id).title})"

    def tasks_text(self, tasks) -> str:
        """Tasks in words: the first few with their titles, the rest by id."""
        named = [self.task_label(task_id) for task_id in tasks[:_NAMED]]
        rest = list(tasks[_NAMED:])
        if rest:
            return f"{', '.join(named)} and {len(rest)} more ({', '.join(rest)})"
        return named[0] if len(named) == 1 else f"{', '.join(named[:-1])} and {named[-1]}"

    def holders_text(self, tasks, first: str, second: str | Belief) -> str:
        """Who holds the tasks in two modes (or a mode and a belief, the holders in its
        modes joined by "or"), tasks with the same holders together."""
        seconds = (second,) if isinstance(second, str) else self.ordered(second)
        where = " or ".join(self.mode_name(mode_id) for mode_id in seconds)
        groups: dict[tuple[str, str], list[str]] = {}
        for task_id in tasks:
            names = dict.fromkeys(self.holder_name(mode_id, task_id) for mode_id in seconds)
            key = (self.holder_name(first, task_id), " or ".join(names))
            groups.setdefault(key, []).append(task_id)
        return "; ".join(
            f"{self.tasks_text(group)} {'is' if len(group) == 1 else 'are'} held by "
            f"{in_first} in {self.mode_name(first)} and by {in_second} in {where}"
            for (in_first, in_second), group in groups.items()
        )

    @staticmethod
    def path_text(steps) -> str:
        """A composed path in words, marking the changes the person may miss."""
        parts = []
        for step in steps:
            text = f"'{step.transition.trigger}'"
            if step.missed:
                text += f" ({_MISSED_WORDS.get(step.transition.cue, 'not noticed')})"
            parts.append(text)
        return _after(parts)

    @staticmethod
    def machine_path_text(transitions) -> str:
        """A path of the machine alone in words."""
        return _after([f"'{t.trigger}'" for t in transitions])


def _after(parts: list[str]) -> str:
    return "After " + ", then ".join(parts) if parts else "From the start"


def verify_mode_map(study: Study, plan: Plan, assumptions: dict[str, Any]) -> list[Finding]:
    """The mode-map findings of one plan, see the module docstring.

    Parameters
    ----------
    study : Study
        A valid study.
    plan : Plan
        One of its plans; a plan without a mode map (or whose initial mode is not one of
        its modes) has no findings.
    assumptions : dict
        The resolved assumptions (for the holders, through :func:`.involvement`).

    Returns
    -------
    list of Finding
        Grouped by kind in the order of the module docstring; within a kind in the order
        of the file (modes, transitions) and of the breadth-first search. A map over the
        search's limits (:func:`mode_search_size`) is not searched: its one finding,
        ``mode_map_unchecked``, says why.
    """
    modes = plan.modes
    if modes is None or modes.initial not in modes.by_id:
        return []
    size = mode_search_size(modes)
    if size.over:
        # The study checks refuse such a map; a map that reaches here all the same is
        # not searched, and says so.
        return [
            Finding(
                "mode_map_unchecked",
                3,
                f"Not checked: {size.refusal()}.",
                (),
                (modes.initial,),
            )
        ]
    check = _Checker(study, plan, modes, assumptions)
    found = explore(modes)
    out = _outgoing(modes)
    actions = _actions(out)
    person = _Person(modes, out, actions)
    findings: list[Finding] = []
    findings += _uncued_changes(check, modes, found, person)
    findings += _ambiguous_indications(check, modes, actions)
    findings += _error_states(check, found)
    findings += _unforeseen_transitions(check, modes, found, person)
    findings += _refused_actions(check, found, person, actions)
    findings += _unreachable_modes(check, modes, found)
    findings += _unheld_tasks(check, modes, found, person)
    findings += _no_way_back(check, modes, found, out, person)
    return findings


def _uncued_changes(
    check: _Checker, modes: ModeMap, found: Exploration, person: _Person
) -> list[Finding]:
    findings = []
    for t in modes.expanded:
        if t.by == "human" or t.cue != "none" or t.source not in modes.by_id:
            continue
        if t.target not in modes.by_id:
            continue
        tasks = check.differences(t.source, t.target)
        if not tasks:
            continue
        # The change is a finding wherever it sits; an unreachable one has no witness.
        before = found.machine_path(t.source) if t.source in found.machine_parents else None
        witness = (
            () if before is None else _replayed(modes.initial, (*before, t), person, check.pick)
        )
        findings.append(
            Finding(
                "uncued_change",
                check.severity(tasks),
                f"'{t.trigger}' changes the mode from {check.mode_name(t.source)} to "
                f"{check.mode_name(t.target)} without any cue, and it changes who holds "
                f"work: {check.holders_text(tasks, t.source, t.target)}.",
                tasks,
                (t.source, t.target),
                tuple(step.event for step in witness) or (t.trigger,),
                witness=witness,
            )
        )
    return findings


def _ambiguous_indications(check: _Checker, modes: ModeMap, actions) -> list[Finding]:
    findings = []
    states = modes.states
    for i, first in enumerate(states):
        shown = (first.indication or "").strip()
        if not shown:
            continue
        for second in states[i + 1 :]:
            if (second.indication or "").strip().casefold() != shown.casefold():
                continue
            tasks = check.differences(first.id, second.id)
            triggers = [
                trigger
                for trigger in dict.fromkeys([*actions[first.id], *actions[second.id]])
                if actions[first.id].get(trigger, []) != actions[second.id].get(trigger, [])
            ]
            if not tasks and not triggers:
                continue
            reasons = []
            if tasks:
                reasons.append(check.holders_text(tasks, first.id, second.id))
            for trigger in triggers:
                reasons.append(
                    f"'{trigger}' leads to "
                    f"{_targets_text(check, actions[first.id].get(trigger, []))} from "
                    f"{first.name} but to "
                    f"{_targets_text(check, actions[second.id].get(trigger, []))} from "
                    f"{second.name}"
                )
            findings.append(
                Finding(
                    "ambiguous_indication",
                    check.severity(tasks),
                    f"{first.name} and {second.name} both show '{shown}', so the person "
                    f"cannot tell them apart, yet they differ: {'; '.join(reasons)}.",
                    tasks,
                    (first.id, second.id),
                    tuple(triggers),
                )
            )
    return findings


def _targets_text(check: _Checker, targets: list[str]) -> str:
    if not targets:
        return "nothing (the action is not accepted)"
    return " or ".join(check.mode_name(target) for target in targets)


def _dependence(depends: bool) -> str:
    return (
        " This depends on a change shown only passively going unnoticed."
        if depends
        else " No unnoticed display change is needed for this."
    )


def _error_states(check: _Checker, found: Exploration) -> list[Finding]:
    findings = []
    for state in found.states:
        actual, believed = state
        tasks = check.believed_differences(actual, believed)
        if not tasks:
            continue
        steps, depends = found.path(state)
        findings.append(
            Finding(
                "error_state",
                check.severity(tasks),
                f"{check.path_text(steps)}, the person can believe the device is in "
                f"{check.belief_name(believed)} while it is in {check.mode_name(actual)}: "
                f"{check.holders_text(tasks, actual, believed)}.{_dependence(depends)}",
                tasks,
                (actual, *check.ordered(believed)),
                tuple(step.transition.trigger for step in steps),
                witness=found.witness(state, check.pick),
            )
        )
    return findings


def _unforeseen_transitions(
    check: _Checker, modes: ModeMap, found: Exploration, person: _Person
) -> list[Finding]:
    findings = []
    for t in modes.expanded:
        if t.by == "human" or t.cue != "none" or t.source not in found.machine_parents:
            continue
        if t.target not in modes.by_id or t.source == t.target:
            continue
        before = found.machine_path(t.source)
        tasks = check.differences(t.source, t.target)
        effect = (
            f"; it changes who holds work: {check.holders_text(tasks, t.source, t.target)}"
            if tasks
            else "; no task changes hands, but the person's picture of the mode is now wrong"
        )
        reach = check.machine_path_text(before)
        findings.append(
            Finding(
                "unforeseen_transition",
                check.severity(tasks),
                f"{reach}, the device is in {check.mode_name(t.source)} and can move to "
                f"{check.mode_name(t.target)} on '{t.trigger}' with no cue, so the "
                f"person's picture does not follow it{effect}.",
                tasks,
                (t.source, t.target),
                (*(step.trigger for step in before), t.trigger),
                witness=_replayed(modes.initial, (*before, t), person, check.pick),
            )
        )
    return findings


def _refused_actions(
    check: _Checker, found: Exploration, person: _Person, actions
) -> list[Finding]:
    findings = []
    for state in found.states:
        actual, believed = state
        for trigger in person.offers(believed):
            if trigger in actions[actual]:
                continue
            steps, depends = found.path(state)
            tasks = check.believed_differences(actual, believed)
            findings.append(
                Finding(
                    "refused_action",
                    check.severity(tasks),
                    f"{check.path_text(steps)}, the person can believe the device is in "
                    f"{check.belief_name(believed)} and try '{trigger}', which the device, "
                    f"in {check.mode_name(actual)}, does not accept.{_dependence(depends)}",
                    tasks,
                    (actual, *check.ordered(believed)),
                    (*(step.transition.trigger for step in steps), trigger),
                    witness=found.witness(state, check.pick, refused=trigger),
                )
            )
    return findings


def _unreachable_modes(check: _Checker, modes: ModeMap, found: Exploration) -> list[Finding]:
    return [
        Finding(
            "unreachable_mode",
            1,
            f"{mode.name} cannot be reached from {check.mode_name(modes.initial)} by any "
            "sequence of transitions: either a transition into it is missing or the mode "
            "is not needed.",
            (),
            (mode.id,),
        )
        for mode in modes.states
        if mode.id not in found.machine_parents
    ]


def _critical_tasks(check: _Checker, modes: ModeMap) -> list[str]:
    """The leaf tasks at or above the critical severity that some mode of the map gives
    to a person (the others are the plan's allocation decision; module docstring)."""
    return [
        task_id
        for task_id in check.leaves
        if (check.study.task(task_id).severity or 0) >= check.critical
        and any(_person_holds(check, mode.id, task_id) for mode in modes.states)
    ]


def _person_holds(check: _Checker, mode_id: str, task_id: str) -> bool:
    """Whether a person principally holds the task in the mode (not when it is not done)."""
    principal, applies = check.holder(mode_id, task_id)
    agent = check.study.agents_by_id.get(principal or "")
    return applies and agent is not None and agent.is_human


def _unheld_tasks(
    check: _Checker, modes: ModeMap, found: Exploration, person: _Person
) -> list[Finding]:
    # Tasks at or above the critical severity that some mode has done (by anyone): one
    # the plan leaves undone in every mode is the plan's decision, not the map's.
    critical = [
        task_id
        for task_id in check.leaves
        if (check.study.task(task_id).severity or 0) >= check.critical
        and any(check.holder(mode.id, task_id)[1] for mode in modes.states)
    ]
    findings = []
    for mode in modes.states:
        tasks = tuple(
            task_id
            for task_id in critical
            if not check.holder(mode.id, task_id)[1] or check.holder(mode.id, task_id)[0] is None
        )
        if not tasks:
            continue
        reachable = mode.id in found.machine_parents
        before = found.machine_path(mode.id) if reachable else ()
        where = (
            f"{check.machine_path_text(before)}, the device is in {mode.name}"
            if reachable
            else f"In {mode.name} (not reachable from the initial mode)"
        )
        findings.append(
            Finding(
                "unheld_task",
                check.severity(tasks),
                f"{where}, where nobody holds {check.tasks_text(tasks)}: "
                f"{'it is' if len(tasks) == 1 else 'they are'} not done in this mode, "
                f"although of severity {check.critical} or more (the critical severity of "
                "the study's risk policy).",
                tasks,
                (mode.id,),
                tuple(t.trigger for t in before),
                witness=_replayed(modes.initial, before, person, check.pick) if reachable else (),
            )
        )
    return findings


def _no_way_back(
    check: _Checker, modes: ModeMap, found: Exploration, out, person: _Person
) -> list[Finding]:
    # Only the critical tasks the map gives to a person in some mode (module docstring);
    # a mode where one is not done lacks it as much as one where the device holds it.
    critical = _critical_tasks(check, modes)
    if not critical:
        return []
    lacks = {
        mode.id: [task_id for task_id in critical if not _person_holds(check, mode.id, task_id)]
        for mode in modes.states
    }
    good = [mode_id for mode_id, tasks in lacks.items() if not tasks]
    reachable = [mode.id for mode in modes.states if mode.id in found.machine_parents]
    severities = f"severity {check.critical} or more"
    if not good:
        tasks = tuple(dict.fromkeys(t for m in reachable for t in lacks[m]))
        return [
            Finding(
                "no_way_back",
                check.severity(tasks),
                f"No mode lets a person hold all the safety-critical tasks ({severities}) "
                "that some mode gives them: "
                f"{check.tasks_text(tasks)}; the person can never "
                "take all of these over at once.",
                tasks,
                tuple(reachable),
            )
        ]
    # Modes that can reach a good mode: search backwards from the good ones.
    into: dict[str, list[str]] = {mode.id: [] for mode in modes.states}
    for source, transitions in out.items():
        for t in transitions:
            into[t.target].append(source)
    back = set(good)
    queue = deque(good)
    while queue:
        mode_id = queue.popleft()
        for source in into[mode_id]:
            if source not in back:
                back.add(source)
                queue.append(source)
    findings = []
    for mode_id in reachable:
        if mode_id in back:
            continue
        before = found.machine_path(mode_id)
        tasks = tuple(lacks[mode_id])
        reach = check.machine_path_text(before)
        findings.append(
            Finding(
                "no_way_back",
                check.severity(tasks),
                f"{reach}, the device is in {check.mode_name(mode_id)}, and from there no "
                "mode can be reached in which a person holds every safety-critical task "
                f"({severities}); here no person holds {check.tasks_text(tasks)}.",
                tasks,
                (mode_id,),
                tuple(t.trigger for t in before),
                witness=_replayed(modes.initial, before, person, check.pick),
            )
        )
    return findings


@dataclass(frozen=True)
class Moment:
    """One moment of a witness played step by step: the event that led here (``None`` at
    the start), the mode the device is in, the mode the person believes (``believed``,
    one of the set ``believed_set`` of modes they cannot tell apart; see
    :class:`.WitnessStep`), and for each task worth showing who holds it in the actual
    mode and who in the believed modes (agent ids, each holder once, in the set's order;
    ``None`` when it is not done)."""

    step: WitnessStep | None
    actual: str
    believed: str
    holders: tuple[tuple[str, str | None, tuple[str | None, ...]], ...]
    believed_set: tuple[str, ...] = ()

    @property
    def confused(self) -> bool:
        """The person's picture disagrees with the device on who holds some task."""
        return any(believed != (actual,) for _, actual, believed in self.holders)


def walkthrough(
    study: Study, plan: Plan, assumptions: dict[str, Any], finding: Finding
) -> list[Moment]:
    """A mode-map finding's witness as moments, from the initial mode on.

    At every moment the tasks shown are the finding's own and any other task whose
    holder differs between the actual mode and some believed mode then, in task-file
    order.

    Parameters
    ----------
    study, plan : Study, Plan
        The study and the plan the finding is about (the plan has a mode map).
    assumptions : dict
        The resolved assumptions (for the holders).
    finding : Finding
        One of :func:`verify_mode_map`'s findings for this plan.

    Returns
    -------
    list of Moment
        Empty when the finding has no witness.
    """
    if not finding.witness or plan.modes is None:
        return []
    if finding.kind == "silent_failure":
        return _failure_moments(finding)
    check = _Checker(study, plan, plan.modes, assumptions)
    own = set(finding.tasks)

    def moment(step: WitnessStep | None, actual: str, believed: tuple[str, ...]) -> Moment:
        differing = set(check.believed_differences(actual, frozenset(believed)))
        holders = tuple(
            (
                task_id,
                _applied(check.holder(actual, task_id)),
                tuple(
                    dict.fromkeys(_applied(check.holder(mode_id, task_id)) for mode_id in believed)
                ),
            )
            for task_id in check.leaves
            if task_id in own or task_id in differing
        )
        shown = step.believed if step is not None else actual
        return Moment(step, actual, shown, holders, believed)

    initial = plan.modes.initial
    moments = [moment(None, initial, (initial,))]
    moments += [moment(step, step.actual, step.believed_set) for step in finding.witness]
    return moments


def _failure_moments(finding: Finding) -> list[Moment]:
    """A failure nobody is told of, as moments: the device holds the task in its mode;
    it fails, the fallback person now holds it, and the person still believes the device
    does (methods document, #finding-silent-failure)."""
    step = finding.witness[0]
    task, device, fallback = finding.tasks[0], finding.agents[0], finding.agents[-1]
    mode = step.actual
    return [
        Moment(None, mode, mode, ((task, device, (device,)),), (mode,)),
        Moment(step, mode, mode, ((task, fallback, (device,)),), (mode,)),
    ]


def _applied(holder: tuple[str | None, bool]) -> str | None:
    principal, applies = holder
    return principal if applies else None
