"""Everything the day simulation needs of one plan, as NumPy tables built once.

A *variant* is one task under the assignment in force in one mode (a task no mode
overrides has one variant for all modes). Occurrences carry their variant's index, so
that person time, stages and demands are looked up for thousands of occurrences at once.
The plan's analysis supplies what both the analytic figures and the simulation must
agree on: the triggers and their chains, each task's initiator, the involvement of each
task in each mode.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..analysis.chains import Span
from ..analysis.duty import off_duty_pieces
from ..analysis.escalation import keeper_involvement
from ..analysis.involvement import Involvement, involvement
from ..analysis.modes import assignment_in_mode
from ..analysis.occurrences import TriggerTiming, rate_and_timing
from ..analysis.plan import PlanAnalysis, StudyGraph, is_interruption, own_involvement
from ..analysis.reliability import failed_involvement, failure_chance, false_alert_receiver
from ..analysis.timeofday import DAY_S, asleep_intervals, awake_intervals, rule_sleeper
from ..graph import trigger_rule
from ..model import Study, seconds_of_day
from ..vocabulary import CHANNELS, STAGES

__all__ = ["ChainPlan", "SimPlan", "TriggerRule", "build_sim_plan"]

#: The most days before a chunk whose chains it draws (chains longer than this lose the
#: work they would carry into a chunk's first days).
MAX_LEAD_DAYS = 30
#: Segment kinds: the four stages, then supervision and monitoring.
KINDS = (*STAGES, "supervision", "monitoring")
INITIATORS = ("human", "automation", "event", "schedule")


@dataclass(frozen=True)
class TriggerRule:
    """How a trigger happens in a day: exactly one of its ways is set."""

    times: tuple[float, ...] | None
    jitter_s: float
    per_day: float | None
    pieces: tuple[tuple[float, float, float], ...]
    every_days: float | None


@dataclass
class ChainPlan:
    """One trigger's chain: members in order, roots, predecessors with lag and link
    probability (indices into the member list)."""

    trigger_id: str
    name: str
    from_event: bool
    rule: TriggerRule
    members: list[int]
    root_probability: dict[int, float]
    predecessors: dict[int, list[tuple[int, float, float, float]]]
    windowed: list[int]


@dataclass
class SimPlan:
    """The plan's tables for the simulation (see the module docstring)."""

    study: Study
    plan_id: str
    assumptions: dict[str, Any]
    task_ids: list[str]
    humans: list[str]
    agents: list[str]
    modes: list[str]
    initial_mode: int
    rates: np.ndarray  # modes x modes, per day, while in the row's mode
    variant_of: np.ndarray  # tasks x modes -> variant
    variant_task: np.ndarray
    duration: np.ndarray  # variants x 3 (low, typical, high)
    stage_share: np.ndarray  # variants x 4: share of the duration the person works
    stage_offset: np.ndarray  # variants x 4: where each stage starts, share of duration
    supervision_s: np.ndarray
    monitoring_s: np.ndarray
    human: np.ndarray  # human index or -1
    monitor: np.ndarray
    holder: np.ndarray  # agent index or -1
    interacts: np.ndarray  # variants x humans: an occurrence is an interaction of theirs
    interrupts: np.ndarray  # variants x humans: ... and one they did not start
    watch_s: np.ndarray  # variants: the monitor's seconds per occurrence (each, continuous)
    watch_share: np.ndarray  # variants: continuous monitoring's share of attention
    initiator: np.ndarray  # tasks: index into INITIATORS
    demands: np.ndarray  # tasks x channels
    supervision_demand: np.ndarray
    monitoring_demand: np.ndarray
    latency_awake: np.ndarray  # agents x 3
    latency_asleep: np.ndarray
    asleep: list[list[tuple[float, float]]]  # per agent (empty for automations)
    window_s: np.ndarray  # tasks, nan without
    #: Variants: the chance an occurrence fails, the variant a failure turns it into
    #: (-1: none), and whether the variant is such a failure (methods document,
    #: #reliability).
    fail_chance: np.ndarray = field(default_factory=lambda: np.zeros(0))
    fail_variant: np.ndarray = field(default_factory=lambda: np.zeros(0, int))
    is_failure: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    #: Variants whose people are asked in turn: (the agents asked, seconds each has,
    #: the variant of each keeping the task); and whether a variant is kept by a person
    #: asked after the first (methods document, #escalation).
    escalation: dict[int, tuple[np.ndarray, float, np.ndarray]] = field(default_factory=dict)
    is_escalated: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))
    chains: list[ChainPlan] = field(default_factory=list)
    #: The modes that keep time (methods document, #mode-share): the long-run
    #: distribution at midnight, each fixed time's move (mode -> mode, -1 for none), each
    #: event's move, and the rules of the events that move the mode but start no chain.
    at_midnight: np.ndarray = field(default_factory=lambda: np.ones(1))
    mode_impulses: list[tuple[float, np.ndarray]] = field(default_factory=list)
    mode_moves: dict[str, np.ndarray] = field(default_factory=dict)
    mode_event_rules: dict[str, TriggerRule] = field(default_factory=dict)
    #: Periodic looks and exception flags: (task, human, per day, seconds each, interrupts).
    looks: list[tuple[int, int, float, float, bool]] = field(default_factory=list)
    #: Per agent: off-duty stretches (from, to, next duty start); empty without hours.
    off_duty: list[list[tuple[float, float, float]]] = field(default_factory=list)
    lead_days: int = 0
    bin_s: float = 900.0
    occupancy_limit: float = 0.8
    channel_limit: float = 7.0

    def __post_init__(self) -> None:
        #: Per agent: whether it ever takes time to respond; the agents who sleep.
        self.latency_any = (self.latency_awake.max(axis=1) > 0) | (
            self.latency_asleep.max(axis=1) > 0
        )
        self.sleepers = [a for a, pieces in enumerate(self.asleep) if pieces]
        self.demands_by_channel = np.ascontiguousarray(self.demands.T)

    @property
    def human_asleep(self) -> list[list[tuple[float, float]]]:
        return [self.asleep[self.agents.index(h)] for h in self.humans]

    @property
    def human_off_duty(self) -> list[list[tuple[float, float, float]]]:
        if not self.off_duty:
            return [[] for _h in self.humans]
        return [self.off_duty[self.agents.index(h)] for h in self.humans]


