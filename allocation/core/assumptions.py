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

from .scales import EK10_LEVELS

__all__ = [
    "ASSUMPTIONS",
    "METHOD_NOTES",
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


def _table(
    keys: tuple[str, ...],
    *,
    maximum: float | None = None,
    adds_up_to: dict[str, float] | None = None,
):
    """Check an object mapping some of ``keys`` to numbers.

    With ``adds_up_to`` (the defaults), the override merged into the defaults must add up
    to 1, so that a study may change one weight only if it changes another to match.
    """

    def check(value: Any) -> str | None:
        if not isinstance(value, dict):
            return f"must be an object with the keys {', '.join(keys)}"
        for key, number in value.items():
            if key not in keys:
                return f"has the key {key!r}; keys are {', '.join(keys)}"
            if not _is_number(number) or number < 0 or (maximum is not None and number > maximum):
                top = f" and at most {maximum:g}" if maximum is not None else ""
                return f"gives {key} {number!r}; it must be a number of at least 0{top}"
        merged = {**(adds_up_to or {}), **value}
        if adds_up_to is not None and abs(sum(merged.values()) - 1) > 1e-6:
            return f"weights must add up to 1 with the defaults kept, not {sum(merged.values()):g}"
        return None

    return check


def _range_check(value: Any) -> str | None:
    if not isinstance(value, list) or len(value) != 3 or not all(_is_number(v) for v in value):
        return "must be [min, typical, max] seconds"
    if not 0 <= value[0] <= value[1] <= value[2]:
        return "must be in order 0 <= min <= typical <= max"
    return None


def _choice(options: tuple[str, ...]):
    def check(value: Any) -> str | None:
        return None if value in options else f"must be one of {', '.join(options)}"

    return check


def ek10_supervision_s(roles: tuple[str, str, str, str]) -> int:
    """Seconds of supervision per occurrence at an ek10 level, from its roles.

    Tool assumption, keyed as Endsley & Kaber's table is: by who Selects when the
    computer Implements (the person selects: an approval, 5 s; both select: a veto
    window, 8 s; the computer selects: a notice to read, 3 s), and none where the person
    implements (they are doing the work) or nobody but the computer Monitors (no one
    supervises). Levels with the same roles cost the same (methods document,
    ``#supervision``).
    """
    monitoring, _generating, selecting, implementing = roles
    if implementing != "C" or monitoring == "C":
        return 0
    return {"H": 5, "H/C": 8, "C": 3}[selecting]


#: Seconds of supervision per occurrence by level (methods document, ``#supervision``),
#: per scale. Tool assumption. sv10, by the level of the decision or action stage:
#: approving (5), watching a veto window (6), reading a notification (7), looking things
#: up (8, 9); 1-4 and 10 cost none. ek10, from each level's roles (above).
SUPERVISION_S = {
    "sv10": {"1": 0, "2": 0, "3": 0, "4": 0, "5": 5, "6": 8, "7": 4, "8": 3, "9": 3, "10": 0},
    "ek10": {str(level): ek10_supervision_s(roles) for level, (_, roles) in EK10_LEVELS.items()},
}

FEEDBACK_KINDS = ("none", "on_request", "display", "alert", "alert_confirm")
AWARENESS_FACTORS = ("automation", "feedback", "initiation", "mode_change", "rarity")
AWARENESS_WEIGHTS = {
    "automation": 0.30,
    "feedback": 0.25,
    "initiation": 0.15,
    "mode_change": 0.20,
    "rarity": 0.10,
}
LIKELIHOOD_FACTORS = ("time", "load", "cue", "automation_initiated", "awareness")
#: The headline figures the study objective weighs (methods document, ``#objective``),
#: lower better for each.
OBJECTIVE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "handovers_to_review",
    "max_risk",
    "mean_awareness",
    "cut_ratio",
    "findings",
)
OBJECTIVE_WEIGHTS = {
    "burden_s_per_day": 1.0,
    "interruptions_per_day": 1.0,
    "night_interruptions_per_day": 1.0,
    "handovers_to_review": 1.0,
    "max_risk": 2.0,
    "mean_awareness": 1.0,
    "cut_ratio": 0.5,
    "findings": 1.0,
}


