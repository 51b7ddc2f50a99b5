"""Analyse one plan of a study: the one entry point of the analyses, and its records.

>>> graph = prepare(study)                       # plan-independent, reuse across plans
>>> result = analyse_plan(study, "hybrid-loop", graph=graph)
>>> result.to_json()                             # the analysis file

The steps, each in its own module: assignments resolve into degrees, holders and person
time (:mod:`.involvement`); the mode map gives the share of the day in each mode
(:mod:`.modetime`); occurrences per day propagate along chains (:mod:`.occurrences`);
chains get their timing and deadlines (:mod:`.chains`); daily figures per person follow;
then mode awareness (:mod:`.awareness`), handovers (:mod:`.handovers`), coherence
(:mod:`.coherence`) and findings (:mod:`.findings`). :mod:`.evaluation` runs them task by
task, link by link and chain by chain, and keeps what it made, so that an edit of one
task computes again only what depends on it; this module holds the records it fills
(:class:`PlanAnalysis` and its parts) and the per-task pieces it shares.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..describe import seconds_text
from ..graph import precedence_order
from ..model import Lag, Plan, Study
from .awareness import Awareness
from .chains import ChainTiming, Span
from .coherence import Coherence
from .duty import on_duty_pieces
from .escalation import Escalation, Segment
from .findings import Finding
from .handovers import Handover, HandoverSite
from .involvement import Involvement, involvement
from .modes import assignment_in_mode
from .modetime import ModeTime
from .occurrences import Occurrences
from .timeofday import DAY_S, asleep_intervals, wrap_interval

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


#: A person's daily figures, in the order of :class:`PersonFigures`' fields.
PERSON_FIGURES = (
    "burden_s_per_day",
    "interactions_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "monitoring_s_per_day",
    "failures_per_day",
    "escalations_per_day",
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
        """The plan's headline figures, for overviews and comparison (sums over
        handovers and tasks correctly rounded, whatever their order)."""
        handovers = {
            "handovers": len(self.handovers),
            "handovers_per_day": math.fsum(h.site.per_day for h in self.handovers),
            "handovers_to_review": sum(h.band != "acceptable" for h in self.handovers),
            "max_risk": max((h.risk for h in self.handovers), default=0),
        }
        return headline_figures(
            self.people,
            handovers,
            self.mean_awareness(self.tasks.values()),
            self.coherence,
            len(self.findings),
        )

    @staticmethod
    def mean_awareness(tasks) -> float:
        """The mean awareness index over the tasks that have one."""
        values = [t.awareness.index for t in tasks if t.awareness is not None]
        return math.fsum(values) / len(values) if values else 0.0

    def to_json(self) -> dict[str, Any]:
        """The analysis file, with explanations beside every figure."""
        from .report import analysis_json

        return analysis_json(self)


def headline_figures(
    people: dict[str, PersonFigures],
    handovers: dict[str, float],
    mean_awareness: float,
    coherence: Coherence,
    findings: int,
) -> dict[str, float]:
    """A plan's headline figures: the people's daily figures summed, the handover
    figures, the mean awareness index, coherence and the count of findings."""
    everyone = people.values()
    return {
        "burden_s_per_day": sum(p.burden_s_per_day for p in everyone),
        "interruptions_per_day": sum(p.interruptions_per_day for p in everyone),
        "night_interruptions_per_day": sum(p.night_interruptions_per_day for p in everyone),
        "failures_per_day": sum(p.failures_per_day for p in everyone),
        "escalations_per_day": sum(p.escalations_per_day for p in everyone),
        **handovers,
        "mean_awareness": mean_awareness,
        "cut_ratio": coherence.cut_ratio,
        "modularity": coherence.modularity,
        "findings": findings,
    }


def default_initiator(
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
    # The engine keeps its figures per task to follow edits (see .evaluation); it is
    # built on this module's records, so it is imported here.
    from .evaluation import PlanEvaluation

    return PlanEvaluation(study, plan_id, graph or prepare(study)).analysis()


def duty_shares(
    study: Study, starts, total: float, holder: str | None
) -> dict[str, tuple[float, float]]:
    """For each person with duty hours, the share of a task's work that reaches them on
    duty, and on duty while asleep: the holder is reached when the work is ready, anyone
    else (a monitor) when it starts (methods document, #duty-hours)."""
    shares: dict[str, tuple[float, float]] = {}
    for agent in study.humans:
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


def reach_shares(
    study: Study, mix: list[tuple[float, Involvement]], starts, total: float
) -> list[Segment]:
    """The stretches of the day in which each person a task's assignments ask in turn is
    asleep or not, on duty or not, each with the share of the task's occurrences whose
    work is ready in it (methods document, #escalation)."""
    people: set[str] = set()
    for _share, involved in mix:
        assignment = involved.assignment
        if assignment is not None and assignment.escalation and not involved.failed:
            people.update(assignment.people_asked)
    if not people or not total:
        return []
    windows = {}
    for person in sorted(people):
        agent = study.agents_by_id[person]
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


def start_asleep_window(
    asleep: list[tuple[float, float]], latency_means: tuple[float, float]
) -> list[tuple[float, float]]:
    """The moments at which work reaching a person with a response latency makes them
    start it inside their asleep window.

    Their latency is the asleep one when the work arrives in their sleep and the awake one
    otherwise (as the simulation draws it): the start is asleep when the work arrives
    asleep and the asleep latency leaves them asleep, or arrives awake and the awake
    latency reaches into the window. The chance that a task starts asleep is the share
    of its ready times in these moments (the same for all the person's tasks: made once).
    """
    awake_s, asleep_s = latency_means
    stays = _overlap(asleep, _shift(asleep, -asleep_s))
    reaches = _outside(_shift(asleep, -awake_s), asleep)
    return stays + reaches


_MISS_ORDER = {"always": 3, "typically": 2, "possibly": 1}
_MISS_WORDS = {
    "always": "always misses it",
    "typically": "typically misses it",
    "possibly": "can miss it",
}


def window_findings(study: Study, starts) -> list[Finding]:
    """A task's worst window miss over the chains it is in (``starts``: per chain, its
    weight, timing, the chain's spread and trigger, in chain order)."""
    worst = None
    for _weight, timing, _day, trigger in starts:
        miss = timing.misses_window
        if miss is not None and (worst is None or _MISS_ORDER[miss] > _MISS_ORDER[worst[0]]):
            worst = (miss, timing, trigger)
    if worst is None:
        return []
    miss, timing, trigger = worst
    task = study.task(timing.task_id)
    finish: Span = timing.finish
    return [
        Finding(
            "window_missed",
            task.severity or 1,
            f"{task.id} ({task.title}) must be done within {seconds_text(timing.window_s)} "
            f"of the start of its chain ({trigger.name}); it {_MISS_WORDS[miss]}: it "
            f"finishes after {seconds_text(finish.low)} at the earliest, "
            f"{seconds_text(finish.typical)} typically, {seconds_text(finish.high)} at the "
            "latest.",
            (task.id,),
            (),
            (trigger.id,) if trigger.kind == "event" else (),
        )
    ]
