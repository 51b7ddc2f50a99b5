"""Several people asked in turn: who ends up with a task, and who was woken for it.

An assignment's ``human`` may be a list with ``escalate_after_s`` = E (methods document,
``#escalation``). The first person is asked when the work reaches them; a person asked
who is on duty answers with their response latency L (asleep or awake, as they are at
that moment), and keeps the task when L <= E; otherwise, or when they are off duty, the
next is asked E seconds later. The last person asked keeps the task whatever their
latency. With ``S_j(E)`` the chance that person j's latency exceeds E, and the day cut
into stretches in which each person asked is asleep or awake, on duty or off (``a_j``,
``o_j`` each 0 or 1), in each stretch::

    S_j(E) = S_asleep(E) if a_j else S_awake(E)
    no_j   = (1 - o_j) + o_j * S_j(E)                 (the call moves on)
    asked_0 = 1,   asked_j = asked_(j-1) * no_(j-1)
    keep_j  = asked_j * (1 - no_j)   (j < n - 1),    keep_(n-1) = asked_(n-1)

each stretch weighted by the share of the task's occurrences ready in it (so that who
keeps a task at night is counted at night).

A latency is triangular over ``[min, typical, max]``; its exceedance has the closed
form [1]_::

    S(x) = 1                                       x <= a
         = 1 - (x - a)^2 / ((b - a)(c - a))        a < x <= c
         = (b - x)^2 / ((b - a)(b - c))            c < x < b
         = 0                                       x >= b

References
----------
.. [1] Evans, M., Hastings, N., & Peacock, B. (2000). Statistical Distributions (3rd ed.),
   ch. 40: the triangular distribution, its distribution function.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

from ..model import Assignment, Range, Study, Task
from .involvement import Involvement, involvement

__all__ = [
    "Escalation",
    "Segment",
    "escalation_shares",
    "latency_ranges",
    "triangular_exceedance",
    "with_escalation",
]


def triangular_exceedance(low: float, mode: float, high: float, x: float) -> float:
    """The chance that a triangular ``(low, mode, high)`` value is above ``x``."""
    if x <= low:
        return 1.0
    if x >= high:
        return 0.0
    # Here low < x < high, so the side x falls on has a width above 0.
    if x <= mode:
        return 1.0 - (x - low) ** 2 / ((high - low) * (mode - low))
    return (high - x) ** 2 / ((high - low) * (high - mode))


def latency_ranges(
    study: Study, person: str, default: list[float]
) -> tuple[tuple[float, float, float], tuple[float, float, float]]:
    """A person's awake and asleep latency ranges, as the simulation draws them: their
    own (``awake`` or ``any``; ``asleep``, else as awake), else ``default_response_s``."""
    agent = study.agents_by_id[person]
    response = agent.response_s or {}

    def triple(value: Range) -> tuple[float, float, float]:
        return (float(value.low), float(value.typical), float(value.high))

    awake_range = response.get("awake") or response.get("any")
    awake = triple(awake_range) if awake_range else (default[0], default[1], default[2])
    asleep = triple(response["asleep"]) if "asleep" in response else awake
    return awake, asleep


#: A stretch of the day where each person asked is asleep or not, on duty or not: its
#: share of the task's occurrences, and per person (asleep, on duty).
Segment = tuple[float, dict[str, tuple[bool, bool]]]


@dataclass(frozen=True)
class Escalation:
    """Per person asked (in order), chances per occurrence: asked; reached on duty but
    not answering in time (and so while asleep); keeping the task, and keeping it having
    been reached on duty (and so while asleep)."""

    people: tuple[str, ...]
    asked: tuple[float, ...]
    keep: tuple[float, ...]
    unanswered: tuple[float, ...]
    unanswered_asleep: tuple[float, ...]
    keep_on_duty: tuple[float, ...]
    keep_asleep: tuple[float, ...]
    after_s: float = 0.0
    cue: str | None = None
    #: The involvement whose people are asked (as assigned, the first person holding).
    base: Involvement | None = None

    def kept_shares(self, index: int) -> tuple[float, float]:
        """Of the occurrences the ``index``-th person keeps, the share that reached them
        on duty, and on duty while asleep (an interruption, and a night one)."""
        if not self.keep[index]:
            return (1.0, 0.0)
        return (
            self.keep_on_duty[index] / self.keep[index],
            self.keep_asleep[index] / self.keep[index],
        )


def escalation_shares(
    study: Study,
    people: tuple[str, ...],
    after_s: float,
    segments: list[Segment],
    default: list[float],
    cue: str | None = None,
) -> Escalation:
    """The chances of the module docstring for the people asked in turn, summed over the
    stretches of the day ``segments`` (where each person is asleep or awake, on duty or
    off); ``cue`` is how each is asked (the assignment's feedback)."""
    size = len(people)
    names = ("asked", "keep", "unanswered", "unanswered_asleep", "keep_on_duty", "keep_asleep")
    totals = {name: [0.0] * size for name in names}
    ranges = [latency_ranges(study, person, default) for person in people]
    for weight, state in segments:
        chance = weight
        for index, person in enumerate(people):
            asleep, on_duty = state.get(person, (False, True))
            awake_range, asleep_range = ranges[index]
            over = triangular_exceedance(*(asleep_range if asleep else awake_range), after_s)
            totals["asked"][index] += chance
            if index == size - 1:
                totals["keep"][index] += chance
                totals["keep_on_duty"][index] += chance * on_duty
                totals["keep_asleep"][index] += chance * on_duty * asleep
                break
            answers = chance * on_duty * (1 - over)
            totals["keep"][index] += answers
            totals["keep_on_duty"][index] += answers
            totals["keep_asleep"][index] += answers * asleep
            totals["unanswered"][index] += chance * on_duty * over
            totals["unanswered_asleep"][index] += chance * on_duty * over * asleep
            chance -= answers
    return Escalation(
        people=tuple(people),
        asked=tuple(totals["asked"]),
        keep=tuple(totals["keep"]),
        unanswered=tuple(totals["unanswered"]),
        unanswered_asleep=tuple(totals["unanswered_asleep"]),
        keep_on_duty=tuple(totals["keep_on_duty"]),
        keep_asleep=tuple(totals["keep_asleep"]),
        after_s=after_s,
        cue=cue,
    )


def keeper_involvement(
    study: Study,
    task: Task,
    involved: Involvement,
    index: int,
    shares: Escalation | None,
    assumptions: dict[str, Any],
) -> Involvement:
    """The task as the ``index``-th person asked does it (0: the first, as assigned),
    reached on duty and asleep with the chances :meth:`Escalation.kept_shares` gives (the
    simulation, which draws them, gives no ``shares``)."""
    assignment = involved.assignment
    assert assignment is not None and assignment.escalation
    people = assignment.people_asked
    kept = replace(assignment, human=people[index], escalation=None, escalate_after_s=None)
    return replace(
        involvement(study, task, kept, assumptions),
        escalated=index > 0,
        kept_shares=None if shares is None else shares.kept_shares(index),
    )


def with_escalation(
    study: Study,
    task: Task,
    mix: list[tuple[float, Involvement]],
    shares_of: Callable[[Assignment], Escalation],
    assumptions: dict[str, Any],
) -> tuple[list[tuple[float, Involvement]], list[tuple[float, Escalation]]]:
    """A task's weighted involvements with each one that asks people in turn split into
    one per person who keeps it (weights ``keep_j``; a failed occurrence is not asked),
    and each escalation with its weight (for the people asked who did not answer)."""
    result: list[tuple[float, Involvement]] = []
    asked: list[tuple[float, Escalation]] = []
    for share, involved in mix:
        assignment = involved.assignment
        if involved.failed or assignment is None or not assignment.escalation:
            result.append((share, involved))
            continue
        shares = replace(shares_of(assignment), base=involved)
        asked.append((share, shares))
        for index, kept in enumerate(shares.keep):
            if kept > 0:
                result.append(
                    (
                        share * kept,
                        keeper_involvement(study, task, involved, index, shares, assumptions),
                    )
                )
    return result, asked
