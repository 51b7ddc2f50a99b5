"""Who does how much of a task under one assignment: degrees, holder, person time.

For the human of an assignment, per occurrence (methods document, ``#person-time``)::

    person_s = sum over stages of split_s * duration * (1 - d_s) + supervision
    supervision = max(supervision_s[L_decision], supervision_s[L_action])

The duration counts at its expectation under the triangular distribution the simulation
draws it from, ``(min + typical + max) / 3`` [3]_, so that per-day sums of it are expected
values; the same at the typical duration is kept beside it (``active_typical_s``).
A human-only assignment costs the whole duration; an automation-only one no person time.
The **principal holder** is the automation when its stage-weighted degree
``sum(split_s * d_s)`` exceeds 0.5, otherwise the human.

References
----------
.. [1] Parasuraman, R., Sheridan, T. B., & Wickens, C. D. (2000). A model for types and
   levels of human interaction with automation. IEEE Trans. SMC-A, 30(3), 286-297.
.. [2] Pritchett, A. R., Kim, S. Y., & Feigh, K. M. (2014). Measuring human-automation
   function allocation. Journal of Cognitive Engineering and Decision Making, 8(1),
   52-77 (responsibility-authority mismatch).
.. [3] Evans, M., Hastings, N., & Peacock, B. (2000). Statistical Distributions (3rd ed.),
   ch. 40: the triangular distribution, mean (a + b + c) / 3.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..model import Assignment, Monitoring, Range, Study, Task
from ..scales import (
    EK10_LEVELS,
    category_of,
    degree_of_automation,
    shared_levels,
    single_level,
    stage_degrees,
    weighted_degree,
)
from ..vocabulary import STAGES

__all__ = [
    "ALERTING",
    "Involvement",
    "expected_duration",
    "flags_per_day",
    "involvement",
    "monitoring_style",
    "watch_text",
]

#: Feedback that tells the person of each occurrence.
ALERTING = ("alert", "alert_confirm")


@dataclass(frozen=True, slots=True)
class Involvement:
    """One task under one assignment: who holds it and what it costs the person.

    ``human_s`` is the assignment's human's expected time per occurrence, split into
    ``active_s`` (the stages' share of the expected duration the automation leaves them)
    and ``supervision_s``; ``duration_s`` is the expected (triangular mean) duration and
    ``typical_duration_s``, ``active_typical_s`` the same at the typical duration.
    ``monitor`` is the accountable human who does not hold the task, if any; they keep
    watch in the style ``monitoring`` (methods document, ``#monitoring``), each check or
    look costing ``monitoring_s``.
    """

    task_id: str
    assignment: Assignment | None
    applies: bool
    degrees: dict[str, float]
    doa: float
    category: str
    automated_share: float
    principal: str | None
    duration_s: float
    active_s: float
    supervision_s: float
    accountable: str | None
    monitor: str | None
    monitoring_s: float
    typical_duration_s: float = 0.0
    active_typical_s: float = 0.0
    monitoring: Monitoring | None = None
    #: A failed occurrence, taken over by the fallback person (methods document,
    #: ``#reliability``).
    failed: bool = False
    #: Kept by a person asked after the first (methods document, ``#escalation``).
    escalated: bool = False
    #: Kept by one of people asked in turn: the share of those occurrences that reached
    #: them on duty, and on duty while asleep; ``None`` otherwise.
    kept_shares: tuple[float, float] | None = None

    @property
    def watch_s(self) -> float:
        """The monitor's expected seconds per occurrence: a check of each one (``each``),
        or their share of attention over its expected duration (``continuous``)."""
        if self.monitoring is None:
            return 0.0
        if self.monitoring.style == "each":
            return self.monitoring_s
        if self.monitoring.style == "continuous":
            return float(self.monitoring.share or 0.0) * self.duration_s
        return 0.0

    @property
    def watch_typical_s(self) -> float:
        """The same as :attr:`watch_s` at the typical duration."""
        if self.monitoring is not None and self.monitoring.style == "continuous":
            return float(self.monitoring.share or 0.0) * self.typical_duration_s
        return self.watch_s

    @property
    def looks_per_day(self) -> float:
        """Periodic looks a day the monitor makes whatever the task's occurrences (flags
        under exception monitoring come with the automation's failures and false alerts,
        see :mod:`.reliability`)."""
        if self.monitoring is None or self.monitoring.style != "periodic":
            return 0.0
        return float(self.monitoring.per_day or 0.0)

    @property
    def checks_each(self) -> bool:
        """The monitor checks every occurrence when told of it: an interaction each."""
        return self.monitoring is not None and self.monitoring.style == "each"

    @property
    def human(self) -> str | None:
        return None if self.assignment is None else self.assignment.human

    @property
    def automation(self) -> str | None:
        return None if self.assignment is None else self.assignment.automation

    @property
    def human_s(self) -> float:
        return self.active_s + self.supervision_s

    @property
    def human_typical_s(self) -> float:
        return self.active_typical_s + self.supervision_s

    def time_of(self, agent_id: str) -> float:
        """Expected seconds per occurrence ``agent_id`` (a human) spends on the task
        (periodic looks and flags are counted per day, not here)."""
        seconds = self.human_s if agent_id == self.human else 0.0
        if agent_id == self.monitor:
            seconds += self.watch_s
        return seconds

    def typical_time_of(self, agent_id: str) -> float:
        """The same as :meth:`time_of` at the typical duration."""
        seconds = self.human_typical_s if agent_id == self.human else 0.0
        if agent_id == self.monitor:
            seconds += self.watch_typical_s
        return seconds

    def people(self) -> list[str]:
        """The humans who spend time on each occurrence."""
        names = [self.human] if self.human and self.human_s > 0 else []
        if self.monitor and self.watch_s > 0 and self.monitor not in names:
            names.append(self.monitor)
        return names

    def interacting(self) -> list[str]:
        """The humans each occurrence involves in an interaction: the one doing their
        part, and a monitor who checks each occurrence (continuous attention is no
        interaction; periodic looks and flags are counted per day)."""
        names = [self.human] if self.human and self.human_s > 0 else []
        monitor = self.monitor
        if monitor and self.checks_each and self.monitoring_s > 0 and monitor not in names:
            names.append(monitor)
        return names

    def stage_holders(self) -> list[str | None]:
        """Who holds each stage: the automation where its degree is above one half."""
        return [
            self.automation if self.degrees[stage] > 0.5 else (self.human or self.automation)
            for stage in STAGES
        ]


def _supervision(assignment: Assignment, scale: str, table: dict[str, Any]) -> float:
    """Seconds of supervision: the larger of the decision and action stages' costs."""
    if not assignment.is_shared:
        return 0.0
    if scale == "ek10":
        level = single_level(assignment)
        if level not in EK10_LEVELS:
            return 0.0
        return float(table.get(str(level), 0))
    levels = shared_levels(assignment)
    return float(max(table.get(str(levels["decision"]), 0), table.get(str(levels["action"]), 0)))


def involvement(
    study: Study,
    task: Task,
    assignment: Assignment | None,
    assumptions: dict[str, Any],
) -> Involvement:
    """Resolve one task's assignment into degrees, holder and person time.

    Parameters
    ----------
    study : Study
    task : Task
        A leaf task.
    assignment : Assignment or None
        The assignment in force (``None`` when the plan leaves the task unallocated).
    assumptions : dict
        The resolved assumptions (``supervision_s``, ``monitoring_s``).

    Returns
    -------
    Involvement
    """
    if assignment is None or not assignment.is_applicable:
        zero = dict.fromkeys(STAGES, 0.0)
        return Involvement(
            task.id,
            assignment,
            False,
            zero,
            0.0,
            "none",
            0.0,
            None,
            0.0,
            0.0,
            0.0,
            None,
            None,
            0.0,
        )
    degrees = stage_degrees(assignment, study.scale)
    split = task.stage_split
    automated = weighted_degree(degrees, split)
    duration_range = assignment.duration_s or task.duration_s
    typical = 0.0 if duration_range is None else float(duration_range.typical)
    duration = 0.0 if duration_range is None else expected_duration(duration_range)
    if assignment.human is None:
        principal = assignment.automation
    elif assignment.automation is None:
        principal = assignment.human
    else:
        # Exactly one half stays with the human; the allowance keeps rounding in the
        # stage degrees ((L - 1) / 9) from tipping an exact half over.
        principal = assignment.automation if automated > 0.5 + 1e-9 else assignment.human
    active = active_typical = 0.0
    supervision = 0.0
    if assignment.human is not None:
        left = sum(split[stage] * (1 - degrees[stage]) for stage in STAGES)
        active, active_typical = left * duration, left * typical
        supervision = _supervision(assignment, study.scale, assumptions["supervision_s"])
    accountable = assignment.accountable or assignment.human
    monitor = None
    if accountable is not None and accountable != principal:
        agent = study.agents_by_id.get(accountable)
        if agent is not None and agent.is_human:
            monitor = accountable
    return Involvement(
        task_id=task.id,
        assignment=assignment,
        applies=True,
        degrees=degrees,
        doa=degree_of_automation(degrees),
        category=category_of(degrees),
        automated_share=automated,
        principal=principal,
        duration_s=duration,
        active_s=active,
        supervision_s=supervision,
        accountable=accountable,
        monitor=monitor,
        monitoring_s=float(assumptions["monitoring_s"]) if monitor else 0.0,
        typical_duration_s=typical,
        active_typical_s=active_typical,
        monitoring=monitoring_style(assignment) if monitor else None,
    )


def monitoring_style(assignment: Assignment) -> Monitoring:
    """The assignment's monitoring style, else the default: ``each`` where the feedback
    is an alert (the person is told of every occurrence), otherwise ``periodic`` once a
    day (methods document, ``#monitoring``; tool assumption)."""
    if assignment.monitoring is not None:
        return assignment.monitoring
    if assignment.feedback in ALERTING:
        return Monitoring("each")
    return Monitoring("periodic", per_day=1)


def flags_per_day(assignment: Assignment | None, occurrences_per_day: float) -> float:
    """Flags a day the automation raises: its false alerts, and its failures detected by
    an alert or a display (methods document, ``#monitoring``)."""
    reliability = None if assignment is None else assignment.reliability
    if reliability is None or assignment is None or assignment.automation is None:
        return 0.0
    flags = float(reliability.false_alerts_per_day or 0.0)
    if reliability.detected:
        flags += occurrences_per_day * reliability.chance
    return flags


def expected_duration(duration: Range) -> float:
    """The mean of the triangular distribution over ``[min, typical, max]``:
    ``(min + typical + max) / 3`` (Evans, Hastings & Peacock 2000, ch. 40)."""
    return (float(duration.low) + float(duration.typical) + float(duration.high)) / 3


def watch_text(study: Study, involved: Involvement, per_day: float = 0.0) -> str | None:
    """How the monitor keeps watch and what it costs, in words (``None``: nobody
    monitors): "Pat checks each (10 s)", "Pat looks 2 a day (10 s each)"; ``per_day``
    is the task's occurrences a day (for the flags of its failures)."""
    watch, monitor = involved.monitoring, involved.monitor
    if watch is None or monitor is None:
        return None
    agent = study.agents_by_id.get(monitor)
    name = agent.name if agent is not None else monitor
    check = f"{involved.monitoring_s:g} s"
    if watch.style == "each":
        return f"{name} checks each ({check})"
    if watch.style == "periodic":
        return f"{name} looks {watch.per_day:g} a day ({check} each)"
    if watch.style == "continuous":
        return f"{name} watches {watch.share:.0%} of the run ({involved.watch_s:.3g} s)"
    flags = flags_per_day(involved.assignment, per_day)
    return f"{name} acts on flags ({check} each; {flags:.3g} a day)"