def _rule(study: Study, trigger_timing: TriggerTiming, every_days_when: str) -> TriggerRule:
    rule = trigger_rule(study, trigger_timing.trigger)
    return _rule_of(study, rule, trigger_timing.timing.pieces, every_days_when)


def _rule_of(study: Study, rule, pieces, every_days_when: str) -> TriggerRule:
    if rule.times is not None:
        times = tuple(float(seconds_of_day(clock)) for clock in rule.times)
        return TriggerRule(times, float(rule.jitter_s or 0), None, pieces, None)
    if rule.per_day is not None:
        return TriggerRule(None, 0.0, float(rule.per_day), pieces, None)
    if rule.every_days is not None:
        sleeper = rule_sleeper(study, rule)
        spread = awake_intervals(sleeper) if every_days_when == "awake" else [(0.0, 86400.0)]
        total = sum(b - a for a, b in spread)
        even = tuple((a, b, (b - a) / total) for a, b in spread if b > a)
        return TriggerRule(None, 0.0, None, even, float(rule.every_days))
    return TriggerRule(None, 0.0, 0.0, pieces, None)


def _span(value) -> tuple[float, float, float]:
    span = Span.of(value)
    return (span.low, span.typical, span.high)


def build_sim_plan(study: Study, analysis: PlanAnalysis, graph: StudyGraph) -> SimPlan:
    """The simulation tables of an analysed plan.

    Parameters
    ----------
    study : Study
    analysis : PlanAnalysis
        The plan's analysis (its triggers, chains, initiators and assumptions).
    graph : StudyGraph
        The study's ``precedes`` structure.

    Returns
    -------
    SimPlan
    """
    plan = analysis.plan
    assumptions = analysis.assumptions
    task_ids = [task.id for task in study.leaves]
    index = {task_id: i for i, task_id in enumerate(task_ids)}
    humans = [agent.id for agent in study.humans]
    agents = [agent.id for agent in study.agents]
    agent_index = {agent_id: i for i, agent_id in enumerate(agents)}
    human_index = {agent_id: i for i, agent_id in enumerate(humans)}
    modes = [mode.id for mode in plan.modes.states] if plan.modes else [""]
    initial = modes.index(plan.modes.initial) if plan.modes else 0
    rates = np.zeros((len(modes), len(modes)))
    if plan.modes:
        for t in plan.modes.expanded:
            if t.per_day and t.source in modes and t.target in modes and t.source != t.target:
                rates[modes.index(t.source), modes.index(t.target)] += float(t.per_day)

    # Variants: one per task, plus one per mode that overrides the task.
    variants: list[Involvement] = []
    variant_of = np.zeros((len(task_ids), len(modes)), int)
    for i, task_id in enumerate(task_ids):
        task = study.task(task_id)
        base = analysis.tasks[task_id].involved
        initial_mode = plan.modes.by_id.get(plan.modes.initial) if plan.modes else None
        if initial_mode is not None and task_id in (initial_mode.overrides or {}):
            # The analysis's involvement is the initial mode's override; the modes that
            # do not override the task take the plan's own assignment.
            base = involvement(study, task, assignment_in_mode(plan, None, task_id), assumptions)
        base_variant = len(variants)
        variants.append(base)
        for m, mode_id in enumerate(modes):
            mode = plan.modes.by_id[mode_id] if plan.modes else None
            if mode is not None and mode.overrides and task_id in mode.overrides:
                variant_of[i, m] = len(variants)
                variants.append(
                    involvement(
                        study, task, assignment_in_mode(plan, mode_id, task_id), assumptions
                    )
                )
            else:
                variant_of[i, m] = base_variant
    # Each variant that can fail gets the variant of its failed occurrences.
    fail_variant = np.full(len(variants), -1)
    fail_chance = np.zeros(len(variants))
    for v in range(len(variants)):
        involved = variants[v]
        failed = failed_involvement(study, study.task(involved.task_id), involved, assumptions)
        if failed is not None:
            fail_variant[v] = len(variants)
            fail_chance[v] = failure_chance(involved.assignment)
            variants.append(failed)
    # Each variant whose people are asked in turn gets one variant per later person
    # keeping it (the first keeps the variant itself); a failed occurrence asks no one.
    escalation: dict[int, tuple[np.ndarray, float, np.ndarray]] = {}
    for v in range(len(variants)):
        involved = variants[v]
        assignment = involved.assignment
        if involved.failed or assignment is None or not assignment.escalation:
            continue
        task = study.task(involved.task_id)
        keepers = [v]
        for k in range(1, len(assignment.people_asked)):
            keepers.append(len(variants))
            kept = keeper_involvement(study, task, involved, k, None, assumptions)
            variants.append(kept)
        escalation[v] = (
            np.array([agent_index[person] for person in assignment.people_asked]),
            float(assignment.escalate_after_s or 0.0),
            np.array(keepers),
        )
    fail_variant = np.concatenate([fail_variant, np.full(len(variants) - fail_variant.size, -1)])
    fail_chance = np.concatenate([fail_chance, np.zeros(len(variants) - fail_chance.size)])
    is_failure = np.array([involved.failed for involved in variants], bool)
    is_escalated = np.array([involved.escalated for involved in variants], bool)
    count = len(variants)
    duration = np.zeros((count, 3))
    stage_share = np.zeros((count, len(STAGES)))
    stage_offset = np.zeros((count, len(STAGES)))
    supervision = np.zeros(count)
    monitoring = np.zeros(count)
    human = np.full(count, -1)
    monitor = np.full(count, -1)
    holder = np.full(count, -1)
    interacts = np.zeros((count, len(humans)), bool)
    interrupts = np.zeros((count, len(humans)), bool)
    watch = np.zeros(count)
    watch_share = np.zeros(count)
    variant_task = np.zeros(count, int)
    for v, involved in enumerate(variants):
        task = study.task(involved.task_id)
        variant_task[v] = index[involved.task_id]
        assignment = involved.assignment
        if assignment is None or not involved.applies:
            continue
        duration[v] = _span(assignment.duration_s or task.duration_s)
        split = task.stage_split
        offset = 0.0
        for s, stage in enumerate(STAGES):
            stage_offset[v, s] = offset
            offset += split[stage]
            if involved.human is not None:
                stage_share[v, s] = split[stage] * (1 - involved.degrees[stage])
        supervision[v] = involved.supervision_s
        monitoring[v] = involved.monitoring_s
        human[v] = human_index.get(involved.human or "", -1)
        monitor[v] = human_index.get(involved.monitor or "", -1)
        holder[v] = agent_index.get(involved.principal or "", -1)
        watch[v] = involved.watch_s
        if involved.monitoring is not None and involved.monitoring.style == "continuous":
            watch_share[v] = float(involved.monitoring.share or 0.0)
        initiator = analysis.tasks[involved.task_id].initiator
        for person in involved.interacting():
            if person in human_index:
                interacts[v, human_index[person]] = True
                interrupts[v, human_index[person]] = is_interruption(involved, initiator, person)
    looks = []
    check_s = float(assumptions["monitoring_s"])
    for i, task_id in enumerate(task_ids):
        if analysis.tasks[task_id].per_day <= 0:
            continue  # looks go with a task that occurs (methods document, #monitoring)
        own = own_involvement(study, plan, task_id, assumptions)
        if own.monitor in human_index and own.looks_per_day > 0:
            looks.append((i, human_index[own.monitor], own.looks_per_day, check_s, False))
        alerted = false_alert_receiver(study, own)
        if alerted is not None and alerted[0] in human_index:
            looks.append((i, human_index[alerted[0]], alerted[1], check_s, True))

    initiators = [analysis.tasks[task_id].initiator for task_id in task_ids]
    demands = np.array(
        [[float((study.task(t).demands or {}).get(c, 0)) for c in CHANNELS] for t in task_ids]
    ).reshape(len(task_ids), len(CHANNELS))
    default = [float(x) for x in assumptions["default_response_s"]]
    latency_awake = np.zeros((len(agents), 3))
    latency_asleep = np.zeros((len(agents), 3))
    asleep = []
    for a, agent in enumerate(study.agents):
        response = agent.response_s or {}
        if agent.is_human:
            awake_range = response.get("awake") or response.get("any")
            latency_awake[a] = _span(awake_range) if awake_range else default
            latency_asleep[a] = (
                _span(response["asleep"]) if "asleep" in response else latency_awake[a]
            )
            asleep.append(asleep_intervals(agent))
        else:
            latency_awake[a] = latency_asleep[a] = _span(response.get("any"))
            asleep.append([])

    sim = SimPlan(
        study=study,
        plan_id=plan.id,
        assumptions=assumptions,
        task_ids=task_ids,
        humans=humans,
        agents=agents,
        modes=modes,
        initial_mode=initial,
        rates=rates,
        variant_of=variant_of,
        variant_task=variant_task,
        duration=duration,
        stage_share=stage_share,
        stage_offset=stage_offset,
        supervision_s=supervision,
        monitoring_s=monitoring,
        human=human,
        monitor=monitor,
        holder=holder,
        interacts=interacts,
        interrupts=interrupts,
        watch_s=watch,
        watch_share=watch_share,
        initiator=np.array([INITIATORS.index(initiator) for initiator in initiators], int),
        demands=demands,
        supervision_demand=np.array(
            [float(assumptions["supervision_demand"].get(c, 0)) for c in CHANNELS]
        ),
        monitoring_demand=np.array(
            [float(assumptions["monitoring_demand"].get(c, 0)) for c in CHANNELS]
        ),
        latency_awake=latency_awake,
        latency_asleep=latency_asleep,
        asleep=asleep,
        window_s=np.array(
            [
                np.nan if (window := study.task(t).window_s) is None else float(window)
                for t in task_ids
            ]
        ),
        fail_chance=fail_chance,
        fail_variant=fail_variant,
        is_failure=is_failure,
        escalation=escalation,
        is_escalated=is_escalated,
        bin_s=float(study.bin_seconds),
        occupancy_limit=float(assumptions["occupancy_limit"]),
        channel_limit=float(assumptions["channel_limit"]),
    )
    sim.chains = _chains(study, analysis, graph, index, assumptions["every_days_when"])
    if plan.modes is not None and analysis.mode_time is not None:
        _keep_time(sim, study, plan.modes, analysis.mode_time, assumptions["every_days_when"])
    sim.looks = looks
    sim.off_duty = [
        off_duty_pieces(agent.on_duty) if agent.is_human and agent.on_duty else []
        for agent in study.agents
    ]
    # How many days the longest chain can run on (its latest finish, from the analysis).
    longest = max(
        (timing.finish.high for chain in analysis.chains for timing in chain.tasks), default=0.0
    )
    sim.lead_days = min(MAX_LEAD_DAYS, int(np.ceil(max(longest, 0.0) / DAY_S)))
    return sim