def _weights(keys: tuple[str, ...], defaults: dict[str, float], maximum: float):
    """Check a table of relative weights: each in [0, maximum], not all of them 0."""
    table = _table(keys, maximum=maximum)

    def check(value: Any) -> str | None:
        message = table(value)
        if message is None and not any({**defaults, **value}.values()):
            return "must keep at least one weight above 0"
        return message

    return check


def _reference_check(value: Any) -> str | None:
    """``{figure: {"good": g, "poor": p}}`` over the objective's figures."""
    if not isinstance(value, dict):
        return "must be an object mapping figures to {good, poor}"
    for figure, points in value.items():
        if figure not in OBJECTIVE_FIGURES:
            return f"has the figure {figure!r}; figures are {', '.join(OBJECTIVE_FIGURES)}"
        if not isinstance(points, dict) or not points or set(points) - {"good", "poor"}:
            return f"{figure} must be an object with good, poor or both"
        for key, number in points.items():
            if not _is_number(number):
                return f"{figure}.{key} must be a number"
        # Lower is better for every figure of the objective: poor lies at or above good
        # (good 0 when left out), or the scale would turn round.
        good = points.get("good", 0)
        if "poor" in points and points["poor"] < good:
            return (
                f"{figure}.poor ({points['poor']:g}) must not be below good ({good:g}): "
                "lower is better for every figure of the objective"
            )
    return None


