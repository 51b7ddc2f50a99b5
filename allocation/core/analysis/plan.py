"""Analyse one plan of a study: the one entry point of the analyses.

>>> graph = prepare(study)                       # plan-independent, reuse across plans
>>> result = analyse_plan(study, "hybrid-loop", graph=graph)
>>> result.to_json()                             # the analysis file

The steps, each in its own module: assignments resolve into degrees, holders and person
time (:mod:`.involvement`); the mode map gives the share of the day in each mode
(:mod:`.modes`); occurrences per day propagate along chains (:mod:`.occurrences`); chains
get their timing and deadlines (:mod:`.chains`); daily figures per person follow; then
mode awareness (:mod:`.awareness`), handovers (:mod:`.handovers`), coherence
(:mod:`.coherence`) and findings (:mod:`.findings`).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..assumptions import resolve_assumptions
from ..describe import seconds_text
from ..graph import precedence_order
from ..model import Assignment, Lag, Plan, Study
from ..vocabulary import STAGES
from .awareness import Awareness, awareness
from .chaincut import chain_cut_findings
from .chains import ChainTiming, Span, TaskTiming, chain_timings, response_latency
from .coherence import Coherence, coherence
from .duty import on_duty_pieces
from .escalation import (
    Escalation,
    Segment,
    escalation_shares,
    keeper_involvement,
    with_escalation,
)
from .findings import Finding, accountability_findings, capability_findings
from .handovers import Handover, HandoverSite, assess_handover, time_budget_ratio
from .involvement import Involvement, involvement
from .modecheck import error_state_tasks, verify_mode_map
from .modes import assignment_in_mode
from .modetime import ModeTime, mode_time
from .occurrences import Occurrences, occurrences
from .reliability import (
    failed_involvement,
    false_alert_receiver,
    silent_failure_findings,
    with_failures,
)
from .risk import resolve_policy
from .timeofday import DAY_S, DayShare, asleep_intervals, wrap_interval

__all__ = ["PersonFigures", "PlanAnalysis", "StudyGraph", "TaskFigures", "analyse_plan", "prepare"]

INTERRUPTING = ("automation", "event")


def is_interruption(involved: Involvement, initiator: str, person: str) -> bool:
    """Whether an occurrence reaches ``person`` as an interruption: an involvement they
    did not start (methods document, ``#interruptions``).

    The one doing their part is interrupted when the automation or an event starts the
    occurrence, or when a failure of the automation hands it to them; a monitor who
    checks each occurrence is told of it, which interrupts them. Periodic looks and
    continuous attention never interrupt.
    """
    if person == involved.human:
        return involved.failed or involved.escalated or initiator in INTERRUPTING
    return person == involved.monitor and involved.checks_each


def own_involvement(
    study: Study, plan: Plan, task_id: str, assumptions: dict[str, Any]
) -> Involvement:
    """The task under the plan's own assignment (no mode's override): the one whose
    monitoring style sets the periodic looks, a habit of the person rather than of a
    mode (tool assumption)."""
    return involvement(
        study, study.task(task_id), assignment_in_mode(plan, None, task_id), assumptions
    )


@dataclass(frozen=True)
class StudyGraph:
    """The plan-independent structure of a study, built once for all its plans."""

    order: tuple[str, ...]
    position: dict[str, int]
    successors: dict[str, list[tuple[str, float]]]
    predecessors: dict[str, list[tuple[str, Lag | None]]]


def prepare(study: Study) -> StudyGraph:
    """Order the tasks and index the ``precedes`` links (the floor of every analysis)."""
    order = tuple(precedence_order(study))
    successors: dict[str, list[tuple[str, float]]] = defaultdict(list)
    predecessors: dict[str, list[tuple[str, Lag | None]]] = defaultdict(list)
    for link in study.links:
        if link.kind == "precedes":
            probability = 1.0 if link.probability is None else float(link.probability)
            successors[link.source].append((link.target, probability))
            predecessors[link.target].append((link.source, link.lag_s))
    return StudyGraph(
        order, {task: i for i, task in enumerate(order)}, dict(successors), dict(predecessors)
    )


@dataclass
class PersonFigures:
    """A human's daily figures under a plan (methods document, ``#daily-figures``)."""

    agent_id: str
    burden_s_per_day: float = 0.0
    interactions_per_day: float = 0.0
    interruptions_per_day: float = 0.0
    night_interruptions_per_day: float = 0.0
    monitoring_s_per_day: float = 0.0
    failures_per_day: float = 0.0
    escalations_per_day: float = 0.0
    awake_s: float = DAY_S

    @property
    def load(self) -> float:
        """The daily burden as a share of the waking day."""
        return self.burden_s_per_day / self.awake_s if self.awake_s else 0.0

    def to_json(self) -> dict[str, float]:
        return {
            "burden_s_per_day": self.burden_s_per_day,
            "interactions_per_day": self.interactions_per_day,
            "interruptions_per_day": self.interruptions_per_day,
            "night_interruptions_per_day": self.night_interruptions_per_day,
            "monitoring_s_per_day": self.monitoring_s_per_day,
            "failures_per_day": self.failures_per_day,
            "escalations_per_day": self.escalations_per_day,
            "awake_share_used": self.load,
        }