def _moves(size: int, steps: list[tuple[int, int]]) -> np.ndarray:
    """Moves applied one after the other (file order) as one map: mode -> mode."""
    mapping = np.arange(size)
    for source, target in steps:
        mapping = np.where(mapping == source, target, mapping)
    return mapping


def _keep_time(sim: SimPlan, study: Study, modes, timed, every_days_when: str) -> None:
    """The fixed-time and event-driven moves of the mode map, and the long-run
    distribution a chunk's first midnight is drawn from."""
    index = {mode_id: i for i, mode_id in enumerate(sim.modes)}
    size = len(sim.modes)
    sim.at_midnight = np.asarray(timed.at_midnight, float)
    timed_moves: dict[float, list[tuple[int, int]]] = {}
    event_moves: dict[str, list[tuple[int, int]]] = {}
    for transition in modes.expanded:
        source, target = index.get(transition.source), index.get(transition.target)
        if source is None or target is None or source == target:
            continue
        if transition.driven == "times":
            for clock in transition.times or ():
                timed_moves.setdefault(float(seconds_of_day(clock)), []).append((source, target))
        elif transition.driven == "event" and transition.event in study.events_by_id:
            moves = event_moves.setdefault(str(transition.event), [])
            if all(existing != source for existing, _t in moves):
                moves.append((source, target))  # one move per mode: the first
    sim.mode_impulses = sorted((at, _moves(size, steps)) for at, steps in timed_moves.items())
    sim.mode_moves = {event_id: _moves(size, steps) for event_id, steps in event_moves.items()}
    chained = {chain.trigger_id for chain in sim.chains if chain.from_event}
    for event_id in sim.mode_moves:
        if event_id in chained:
            continue
        event = study.events_by_id[event_id]
        _per_day, day = rate_and_timing(event, study, every_days_when)
        sim.mode_event_rules[event_id] = _rule_of(study, event, day.pieces, every_days_when)


