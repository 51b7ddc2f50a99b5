"""Study-file items (JSON form) to row field values: the inverse of the selectors.

Each function takes one item as the study file writes it and returns the keyword
arguments of its row, so that import and every edit write rows the same way.
"""

from __future__ import annotations

from typing import Any

from allocation import models as m
from allocation.core.model import ANY_MODE
from allocation.core.objective_file import objective_from_header


def header_values(item: dict[str, Any]) -> dict[str, Any]:
    return {
        "key": item["id"],
        "title": item["title"],
        "description": item.get("description", ""),
        "scale": item["scale"],
        "bin_s": item.get("bin_s"),
        # The file's study.objective is kept with the assumptions.
        "assumptions": objective_from_header(item),
        "risk_policy": item.get("risk_policy"),
    }


def agent_values(item: dict[str, Any]) -> dict[str, Any]:
    asleep = item.get("asleep") or ["", ""]
    on_duty = item.get("on_duty") or ["", ""]
    return {
        "key": item["id"],
        "name": item["name"],
        "kind": item["kind"],
        "capabilities": item.get("capabilities"),
        "asleep_from": asleep[0],
        "asleep_to": asleep[1],
        "on_duty_from": on_duty[0],
        "on_duty_to": on_duty[1],
        "response_s": item.get("response_s"),
        "notes": item.get("notes", ""),
    }


def event_values(item: dict[str, Any]) -> dict[str, Any]:
    return {
        "key": item["id"],
        "name": item["name"],
        "times": item.get("times"),
        "jitter_s": item.get("jitter_s"),
        "per_day": item.get("per_day"),
        "when": item.get("when", ""),
        "of": item.get("of", ""),
        "every_days": item.get("every_days"),
        "notes": item.get("notes", ""),
    }


def task_values(item: dict[str, Any]) -> dict[str, Any]:
    """A task's own values; its ``parent`` is set separately (it needs the parent row)."""
    return {
        "key": item["id"],
        "title": item["title"],
        "occurs": item.get("occurs"),
        "duration_s": item.get("duration_s"),
        "window_s": item.get("window_s"),
        "severity": item.get("severity"),
        "demands": item.get("demands"),
        "split": item.get("split"),
        "needs": item.get("needs"),
        "notes": item.get("notes", ""),
    }


def link_values(item: dict[str, Any], tasks: dict[str, m.Task]) -> dict[str, Any]:
    return {
        "source": tasks[item["from"]],
        "target": tasks[item["to"]],
        "kind": item["kind"],
        "lag_s": item.get("lag_s"),
        "probability": item.get("probability"),
        "notes": item.get("notes", ""),
    }


def assignment_values(item: dict[str, Any], agents: dict[str, m.Agent]) -> dict[str, Any]:
    """Values of a plan assignment or a mode override (the fields they share)."""
    people = item.get("human")
    first, later = (people[0], list(people[1:])) if isinstance(people, list) else (people, None)
    return {
        "human": agents[first] if first is not None else None,
        "escalation": later or None,
        "escalate_after_s": item.get("escalate_after_s"),
        "automation": agents[item["automation"]] if "automation" in item else None,
        "levels": item.get("levels"),
        "duration_s": item.get("duration_s"),
        "accountable": agents[item["accountable"]] if "accountable" in item else None,
        "feedback": item.get("feedback", ""),
        "initiator": item.get("initiator", ""),
        "status": item.get("status", ""),
        "rationale": item.get("rationale", ""),
        "applies": item.get("applies", True),
        "monitoring": item.get("monitoring"),
        "pass_through": bool(item.get("pass_through", False)),
        **reliability_values(item.get("reliability"), agents),
    }


def reliability_values(
    reliability: dict[str, Any] | None, agents: dict[str, m.Agent]
) -> dict[str, Any]:
    """An assignment's reliability: the fallback person as a row, the rest as written."""
    if reliability is None:
        return {"reliability": None, "fallback": None}
    rest = {key: value for key, value in reliability.items() if key != "fallback"}
    fallback = reliability.get("fallback")
    return {"reliability": rest, "fallback": agents[fallback] if fallback else None}


def plan_values(item: dict[str, Any]) -> dict[str, Any]:
    modes = item.get("modes")
    return {
        "key": item["id"],
        "name": item["name"],
        "description": item.get("description", ""),
        "initial_mode": modes["initial"] if modes else "",
    }


def mode_values(item: dict[str, Any]) -> dict[str, Any]:
    return {
        "key": item["id"],
        "name": item["name"],
        "indication": item.get("indication", ""),
        "lists_overrides": "overrides" in item,
        "notes": item.get("notes", ""),
    }


def transition_values(
    item: dict[str, Any], states: dict[str, m.ModeState], events: dict[str, m.Event]
) -> dict[str, Any]:
    return {
        "event": events[item["event"]] if "event" in item else None,
        "times": item.get("times"),
        "source": None if item["from"] == ANY_MODE else states[item["from"]],
        "target": states[item["to"]],
        "trigger": item["trigger"],
        "by": item["by"],
        "cue": item["cue"],
        "per_day": item.get("per_day"),
        "notes": item.get("notes", ""),
    }
