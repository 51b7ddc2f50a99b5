"""Writing a study back to the JSON format version 2.

Only the keys the study sets are written, so reading a file and writing it again gives
the same data (FORMAT.md: import then export is lossless).
"""

from __future__ import annotations

from typing import Any

from .model import (
    Agent,
    Assignment,
    Event,
    Link,
    Mode,
    ModeMap,
    Monitoring,
    Occurs,
    Plan,
    Reliability,
    Study,
    Task,
    Transition,
)
from .objective_file import split_objective
from .reading import FORMAT_NAME, FORMAT_VERSION

__all__ = ["study_to_json"]


def _compact(pairs: dict[str, Any]) -> dict[str, Any]:
    """Drop the keys whose value is ``None`` (keys the study file left out)."""
    return {key: value for key, value in pairs.items() if value is not None}


def _listed(values: tuple | None) -> list | None:
    return None if values is None else list(values)


def _range(value: Any) -> Any:
    return None if value is None else value.to_json()


def study_to_json(study: Study) -> dict[str, Any]:
    """The study as a JSON-ready dict in format version 2."""
    # The objective's weights and reference points live in study.objective.
    assumptions, objective = split_objective(study.assumptions)
    header = _compact(
        {
            "id": study.id,
            "title": study.title,
            "description": study.description,
            "scale": study.scale,
            "bin_s": study.bin_s,
            "assumptions": assumptions,
            "risk_policy": study.risk_policy,
            "objective": objective,
        }
    )
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "study": header,
        "agents": [agent_to_json(agent) for agent in study.agents],
        "events": [event_to_json(event) for event in study.events],
        "tasks": [task_to_json(task) for task in study.tasks],
        "links": [link_to_json(link) for link in study.links],
        "plans": [plan_to_json(plan) for plan in study.plans],
    }


def agent_to_json(agent: Agent) -> dict[str, Any]:
    return _compact(
        {
            "id": agent.id,
            "name": agent.name,
            "kind": agent.kind,
            "capabilities": _listed(agent.capabilities),
            "asleep": _listed(agent.asleep),
            "on_duty": _listed(agent.on_duty),
            "response_s": None
            if agent.response_s is None
            else {key: value.to_json() for key, value in agent.response_s.items()},
            "notes": agent.notes,
        }
    )


def _ways(item: Event | Occurs) -> dict[str, Any]:
    return {
        "times": _listed(item.times),
        "jitter_s": item.jitter_s,
        "per_day": item.per_day,
        "when": item.when,
        "of": item.of,
        "every_days": item.every_days,
    }


def event_to_json(event: Event) -> dict[str, Any]:
    return _compact({"id": event.id, "name": event.name, **_ways(event), "notes": event.notes})


def occurs_to_json(occurs: Occurs) -> dict[str, Any]:
    return _compact({**_ways(occurs), "event": occurs.event, "probability": occurs.probability})


def task_to_json(task: Task) -> dict[str, Any]:
    return _compact(
        {
            "id": task.id,
            "parent": task.parent,
            "title": task.title,
            "occurs": None if task.occurs is None else occurs_to_json(task.occurs),
            "duration_s": _range(task.duration_s),
            "window_s": task.window_s,
            "severity": task.severity,
            "demands": task.demands,
            "split": task.split,
            "needs": {stage: list(names) for stage, names in task.needs.items()}
            if isinstance(task.needs, dict)
            else _listed(task.needs),
            "notes": task.notes,
        }
    )


def link_to_json(link: Link) -> dict[str, Any]:
    return _compact(
        {
            "from": link.source,
            "to": link.target,
            "kind": link.kind,
            "lag_s": _range(link.lag_s),
            "probability": link.probability,
            "notes": link.notes,
        }
    )


def assignment_to_json(assignment: Assignment) -> dict[str, Any]:
    return _compact(
        {
            "human": list(assignment.people_asked) if assignment.escalation else assignment.human,
            "automation": assignment.automation,
            "levels": dict(assignment.levels)
            if isinstance(assignment.levels, dict)
            else assignment.levels,
            "duration_s": _range(assignment.duration_s),
            "accountable": assignment.accountable,
            "feedback": assignment.feedback,
            "initiator": assignment.initiator,
            "status": assignment.status,
            "rationale": assignment.rationale,
            "applies": assignment.applies,
            "monitoring": monitoring_to_json(assignment.monitoring),
            "pass_through": assignment.pass_through,
            "reliability": reliability_to_json(assignment.reliability),
            "escalate_after_s": assignment.escalate_after_s,
        }
    )


def reliability_to_json(reliability: Reliability | None) -> dict[str, Any] | None:
    """An assignment's reliability as the file writes it (keys left out stay out)."""
    if reliability is None:
        return None
    return _compact(
        {
            "fails_per_1000": reliability.fails_per_1000,
            "detected_by": reliability.detected_by,
            "fallback": reliability.fallback,
            "false_alerts_per_day": reliability.false_alerts_per_day,
        }
    )


def monitoring_to_json(monitoring: Monitoring | None) -> str | dict[str, Any] | None:
    """An assignment's monitoring style as the file writes it: the word alone for
    ``each`` and ``exception``, else the style with its amount."""
    if monitoring is None:
        return None
    if monitoring.style == "periodic":
        return {"style": "periodic", "per_day": monitoring.per_day}
    if monitoring.style == "continuous":
        return {"style": "continuous", "share": monitoring.share}
    return monitoring.style


def mode_to_json(mode: Mode) -> dict[str, Any]:
    return _compact(
        {
            "id": mode.id,
            "name": mode.name,
            "indication": mode.indication,
            "overrides": None
            if mode.overrides is None
            else {task_id: assignment_to_json(item) for task_id, item in mode.overrides.items()},
            "notes": mode.notes,
        }
    )


def transition_to_json(transition: Transition) -> dict[str, Any]:
    return _compact(
        {
            "from": transition.source,
            "to": transition.target,
            "trigger": transition.trigger,
            "by": transition.by,
            "cue": transition.cue,
            "per_day": transition.per_day,
            "event": transition.event,
            "times": _listed(transition.times),
            "notes": transition.notes,
        }
    )


def mode_map_to_json(modes: ModeMap) -> dict[str, Any]:
    return {
        "initial": modes.initial,
        "states": [mode_to_json(mode) for mode in modes.states],
        "transitions": [transition_to_json(item) for item in modes.transitions],
    }


def plan_to_json(plan: Plan) -> dict[str, Any]:
    return _compact(
        {
            "id": plan.id,
            "name": plan.name,
            "description": plan.description,
            "assignments": {
                task_id: assignment_to_json(item) for task_id, item in plan.assignments.items()
            },
            "modes": None if plan.modes is None else mode_map_to_json(plan.modes),
        }
    )
