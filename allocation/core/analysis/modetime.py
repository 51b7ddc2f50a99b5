"""Time in each mode: the long-run share of the day a device spends in each of its modes.

A mode map's transitions happen at a rate (``per_day`` while in the source mode), with
an event's occurrences, or at fixed times of day (methods document, ``#mode-share``).
Over one day the rates are piecewise constant: a transition driven by an event that
happens at a rate over part of the day (awake, asleep) takes that rate there. Between
the day's breakpoints the mode is a continuous-time Markov chain with generator ``Q_k``;
at a fixed time (a transition's ``times``, or an event at fixed times) the mode jumps
by a stochastic matrix ``J``. The day from midnight to midnight is the matrix::

    M = J(t_0) expm(Q_0 (t_1 - t_0)) J(t_1) expm(Q_1 (t_2 - t_1)) ...

and the distribution at midnight in the long run is the stationary distribution of
``M`` (the periodic steady state of the chain [1]_), found on the closed classes the
initial mode reaches (weighted by the chance of reaching each). The share of time in
each mode is its distribution integrated over the day, each stretch by the block-matrix
identity for the integral of a matrix exponential [2]_; a transition's firings a day
are its rate times the time in its source mode, plus the chance of being in its source
mode at each of its fixed times.

References
----------
.. [1] Ross, S. M. (2014). Introduction to Probability Models (11th ed.), ch. 4 and 6:
   stationary distributions of Markov chains; continuous-time Markov chains.
.. [2] Van Loan, C. F. (1978). Computing integrals involving the matrix exponential.
   IEEE Transactions on Automatic Control, 23(3), 395-404.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import networkx as nx
import numpy as np

from ..model import ANY_MODE, ModeMap, Study, seconds_of_day
from .occurrences import rate_and_timing
from .timeofday import DAY_S, DayShare

__all__ = ["ModeTime", "Stretch", "mode_time"]

#: Probabilities below this are taken as no move when finding closed classes.
_TINY = 1e-12


@dataclass(frozen=True)
class Stretch:
    """A part of the day with constant rates: its bounds (seconds of the day), its
    generator (per day), the distribution entering it, and the integral of the
    distribution over it (days)."""

    start: float
    end: float
    generator: np.ndarray
    entering: np.ndarray
    integral: np.ndarray


@dataclass(frozen=True)
class ModeTime:
    """The modes' long-run time: shares of the day, the distribution over the day, each
    transition's firings a day (by index into the map's expanded transitions)."""

    modes: tuple[str, ...]
    stretches: tuple[Stretch, ...]
    shares: np.ndarray
    fires: tuple[float, ...]
    at_midnight: np.ndarray
    mean_generator: np.ndarray
    #: Per event that moves the mode: the jump each of its occurrences makes.
    event_jumps: dict[str, np.ndarray]

    def row_fires(self, modes: ModeMap) -> list[float]:
        """Firings a day of each transition as the map lists it: one from every mode
        (``"*"``) adds up its copies (the map's expanded transitions, in file order)."""
        totals = []
        for listed in modes.transitions:
            total = 0.0
            for expanded, fires in zip(modes.expanded, self.fires, strict=True):
                from_it = listed.source == ANY_MODE or expanded.source == listed.source
                if from_it and replace(expanded, source=listed.source) == listed:
                    total += fires
            totals.append(total)
        return totals

    def share_dict(self) -> dict[str, float]:
        return {mode: float(share) for mode, share in zip(self.modes, self.shares, strict=True)}

    def _stretch(self, seconds: float) -> Stretch:
        for stretch in self.stretches:
            if stretch.start <= seconds < stretch.end:
                return stretch
        return self.stretches[-1]

    def at(self, seconds: float) -> np.ndarray:
        """The distribution over the modes at a time of the day."""
        stretch = self._stretch(seconds % DAY_S)
        elapsed = (seconds % DAY_S - stretch.start) / DAY_S
        return stretch.entering @ _expm(stretch.generator * elapsed)

    def over(self, day: DayShare) -> np.ndarray:
        """The distribution over the modes of things that happen as ``day`` spreads
        them: each piece's average distribution, by its weight."""
        total = np.zeros(len(self.modes))
        for low, high, weight in day.pieces:
            if high - low <= 1.0:
                total += weight * self.at((low + high) / 2)
                continue
            part = np.zeros(len(self.modes))
            for stretch in self.stretches:
                a, b = max(low, stretch.start), min(high, stretch.end)
                if b <= a:
                    continue
                part += _integral(stretch, b) - _integral(stretch, a)
            total += weight * part / ((high - low) / DAY_S)
        return total / max(total.sum(), _TINY)

    def after(self, distribution: np.ndarray, seconds: float) -> np.ndarray:
        """A distribution ``seconds`` later, at the day's average rates."""
        if seconds <= 0:
            return distribution
        return distribution @ _expm(self.mean_generator * seconds / DAY_S)


def _expm(matrix: np.ndarray) -> np.ndarray:
    from .modes import expm

    return expm(matrix)


def _integral(stretch: Stretch, seconds: float) -> np.ndarray:
    """The distribution integrated from the stretch's start to ``seconds`` (days)."""
    size = len(stretch.entering)
    length = (seconds - stretch.start) / DAY_S
    if length <= 0:
        return np.zeros(size)
    block = np.zeros((2 * size, 2 * size))
    block[:size, :size] = stretch.generator * length
    block[:size, size:] = np.eye(size) * length
    return stretch.entering @ _expm(block)[:size, size:]


def _jump(size: int, moves: list[tuple[int, int]]) -> np.ndarray:
    """The stochastic matrix of moves applied one after the other (file order)."""
    jump = np.eye(size)
    for source, target in moves:
        step = np.eye(size)
        step[source] = 0.0
        step[source, target] = 1.0
        jump = jump @ step
    return jump


def _long_run(day: np.ndarray, start: int) -> np.ndarray:
    """The long-run distribution at midnight from the initial mode: the stationary
    distribution of each closed class the initial mode reaches, weighted by the chance
    of ending up in it."""
    size = len(day)
    graph = nx.DiGraph()
    graph.add_nodes_from(range(size))
    rows, columns = np.nonzero(day > _TINY)
    graph.add_edges_from((int(i), int(j)) for i, j in zip(rows, columns, strict=True) if i != j)
    reach = nx.descendants(graph, start) | {start}
    sub = graph.subgraph(reach)
    condensed = nx.condensation(sub)
    closed = [
        sorted(condensed.nodes[node]["members"])
        for node in condensed.nodes
        if condensed.out_degree(node) == 0
    ]
    chances = _absorption(day, start, reach, closed)
    result = np.zeros(size)
    for members, chance in zip(closed, chances, strict=True):
        block = day[np.ix_(members, members)]
        # pi (B - I) = 0 with sum pi = 1: one equation replaced by the sum.
        system = (block - np.eye(len(members))).T
        system[-1] = 1.0
        right = np.zeros(len(members))
        right[-1] = 1.0
        result[members] += chance * np.linalg.solve(system, right)
    return np.clip(result, 0.0, None) / max(result.sum(), _TINY)


def _absorption(
    day: np.ndarray, start: int, reach: set[int], closed: list[list[int]]
) -> list[float]:
    """The chance of ending up in each closed class from the initial mode."""
    for index, members in enumerate(closed):
        if start in members:
            return [1.0 if i == index else 0.0 for i in range(len(closed))]
    transient = sorted(reach - {m for members in closed for m in members})
    position = {mode: i for i, mode in enumerate(transient)}
    inner = day[np.ix_(transient, transient)]
    into = np.array([[day[t, members].sum() for members in closed] for t in transient])
    absorbed = np.linalg.solve(np.eye(len(transient)) - inner, into)
    return [float(value) for value in absorbed[position[start]]]


def mode_time(study: Study, modes: ModeMap, every_days_when: str = "awake") -> ModeTime | None:
    """The long-run time in each mode of a map (``None`` when its initial mode is not
    among its states).

    Parameters
    ----------
    study : Study
        For the events that move the mode and whose day they follow.
    modes : ModeMap
    every_days_when : str
        The assumption of when an every-N-days event happens.
    """
    ids = tuple(mode.id for mode in modes.states)
    if modes.initial not in ids:
        return None
    index = {mode_id: i for i, mode_id in enumerate(ids)}
    size = len(ids)
    expanded = modes.expanded
    base = np.zeros((size, size))
    # Rate-driven transitions, and per event its moves and how it happens in the day.
    event_moves: dict[str, list[tuple[int, int, int]]] = {}
    impulses: dict[float, list[tuple[int, int, int]]] = {}
    for number, transition in enumerate(expanded):
        source, target = index.get(transition.source), index.get(transition.target)
        if source is None or target is None or source == target:
            continue
        driven = transition.driven
        if driven == "rate":
            base[source, target] += float(transition.per_day or 0.0)
        elif driven == "event" and transition.event in study.events_by_id:
            event_moves.setdefault(str(transition.event), []).append((source, target, number))
        elif driven == "times":
            for clock in transition.times or ():
                impulses.setdefault(float(seconds_of_day(clock)), []).append(
                    (source, target, number)
                )
    rated: list[tuple[DayShare, float, list[tuple[int, int, int]]]] = []
    event_jumps = {}
    for event_id, moves in event_moves.items():
        first = _first_per_source(moves)
        event_jumps[event_id] = _jump(size, [(s, t) for s, t, _n in first])
        event = study.events_by_id[event_id]
        per_day, day = rate_and_timing(event, study, every_days_when)
        if event.times is not None:
            for clock in event.times:
                impulses.setdefault(float(seconds_of_day(clock)), []).extend(first)
        else:
            rated.append((day, per_day, first))
    edges = {0.0, DAY_S} | set(impulses)
    for day, _per_day, _moves in rated:
        for low, high, _weight in day.pieces:
            edges |= {low, high}
    edges_sorted = sorted(edge for edge in edges if 0.0 <= edge <= DAY_S)
    # Per stretch: its bounds, its generator and each transition's rate in it.
    generators = []
    for low, high in zip(edges_sorted, edges_sorted[1:], strict=False):
        generator = base.copy()
        rates = {
            number: float(transition.per_day or 0.0)
            for number, transition in enumerate(expanded)
            if transition.driven == "rate"
        }
        middle = (low + high) / 2
        for day, per_day, moves in rated:
            density = sum(w / (b - a) for a, b, w in day.pieces if a <= middle < b and b > a)
            for source, target, number in moves:
                generator[source, target] += per_day * density * DAY_S
                rates[number] = per_day * density * DAY_S
        np.fill_diagonal(generator, 0.0)
        np.fill_diagonal(generator, -generator.sum(axis=1))
        generators.append((low, high, generator, rates))
    # One day from midnight: the jumps at each time, then the stretch after it.
    passes = [_expm(generator * (high - low) / DAY_S) for low, high, generator, _r in generators]
    day_matrix = np.eye(size)
    for (low, _high, _generator, _rates), passing in zip(generators, passes, strict=True):
        if low in impulses:
            day_matrix = day_matrix @ _jump(size, [(s, t) for s, t, _n in impulses[low]])
        day_matrix = day_matrix @ passing
    at_midnight = _long_run(day_matrix, index[modes.initial])
    fires = [0.0] * len(expanded)
    stretches = []
    current = at_midnight
    shares = np.zeros(size)
    for (low, high, generator, rates), passing in zip(generators, passes, strict=True):
        for source, target, number in impulses.get(low, []):
            fires[number] += float(current[source])
            current = current @ _jump(size, [(source, target)])
        stretch = Stretch(low, high, generator, current, np.zeros(size))
        integral = _integral(stretch, high)
        stretch = Stretch(low, high, generator, current, integral)
        stretches.append(stretch)
        shares += integral
        for number, rate in rates.items():
            source = index.get(expanded[number].source)
            if source is not None and expanded[number].source != expanded[number].target:
                fires[number] += rate * float(integral[source])
        current = current @ passing
    shares = np.clip(shares, 0.0, None)
    shares = shares / max(shares.sum(), _TINY)
    weights = [(high - low) / DAY_S for low, high, _g, _r in generators]
    mean_generator = sum(w * g for w, (_l, _h, g, _r) in zip(weights, generators, strict=True))
    return ModeTime(
        modes=ids,
        stretches=tuple(stretches),
        shares=shares,
        fires=tuple(fires),
        at_midnight=at_midnight,
        mean_generator=np.asarray(mean_generator),
        event_jumps=event_jumps,
    )


def _first_per_source(moves: list[tuple[int, int, int]]) -> list[tuple[int, int, int]]:
    """One move per source mode for an event: the first in file order."""
    seen: set[int] = set()
    first = []
    for source, target, number in moves:
        if source not in seen:
            seen.add(source)
            first.append((source, target, number))
    return first