@dataclass
class TaskFigures:
    """One leaf task under the plan, in its normal (initial) mode, with its daily figures."""

    involved: Involvement
    per_day: float
    initiator: str
    person_s_per_day: dict[str, float]
    asleep_share: dict[str, float]
    awareness: Awareness | None = None
    ready_s: float = 0.0
    #: The stretches of the day in which each person asked in turn is asleep or on duty,
    #: with the share of the task's work ready in each (methods document, #escalation).
    segments: list[Segment] = field(default_factory=list)
    #: People with duty hours: the share of the task's work that reaches them on duty,
    #: and on duty inside their asleep window (methods document, #duty-hours).
    duty_share: dict[str, tuple[float, float]] = field(default_factory=dict)

    @property
    def person_s(self) -> float:
        """Expected seconds per occurrence all humans together spend on it (durations at
        their triangular mean)."""
        involved = self.involved
        return involved.human_s + involved.watch_s

    @property
    def typical_s(self) -> float:
        """The same as :attr:`person_s` at the typical duration."""
        involved = self.involved
        return involved.human_typical_s + involved.watch_typical_s


@dataclass
class PlanAnalysis:
    """Everything Baton computes for one plan."""

    study: Study
    plan: Plan
    assumptions: dict[str, Any]
    policy: dict[str, Any]
    occurrences: Occurrences
    tasks: dict[str, TaskFigures]
    people: dict[str, PersonFigures]
    chains: list[ChainTiming]
    handovers: list[Handover]
    coherence: Coherence
    findings: list[Finding]
    mode_share: dict[str, float] = field(default_factory=dict)
    #: Work passing between two automations: not handovers (methods document,
    #: #automation-interfaces).
    interfaces: list[HandoverSite] = field(default_factory=list)
    #: The modes' long-run time (methods document, #mode-share); ``None`` without modes.
    mode_time: ModeTime | None = None
    #: Per task whose people are asked in turn: each such assignment's weight and shares
    #: (methods document, #escalation).
    escalations: dict[str, list[tuple[float, Escalation]]] = field(default_factory=dict)

    def headline(self) -> dict[str, float]:
        """The plan's headline figures, for overviews and comparison."""
        people = self.people.values()
        risks = [handover.risk for handover in self.handovers]
        return {
            "burden_s_per_day": sum(p.burden_s_per_day for p in people),
            "interruptions_per_day": sum(p.interruptions_per_day for p in people),
            "night_interruptions_per_day": sum(p.night_interruptions_per_day for p in people),
            "failures_per_day": sum(p.failures_per_day for p in people),
            "escalations_per_day": sum(p.escalations_per_day for p in people),
            "handovers": len(self.handovers),
            "handovers_per_day": sum(h.site.per_day for h in self.handovers),
            "handovers_to_review": sum(h.band != "acceptable" for h in self.handovers),
            "max_risk": max(risks, default=0),
            "mean_awareness": _mean(
                [t.awareness.index for t in self.tasks.values() if t.awareness is not None]
            ),
            "cut_ratio": self.coherence.cut_ratio,
            "modularity": self.coherence.modularity,
            "findings": len(self.findings),
        }

    def to_json(self) -> dict[str, Any]:
        """The analysis file, with explanations beside every figure."""
        from .report import analysis_json

        return analysis_json(self)


def _mean(values: list[float]) -> float:
    return sum(values) / len(values) if values else 0.0


def _default_initiator(
    study: Study, task_id: str, graph: StudyGraph, holders: dict[str, str | None]
) -> str:
    """Who starts a task's occurrences when its assignment does not say.

    Its own event starts it (``event``), its own schedule (``schedule``); in a chain, the
    automation if a predecessor is held by an automation, else the person.
    """
    occurs = study.task(task_id).occurs
    if occurs is not None and occurs.event is not None:
        return "event"
    if occurs is not None and occurs.is_schedule:
        return "schedule"
    for source, _lag in graph.predecessors.get(task_id, ()):
        holder = study.agents_by_id.get(holders.get(source) or "")
        if holder is not None and not holder.is_human:
            return "automation"
    return "human"


def analyse_plan(study: Study, plan_id: str, *, graph: StudyGraph | None = None) -> PlanAnalysis:
    """Analyse one plan of a valid study.

    Parameters
    ----------
    study : Study
        A study without errors (see :func:`allocation.core.read_study`).
    plan_id : str
        The plan to analyse.
    graph : StudyGraph, optional
        From :func:`prepare`, to share between plans.

    Returns
    -------
    PlanAnalysis
    """
    return _Analysis(study, study.plan(plan_id), graph or prepare(study)).run()


