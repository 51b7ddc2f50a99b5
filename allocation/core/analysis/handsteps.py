"""A failure or an escalation played step by step: who holds the task at each step,
and who the people concerned believe holds it (methods document, ``#reliability`` and
``#escalation``).

A failure: the device holds the task; it fails, and the fallback person is told by an
alert, may see it on a display, or is not told at all (then they still believe the
device holds it); told, they take the whole task over. An escalation: the first person
is asked; each one who does not answer within the time allowed is passed over and the
next is asked, until one takes the task.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..describe import seconds_text
from ..model import Study
from .escalation import latency_ranges, triangular_exceedance
from .handovers import Handover
from .plan import PlanAnalysis

__all__ = ["HandStep", "handover_steps"]


@dataclass(frozen=True)
class HandStep:
    """One step: what happened (``None`` at the start), how it reached the people, who
    really holds the task after it and who the person concerned believes holds it."""

    event: str | None
    how: str
    holder: str | None
    believed: str | None
    missed: bool = False

    @property
    def confused(self) -> bool:
        return self.believed != self.holder


def _name(study: Study, agent_id: str | None) -> str:
    agent = study.agents_by_id.get(agent_id or "")
    return agent.name if agent is not None else (agent_id or "nobody")


def handover_steps(result: PlanAnalysis, handover: Handover) -> list[HandStep]:
    """The steps of a failure or an escalation handover (empty for other sources)."""
    site = handover.site
    if site.source == "failure":
        return _failure(result.study, handover)
    if site.source == "escalation":
        return _escalation(result, handover)
    return []


def _failure(study: Study, handover: Handover) -> list[HandStep]:
    site = handover.site
    device, person = site.from_agent, site.to_agent
    task = study.task(site.to_task)
    cue = site.cue or "none"
    steps = [
        HandStep(None, f"{_name(study, device)} does {task.id} ({task.title})", device, device)
    ]
    told = {
        "alert": (f"an alert tells {_name(study, person)}", False),
        "display": (f"the display shows it: {_name(study, person)} may miss it", True),
        "none": (f"nothing tells {_name(study, person)}", True),
    }
    how, missed = told.get(cue, told["none"])
    steps.append(
        HandStep(
            f"{_name(study, device)} fails at {task.id}",
            how,
            person,
            device if missed else person,
            missed,
        )
    )
    if not missed or cue == "display":
        steps.append(
            HandStep(
                f"{_name(study, person)} takes the whole task over",
                "time budget ratio "
                + ("—" if handover.time_ratio is None else f"{handover.time_ratio:.2f}"),
                person,
                person,
            )
        )
    return steps


def _escalation(result: PlanAnalysis, handover: Handover) -> list[HandStep]:
    study, site = result.study, handover.site
    task = study.task(site.to_task)
    keeper = next(
        (
            shares
            for _share, shares in result.escalations.get(task.id, ())
            if site.to_agent in shares.people
        ),
        None,
    )
    if keeper is None:
        return []
    people, after = keeper.people, keeper.after_s
    default = result.assumptions["default_response_s"]
    steps = [
        HandStep(
            None,
            f"the work of {task.id} ({task.title}) is ready: {_name(study, people[0])} is asked",
            people[0],
            people[0],
        )
    ]
    for index in range(1, people.index(site.to_agent or "") + 1):
        before = people[index - 1]
        awake, asleep = latency_ranges(study, before, default)
        over_awake = triangular_exceedance(*awake, after)
        over_asleep = triangular_exceedance(*asleep, after)
        steps.append(
            HandStep(
                f"no answer from {_name(study, before)} within {seconds_text(after)}",
                f"{_name(study, people[index])} is asked (an awake {_name(study, before)} "
                f"misses {seconds_text(after)} {over_awake:.0%} of the time, asleep "
                f"{over_asleep:.0%})",
                people[index],
                people[index],
                missed=True,
            )
        )
    steps.append(
        HandStep(
            f"{_name(study, site.to_agent)} answers and takes the task",
            "time budget ratio "
            + ("—" if handover.time_ratio is None else f"{handover.time_ratio:.2f}"),
            site.to_agent,
            site.to_agent,
        )
    )
    return steps