def _chains(study, analysis: PlanAnalysis, graph: StudyGraph, index, every_days_when):
    link_probability = {
        (source, target): p
        for source, targets in graph.successors.items()
        for target, p in targets
    }
    chains = []
    for trigger_id, timing in analysis.occurrences.timings.items():
        chance = analysis.occurrences.chains[trigger_id]
        members = sorted((t for t, p in chance.items() if p > 0), key=graph.position.__getitem__)
        place = {task_id: k for k, task_id in enumerate(members)}
        roots = {}
        for root in timing.trigger.roots:
            if root in place:
                occurs = study.task(root).occurs
                roots[place[root]] = (
                    1.0 if occurs.probability is None else float(occurs.probability)
                )
        predecessors = {}
        for task_id in members:
            if place[task_id] in roots:
                continue
            predecessors[place[task_id]] = [
                (place[source], link_probability[(source, task_id)], *_lag(lag))
                for source, lag in graph.predecessors.get(task_id, ())
                if source in place
            ]
        chains.append(
            ChainPlan(
                trigger_id=trigger_id,
                name=timing.trigger.name,
                from_event=timing.from_event,
                rule=_rule(study, timing, every_days_when),
                members=[index[task_id] for task_id in members],
                root_probability=roots,
                predecessors=predecessors,
                windowed=[
                    k
                    for k, task_id in enumerate(members)
                    if study.task(task_id).window_s is not None
                ],
            )
        )
    return chains


def _lag(lag) -> tuple[float, float]:
    if lag is None:
        return (0.0, 0.0)
    return (float(lag.low), float(lag.high))