class _Analysis:
    def __init__(self, study: Study, plan: Plan, graph: StudyGraph):
        self.study = study
        self.plan = plan
        self.graph = graph
        self.assumptions = resolve_assumptions(study.assumptions, study.scale)
        self.policy = resolve_policy(study.risk_policy)
        self.mode_time = (
            mode_time(study, plan.modes, self.assumptions["every_days_when"])
            if plan.modes
            else None
        )
        self.mode_share = self.mode_time.share_dict() if self.mode_time else {}
        # Each transition's place among the map's expanded ones, by identity (they are
        # made once, cached), for its firings a day.
        self.fire_index = {
            id(t): i for i, t in enumerate(plan.modes.expanded if plan.modes else ())
        }
        self.initial = plan.modes.initial if plan.modes else None
        self.mode_findings = verify_mode_map(study, plan, self.assumptions) if plan.modes else []

    def involved(self, task_id: str, mode: str | None) -> Involvement:
        task = self.study.task(task_id)
        return involvement(
            self.study, task, assignment_in_mode(self.plan, mode, task_id), self.assumptions
        )

    def run(self) -> PlanAnalysis:
        study, plan, graph = self.study, self.plan, self.graph
        leaves = [task.id for task in study.leaves]
        normal = {task_id: self.involved(task_id, self.initial) for task_id in leaves}
        holders = {task_id: normal[task_id].principal for task_id in leaves}

        def applies(task_id: str) -> bool:
            # A task not done stops its chain, unless the plan lets the chain go on.
            assignment = plan.assignments.get(task_id)
            return assignment is None or assignment.is_applicable or bool(assignment.pass_through)

        counted = occurrences(
            study, graph.successors, graph.position, applies, self.assumptions["every_days_when"]
        )

        def duration(task_id: str):
            assignment = normal[task_id].assignment
            if assignment is not None and not assignment.is_applicable:
                return None  # a step the chain passes through in no time
            if assignment is not None and assignment.duration_s is not None:
                return assignment.duration_s
            return study.task(task_id).duration_s

        chains = chain_timings(
            study,
            counted,
            graph.predecessors,
            graph.position,
            holders.get,
            duration,
            self.assumptions,
        )
        self.starts = _chain_starts(chains, counted)
        mixes = self.mixes = self.mode_mixes(leaves, normal)
        tasks = self.task_figures(leaves, normal, holders, counted, chains)
        mixes = self.mixes = self.escalate(tasks, mixes)
        people = self.people_figures(tasks, mixes)
        mode_cues = self.mode_cues(leaves, normal)
        in_question = error_state_tasks(self.mode_findings)
        for task_id, figures in tasks.items():
            figures.awareness = awareness(
                study,
                figures.involved,
                figures.initiator,
                figures.per_day,
                mode_cues.get(task_id),
                self.assumptions,
                in_error_state=task_id in in_question,
            )
        link_weights = self.link_weights(counted)
        sites = self.handover_sites(tasks, holders, link_weights)
        interfaces = [site for site in sites if not self.involves_a_person(site)]
        handovers = self.handovers(
            [site for site in sites if self.involves_a_person(site)], tasks, people
        )
        findings = self.findings(normal, chains) + self.chain_cuts(tasks, counted)
        findings.sort(key=lambda f: (-f.severity, f.kind, f.tasks))
        return PlanAnalysis(
            study=study,
            plan=plan,
            assumptions=self.assumptions,
            policy=self.policy,
            occurrences=counted,
            tasks=tasks,
            people=people,
            chains=chains,
            handovers=handovers,
            coherence=coherence(holders, link_weights),
            findings=findings,
            mode_share=self.mode_share,
            interfaces=interfaces,
            mode_time=self.mode_time,
            escalations=self.escalations,
        )

    # -- modes ----------------------------------------------------------------------

    def mode_mixes(
        self, leaves: list[str], normal: dict[str, Involvement]
    ) -> dict[str, list[tuple[float, Involvement]]]:
        """Each task's assignments in force, weighted by the chance that its work is
        ready in each mode (methods document, #mode-share)."""
        mixes = {task_id: [(1.0, normal[task_id])] for task_id in leaves}
        modes, timed = self.plan.modes, self.mode_time
        if modes is not None and timed is not None:
            for task_id in leaves:
                if not any(task_id in (mode.overrides or {}) for mode in modes.states):
                    continue
                shares = task_modes(timed, self.starts[task_id])
                mixes[task_id] = [
                    (float(share), self.involved(task_id, mode))
                    for mode, share in zip(timed.modes, shares, strict=True)
                    if share > 0
                ]
        # Each assignment that can fail: its normal and its failed occurrences.
        study = self.study
        return {
            task_id: with_failures(study, study.task(task_id), mix, self.assumptions)
            for task_id, mix in mixes.items()
        }

    def mode_holder_changes(self, leaves: list[str]):
        """Transitions that change a task's holder: (transition, task, from, to)."""
        modes = self.plan.modes
        if not modes:
            return []
        changes = []
        for transition in modes.expanded:
            source, target = modes.by_id.get(transition.source), modes.by_id.get(transition.target)
            if source is None or target is None or source.id == target.id:
                continue
            touched = set(source.overrides or {}) | set(target.overrides or {})
            for task_id in leaves:
                if task_id not in touched:
                    continue
                before = self.involved(task_id, source.id).principal
                after = self.involved(task_id, target.id).principal
                if before != after:
                    changes.append((transition, task_id, before, after))
        return changes

    def fires_per_day(self, transition) -> float:
        """How often a transition of the map happens a day in the long run."""
        if self.mode_time is None:
            return 0.0
        return self.mode_time.fires[self.fire_index[id(transition)]]

    def mode_cues(self, leaves: list[str], normal: dict[str, Involvement]) -> dict[str, str]:
        """The weakest cue among the transitions that change each task's holder."""
        weakness = self.assumptions["cue_weakness"]
        cues: dict[str, str] = {}
        for transition, task_id, _before, _after in self.mode_holder_changes(leaves):
            current = cues.get(task_id)
            if current is None or weakness[transition.cue] > weakness[current]:
                cues[task_id] = transition.cue
        return cues

    # -- figures --------------------------------------------------------------------

    def task_figures(self, leaves, normal, holders, counted: Occurrences, chains):
        study, graph = self.study, self.graph
        sleep = {agent.id: asleep_intervals(agent) for agent in study.humans}
        # Per task, from each chain: its weight (occurrences per day), its timing in the
        # chain, and the chain's time-of-day spread. The expected times place its
        # occurrences in the day (asleep shares, night interruptions); the typical ready
        # time is the time budget's.
        starts = self.starts
        default = self.assumptions["default_response_s"]
        latency_means = {
            human: (
                response_latency(study, human, 0.0, default).mean,
                response_latency(study, human, 1.0, default).mean,
            )
            for human in sleep
        }
        tasks = {}
        for task_id in leaves:
            involved = normal[task_id]
            assignment = involved.assignment
            initiator = (
                assignment.initiator
                if assignment and assignment.initiator
                else _default_initiator(study, task_id, graph, holders)
            )
            total = sum(item[0] for item in starts[task_id])
            asleep_share = dict.fromkeys(sleep, 0.0)
            for weight, timing, day, _trigger in starts[task_id] if total else ():
                moved = None  # the chain's day shifted by the expected start, made once
                for human, pieces in sleep.items():
                    if not pieces:
                        continue
                    if holders[task_id] == human and timing.latency.mean > 0:
                        share = _start_asleep_share(day, timing, pieces, latency_means[human])
                    else:
                        moved = moved or day.shifted(timing.start.mean)
                        share = moved.share_within(pieces)
                    asleep_share[human] += weight * share / total
            ready = (
                sum(weight * timing.ready.typical for weight, timing, _d, _t in starts[task_id])
                / total
                if total
                else 0.0
            )
            tasks[task_id] = TaskFigures(
                involved=involved,
                per_day=counted.per_day[task_id],
                initiator=initiator,
                person_s_per_day={},
                asleep_share=asleep_share,
                ready_s=ready,
                duty_share=self.duty_shares(starts[task_id], total, holders[task_id]),
                segments=self.reach_shares(task_id, starts[task_id], total),
            )
        return tasks

    def reach_shares(self, task_id: str, starts, total: float) -> list[Segment]:
        """The stretches of the day in which each person the task's assignments ask in
        turn is asleep or not, on duty or not, each with the share of the task's
        occurrences whose work is ready in it (methods document, #escalation)."""
        people: set[str] = set()
        for _share, involved in self.mixes[task_id]:
            assignment = involved.assignment
            if assignment is not None and assignment.escalation and not involved.failed:
                people.update(assignment.people_asked)
        if not people or not total:
            return []
        windows = {}
        for person in sorted(people):
            agent = self.study.agents_by_id[person]
            on = on_duty_pieces(agent.on_duty) if agent.on_duty is not None else [(0.0, DAY_S)]
            windows[person] = (asleep_intervals(agent), on)
        edges = sorted(
            {0.0, float(DAY_S)}
            | {
                float(edge)
                for pieces in windows.values()
                for part in pieces
                for piece in part
                for edge in piece
            }
        )
        moved = [(weight, day.shifted(timing.ready.mean)) for weight, timing, day, _t in starts]
        segments: list[Segment] = []
        for low, high in zip(edges, edges[1:], strict=False):
            if high <= low:
                continue
            middle = (low + high) / 2
            weight = sum(w * day.share_within([(low, high)]) for w, day in moved) / total
            if weight <= 0:
                continue
            state = {
                person: (
                    any(a <= middle < b for a, b in asleep),
                    any(a <= middle < b for a, b in on),
                )
                for person, (asleep, on) in windows.items()
            }
            segments.append((weight, state))
        return segments

    def escalate(self, tasks: dict[str, TaskFigures], mixes):
        """Each task's involvements with those that ask people in turn split by who
        keeps it; the escalations kept for the people who did not answer."""
        study, default = self.study, self.assumptions["default_response_s"]
        self.escalations: dict[str, list[tuple[float, Escalation]]] = {}
        self.escalation_waits: dict[tuple[str, str], float] = {}
        self.escalation_keepers: dict[tuple[str, str], Involvement] = {}
        result = {}
        for task_id, mix in mixes.items():

            def shares_of(assignment: Assignment, segments=tasks[task_id].segments) -> Escalation:
                return escalation_shares(
                    study,
                    assignment.people_asked,
                    float(assignment.escalate_after_s or 0.0),
                    segments,
                    default,
                    assignment.feedback,
                )

            result[task_id], asked = with_escalation(
                study, study.task(task_id), mix, shares_of, self.assumptions
            )
            if asked:
                self.escalations[task_id] = asked
        return result

    def duty_shares(self, starts, total: float, holder: str | None):
        """For each person with duty hours, the share of the task's work that reaches
        them on duty, and on duty while asleep: the holder is reached when the work is
        ready, anyone else (a monitor) when it starts."""
        shares: dict[str, tuple[float, float]] = {}
        for agent in self.study.humans:
            if agent.on_duty is None or not total:
                continue
            on = on_duty_pieces(agent.on_duty)
            night = _overlap(on, asleep_intervals(agent))
            reached = on_share = night_share = 0.0
            for weight, timing, day, _trigger in starts:
                moment = timing.ready.mean if agent.id == holder else timing.start.mean
                moved = day.shifted(moment)
                on_share += weight * moved.share_within(on)
                night_share += weight * (moved.share_within(night) if night else 0.0)
                reached += weight
            shares[agent.id] = (on_share / reached, night_share / reached)
        return shares

    def people_figures(self, tasks: dict[str, TaskFigures], mixes) -> dict[str, PersonFigures]:
        people = {}
        for agent in self.study.humans:
            asleep = sum(b - a for a, b in asleep_intervals(agent))
            people[agent.id] = PersonFigures(agent.id, awake_s=DAY_S - asleep)
        for task_id, figures in tasks.items():
            for share, involved in mixes[task_id]:
                rate = figures.per_day * share
                for human in involved.people():
                    if human not in people:
                        continue
                    seconds = involved.time_of(human)
                    people[human].burden_s_per_day += rate * seconds
                    figures.person_s_per_day[human] = (
                        figures.person_s_per_day.get(human, 0.0) + rate * seconds
                    )
                    if human == involved.monitor:
                        people[human].monitoring_s_per_day += rate * involved.watch_s
                if involved.failed and involved.human in people:
                    people[involved.human].failures_per_day += rate
                for human in involved.interacting():
                    if human not in people:
                        continue
                    person = people[human]
                    person.interactions_per_day += rate
                    if is_interruption(involved, figures.initiator, human):
                        # Work reaching a person off duty waits: not an interruption; one
                        # who answered a call in time was on duty.
                        on, night = figures.duty_share.get(
                            human, (1.0, figures.asleep_share.get(human, 0.0))
                        )
                        if involved.kept_shares is not None and human == involved.human:
                            on, night = involved.kept_shares
                        person.interruptions_per_day += rate * on
                        person.night_interruptions_per_day += rate * night
            self.add_unanswered(task_id, figures, people)
            self.add_looks(task_id, figures, people)
        return people

    def add_unanswered(
        self, task_id: str, figures: TaskFigures, people: dict[str, PersonFigures]
    ) -> None:
        """The people asked in turn who did not answer in time: each call an interaction
        and an interruption (at night while they sleep), costing no time; and every call
        after the first an escalation of the person it goes to."""
        for share, shares in self.escalations.get(task_id, ()):
            rate = figures.per_day * share
            for index, person in enumerate(shares.people):
                if person not in people:
                    continue
                figures_of = people[person]
                figures_of.interactions_per_day += rate * shares.unanswered[index]
                figures_of.interruptions_per_day += rate * shares.unanswered[index]
                figures_of.night_interruptions_per_day += rate * shares.unanswered_asleep[index]
                if index > 0:
                    # Reached: a call not answered in time, or the task kept.
                    reached = shares.unanswered[index] + shares.keep[index]
                    figures_of.escalations_per_day += rate * reached

    def add_looks(
        self, task_id: str, figures: TaskFigures, people: dict[str, PersonFigures]
    ) -> None:
        """Checks a day whatever the task's occurrences (methods document,
        ``#monitoring``): a monitor's periodic looks, started by the person, spread over
        their awake time (interactions, never interruptions), and the automation's false
        alerts to its accountable person (each an interruption, at any time of the day).
        Both go with a task that occurs under the plan."""
        if figures.per_day <= 0:
            return
        own = figures.involved if self.initial is None else self.involved(task_id, None)
        checks = []
        if own.monitor in people and own.looks_per_day > 0:
            checks.append((own.monitor, own.looks_per_day, False))
        alerted = false_alert_receiver(self.study, own)
        if alerted is not None and alerted[0] in people:
            checks.append((*alerted, True))
        for who, per_day, interrupts in checks:
            person = people[who]
            seconds = per_day * float(self.assumptions["monitoring_s"])
            person.burden_s_per_day += seconds
            person.monitoring_s_per_day += seconds
            figures.person_s_per_day[who] = figures.person_s_per_day.get(who, 0.0) + seconds
            person.interactions_per_day += per_day
            if interrupts:
                person.interruptions_per_day += per_day
                asleep = sum(b - a for a, b in asleep_intervals(self.study.agents_by_id[who]))
                person.night_interruptions_per_day += per_day * asleep / DAY_S

    def link_weights(self, counted: Occurrences) -> list[tuple[str, str, float]]:
        """Each link with the occurrences per day it carries."""
        weights = []
        for link in self.study.links:
            source = counted.per_day.get(link.source, 0.0)
            target = counted.per_day.get(link.target, 0.0)
            if link.kind == "precedes":
                probability = 1.0 if link.probability is None else float(link.probability)
                weight = min(source * probability, target)
            else:
                weight = min(source, target)
            weights.append((link.source, link.target, weight))
        return weights

    # -- handovers ------------------------------------------------------------------

    def handover_sites(self, tasks, holders, link_weights) -> list[HandoverSite]:
        sites = []
        for (source, target, weight), link in zip(link_weights, self.study.links, strict=True):
            sites += self.link_site(tasks, holders, source, target, weight, link.kind)
        sites += self.sites_through(tasks, holders, link_weights)
        for task_id, figures in tasks.items():
            involved = figures.involved
            if not involved.applies or involved.category != "shared":
                continue
            stage_holders = involved.stage_holders()
            for index in range(1, len(STAGES)):
                if stage_holders[index] != stage_holders[index - 1]:
                    sites.append(
                        HandoverSite(
                            "shared",
                            task_id,
                            task_id,
                            stage_holders[index - 1],
                            stage_holders[index],
                            figures.per_day,
                            involved.assignment.feedback,
                            figures.initiator,
                            stage=STAGES[index],
                        )
                    )
        sites += self.failure_sites(tasks)
        sites += self.escalation_sites(tasks)
        for transition, task_id, before, after in self.mode_holder_changes(list(tasks)):
            if before is None or after is None:
                continue
            rate = self.fires_per_day(transition)
            initiator = {"environment": "event"}.get(transition.by, transition.by)
            sites.append(
                HandoverSite(
                    "mode",
                    task_id,
                    task_id,
                    before,
                    after,
                    rate,
                    transition.cue,
                    initiator,
                    modes=(transition.source, transition.target),
                    trigger=transition.trigger,
                )
            )
        return sites

    def failure_sites(self, tasks: dict[str, TaskFigures]) -> list[HandoverSite]:
        """A failure of the automation hands the whole task to the fallback person, as
        often as it fails, with the cue that tells them (methods document,
        ``#reliability``); one site per task and fallback (the modes' failures add up)."""
        found: dict[tuple[str, str | None, str | None], HandoverSite] = {}
        for task_id, figures in tasks.items():
            mix = self.mixes[task_id]
            # A failed involvement follows the normal one it is the failure of.
            for (_share, normal), (share, involved) in zip(mix, mix[1:], strict=False):
                if not involved.failed:
                    continue
                key = (task_id, normal.automation, involved.human)
                site = found.get(key)
                per_day = figures.per_day * share + (site.per_day if site else 0.0)
                found[key] = HandoverSite(
                    "failure",
                    task_id,
                    task_id,
                    normal.automation,
                    involved.human,
                    per_day,
                    involved.assignment.feedback if involved.assignment else None,
                    "automation",
                    trigger="failure",
                )
        return list(found.values())

    def escalation_sites(self, tasks: dict[str, TaskFigures]) -> list[HandoverSite]:
        """Each call that moves on from one person asked to the next, as often as it
        does, cued as the assignment tells its people (methods document,
        ``#escalation``); one site per task and pair of people."""
        found: dict[tuple[str, str, str], HandoverSite] = {}
        for task_id, entries in self.escalations.items():
            per_day = tasks[task_id].per_day
            for share, shares in entries:
                for index in range(1, len(shares.people)):
                    before, after = shares.people[index - 1], shares.people[index]
                    key = (task_id, before, after)
                    site = found.get(key)
                    found[key] = HandoverSite(
                        "escalation",
                        task_id,
                        task_id,
                        before,
                        after,
                        per_day * share * shares.asked[index] + (site.per_day if site else 0.0),
                        shares.cue,
                        "automation",
                        trigger=f"no answer within {seconds_text(shares.after_s)}",
                    )
                    self.escalation_waits[(task_id, after)] = index * shares.after_s
                    if shares.base is not None:
                        self.escalation_keepers[(task_id, after)] = keeper_involvement(
                            self.study,
                            self.study.task(task_id),
                            shares.base,
                            index,
                            None,
                            self.assumptions,
                        )
        return list(found.values())

    def sites_through(self, tasks, holders, link_weights) -> list[HandoverSite]:
        """Work passing across a task not done whose chain goes on (``pass_through``):
        from the holder before it to the holder after it, as often as the lesser of the
        two links carries (methods document, #handover-sites)."""
        passed = {
            task_id
            for task_id, assignment in self.plan.assignments.items()
            if not assignment.is_applicable and assignment.pass_through
        }
        if not passed:
            return []
        into: dict[str, list[tuple[str, float]]] = defaultdict(list)
        out_of: dict[str, list[tuple[str, float]]] = defaultdict(list)
        for (source, target, weight), link in zip(link_weights, self.study.links, strict=True):
            if link.kind != "precedes":
                continue
            if target in passed:
                into[target].append((source, weight))
            if source in passed:
                out_of[source].append((target, weight))
        sites = []
        for middle in sorted(passed):
            for source, weight_in in into[middle]:
                for target, weight_out in out_of[middle]:
                    weight = min(weight_in, weight_out)
                    trigger = f"precedes through {middle}"
                    sites += self.link_site(tasks, holders, source, target, weight, trigger)
        return sites

    def link_site(self, tasks, holders, source, target, weight, trigger) -> list[HandoverSite]:
        """The handover point of work passing from ``source`` to ``target``, if their
        holders differ (none where either is held by nobody)."""
        before, after = holders.get(source), holders.get(target)
        if before is None or after is None or before == after:
            return []
        cue = self.strongest_cue(tasks[source].involved, tasks[target].involved)
        return [
            HandoverSite(
                "link",
                source,
                target,
                before,
                after,
                weight,
                cue,
                tasks[target].initiator,
                trigger=trigger,
            )
        ]

    def strongest_cue(self, *involved: Involvement) -> str | None:
        """The best cue either side of a link gives: the sender's alarm or the receiver's
        display both tell the person the work is now theirs."""
        weakness = self.assumptions["cue_weakness"]
        cues = [
            item.assignment.feedback
            for item in involved
            if item.assignment is not None and item.assignment.feedback
        ]
        return min(cues, key=lambda cue: weakness[cue], default=None)

    def involves_a_person(self, site: HandoverSite) -> bool:
        """A handover is a change of holder with a human on at least one side; between
        two automations it is an automation interface."""
        agents = self.study.agents_by_id
        return any(
            agent is not None and agent.is_human
            for agent in (agents.get(site.from_agent or ""), agents.get(site.to_agent or ""))
        )

    def handovers(self, sites: list[HandoverSite], tasks, people) -> list[Handover]:
        study = self.study
        assessed = []
        for site in sites:
            receiver = study.agents_by_id.get(site.to_agent or "")
            is_human = receiver is not None and receiver.is_human
            target = tasks[site.to_task]
            mode = site.modes[1] if site.modes else self.initial
            involved = self.involved(site.to_task, mode) if site.modes else target.involved
            if site.source == "failure":
                # The fallback person does the whole task.
                involved = next(
                    item
                    for _share, item in self.mixes[site.to_task]
                    if item.failed and item.human == site.to_agent
                )
            elif site.source == "escalation":
                # The person the call reached does the task.
                involved = self.escalation_keepers[(site.to_task, site.to_agent or "")]
            # The budget of a typical occurrence: typical work, latency and ready time
            # (methods document, #time-budget-ratio).
            if receiver is not None and receiver.is_human:
                work = involved.typical_time_of(receiver.id) or involved.typical_duration_s
            else:
                work = involved.typical_duration_s
            latency = response_latency(
                study,
                site.to_agent,
                target.asleep_share.get(site.to_agent, 0.0),
                self.assumptions["default_response_s"],
            ).typical
            window = study.task(site.to_task).window_s
            ready = 0.0 if site.source == "mode" else target.ready_s
            # The calls before this one count in its time budget.
            ready += self.escalation_waits.get((site.to_task, site.to_agent or ""), 0.0)
            ratio = time_budget_ratio(
                latency,
                work,
                None if window is None else float(window),
                ready,
                float(self.assumptions["time_budget_floor_s"]),
            )
            load = people[site.to_agent].load if site.to_agent in people else 0.0
            assessed.append(
                assess_handover(
                    site,
                    receiver_is_human=is_human,
                    time_ratio=ratio,
                    receiver_load=load,
                    awareness=target.awareness.index if target.awareness else 0.0,
                    severity=study.task(site.to_task).severity or 1,
                    assumptions=self.assumptions,
                    policy=self.policy,
                )
            )
        assessed.sort(key=lambda h: (-h.risk, -h.likelihood, -h.site.per_day))
        return assessed

    # -- findings -------------------------------------------------------------------

    def chain_cuts(self, tasks: dict[str, TaskFigures], counted: Occurrences) -> list[Finding]:
        """The tasks each task not done takes away (methods document,
        ``#finding-chain-cut``): occurrences counted again as if every such task let
        its chain go on."""
        stopped = [
            task_id
            for task_id, assignment in self.plan.assignments.items()
            if task_id in tasks and not assignment.is_applicable and not assignment.pass_through
        ]
        if not stopped:
            return []
        graph = self.graph
        through = occurrences(
            self.study,
            graph.successors,
            graph.position,
            lambda _task_id: True,
            self.assumptions["every_days_when"],
        )
        return chain_cut_findings(
            self.study,
            stopped,
            counted.per_day,
            through.per_day,
            graph.successors,
            lambda task_id: tasks[task_id].person_s,
            {
                task_id: 4 * (counted.se_per_day.get(task_id, 0.0) + se)
                for task_id, se in through.se_per_day.items()
            },
        )

    def failure_findings(
        self, involved: Involvement, critical: int, mode: str | None = None
    ) -> list[Finding]:
        """A failure nobody is told of, and a fallback person without what the task
        needs (methods document, ``#reliability``)."""
        study = self.study
        in_mode = mode or (self.plan.modes.initial if self.plan.modes else None)
        found = silent_failure_findings(study, involved, critical, mode, in_mode)
        failed = failed_involvement(
            study, study.task(involved.task_id), involved, self.assumptions
        )
        if failed is not None:
            found += capability_findings(study, failed, mode, after_failure=True)
        return found

    def findings(self, normal: dict[str, Involvement], chains: list[ChainTiming]):
        study = self.study
        found: list[Finding] = []
        critical = int(self.policy["critical_severity"])
        for involved in normal.values():
            found += accountability_findings(study, involved)
            found += capability_findings(study, involved)
            found += self.failure_findings(involved, critical)
        if self.plan.modes:
            for mode in self.plan.modes.states:
                if mode.id == self.initial:
                    continue
                for task_id in mode.overrides or {}:
                    if task_id not in normal:
                        continue
                    involved = self.involved(task_id, mode.id)
                    found += accountability_findings(study, involved, mode.id)
                    found += capability_findings(study, involved, mode.id)
                    found += self.failure_findings(involved, critical, mode.id)
        found += _window_findings(study, chains)
        found += self.mode_findings
        found.sort(key=lambda f: (-f.severity, f.kind, f.tasks))
        return found


