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

from ..model import Assignment, Range, Study, Task
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

__all__ = ["Involvement", "expected_duration", "involvement"]


@dataclass(frozen=True, slots=True)
class Involvement:
    """One task under one assignment: who holds it and what it costs the person.

    ``human_s`` is the assignment's human's expected time per occurrence, split into
    ``active_s`` (the stages' share of the expected duration the automation leaves them)
    and ``supervision_s``; ``duration_s`` is the expected (triangular mean) duration and
    ``typical_duration_s``, ``active_typical_s`` the same at the typical duration.
    ``monitor`` is the accountable human who does not hold the task, if any; they spend
    ``monitoring_s`` per occurrence checking it.
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
        """Expected seconds per occurrence ``agent_id`` (a human) spends on the task."""
        seconds = self.human_s if agent_id == self.human else 0.0
        if agent_id == self.monitor:
            seconds += self.monitoring_s
        return seconds

    def typical_time_of(self, agent_id: str) -> float:
        """The same as :meth:`time_of` at the typical duration."""
        seconds = self.human_typical_s if agent_id == self.human else 0.0
        if agent_id == self.monitor:
            seconds += self.monitoring_s
        return seconds

    def people(self) -> list[str]:
        """The humans who spend time on each occurrence."""
        names = [self.human] if self.human and self.human_s > 0 else []
        if self.monitor and self.monitoring_s > 0 and self.monitor not in names:
            names.append(self.monitor)
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
    )


def expected_duration(duration: Range) -> float:
    """The mean of the triangular distribution over ``[min, typical, max]``:
    ``(min + typical + max) / 3`` (Evans, Hastings & Peacock 2000, ch. 40)."""
    return (float(duration.low) + float(duration.typical) + float(duration.high)) / 3
