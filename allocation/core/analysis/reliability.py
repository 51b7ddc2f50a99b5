"""Automation that fails: who takes a failed occurrence over, and what it costs them.

An assignment may state its automation's reliability (methods document,
``#reliability``). Each occurrence fails independently with probability
``p = fails_per_1000 / 1000``; a failed occurrence is done whole by the fallback person
(the one named, else the assignment's human, else the accountable person) at the task's
own duration, and the automation does none of it. Expected values per occurrence are
then a mixture::

    E[time of person X] = (1 - p) * normal_X + p * failed_X

the failed occurrences being a Bernoulli thinning of the task's occurrences, so the
failures a day are ``p`` times its occurrences a day [1]_. False alerts are a separate
rate a day, each a check of ``monitoring_s`` for the accountable person.

References
----------
.. [1] Ross, S. M. (2014). Introduction to Probability Models (11th ed.), sec. 5.3.4:
   thinning a Poisson process by independent Bernoulli trials.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

from ..model import Assignment, Monitoring, Study, Task
from .findings import Finding, WitnessStep
from .involvement import Involvement, involvement

__all__ = [
    "failed_involvement",
    "failure_chance",
    "fallback_person",
    "false_alert_receiver",
    "silent_failure_findings",
    "with_failures",
]


def fallback_person(study: Study, assignment: Assignment) -> str | None:
    """Who takes a failed occurrence over: the fallback named, else the assignment's
    human, else its accountable person if that is a human; ``None`` for none."""
    reliability = assignment.reliability
    if reliability is not None and reliability.fallback is not None:
        return reliability.fallback
    if assignment.human is not None:
        return assignment.human
    agent = study.agents_by_id.get(assignment.accountable or "")
    return agent.id if agent is not None and agent.is_human else None


def failure_chance(assignment: Assignment | None) -> float:
    """The chance that one occurrence under the assignment fails (0 without an
    automation or a stated reliability)."""
    if assignment is None or assignment.automation is None or assignment.reliability is None:
        return 0.0
    return assignment.reliability.chance


def failed_involvement(
    study: Study, task: Task, involved: Involvement, assumptions: dict[str, Any]
) -> Involvement | None:
    """The task as the fallback person does it after a failure: the whole task, at the
    task's own duration, started by the failure; ``None`` when it cannot fail.

    The accountable person stays accountable: one other than the fallback keeps watch in
    the same style, except that under exception monitoring a detected failure is a flag,
    a check of that occurrence. The fallback who is also accountable pays no monitoring
    on top of doing the task.
    """
    assignment = involved.assignment
    if assignment is None or not involved.applies or failure_chance(assignment) <= 0:
        return None
    reliability = assignment.reliability
    assert reliability is not None
    fallback = fallback_person(study, assignment)
    if fallback is None:
        return None
    monitoring = assignment.monitoring
    watch = involved.monitoring
    if watch is not None and watch.style == "exception" and reliability.detected:
        monitoring = Monitoring("each")
    taken = Assignment(
        human=fallback,
        accountable=assignment.accountable or assignment.human,
        feedback=reliability.detected_by,
        initiator="automation",
        monitoring=monitoring,
    )
    return replace(involvement(study, task, taken, assumptions), failed=True)


def with_failures(
    study: Study,
    task: Task,
    mix: list[tuple[float, Involvement]],
    assumptions: dict[str, Any],
) -> list[tuple[float, Involvement]]:
    """A task's weighted involvements with each one that can fail split into its normal
    and its failed occurrences (weights ``1 - p`` and ``p``)."""
    result = []
    for share, involved in mix:
        failed = failed_involvement(study, task, involved, assumptions)
        if failed is None:
            result.append((share, involved))
            continue
        chance = failure_chance(involved.assignment)
        result += [(share * (1 - chance), involved), (share * chance, failed)]
    return result


def false_alert_receiver(study: Study, involved: Involvement) -> tuple[str, float] | None:
    """The person the automation's false alerts go to (its accountable human) and how
    many a day; ``None`` when there are none or no accountable person to receive them
    (then they cost no one)."""
    assignment = involved.assignment
    if assignment is None or assignment.automation is None or assignment.reliability is None:
        return None
    per_day = float(assignment.reliability.false_alerts_per_day or 0.0)
    agent = study.agents_by_id.get(involved.accountable or "")
    if per_day <= 0 or agent is None or not agent.is_human:
        return None
    return agent.id, per_day


def silent_failure_findings(
    study: Study,
    involved: Involvement,
    critical: int,
    mode: str | None = None,
    in_mode: str | None = None,
) -> list[Finding]:
    """A finding ``silent_failure`` where the automation of a task at or above the
    critical severity can fail and nothing tells anyone (``detected_by`` none).

    ``in_mode`` (the mode of the override, or the map's initial mode for the plan's own
    assignment) gives the finding its witness: the device fails there, unnoticed, so
    the person still believes the device holds the task."""
    assignment = involved.assignment
    if assignment is None or not involved.applies or failure_chance(assignment) <= 0:
        return []
    reliability = assignment.reliability
    task = study.task(involved.task_id)
    severity = task.severity or 1
    if reliability is None or reliability.detected or severity < critical:
        return []
    agents = study.agents_by_id
    machine = agents[assignment.automation].name if assignment.automation in agents else "?"
    fallback = fallback_person(study, assignment)
    person = agents[fallback].name if fallback in agents else "the fallback person"
    where = f" in mode {mode}" if mode else ""
    witness: tuple[WitnessStep, ...] = ()
    if in_mode is not None:
        witness = (
            WitnessStep(
                f"{machine} fails at {task.id}",
                "automation",
                reliability.detected_by or "none",
                True,
                in_mode,
                in_mode,
            ),
        )
    return [
        Finding(
            "silent_failure",
            severity,
            f"{machine} fails {reliability.fails_per_1000:g} times in 1,000 at {task.id} "
            f"({task.title}){where} and nothing tells anyone: {person} is to take it over "
            f"but is not told (severity {severity}, at or above the critical {critical}).",
            (task.id,),
            (mode,) if mode else (),
            (),
            tuple(agent for agent in (assignment.automation, fallback) if agent),
            witness,
        )
    ]