def _chain_starts(chains: list[ChainTiming], counted: Occurrences):
    """Per task, from each chain: its weight (occurrences per day), its timing in the
    chain, the chain's time-of-day spread and its trigger. The expected times place its
    occurrences in the day (asleep shares, night interruptions, modes); the typical ready
    time is the time budget's."""
    starts: dict[str, list[tuple[float, TaskTiming, DayShare, Any]]] = defaultdict(list)
    for chain in chains:
        chain_spread = counted.timings[chain.trigger.id].timing
        for timing in chain.tasks:
            weight = chain.per_day * timing.probability
            starts[timing.task_id].append((weight, timing, chain_spread, chain.trigger))
    return starts


def task_modes(timed: ModeTime, starts) -> np.ndarray:
    """The chance that a task's work is ready in each mode: per chain, the distribution
    over the modes when its trigger happens (after the jump its event makes, where the
    event moves the mode: the mode changes first) carried over the time to the task's
    ready time at the day's average rates; or, for a chain whose trigger does not move
    the mode, the distribution at the task's ready times of the day (methods document,
    #mode-share)."""
    if len(timed.stretches) == 1 and not timed.event_jumps:
        return timed.shares  # the same in every moment of the day
    total = sum(weight for weight, _timing, _day, _trigger in starts)
    if not total:
        return timed.shares
    result = np.zeros(len(timed.modes))
    for weight, timing, day, trigger in starts:
        jump = timed.event_jumps.get(trigger.id) if trigger.kind == "event" else None
        if jump is None:
            result += weight * timed.over(day.shifted(timing.ready.mean))
        else:
            result += weight * timed.after(timed.over(day) @ jump, timing.ready.mean)
    return result / total


