"""Duty hours: work that reaches a person off duty waits for their next duty start
(methods document, ``#duty-hours``).

A person with ``on_duty`` [from, to] answers work that reaches them off duty at the next
duty start, with their awake latency after it (tool assumption: on duty they are awake).
Such work is not an interruption. For work whose arrival time is spread over the day
(a :class:`~.timeofday.DayShare`), the wait is an expectation over that spread: for each
uniform piece of arrivals inside an off-duty stretch ending at duty start ``s``, the mean
wait is ``s`` less the piece's middle.

Examples
--------
Work arriving evenly over the day to a nurse on duty 08:00-18:00 arrives off duty with
probability 14/24 and waits on average (14 h)^2 / 2 / 24 h = 4.083 h.

>>> from allocation.core.analysis.timeofday import DayShare
>>> day = DayShare.uniform([])
>>> off, mean, longest = duty_wait(day, ("08:00", "18:00"))
>>> round(off * 24, 6), round(mean / 3600, 4), longest / 3600
(14.0, 4.0833, 14.0)
"""

from __future__ import annotations

from ..model import seconds_of_day
from .timeofday import DAY_S, DayShare, wrap_interval

__all__ = ["duty_wait", "off_duty_pieces", "on_duty_pieces"]


def on_duty_pieces(on_duty: tuple[str, str]) -> list[tuple[float, float]]:
    """The duty hours as non-wrapping pieces of the day."""
    start, end = (float(seconds_of_day(clock)) for clock in on_duty)
    if end <= start:
        end += DAY_S
    return wrap_interval(start, end)


def off_duty_pieces(on_duty: tuple[str, str]) -> list[tuple[float, float, float]]:
    """The rest of the day as ``(from, to, next duty start)``, the start counted from the
    same midnight (so past ``DAY_S`` when it is the next day's)."""
    on = sorted(on_duty_pieces(on_duty))
    starts = [a for a, _b in on]
    pieces, cursor = [], 0.0
    for a, b in on + [(DAY_S, DAY_S)]:
        if a > cursor:
            later = [s for s in starts if s >= a]
            pieces.append((cursor, a, later[0] if later else starts[0] + DAY_S))
        cursor = max(cursor, b)
    return pieces


def duty_wait(day: DayShare, on_duty: tuple[str, str]) -> tuple[float, float, float]:
    """For arrivals spread as ``day``: the share off duty, the mean wait (seconds,
    on-duty arrivals waiting 0) and the longest wait."""
    off_share = mean = longest = 0.0
    for lo, hi, next_start in off_duty_pieces(on_duty):
        for a, b, weight in day.pieces:
            overlap_lo, overlap_hi = max(a, lo), min(b, hi)
            if overlap_hi <= overlap_lo:
                continue
            part = weight * (overlap_hi - overlap_lo) / (b - a)
            off_share += part
            mean += part * (next_start - (overlap_lo + overlap_hi) / 2)
            longest = max(longest, next_start - overlap_lo)
    return min(off_share, 1.0), mean, longest