ASSUMPTIONS: tuple[Assumption, ...] = (
    Assumption(
        "supervision_s",
        SUPERVISION_S,
        TOOL,
        "Baton default; levels of Sheridan & Verplank (1978) via Parasuraman et al. (2000), "
        "and of Endsley & Kaber (1999)",
        "Seconds a person spends per occurrence supervising automation at a level of the "
        "decision or action stage (approve, watch a veto window, read a notice). A study "
        "overrides the table of its own scale, level by level.",
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
    Assumption(
        "supervision_demand",
        {"visual": 1.0, "auditory": 0.0, "cognitive": 1.2, "psychomotor": 0.0},
        TOOL,
        "Baton default; anchor values of McCracken & Aldrich (1984): visually register, "
        "alternative selection",
        "VACP demand on each channel while a person supervises automation (approving, "
        "watching a veto window, reading a notice) in the day simulation.",
        _table(("visual", "auditory", "cognitive", "psychomotor"), maximum=7),
    ),
    Assumption(
        "monitoring_demand",
        {"visual": 1.0, "auditory": 0.0, "cognitive": 1.0, "psychomotor": 0.0},
        TOOL,
        "Baton default; anchor values of McCracken & Aldrich (1984): visually register, "
        "automatic (simple association)",
        "VACP demand on each channel while an accountable person checks work another agent "
        "holds, in the day simulation.",
        _table(("visual", "auditory", "cognitive", "psychomotor"), maximum=7),
    ),
    Assumption(
        "cue_weakness",
        {"none": 1.0, "on_request": 0.75, "display": 0.5, "alert": 0.25, "alert_confirm": 0.0},
        TOOL,
        "Baton default; ordering after Sarter & Woods (1995): unannounced changes are missed",
        "How weak each kind of feedback or cue is at keeping the person aware, from 0 "
        "(an alert that must be confirmed) to 1 (nothing). Used for awareness and handovers; "
        "an assignment that involves automation and names no feedback counts as none.",
        _table(FEEDBACK_KINDS, maximum=1),
    ),
    Assumption(
        "initiation_weight",
        {"automation": 1.0, "event": 0.5, "schedule": 0.25, "human": 0.0},
        TOOL,
        "Baton default; after Sarter & Woods (1995): automation-initiated changes are the "
        "ones people miss",
        "How much each initiator of a task's occurrences counts toward the awareness "
        "factor 'started by the automation'.",
        _table(("automation", "event", "schedule", "human"), maximum=1),
    ),
    Assumption(
        "awareness_weights",
        AWARENESS_WEIGHTS,
        TOOL,
        "Baton default; factors after Endsley & Kiris (1995), Onnasch et al. (2014), "
        "Sarter & Woods (1995)",
        "Weights of the mode-awareness factors (they add up to 1): automation of the "
        "decision and action stages, weakness of feedback, share started by the automation, "
        "holder changing between modes, rarity of the person's own practice.",
        _table(AWARENESS_FACTORS, maximum=1, adds_up_to=AWARENESS_WEIGHTS),
    ),
    Assumption(
        "practice_per_day",
        1.0,
        TOOL,
        "Baton default",
        "Hands-on occurrences per day at or above which a person counts as in practice; "
        "rarer practice raises the awareness factor 'rarity' toward 1.",
        _number(0.0, None, strict=True),
    ),
    Assumption(
        "likelihood_weights",
        {"time": 0.5, "load": 0.2, "cue": 0.3, "automation_initiated": 0.15, "awareness": 0.3},
        TOOL,
        "Baton default; the factors of Baton's methods document (handover likelihood) "
        "combined by a weighted noisy-OR",
        "Weight of each handover factor in the likelihood 1 - prod(1 - weight x factor): "
        "time budget ratio, receiver's concurrent load, weakness of the cue, "
        "automation-initiated, receiver's mode-awareness index.",
        _table(LIKELIHOOD_FACTORS, maximum=1),
    ),
    Assumption(
        "default_response_s",
        [5, 30, 120],
        TOOL,
        "Baton default",
        "A person's response latency [min, typical, max] in seconds when their agent gives "
        "none; an automation without one responds at once.",
        _range_check,
    ),
    Assumption(
        "every_days_when",
        "awake",
        TOOL,
        "Baton default",
        "When in the day a task or event that occurs every N days happens: while the "
        "person is awake, or at any time.",
        _choice(("awake", "any")),
    ),
    Assumption(
        "time_budget_floor_s",
        1,
        TOOL,
        "Baton default",
        "The least time left in a window a handover's time budget ratio divides by, in "
        "seconds: work ready at or past its deadline still gets a finite, large ratio.",
        _number(0.0, None, strict=True),
    ),
    Assumption(
        "objective_weights",
        OBJECTIVE_WEIGHTS,
        TOOL,
        "Baton default; a weighted sum of figures scaled between reference points "
        "(simple additive weighting)",
        "Weights (0 to 100, relative) of the headline figures in the study objective that "
        "ranks plans: each figure is scaled between its reference points "
        "(objective_reference) to 0 (good) .. 1 (poor); the score is the weighted sum, "
        "lower ranks first. Defaults: person burden, interruptions, night interruptions, "
        "handovers needing review, mean mode-awareness index and findings 1 each; highest "
        "screening index 2 (harm weighs double); cut ratio 0.5 (an indirect, structural "
        "sign).",
        _weights(OBJECTIVE_FIGURES, OBJECTIVE_WEIGHTS, maximum=100),
    ),
    Assumption(
        "objective_reference",
        {},
        TOOL,
        "Baton default",
        "Per figure of the objective, the value that scores 0 (good) and the value that "
        "scores the whole weight (poor): {figure: {good: g, poor: p}}. Defaults: good 0, "
        "the ideal of every figure weighed; poor the worst value among all the study's "
        "plans (good itself where every plan is better than good); a poor given may not "
        "lie below good. A figure whose poor equals its good scores 0 for every plan.",
        _reference_check,
    ),
)

_BY_KEY = {assumption.key: assumption for assumption in ASSUMPTIONS}

#: Fixed parts of the method, listed with the assumptions but not editable.
METHOD_NOTES = (
    ("jitter", TOOL, "A fixed time with jitter_s happens uniformly within +/- jitter_s."),
    (
        "rates",
        TOOL,
        "A rate per day is a Poisson process, spread evenly over the awake or asleep time "
        "of the person it names (of), or over the whole day (when: any, the default).",
    ),
    (
        "chains",
        TOOL,
        "A task in a chain occurs when some predecessor in that chain that occurred "
        "leads on to it (each link drawn once per happening, independently of the others), "
        "and starts when all of those that occurred are done.",
    ),
    (
        "latency_minute",
        TOOL,
        "In a chain, a person's response latency is awake or asleep as the minute the "
        "work reaches them makes it (the share of the chain's start times that fall in "
        "their asleep window, read at that minute).",
    ),
    (
        "doa",
        TOOL,
        "Overall degree of automation weighs the stages 1 : 2 : 3 : 4 (after "
        "Onnasch et al. 2014: later stages and higher levels both raise it).",
    ),
    (
        "degree_spacing",
        TOOL,
        "A level L of the ten-level scales is the degree d = (L - 1) / 9: an ordinal "
        "scale read as even steps.",
    ),
    (
        "stage_threshold",
        TOOL,
        "A stage is the automation's where its degree is above one half; the automation "
        "principally holds a task where its stage-weighted degree is above one half.",
    ),
    (
        "noticing",
        TOOL,
        "Alerts are always noticed; a change shown on the display or on request may be "
        "missed (the mode check follows both ways); a change with no cue is never "
        "noticed (after Sarter & Woods 1995).",
    ),
    (
        "link_weights",
        TOOL,
        "A link weighs the occurrences a day it carries: for precedes, the smaller of "
        "the source's a day times the link's probability and the target's a day; for "
        "informs, the smaller of the two a day.",
    ),
    (
        "monitoring_default",
        TOOL,
        "An accountable person who does not hold a task checks each occurrence where the "
        "feedback is an alert, otherwise looks once a day; looks follow the plan's own "
        "assignment and go with a task that occurs. False alerts of an automation with "
        "no accountable person cost no one.",
    ),
    (
        "slips_a_year",
        TOOL,
        "A handover's expected slips a year are its occurrences a day times 365 times "
        "its likelihood index, the index read as a chance per occurrence; the time "
        "factor of the index is the time budget ratio capped at 1.",
    ),
    (
        "failures",
        TOOL,
        "Occurrences fail independently with the assignment's stated chance; a failed "
        "occurrence is done whole by the fallback person at the task's own duration and "
        "interrupts them; chain timing and windows follow the normal holders, a failure's "
        "delay being judged by its handover's time budget.",
    ),
    (
        "escalation",
        TOOL,
        "People asked in turn answer independently of each other; one who answers within "
        "escalate_after_s takes the task, one off duty is passed over, and the last keeps "
        "it whatever; chain timing follows the first person asked.",
    ),
    (
        "duty",
        TOOL,
        "On duty a person answers with their awake latency; work reaching them off duty "
        "waits for their next duty start and interrupts no one.",
    ),
    (
        "simulation",
        TOOL,
        "The day simulation draws durations and latencies from their triangular "
        "distributions, lags uniformly, rates as Poisson processes, periodic looks "
        "as a Poisson process over the person's awake day and false alerts over the "
        "whole day, each occurrence's failure with its chance; the mode is carried across "
        "midnight, a chunk's first midnight drawn from the long-run distribution; runs "
        "are cut into chunks of days drawn from one seed.",
    ),
)


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


def _default(assumption: Assumption, scale: str) -> Any:
    if assumption.key == "supervision_s":
        return assumption.default.get(scale, assumption.default["sv10"])
    return assumption.default


def resolve_assumptions(values: Mapping[str, Any] | None, scale: str = "sv10") -> dict[str, Any]:
    """Every assumption's value in force: the study's override, else the default.

    Tables are merged key by key, so a study may override one level or one weight only.
    """
    values = values or {}
    resolved = {}
    for assumption in ASSUMPTIONS:
        default = _default(assumption, scale)
        value = values.get(assumption.key, default)
        if isinstance(default, dict) and isinstance(value, dict):
            value = {**default, **value}
        resolved[assumption.key] = value
    return resolved


def assumption_table(values: Mapping[str, Any] | None, scale: str = "sv10") -> list[dict]:
    """One row per assumption: key, default, the study's value, status, source, text."""
    values = values or {}
    resolved = resolve_assumptions(values, scale)
    return [
        {
            "key": assumption.key,
            "default": _default(assumption, scale),
            "value": resolved[assumption.key],
            "overridden": assumption.key in values,
            "status": assumption.status,
            "source": assumption.source,
            "description": assumption.description,
        }
        for assumption in ASSUMPTIONS
    ]
