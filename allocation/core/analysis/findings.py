"""Findings: points in a plan that a review should look at, each with its tasks and
severity.

This module holds the finding record and two kinds of finding (methods document,
``#findings``):

- ``accountability``: the accountable human is not the principal holder, so they must
  monitor work another agent holds (responsibility-authority mismatch; Pritchett, Kim &
  Feigh 2014); an automation named accountable is a finding too;
- ``capability``: an agent does a stage of a task whose needed capability it lacks
  (requirement 1 of Feigh & Pritchett 2014: each agent is allocated only what it can
  do). Needs are per task, so every agent doing any stage must have them all.

References
----------
.. [1] Pritchett, A. R., Kim, S. Y., & Feigh, K. M. (2014). Measuring human-automation
   function allocation. JCEDM, 8(1), 52-77.
.. [2] Feigh, K. M., & Pritchett, A. R. (2014). Requirements for effective function
   allocation: a critical review. JCEDM, 8(1), 23-32.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..model import Study
from ..vocabulary import STAGES
from .involvement import Involvement

__all__ = ["Finding", "WitnessStep", "accountability_findings", "capability_findings"]


@dataclass(frozen=True)
class WitnessStep:
    """One event of a mode-map finding's witness, and where it leaves machine and person.

    ``actual`` is the mode the device is in after the event and ``believed_set`` the
    modes the person then believes it may be in (modes they cannot tell apart);
    ``believed`` is one of them, the first that disagrees with the actual mode on who
    holds some task if any does (else the actual mode if it is in the set); ``missed``
    is true when the person did not notice the change (always false for their own
    actions and for alerts); ``refused`` marks an action of the person that the device
    does not accept (nothing changes).
    """

    event: str
    by: str
    cue: str
    missed: bool
    actual: str
    believed: str
    refused: bool = False
    believed_set: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if not self.believed_set:
            object.__setattr__(self, "believed_set", (self.believed,))

    def to_json(self) -> dict[str, Any]:
        return {
            "event": self.event,
            "by": self.by,
            "cue": self.cue,
            "missed": self.missed,
            "refused": self.refused,
            "actual": self.actual,
            "believed": self.believed,
            "believed_set": list(self.believed_set),
        }


@dataclass(frozen=True)
class Finding:
    """One point to review.

    ``witness`` is, for mode-map findings, the shortest sequence of events from the
    initial mode that shows the finding (empty for the other kinds and for findings
    that no event sequence shows, such as an unreachable mode).
    """

    kind: str
    severity: int
    message: str
    tasks: tuple[str, ...] = ()
    modes: tuple[str, ...] = ()
    events: tuple[str, ...] = ()
    agents: tuple[str, ...] = ()
    witness: tuple[WitnessStep, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "severity": self.severity,
            "tasks": list(self.tasks),
            "modes": list(self.modes),
            "events": list(self.events),
            "agents": list(self.agents),
            "witness": [step.to_json() for step in self.witness],
            "message": self.message,
        }


def _severity(study: Study, task_id: str) -> int:
    return study.task(task_id).severity or 1


def _label(study: Study, task_id: str) -> str:
    return f"{task_id} ({study.task(task_id).title})"


def _name(study: Study, agent_id: str) -> str:
    agent = study.agents_by_id.get(agent_id)
    return agent.name if agent else agent_id


def accountability_findings(
    study: Study, involved: Involvement, mode: str | None = None
) -> list[Finding]:
    """Responsibility-authority mismatches of one task under one assignment."""
    if not involved.applies or involved.accountable is None:
        return []
    accountable = study.agents_by_id.get(involved.accountable)
    where = f" in mode {mode}" if mode else ""
    modes = (mode,) if mode else ()
    task = _label(study, involved.task_id)
    if accountable is not None and not accountable.is_human:
        return [
            Finding(
                "accountability",
                _severity(study, involved.task_id),
                f"{accountable.name} is named accountable for {task}{where}, but accountability "
                "rests with people; name the person who answers for it.",
                (involved.task_id,),
                modes,
                (),
                (involved.accountable,),
            )
        ]
    if involved.monitor is None:
        return []
    holder = _name(study, involved.principal) if involved.principal else "nobody"
    return [
        Finding(
            "accountability",
            _severity(study, involved.task_id),
            f"{_name(study, involved.monitor)} is accountable for {task}{where} but "
            f"{holder} holds it: they must keep watch over it "
            f"({_watch_words(involved)}, added to their load).",
            (involved.task_id,),
            modes,
            (),
            (involved.monitor, involved.principal or ""),
        )
    ]


def capability_findings(
    study: Study, involved: Involvement, mode: str | None = None, *, after_failure: bool = False
) -> list[Finding]:
    """Agents doing a stage of the task without a capability it needs (``after_failure``:
    the fallback person doing the whole task after the automation failed)."""
    task = study.task(involved.task_id)
    if not involved.applies or not task.needs:
        return []
    findings = []
    # The stages each agent does: the human where the stage is not wholly automated, the
    # automation where it has any part (methods document, #finding-capability).
    doers = []
    if involved.human is not None:
        doers.append((involved.human, [s for s in STAGES if involved.degrees[s] < 1]))
    if involved.automation is not None:
        doers.append((involved.automation, [s for s in STAGES if involved.degrees[s] > 0]))
    where = f" in mode {mode}" if mode else ""
    if after_failure:
        where += " after the automation fails"
    needed = task.needs_by_stage
    for agent_id, stages in doers:
        agent = study.agents_by_id.get(agent_id)
        if agent is None or not stages:
            continue
        lacking = {s: sorted(needed[s] - agent.capability_set) for s in stages}
        missing = sorted({name for names in lacking.values() for name in names})
        if missing:
            by_stage = isinstance(task.needs, dict)
            what = (
                "; ".join(f"{', '.join(names)} for {s}" for s, names in lacking.items() if names)
                if by_stage
                else ", ".join(missing)
            )
            findings.append(
                Finding(
                    "capability",
                    task.severity or 1,
                    f"{agent.name} does part of {_label(study, task.id)}{where} but lacks "
                    f"{what}, which the task needs.",
                    (task.id,),
                    (mode,) if mode else (),
                    (),
                    (agent_id,),
                )
            )
    return findings


def _watch_words(involved: Involvement) -> str:
    """The monitoring style and its cost, as the accountability finding says it."""
    watch = involved.monitoring
    check = f"{involved.monitoring_s:g} s"
    if watch is None or watch.style == "each":
        return f"a check of {check} per occurrence"
    if watch.style == "periodic":
        return f"{watch.per_day:g} look(s) a day of {check}"
    if watch.style == "continuous":
        return f"{watch.share:.0%} of their attention while it runs"
    return f"a check of {check} per flag of the automation"