def _shift(pieces: list[tuple[float, float]], seconds: float) -> list[tuple[float, float]]:
    return [part for a, b in pieces for part in wrap_interval(a + seconds, b + seconds)]


def _overlap(first, second) -> list[tuple[float, float]]:
    return [(max(a, c), min(b, d)) for a, b in first for c, d in second if min(b, d) > max(a, c)]


def _outside(first, second) -> list[tuple[float, float]]:
    """The parts of the intervals ``first`` outside all of ``second``."""
    result = []
    for a, b in first:
        cuts = [(a, b)]
        for c, d in second:
            cuts = [
                part
                for lo, hi in cuts
                for part in ((lo, min(hi, c)), (max(lo, d), hi))
                if part[1] > part[0]
            ]
        result += cuts
    return result


def _start_asleep_share(
    day: DayShare,
    timing: TaskTiming,
    asleep: list[tuple[float, float]],
    latency_means: tuple[float, float],
) -> float:
    """The chance that a task of a chain, whose work reaches the person with a response
    latency, starts inside their asleep window.

    Their latency is the asleep one when the work arrives in their sleep and the awake one
    otherwise (as the simulation draws it): the start is asleep when the work arrives
    asleep and the asleep latency leaves them asleep, or arrives awake and the awake
    latency reaches into the window. Without a latency, the chain's start times shifted
    by the task's expected start place it.
    """
    awake_s, asleep_s = latency_means
    stays = _overlap(asleep, _shift(asleep, -asleep_s))
    reaches = _outside(_shift(asleep, -awake_s), asleep)
    return day.shifted(timing.ready.mean).share_within(stays + reaches)


