"""The registry: every figure Baton computes, every kind of finding and every status, in
words, once.

Screens, exports, the command line and the core's own tables (the comparison's figures,
the simulation's figure words) read a figure's label, unit, display precision, which way
is better and the section of Baton's methods document that defines it from here, so a
figure is named and rounded the same everywhere. The anchors are the ``{#id}`` of the
sections of ``METHODS.md`` (read by :mod:`allocation.core.methods`); a test checks that
each one exists and that every figure section of the document is named here.

>>> figure_text("burden_s_per_day", 14644)
'4.07 h a day'
>>> figure_text("night_interruptions_per_day", 0.25)
'0.25 a day'
>>> FIGURES["modularity"].better
'higher'
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from decimal import Decimal
from typing import Any

from .assumptions import MEMORY, PRACTICE, PUBLISHED, TOOL
from .describe import seconds_text
from .vocabulary import (
    ASSIGNMENT_STATUSES,
    CHANNELS,
    CUES,
    FREQUENCY_BANDS,
    INITIATORS,
    TRANSITION_CAUSES,
)

__all__ = [
    "INITIATOR_WORDS",
    "CAUSE_WORDS",
    "CUE_WORDS",
    "PERSON_FIGURES",
    "ASSIGNMENT_STATUS_WORDS",
    "ASSUMPTION_STATUS_WORDS",
    "AWARENESS_FACTORS",
    "BETTER",
    "CATEGORIES",
    "DECISION_STATUS_WORDS",
    "FIGURES",
    "FINDING_KINDS",
    "HANDOVER_SOURCES",
    "LIKELIHOOD_FACTORS",
    "RISK_BANDS",
    "FREQUENCY_BAND_WORDS",
    "SIMULATED",
    "Figure",
    "FindingKind",
    "Term",
    "anchors",
    "figure",
    "figure_number",
    "figure_text",
    "finding_kind",
]

LOWER, HIGHER, NONE = "lower", "higher", "none"
#: Which way a figure is better: lower, higher, or neither (a fact, not a goal).
BETTER = (LOWER, HIGHER, NONE)

MINUS = "−"  # the minus sign, not the hyphen


@dataclass(frozen=True)
class Figure:
    """One figure: how it is named, written and judged, and where it is defined.

    ``unit`` is written after the value (``"s a day"``, ``"a day"``, ``"VACP sum"``; empty
    for a pure number). A figure with ``seconds`` is a duration in seconds, and its unit
    starts with ``"s"``: :func:`figure_text` writes it in the largest unit that reads well
    (:func:`~allocation.core.describe.seconds_text`) followed by the rest of the unit.
    ``decimals`` is the precision of the value as a plain number (a duration in a column
    of seconds, a count, an index). ``short`` is a column heading where the label is too
    long. ``anchor`` is the id of the figure's section in Baton's methods document.
    """

    key: str
    label: str
    unit: str
    decimals: int
    better: str
    anchor: str
    short: str = ""
    seconds: bool = False

    @property
    def heading(self) -> str:
        """The label for a column heading: the short label, else the label."""
        return self.short or self.label

    @property
    def lower_is_better(self) -> bool:
        return self.better == LOWER

    @property
    def per(self) -> str:
        """What a duration is per (``"a day"``), after its ``s``; empty for other figures."""
        return self.unit[1:].strip() if self.seconds else ""


@dataclass(frozen=True)
class FindingKind:
    """A kind of finding: its name, what it says, what its severity is taken from."""

    key: str
    label: str
    explanation: str
    severity: str
    anchor: str


@dataclass(frozen=True)
class Term:
    """One value of a fixed list (a status, a band, a category) in words."""

    key: str
    label: str
    meaning: str
    anchor: str


def _figures(*figures: Figure) -> dict[str, Figure]:
    table = {}
    for item in figures:
        if item.key in table:
            raise ValueError(f"figure {item.key!r} is registered twice")
        if item.better not in BETTER:
            raise ValueError(f"figure {item.key!r}: better must be one of {BETTER}")
        if item.seconds and item.unit.split(" ")[0] != "s":
            raise ValueError(f"figure {item.key!r} is in seconds, so its unit starts with 's'")
        table[item.key] = item
    return table


F = Figure

#: Every figure, by the key it has in the analysis file, the headline figures, the
#: simulation's daily figures, the comparison and the workload ratings.
FIGURES: dict[str, Figure] = _figures(
    # -- a person's daily figures (analysis file "people"; plan headline) -----------------
    F("burden_s_per_day", "Person time", "s a day", 1, LOWER, "person-time", seconds=True),
    F("monitoring_s_per_day", "Monitoring", "s a day", 1, LOWER, "monitoring", seconds=True),
    F("interactions_per_day", "Interactions", "a day", 2, NONE, "interactions"),
    F("interruptions_per_day", "Interruptions", "a day", 2, LOWER, "interruptions"),
    F(
        "night_interruptions_per_day",
        "Night interruptions",
        "a day",
        2,
        LOWER,
        "night-interruptions",
    ),
    F("failures_per_day", "Failures taken over", "a day", 3, LOWER, "reliability"),
    F("escalations_per_day", "Calls passed on to them", "a day", 3, LOWER, "escalation"),
    F(
        "awake_share_used",
        "Share of the waking day",
        "",
        3,
        LOWER,
        "waking-day-share",
        short="Waking day used",
    ),
    # -- one task under the plan (analysis file "tasks") ----------------------------------
    F(
        "person_s",
        "Expected person time per occurrence",
        "s",
        1,
        LOWER,
        "person-time",
        short="Person time per occurrence",
        seconds=True,
    ),
    F(
        "expected_s",
        "Expected person time per occurrence",
        "s",
        1,
        LOWER,
        "person-time",
        short="Expected",
        seconds=True,
    ),
    F(
        "typical_s",
        "Person time per occurrence at typical durations",
        "s",
        1,
        LOWER,
        "person-time",
        short="At typical durations",
        seconds=True,
    ),
    F(
        "active_s",
        "Expected active time per occurrence",
        "s",
        1,
        LOWER,
        "person-time",
        seconds=True,
    ),
    F(
        "supervision_s",
        "Supervision per occurrence",
        "s",
        1,
        LOWER,
        "supervision",
        seconds=True,
    ),
    F("monitoring_s", "Seconds per check", "s", 1, LOWER, "monitoring", seconds=True),
    F("watch_s", "Monitoring per occurrence", "s", 1, LOWER, "monitoring", seconds=True),
    F("looks_per_day", "Periodic looks", "a day", 2, NONE, "monitoring"),
    F(
        "person_s_per_day",
        "Person time on the task",
        "s a day",
        1,
        LOWER,
        "person-time",
        seconds=True,
    ),
    F("occurrences_per_day", "Occurrences", "a day", 2, NONE, "occurrences"),
    F("degrees", "Degree of automation of a stage", "", 2, NONE, "levels-of-automation"),
    F("doa", "Overall degree of automation", "", 2, NONE, "degree-of-automation"),
    F("automated_share", "Share the automation does", "", 2, NONE, "principal-holder"),
    F("asleep_share", "Share while asleep", "", 2, NONE, "time-of-day"),
    F("awareness", "Mode-awareness index", "", 3, LOWER, "awareness-index"),
    F("latency_s", "Response latency", "s", 0, LOWER, "response-latency", seconds=True),
    # -- chains and deadlines -------------------------------------------------------------
    F("start_s", "Start", "s", 0, NONE, "chain-timing", seconds=True),
    F("finish_s", "Finish", "s", 0, LOWER, "chain-timing", seconds=True),
    F("missed_share", "Share of windows missed", "", 3, LOWER, "window-misses"),
    # -- the mode map ---------------------------------------------------------------------
    F("mode_share", "Share of the day in the mode", "", 3, NONE, "mode-share"),
    # -- handovers ------------------------------------------------------------------------
    F("handovers", "Handover points", "", 0, LOWER, "handover-sites", short="Handovers"),
    F(
        "handovers_per_day",
        "Handover occurrences",
        "a day",
        2,
        LOWER,
        "handover-sites",
        short="Handovers a day",
    ),
    F("time_ratio", "Time budget ratio", "", 2, LOWER, "time-budget-ratio"),
    F("likelihood", "Likelihood index", "", 2, LOWER, "handover-likelihood"),
    F("likelihood_band", "Likelihood band", "", 0, LOWER, "handover-risk"),
    F("frequency_per_year", "Expected slips a year", "a year", 3, LOWER, "handover-risk"),
    F("risk", "Screening score", "", 0, LOWER, "handover-risk", short="Score"),
    F("receiver_load", "Receiver's load", "", 3, LOWER, "waking-day-share"),
    F(
        "handovers_to_review",
        "Handovers needing review",
        "",
        0,
        LOWER,
        "handover-risk",
        short="To review",
    ),
    F(
        "max_risk",
        "Highest screening score",
        "",
        0,
        LOWER,
        "handover-risk",
        short="Highest score",
    ),
    # -- plan headline --------------------------------------------------------------------
    F(
        "mean_awareness",
        "Mean mode-awareness index",
        "",
        3,
        LOWER,
        "awareness-index",
        short="Mean awareness",
    ),
    F("cut_ratio", "Cut ratio", "", 3, LOWER, "cut-ratio"),
    F("modularity", "Modularity", "", 3, HIGHER, "modularity"),
    F("findings", "Findings", "", 0, LOWER, "findings"),
    # -- simulated days (daily figures that only the simulation gives) ---------------------
    F("peak_occupancy", "Peak occupancy", "share of a bin", 2, LOWER, "occupancy"),
    F("overload_min", "Occupancy overload", "min a day", 1, LOWER, "occupancy"),
    *(
        F(f"peak_{c}", f"Peak {c} demand", "VACP sum", 1, LOWER, "channel-demand")
        for c in CHANNELS
    ),
    *(
        F(
            f"overload_s_{c}",
            f"{c.capitalize()} overload",
            "s a day",
            0,
            LOWER,
            "channel-demand",
            seconds=True,
        )
        for c in CHANNELS
    ),
    # -- comparison -----------------------------------------------------------------------
    F(
        "burden_change",
        "Person time moved",
        "s a day",
        1,
        LOWER,
        "burden-moved",
        seconds=True,
    ),
    F("objective_score", "Objective score", "", 3, LOWER, "objective", short="Score"),
    F("objective_contribution", "Contribution to the score", "", 3, LOWER, "objective"),
    # -- workload ratings -----------------------------------------------------------------
    F("tlx_raw", "Raw TLX", "", 1, LOWER, "tlx-raw"),
    F("tlx_weighted", "Weighted TLX", "", 1, LOWER, "tlx-weighted"),
    F("tlx_tally", "Tally", "", 0, NONE, "tlx-weighted"),
)

#: The simulation's names of the daily figures it shares with the analysis: a simulated
#: day's value of the same figure.
SIMULATED = {
    "burden_s": "burden_s_per_day",
    "monitoring_s": "monitoring_s_per_day",
    "interactions": "interactions_per_day",
    "interruptions": "interruptions_per_day",
    "night_interruptions": "night_interruptions_per_day",
    "failures": "failures_per_day",
    "escalations": "escalations_per_day",
}

#: The factors of the mode-awareness index (analysis file ``awareness_factors``).
AWARENESS_FACTORS: dict[str, Figure] = _figures(
    F("automation", "Automation of decision and action", "", 2, LOWER, "awareness-factors"),
    F("feedback", "Weak feedback", "", 2, LOWER, "awareness-factors"),
    F("initiation", "Started by others", "", 2, LOWER, "awareness-factors"),
    F("mode_change", "Holder changes between modes", "", 2, LOWER, "awareness-factors"),
    F("rarity", "Rare hands-on practice", "", 2, LOWER, "awareness-factors"),
)

#: The factors of a handover's likelihood index (a handover's ``factors``).
LIKELIHOOD_FACTORS: dict[str, Figure] = _figures(
    F("time", "Time budget", "", 2, LOWER, "handover-likelihood"),
    F("load", "Receiver's load", "", 2, LOWER, "handover-likelihood"),
    F("cue", "Weak cue", "", 2, LOWER, "handover-likelihood"),
    F("automation_initiated", "Started by others", "", 2, LOWER, "handover-likelihood"),
    F("awareness", "Receiver's mode awareness", "", 2, LOWER, "handover-likelihood"),
)

del F


#: A person's daily figures, in the order every table of a person's day shows them
#: (the dashboard, the printable report).
PERSON_FIGURES = (
    "burden_s_per_day",
    "monitoring_s_per_day",
    "interactions_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "failures_per_day",
    "escalations_per_day",
    "awake_share_used",
)


def figure(key: str) -> Figure:
    """The figure of a key, also under its simulation name (``burden_s``).

    Raises
    ------
    KeyError
        Naming the key, when the registry has no such figure.
    """
    found = FIGURES.get(SIMULATED.get(key, key))
    if found is None:
        raise KeyError(f"no figure {key!r} in the registry")
    return found


def _spec(key: str | Figure) -> Figure:
    return key if isinstance(key, Figure) else figure(key)


def _number(value: float | None) -> float | None:
    # NaN is no value either: both show as a dash.
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    return float(value)


def figure_number(key: str | Figure, value: float | None, *, signed: bool = False) -> str:
    """A figure's value as a plain number at the registry's precision, without its unit.

    Thousands are grouped and negative values take the minus sign. A value other than 0
    too small for the precision keeps two significant digits, so that a rare occurrence
    never reads as none. With ``signed`` (a difference) a positive value takes ``+`` and
    zero reads ``±0``. ``None`` (and NaN) read ``—``.

    >>> figure_number("cut_ratio", 0.25)
    '0.250'
    >>> figure_number("occurrences_per_day", 1 / 365)
    '0.0027'
    >>> figure_number("interruptions_per_day", -0.001, signed=True)
    '−0.001'
    """
    number = _number(value)
    if number is None:
        return "—"
    spec = _spec(key)
    if signed and number == 0:
        return "±0"
    text = f"{abs(number):,.{spec.decimals}f}"
    if number != 0 and text.strip("0.,") == "":
        # Two significant digits, written out in full (never as 1e-07).
        text = format(Decimal(f"{abs(number):.2g}"), "f")
    if signed:
        return ("+" if number > 0 else MINUS) + text
    return MINUS + text if number < 0 else text


def figure_text(
    key: str | Figure, value: float | None, *, unit: bool = True, signed: bool = False
) -> str:
    """A figure's value as written on screens and in reports, with its unit.

    A duration goes through :func:`~allocation.core.describe.seconds_text` (three
    significant digits in the largest unit that reads well) and is followed by what it is
    per; any other figure is :func:`figure_number` followed by its unit.

    Parameters
    ----------
    key : str or Figure
        The figure (also under its simulation name).
    value : float or None
        The value in the figure's own unit (seconds for a duration).
    unit : bool
        Write the unit (leave it out in a column whose heading gives it).
    signed : bool
        A difference: ``+`` before an increase, ``±0`` for none.

    Examples
    --------
    14,644 s is 4.0678 h, three significant digits 4.07:

    >>> figure_text("burden_s_per_day", 14644)
    '4.07 h a day'
    >>> figure_text("person_s", 52 / 3)
    '17.3 s'
    >>> figure_text("burden_change", -90, signed=True)
    '−1.5 min a day'
    """
    number = _number(value)
    if number is None:
        return "—"
    spec = _spec(key)
    if spec.seconds:
        if signed and number == 0:
            return "±0"
        sign = MINUS if number < 0 else ("+" if signed else "")
        text = sign + seconds_text(abs(number))
        after = spec.per
    else:
        text = figure_number(spec, number, signed=signed)
        after = spec.unit
    return f"{text} {after}" if unit and after else text


# -- finding kinds ------------------------------------------------------------------------

_HIGHEST = "the highest severity among the tasks whose holder differs"


def _kinds(*kinds: FindingKind) -> dict[str, FindingKind]:
    return {kind.key: kind for kind in kinds}


K = FindingKind

#: Every kind of finding the analyses raise, in the order screens list them.
FINDING_KINDS: dict[str, FindingKind] = _kinds(
    K(
        "accountability",
        "Accountable without holding the task",
        "The accountable person does not principally hold the task and must monitor work "
        "another agent holds, or an automation is named accountable.",
        "the task's severity",
        "finding-accountability",
    ),
    K(
        "capability",
        "Capability missing",
        "An agent does part of a task without a capability the task needs.",
        "the task's severity",
        "finding-capability",
    ),
    K(
        "window_missed",
        "Window missed",
        "A task of a chain finishes after its window, always, typically or possibly.",
        "the task's severity",
        "finding-window-missed",
    ),
    K(
        "chain_cut",
        "Chain cut",
        "A task not done in the plan takes away the tasks only it starts, and the work "
        "that goes with them.",
        "the highest severity among the tasks cut",
        "finding-chain-cut",
    ),
    K(
        "silent_failure",
        "Failure nobody is told of",
        "The automation of a task at or above the critical severity can fail with nothing "
        "to tell the person who is to take it over.",
        "the task's severity",
        "finding-silent-failure",
    ),
    K(
        "uncued_change",
        "Change without a cue",
        "The device changes mode by itself with nothing to tell the person, and who does "
        "some task changes with it.",
        _HIGHEST,
        "finding-uncued-change",
    ),
    K(
        "ambiguous_indication",
        "Modes that look alike",
        "Two modes show the same thing but differ in who does what, or in what the same "
        "action of the person does.",
        _HIGHEST + " (1 when only an action differs)",
        "finding-ambiguous-indication",
    ),
    K(
        "error_state",
        "Person and device disagree",
        "A reachable situation where a mode the person believes (modes that look alike "
        "are believed together) and the mode the device is in disagree on who does some "
        "task.",
        _HIGHEST,
        "finding-error-state",
    ),
    K(
        "unforeseen_transition",
        "Change the person cannot follow",
        "The device can change mode in a way the person's picture does not follow.",
        _HIGHEST + " (1 when no task changes hands)",
        "finding-unforeseen-transition",
    ),
    K(
        "refused_action",
        "Action refused",
        "The person tries an action their picture of the mode offers, and the device, in "
        "its actual mode, does not accept it.",
        _HIGHEST + " between the believed and the actual mode (1 when none does)",
        "finding-refused-action",
    ),
    K(
        "unreachable_mode",
        "Mode never reached",
        "No sequence of transitions reaches the mode.",
        "always 1 (negligible): a design question, not a hazard",
        "finding-unreachable-mode",
    ),
    K(
        "unheld_task",
        "Critical task held by nobody",
        "In the mode nobody holds a task at or above the critical severity: it is not done "
        "while the device stays there.",
        "the highest severity among the critical tasks nobody holds there",
        "finding-unheld-task",
    ),
    K(
        "no_way_back",
        "No way back",
        "From the mode no path leads back to one where the person holds the safety-critical "
        "tasks the map gives them elsewhere (a mode where such a task is not done lacks it).",
        "the highest severity among the safety-critical tasks no person holds there",
        "finding-no-way-back",
    ),
    K(
        "mode_map_unchecked",
        "Mode map too large to check",
        "The mode map has too many modes or transitions for its check to search them; "
        "none of its confusions is known.",
        "always 3 (moderate): the map's confusions are unknown",
        "finding-mode-map-unchecked",
    ),
)

del K


def finding_kind(key: str) -> FindingKind:
    """The words of a finding kind.

    Raises
    ------
    KeyError
        Naming the kind, when the registry has no such kind.
    """
    found = FINDING_KINDS.get(key)
    if found is None:
        raise KeyError(f"no finding kind {key!r} in the registry")
    return found


# -- statuses and other fixed lists --------------------------------------------------------


def _terms(
    keys: Iterable[str], words: Mapping[str, tuple[str, str]], anchor: str
) -> dict[str, Term]:
    """The words of a fixed list, which must give words to exactly its keys."""
    keys = tuple(keys)
    if set(keys) != set(words):
        raise ValueError(f"words for {sorted(words)} but the list is {sorted(keys)}")
    return {key: Term(key, *words[key], anchor) for key in keys}


#: An assignment's review status (the study file's ``status``).
ASSIGNMENT_STATUS_WORDS: dict[str, Term] = _terms(
    ASSIGNMENT_STATUSES,
    {
        "proposed": ("Proposed", "Put forward for the review; not yet agreed."),
        "agreed": ("Agreed", "The team has agreed to this allocation of the task."),
        "rejected": ("Rejected", "The team has turned this allocation down."),
        "open": ("Open", "Still to be decided."),
    },
    "assignment-statuses",
)

#: How far an assumption's default can be trusted (see :mod:`.assumptions`).
ASSUMPTION_STATUS_WORDS: dict[str, Term] = _terms(
    (PUBLISHED, MEMORY, PRACTICE, TOOL),
    {
        PUBLISHED: ("published", "A value read in the published source named beside it."),
        MEMORY: (
            "published, from memory",
            "A published value recalled, not re-read: a configurable default.",
        ),
        PRACTICE: ("common practice", "A common rule of thumb with no single source."),
        TOOL: ("tool assumption", "Baton's own choice, to be reviewed and overridden."),
    },
    "assumption-statuses",
)

#: A decision of the review's decision log.
DECISION_STATUS_WORDS: dict[str, Term] = _terms(
    ("open", "agreed", "rejected", "deferred"),
    {
        "open": ("Open", "Raised, not yet decided."),
        "agreed": ("Agreed", "Decided as written."),
        "rejected": ("Rejected", "Turned down."),
        "deferred": ("Deferred", "Put off to a later review."),
    },
    "decision-statuses",
)

#: How often a slip at a handover may happen (expected slips a year, the policy's cuts).
FREQUENCY_BAND_WORDS: dict[str, Term] = _terms(
    FREQUENCY_BANDS,
    {
        "frequent": ("Frequent", "At or above the policy's first cut (example: 10 a year)."),
        "probable": ("Probable", "At or above the second cut (example: 1 a year)."),
        "occasional": ("Occasional", "At or above the third cut (example: 0.1 a year)."),
        "remote": ("Remote", "At or above the last cut (example: 0.01 a year)."),
        "improbable": ("Improbable", "Below the last cut."),
    },
    "handover-risk",
)

#: The bands of the risk policy a handover falls in.
RISK_BANDS: dict[str, Term] = _terms(
    ("acceptable", "review", "unacceptable"),
    {
        "acceptable": (
            "Acceptable",
            "Its frequency and severity fall in the policy's acceptable cells.",
        ),
        "review": ("Review", "Its frequency and severity call for the team to look at it."),
        "unacceptable": (
            "Unacceptable",
            "Its frequency and severity fall in the policy's unacceptable cells.",
        ),
    },
    "handover-risk",
)

#: Where a handover is.
HANDOVER_SOURCES: dict[str, Term] = _terms(
    ("link", "shared", "mode", "failure", "escalation"),
    {
        "link": ("Along a link", "A link whose two tasks different agents hold."),
        "shared": ("Within a shared task", "The stages of a shared task pass between agents."),
        "mode": ("Mode change", "A transition of the mode map changes who holds a task."),
        "failure": (
            "Failure",
            "The automation fails at an occurrence and a person takes the whole task over.",
        ),
        "escalation": (
            "Escalation",
            "The person asked does not answer in time and the next person is asked.",
        ),
    },
    "handover-sites",
)

#: A task's category under a plan, from its stage degrees of automation.
CATEGORIES: dict[str, Term] = _terms(
    ("person", "device", "shared", "not_applicable"),
    {
        "person": ("Person", "Every stage's degree of automation is 0."),
        "device": ("Device", "Every stage's degree of automation is 1."),
        "shared": ("Shared", "Some stage is automated and some is not, or partly."),
        "not_applicable": ("Not applicable", "The plan does not do the task."),
    },
    "levels-of-automation",
)


#: How the person is told of a change (a transition's ``cue``, an assignment's
#: ``feedback``), strongest first.
CUE_WORDS: dict[str, Term] = _terms(
    sorted(CUES, key=("alert_confirm", "alert", "display", "on_request", "none").index),
    {
        "alert_confirm": ("Alert to confirm", "An alert the person must acknowledge."),
        "alert": ("Alert", "An alert: always noticed."),
        "display": ("Display change only", "Shown on the display: may be missed."),
        "on_request": ("Shown on request", "Shown only when the person asks: may be missed."),
        "none": ("No cue", "Nothing tells the person: never noticed."),
    },
    "mode-check",
)

#: Who or what causes a transition of the mode map.
CAUSE_WORDS: dict[str, Term] = _terms(
    TRANSITION_CAUSES,
    {
        "human": ("The person", "An action of the person."),
        "automation": ("The device", "The device changes its own mode."),
        "event": ("An event", "An event of the study (a sensor signal lost, a meal)."),
        "schedule": ("A schedule", "A time of day."),
        "environment": ("The surroundings", "Something outside person and device."),
    },
    "mode-check",
)

#: Who starts a task (an assignment's ``initiator``): the causes a start can have.
INITIATOR_WORDS: dict[str, Term] = {key: CAUSE_WORDS[key] for key in INITIATORS}


def anchors() -> dict[str, set[str]]:
    """Every anchor of the methods document the registry names, with who names it."""
    named: dict[str, set[str]] = {}
    tables: dict[str, list[Any]] = {
        "figure": [*FIGURES.values(), *AWARENESS_FACTORS.values(), *LIKELIHOOD_FACTORS.values()],
        "finding kind": list(FINDING_KINDS.values()),
        "term": [
            *ASSIGNMENT_STATUS_WORDS.values(),
            *ASSUMPTION_STATUS_WORDS.values(),
            *DECISION_STATUS_WORDS.values(),
            *RISK_BANDS.values(),
            *FREQUENCY_BAND_WORDS.values(),
            *HANDOVER_SOURCES.values(),
            *CATEGORIES.values(),
            *CUE_WORDS.values(),
            *CAUSE_WORDS.values(),
        ],
    }
    for what, items in tables.items():
        for item in items:
            named.setdefault(item.anchor, set()).add(f"{what} {item.key}")
    return named
