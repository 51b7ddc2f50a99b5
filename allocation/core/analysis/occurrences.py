"""How often each task occurs per day, analytically, and when in the day.

Each event and each task with its own schedule is a *trigger*. A trigger happens
``per_day`` times a day at times spread by a :class:`DayShare`. Within one happening of
a trigger, its root tasks occur (an event's task with its ``probability``), and a task
further down the chain occurs when any of its predecessors in the chain that occurred
leads on to it, each ``precedes`` link drawn with its probability: the chance of each
task is computed exactly as the simulation draws it, predecessors that share an
uncertain ancestor included (:mod:`.chance`). A task reached from several triggers adds
their occurrences up. A task that does not apply under the plan does not occur and its
chain does not continue through it.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

from ..graph import Trigger, root_occurs, trigger_rule, triggers
from ..model import Event, Occurs, Study, seconds_of_day
from .chance import ChainChance, chain_chances
from .timeofday import DayShare, asleep_intervals, awake_intervals, rule_sleeper

__all__ = [
    "Occurrences",
    "TriggerTiming",
    "occurrences",
    "rate_and_timing",
    "tally",
    "trigger_chances",
    "trigger_timings",
]


@dataclass(frozen=True)
class TriggerTiming:
    """A trigger with how often and when in the day it happens."""

    trigger: Trigger
    per_day: float
    timing: DayShare

    @property
    def from_event(self) -> bool:
        return self.trigger.kind == "event"


def rate_and_timing(
    rule: Event | Occurs, study: Study, every_days_when: str
) -> tuple[float, DayShare]:
    person = rule_sleeper(study, rule)
    if rule.times is not None:
        seconds = [seconds_of_day(clock) for clock in rule.times]
        return float(len(seconds)), DayShare.at_times(seconds, rule.jitter_s or 0)
    if rule.per_day is not None:
        when = rule.when or "any"
        pieces = {"awake": awake_intervals(person), "asleep": asleep_intervals(person), "any": []}[
            when
        ]
        return float(rule.per_day), DayShare.uniform(pieces)
    if rule.every_days is not None:
        pieces = awake_intervals(person) if every_days_when == "awake" else []
        return 1.0 / float(rule.every_days), DayShare.uniform(pieces)
    return 0.0, DayShare.uniform([])


def trigger_timings(study: Study, every_days_when: str = "awake") -> list[TriggerTiming]:
    """Every trigger of the study with its rate per day and its time-of-day spread."""
    result = []
    for trigger in triggers(study):
        per_day, timing = rate_and_timing(trigger_rule(study, trigger), study, every_days_when)
        result.append(TriggerTiming(trigger, per_day, timing))
    return result


@dataclass
class Occurrences:
    """Occurrences per day of every leaf task, by trigger.

    Attributes
    ----------
    per_day : dict
        Task id to occurrences per day, all triggers together.
    probability : dict
        Task id to ``{trigger id: probability the task occurs in one happening}``.
    from_trigger : dict
        Task id to ``{trigger id: occurrences per day from that trigger}``.
    timings : dict
        Trigger id to its :class:`TriggerTiming`.
    chains : dict
        Trigger id to ``{task id: probability}`` for the tasks its chain can reach.
    se_per_day : dict
        Task id to the standard error of its occurrences per day, for the tasks whose
        chance was estimated by Monte Carlo (a large shared part of a chain); the other
        tasks' occurrences are exact.
    """

    per_day: dict[str, float] = field(default_factory=dict)
    probability: dict[str, dict[str, float]] = field(default_factory=dict)
    from_trigger: dict[str, dict[str, float]] = field(default_factory=dict)
    timings: dict[str, TriggerTiming] = field(default_factory=dict)
    chains: dict[str, dict[str, float]] = field(default_factory=dict)
    se_per_day: dict[str, float] = field(default_factory=dict)


def occurrences(
    study: Study,
    successors: dict[str, list[tuple[str, float]]],
    position: dict[str, int],
    applies: Callable[[str], bool] = lambda _task_id: True,
    every_days_when: str = "awake",
) -> Occurrences:
    """Analytic occurrences per day of every leaf task.

    Parameters
    ----------
    study : Study
    successors : dict
        Task id to its ``precedes`` successors as ``(task id, link probability)``.
    position : dict
        Task id to its place in a topological order of the ``precedes`` links.
    applies : callable
        Whether a task is done at all under the plan.
    every_days_when : str
        The assumption ``every_days_when``.

    Returns
    -------
    Occurrences
    """
    result = Occurrences(per_day={task.id: 0.0 for task in study.leaves})
    reaching: dict[str, list[tuple[TriggerTiming, ChainChance]]] = {
        task.id: [] for task in study.leaves
    }
    for timing in trigger_timings(study, every_days_when):
        result.timings[timing.trigger.id] = timing
        chained = trigger_chances(study, timing, successors, position, applies)
        result.chains[timing.trigger.id] = chained.chance
        for task_id in chained.chance:
            reaching[task_id].append((timing, chained))
    for task_id, entries in reaching.items():
        tally(result, task_id, entries)
    return result


def trigger_chances(
    study: Study,
    timing: TriggerTiming,
    successors: dict[str, list[tuple[str, float]]],
    position: dict[str, int],
    applies: Callable[[str], bool],
) -> ChainChance:
    """The chance of each task in one happening of a trigger's chain."""
    trigger = timing.trigger
    roots = {}
    for root in trigger.roots:
        own = root_occurs(study, root).probability
        roots[root] = 1.0 if own is None else float(own)
    return chain_chances(roots, successors, position, applies, key=trigger.id)


def tally(
    result: Occurrences,
    task_id: str,
    entries: Iterable[tuple[TriggerTiming, ChainChance]],
) -> None:
    """A task's occurrences from the chains that reach it, in trigger order: its chance
    and occurrences a day from each, their sum, and the standard error where a chance
    was estimated."""
    probability: dict[str, float] = {}
    from_trigger: dict[str, float] = {}
    per_day = 0.0
    se: float | None = None
    for timing, chained in entries:
        trigger_id = timing.trigger.id
        chance = chained.chance[task_id]
        probability[trigger_id] = chance
        from_trigger[trigger_id] = timing.per_day * chance
        per_day += timing.per_day * chance
        if chained.se is not None and task_id in chained.se:
            variance = (se or 0.0) ** 2 + (timing.per_day * chained.se[task_id]) ** 2
            se = variance**0.5
    result.probability[task_id] = probability
    result.from_trigger[task_id] = from_trigger
    result.per_day[task_id] = per_day
    if se is None:
        result.se_per_day.pop(task_id, None)
    else:
        result.se_per_day[task_id] = se
