"""The study's assumptions: every default the analyses use, with its status and source.

Each default is marked *published (source)*, *memory* (a published value recalled, not
re-read), *practice* (a common rule of thumb) or *tool assumption* (Baton's own choice).
A study overrides any of them in its ``assumptions`` object; :func:`assumption_table`
lists them all, with the study's value beside the default, for the Assumptions page and
for every export.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

__all__ = [
    "ASSUMPTIONS",
    "Assumption",
    "assumption_table",
    "check_assumptions",
    "resolve_assumptions",
]

PUBLISHED = "published"
MEMORY = "memory"
PRACTICE = "practice"
TOOL = "tool assumption"


@dataclass(frozen=True)
class Assumption:
    """One default value the analyses rely on."""

    key: str
    default: Any
    status: str
    source: str
    description: str
    check: Callable[[Any], str | None]


def _is_number(value: Any) -> bool:
    """A finite number (not a boolean, NaN, an infinity or an int too large for a float)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return False
    try:
        return math.isfinite(value)
    except OverflowError:
        return False


def _number(minimum: float = 0.0, maximum: float | None = None, strict: bool = False):
    def check(value: Any) -> str | None:
        if not _is_number(value):
            return "must be a finite number"
        if value < minimum or (strict and value == minimum):
            return f"must be {'more than' if strict else 'at least'} {minimum:g}"
        if maximum is not None and value > maximum:
            return f"must be at most {maximum:g}"
        return None

    return check


def _seconds_by_level(value: Any) -> str | None:
    if not isinstance(value, dict):
        return "must be an object mapping levels 1-10 to seconds"
    for level, seconds in value.items():
        if level not in {str(n) for n in range(1, 11)}:
            return f"has the key {level!r}; keys are the levels '1' to '10'"
        if not _is_number(seconds) or seconds < 0:
            return f"gives level {level} {seconds!r}; seconds must be a number of at least 0"
    return None


#: Seconds of supervision per occurrence by sv10 level of the decision or action
#: stage (DESIGN §3.1). Tool assumption: approving (5), watching a veto window (6),
#: reading a notification (7), looking things up (8, 9); 1-4 and 10 cost none.
SUPERVISION_S = {
    "1": 0, "2": 0, "3": 0, "4": 0, "5": 5, "6": 8, "7": 4, "8": 3, "9": 3, "10": 0,
}  # fmt: skip

ASSUMPTIONS: tuple[Assumption, ...] = (
    Assumption(
        "supervision_s",
        SUPERVISION_S,
        TOOL,
        "Baton default; levels after Sheridan & Verplank (1978) via Parasuraman et al. (2000)",
        "Seconds a person spends per occurrence supervising automation at a given level "
        "of the decision or action stage (approve, watch a veto window, read a notice).",
        _seconds_by_level,
    ),
    Assumption(
        "monitoring_s",
        10,
        TOOL,
        "Baton default; responsibility-authority mismatch after Pritchett, Kim & Feigh (2014)",
        "Seconds per occurrence an accountable person spends checking work another agent holds.",
        _number(),
    ),
    Assumption(
        "occupancy_limit",
        0.8,
        PRACTICE,
        "time-line analysis, NATO AC/243 (Panel 8) TR/7 (1992); the 0.8 line is common practice",
        "Time required divided by time available in a timeline bin above which the bin "
        "counts as overload.",
        _number(0.0, None, strict=True),
    ),
    Assumption(
        "channel_limit",
        7.0,
        MEMORY,
        "VACP, McCracken & Aldrich (1984); the red line of 7 is recalled from memory",
        "Concurrent VACP demand on one channel above which the channel counts as overloaded.",
        _number(0.0, None, strict=True),
    ),
)

_BY_KEY = {assumption.key: assumption for assumption in ASSUMPTIONS}


def check_assumptions(values: Mapping[str, Any]) -> list[tuple[str, str]]:
    """Problems in a study's ``assumptions`` object, as ``(key, message)`` pairs."""
    problems = []
    for key, value in values.items():
        assumption = _BY_KEY.get(key)
        if assumption is None:
            known = ", ".join(sorted(_BY_KEY))
            problems.append((key, f"is not a known assumption (known: {known})"))
            continue
        message = assumption.check(value)
        if message:
            problems.append((key, message))
    return problems


def resolve_assumptions(values: Mapping[str, Any] | None) -> dict[str, Any]:
    """Every assumption's value in force: the study's override, else the default.

    Level tables are merged level by level, so a study may override one level only.
    """
    values = values or {}
    resolved = {}
    for assumption in ASSUMPTIONS:
        value = values.get(assumption.key, assumption.default)
        if isinstance(assumption.default, dict) and isinstance(value, dict):
            value = {**assumption.default, **value}
        resolved[assumption.key] = value
    return resolved


def assumption_table(values: Mapping[str, Any] | None) -> list[dict[str, Any]]:
    """One row per assumption: key, default, the study's value, status, source, text."""
    values = values or {}
    resolved = resolve_assumptions(values)
    return [
        {
            "key": assumption.key,
            "default": assumption.default,
            "value": resolved[assumption.key],
            "overridden": assumption.key in values,
            "status": assumption.status,
            "source": assumption.source,
            "description": assumption.description,
        }
        for assumption in ASSUMPTIONS
    ]
