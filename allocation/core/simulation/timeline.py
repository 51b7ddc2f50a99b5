"""A person's simulated timeline summed up: occupancy per bin and demand per channel.

- **Occupancy** (time-line analysis, NATO AC/243 (Panel 8) TR/7, 1992): in each bin of
  the day, the seconds of work required divided by the bin's length. Concurrent work
  adds up, so a bin can exceed 1: it is the integral over the bin of the number of
  stretches of work under way, divided by the bin's length.
- **Channel demand** (VACP, McCracken & Aldrich 1984): each stretch of work puts its
  demand on the visual, auditory, cognitive and psychomotor channels while it lasts;
  concurrent demands add.

Both come from one sweep over the stretches' ends in time order: the running sums give
each column's level between consecutive ends, and their running integral gives any
bin's area, the seconds above a limit and the peaks.

References
----------
.. [1] NATO AC/243 (Panel 8) TR/7 (1992). Analysis techniques for man-machine systems
   design, vol. 2: time-line analysis.
.. [2] McCracken, J. H., & Aldrich, T. B. (1984). Analyses of selected LHX mission
   functions. US Army Research Institute, Technical Note ASI479-024-84.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .sampling import DAY_S

__all__ = ["Sweep", "bin_edges"]


def bin_edges(first_day: int, days: int, bin_s: float) -> tuple[np.ndarray, int]:
    """The bin edges of consecutive days (absolute seconds) and the bins per day; a day
    whose length is not a whole number of bins ends with a shorter bin."""
    within = np.arange(0.0, DAY_S, bin_s)
    per_day = within.size
    edges = (np.arange(first_day, first_day + days)[:, None] * DAY_S + within[None, :]).ravel()
    return np.append(edges, (first_day + days) * DAY_S), per_day


@dataclass(frozen=True)
class Sweep:
    """Concurrent sums of several weights over time, from one sort of all the ends.

    Between ``time[i]`` and ``time[i + 1]`` the sum of column ``c`` is ``level[c, i]``; its
    integral up to any moment follows by linear interpolation of the running integral at
    the ends (the level is constant in between).
    """

    time: np.ndarray
    level: np.ndarray  # columns x ends

    @classmethod
    def of(cls, start: np.ndarray, end: np.ndarray, weights: np.ndarray) -> Sweep:
        """The sweep of stretches ``[start, end)``; ``weights`` has a row per column and
        a value per stretch in it."""
        columns = weights.shape[0]
        if start.size == 0:
            return cls(np.zeros(0), np.zeros((columns, 0)))
        # Where ends and starts coincide the order among them does not matter: the levels
        # in between last no time, and :meth:`peaks` passes over them.
        count = start.size
        times = np.concatenate([end, start])
        order = np.argsort(times)
        starting = order >= count
        source = order - count * starting
        by_column = np.ascontiguousarray(weights)
        level = np.empty((columns, 2 * count))
        gathered = np.empty(2 * count)
        for column in range(columns):
            values = by_column[column]
            if np.all(values == values[0]):
                # One weight for all (the occupancy column): no gather needed.
                np.multiply(np.where(starting, 1.0, -1.0), values[0], out=gathered)
            else:
                np.take(values, source, out=gathered)
                np.negative(gathered, out=gathered, where=~starting)
            # Rounding leaves dust where every stretch has ended; limits are compared
            # with an allowance for it.
            np.cumsum(gathered, out=level[column])
        return cls(times[order], level)

    def _running(self, values: np.ndarray, points: np.ndarray) -> np.ndarray:
        """The integral of a per-stretch value (held from each end to the next) up to
        each of ``points``."""
        if self.time.size == 0:
            return np.zeros(points.size)
        area = np.empty(self.time.size)
        area[0] = 0.0
        np.cumsum(values[:-1] * np.diff(self.time), out=area[1:])
        return np.interp(points, self.time, area)

    def integral(self, column: int, points: np.ndarray) -> np.ndarray:
        """The column's integral from the start up to each of ``points``."""
        if self.time.size == 0:
            return np.zeros(points.size)
        return self._running(self.level[column], points)

    def above(self, column: int, limit: float, points: np.ndarray) -> np.ndarray:
        """Seconds the column spends above ``limit`` up to each of ``points``."""
        if self.time.size == 0:
            return np.zeros(points.size)
        return self._running((self.level[column] > limit + 1e-9).astype(float), points)

    def peaks(self, column: int, edges: np.ndarray) -> np.ndarray:
        """The column's highest level within each span between consecutive ``edges``:
        the level at the span's start and every level an end inside it leads to."""
        spans = edges.size - 1
        if self.time.size == 0:
            return np.zeros(spans)
        # Levels that last no time (between ends at the same moment) are passed over; a
        # sentinel below every level lets the index pairs run to the array's end.
        level = np.append(self.level[column], -np.inf)
        level[:-2][np.diff(self.time) <= 0] = -np.inf
        first = np.searchsorted(self.time, edges[:-1], side="right")
        last = np.searchsorted(self.time, edges[1:], side="left")
        # reduceat over the pairs [first, last) and the gaps between them; keep the pairs.
        pairs = np.empty(2 * spans, int)
        pairs[0::2], pairs[1::2] = first, np.maximum(last, first)
        inside = np.maximum.reduceat(level, pairs)[0::2]
        inside[last <= first] = -np.inf
        carried = np.where(first > 0, level[first - 1], 0.0)
        return np.maximum(inside, carried)