_MISS_ORDER = {"always": 3, "typically": 2, "possibly": 1}
_MISS_WORDS = {
    "always": "always misses it",
    "typically": "typically misses it",
    "possibly": "can miss it",
}


def _window_findings(study: Study, chains: list[ChainTiming]) -> list[Finding]:
    """The worst window miss of each task over its chains."""
    worst: dict[str, tuple[int, str, ChainTiming, Any]] = {}
    for chain in chains:
        for timing in chain.tasks:
            miss = timing.misses_window
            if miss is None:
                continue
            rank = _MISS_ORDER[miss]
            if timing.task_id not in worst or rank > worst[timing.task_id][0]:
                worst[timing.task_id] = (rank, miss, chain, timing)
    findings = []
    for task_id, (_rank, miss, chain, timing) in worst.items():
        task = study.task(task_id)
        finish: Span = timing.finish
        events = (chain.trigger.id,) if chain.trigger.kind == "event" else ()
        findings.append(
            Finding(
                "window_missed",
                task.severity or 1,
                f"{task_id} ({task.title}) must be done within {seconds_text(timing.window_s)} "
                f"of the start of its chain ({chain.trigger.name}); it {_MISS_WORDS[miss]}: it "
                f"finishes after {seconds_text(finish.low)} at the earliest, "
                f"{seconds_text(finish.typical)} typically, {seconds_text(finish.high)} at the "
                "latest.",
                (task_id,),
                (),
                events,
            )
        )
    return findings
