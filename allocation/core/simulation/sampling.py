"""Random draws the day simulation needs, vectorised with NumPy.

Every draw comes from a :class:`numpy.random.Generator` the caller seeds, so a run is
reproducible from its seed alone.

References
----------
.. [1] Evans, M., Hastings, N., & Peacock, B. (2000). Statistical Distributions (3rd ed.),
   ch. 40: the triangular distribution and its inverse distribution function.
"""

from __future__ import annotations

import numpy as np

from ..analysis.timeofday import DAY_S

__all__ = [
    "DAY_S",
    "in_intervals",
    "triangular",
    "uniform_in_pieces",
]


def triangular(
    rng: np.random.Generator,
    low: np.ndarray | float,
    mode: np.ndarray | float,
    high: np.ndarray | float,
    size: int | None = None,
) -> np.ndarray:
    """Draws of the triangular distribution, one per element, by its inverse CDF.

    Unlike :meth:`numpy.random.Generator.triangular` this accepts ``low == high`` (a
    fixed value) element by element.

    Parameters
    ----------
    rng : numpy.random.Generator
    low, mode, high : ndarray or float
        Broadcastable, with ``low <= mode <= high``.
    size : int, optional
        The number of draws when all three are single numbers.

    Returns
    -------
    ndarray
    """
    if size is not None and np.ndim(low) == 0 and np.ndim(mode) == 0 and np.ndim(high) == 0:
        low, mode, high = float(low), float(mode), float(high)
        if high <= low:
            return np.full(size, low)
        u = rng.random(size)
        cut = (mode - low) / (high - low)
        return np.where(
            u < cut,
            low + np.sqrt(u * (high - low) * (mode - low)),
            high - np.sqrt((1 - u) * (high - low) * (high - mode)),
        )
    low, mode, high = np.broadcast_arrays(
        np.asarray(low, float), np.asarray(mode, float), np.asarray(high, float)
    )
    width = high - low
    if not (width > 0).any():
        return low.copy()  # fixed values: no draw needed
    u = rng.random(low.shape)
    safe = np.where(width > 0, width, 1.0)
    cut = (mode - low) / safe
    left = low + np.sqrt(u * width * (mode - low))
    right = high - np.sqrt((1 - u) * width * (high - mode))
    return np.where(width > 0, np.where(u < cut, left, right), low)


def uniform_in_pieces(
    rng: np.random.Generator, count: int, pieces: tuple[tuple[float, float, float], ...]
) -> np.ndarray:
    """``count`` times of day spread as a :class:`~..analysis.timeofday.DayShare`'s
    weighted uniform pieces ``(start, end, weight)``."""
    if count == 0:
        return np.zeros(0)
    starts = np.array([a for a, _b, _w in pieces], float)
    ends = np.array([b for _a, b, _w in pieces], float)
    weights = np.array([w for _a, _b, w in pieces], float)
    chosen = rng.choice(len(pieces), size=count, p=weights / weights.sum())
    return starts[chosen] + rng.random(count) * (ends[chosen] - starts[chosen])


def in_intervals(seconds_of_day: np.ndarray, intervals: list[tuple[float, float]]) -> np.ndarray:
    """Whether each time of day falls in one of the non-wrapping ``intervals``."""
    inside = np.zeros(np.shape(seconds_of_day), bool)
    for start, end in intervals:
        inside |= (seconds_of_day >= start) & (seconds_of_day < end)
    return inside
