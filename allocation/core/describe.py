"""Plain-language descriptions of model values, for screens and reports."""

from __future__ import annotations

from .model import Range, Study, Task
from .vocabulary import SEVERITIES

__all__ = ["duration_text", "occurs_text", "seconds_text", "severity_text", "task_outline"]


def seconds_text(seconds: float) -> str:
    """A number of seconds in the largest unit that reads well: ``90`` -> ``"1.5 min"``."""
    for size, unit in ((86400, "d"), (3600, "h"), (60, "min")):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} s"


def duration_text(duration: Range | None) -> str:
    """``"5 s (2 s–30 s)"`` for a range, ``"10 s"`` for a single value, ``"—"`` for none."""
    if duration is None:
        return "—"
    if duration.single or duration.low == duration.high:
        return seconds_text(duration.typical)
    return (
        f"{seconds_text(duration.typical)} ({seconds_text(duration.low)}–"
        f"{seconds_text(duration.high)})"
    )


def severity_text(severity: int | None) -> str:
    if severity is None:
        return "—"
    return f"{severity} {SEVERITIES[severity][0]}"


def occurs_text(study: Study, task: Task) -> str:
    """How a leaf task occurs, in words."""
    occurs = task.occurs
    if occurs is None:
        return "in a chain" if not study.is_goal(task.id) else ""
    if occurs.times is not None:
        jitter = f" (± {seconds_text(occurs.jitter_s)})" if occurs.jitter_s else ""
        return f"at {', '.join(occurs.times)}{jitter}"
    if occurs.per_day is not None:
        when = occurs.when or "any"
        if when == "any":
            return f"{occurs.per_day:g} a day, at any time"
        return f"{occurs.per_day:g} a day while {occurs.of or 'the person'} is {when}"
    if occurs.every_days is not None:
        return f"every {occurs.every_days:g} days"
    event = study.events_by_id.get(occurs.event or "")
    name = event.name if event else occurs.event
    chance = f", {occurs.probability:.0%} of the time" if occurs.probability is not None else ""
    return f"on {name}{chance}"


def task_outline(study: Study) -> list[tuple[Task, int]]:
    """Every task in hierarchy order with its depth (0 for a top-level task)."""
    outline: list[tuple[Task, int]] = []
    children = study.children
    known = study.tasks_by_id

    def visit(task_id: str, depth: int) -> None:
        outline.append((known[task_id], depth))
        for child in children[task_id]:
            visit(child, depth + 1)

    for task in study.tasks:
        if task.parent is None or task.parent not in known:
            visit(task.id, 0)
    return outline
