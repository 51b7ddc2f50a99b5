"""When in the day things happen: occurrence-time distributions over a 24-hour day.

A distribution is a mixture of uniform pieces ``(start, end, weight)`` within
``[0, 86400)`` seconds, enough for fixed times with uniform jitter, rates spread evenly
over the awake or asleep part of the day, and shifts along a chain. It answers one
question exactly: what share of occurrences falls inside a window such as a person's
sleep.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from ..model import Agent, Event, Occurs, Study, seconds_of_day

__all__ = [
    "DAY_S",
    "DayShare",
    "asleep_intervals",
    "awake_intervals",
    "rule_sleeper",
    "sleepers",
    "wrap_interval",
]

DAY_S = 86400.0


def wrap_interval(start: float, end: float) -> list[tuple[float, float]]:
    """An interval of the day, possibly crossing midnight, as non-wrapping pieces."""
    length = end - start
    if length >= DAY_S:
        return [(0.0, DAY_S)]
    start %= DAY_S
    end = start + length
    if end <= DAY_S:
        return [(start, end)]
    return [(start, DAY_S), (0.0, end - DAY_S)]


def asleep_intervals(agent: Agent | None) -> list[tuple[float, float]]:
    """A human's asleep window as non-wrapping pieces; none without a window."""
    if agent is None or agent.asleep is None:
        return []
    start, end = (float(seconds_of_day(clock)) for clock in agent.asleep)
    if end < start:
        end += DAY_S
    return wrap_interval(start, end)


def awake_intervals(agent: Agent | None) -> list[tuple[float, float]]:
    """The rest of the day; the whole day for someone with no asleep window."""
    asleep = sorted(asleep_intervals(agent))
    pieces, cursor = [], 0.0
    for start, end in asleep:
        if start > cursor:
            pieces.append((cursor, start))
        cursor = max(cursor, end)
    if cursor < DAY_S:
        pieces.append((cursor, DAY_S))
    return pieces


def sleepers(study: Study) -> list[Agent]:
    """The humans with an asleep window, in file order."""
    return [agent for agent in study.humans if agent.asleep is not None]


def rule_sleeper(study: Study, rule: Event | Occurs) -> Agent | None:
    """The human whose awake and asleep day a rate follows: the one it names (``of``),
    else the only human with an asleep window. ``None`` where no one has one (awake is
    then the whole day) and, in a study that the checks refuse, where several have one
    and the rate names no one (methods document, ``#whose-day``)."""
    if rule.of is not None:
        agent = study.agents_by_id.get(rule.of)
        return agent if agent is not None and agent.is_human else None
    asleep = sleepers(study)
    return asleep[0] if len(asleep) == 1 else None


@dataclass(frozen=True)
class DayShare:
    """A distribution of occurrence times over the day, as weighted uniform pieces."""

    pieces: tuple[tuple[float, float, float], ...]

    @classmethod
    def uniform(cls, intervals: Iterable[tuple[float, float]]) -> DayShare:
        """Evenly spread over the given non-wrapping intervals (the whole day if none)."""
        intervals = [(a, b) for a, b in intervals if b > a] or [(0.0, DAY_S)]
        total = sum(b - a for a, b in intervals)
        return cls(tuple((a, b, (b - a) / total) for a, b in intervals))

    @classmethod
    def at_times(cls, seconds: Iterable[float], jitter_s: float = 0.0) -> DayShare:
        """Fixed times of day, each spread uniformly over ``± jitter_s``.

        The uniform jitter is a tool assumption; with no jitter a time is taken as a
        one-second slot.
        """
        seconds = list(seconds)
        half = max(float(jitter_s), 0.5)
        pieces = []
        for moment in seconds:
            parts = wrap_interval(moment - half, moment + half)
            # A jitter of half a day or more covers the whole day: its one piece then
            # carries the time's whole weight.
            length = sum(b - a for a, b in parts)
            for a, b in parts:
                pieces.append((a, b, (b - a) / length / len(seconds)))
        return cls(tuple(pieces))

    def share_within(self, intervals: Iterable[tuple[float, float]]) -> float:
        """The share of occurrences that fall inside the non-wrapping ``intervals``."""
        intervals = list(intervals)
        share = 0.0
        for a, b, weight in self.pieces:
            for lo, hi in intervals:
                overlap = min(b, hi) - max(a, lo)
                if overlap > 0:
                    share += weight * overlap / (b - a)
        return min(share, 1.0)

    def shifted(self, seconds: float) -> DayShare:
        """The same distribution ``seconds`` later (wrapping past midnight)."""
        if not seconds:
            return self
        pieces = []
        for a, b, weight in self.pieces:
            for lo, hi in wrap_interval(a + seconds, b + seconds):
                pieces.append((lo, hi, weight * (hi - lo) / (b - a)))
        return DayShare(tuple(pieces))

    @staticmethod
    def mixture(parts: Iterable[tuple[float, DayShare]]) -> DayShare | None:
        """Mix distributions by weight; ``None`` when every weight is zero."""
        parts = [(w, share) for w, share in parts if w > 0]
        total = sum(w for w, _share in parts)
        if not total:
            return None
        return DayShare(
            tuple(
                (a, b, weight * w / total) for w, share in parts for a, b, weight in share.pieces
            )
        )
