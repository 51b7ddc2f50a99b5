"""The chance of each task in one happening of a chain, exactly as the day simulation
draws it (methods document, ``#occurrences``).

Within one happening, a root occurs with its own probability; any other task occurs when
some predecessor that occurred leads on to it, each ``precedes`` link drawn on its own
with its probability. A task is thus reached when some path of links that all came out
from an occurring root leads to it — the two-terminal reliability of the chain's graph
[1]_. Where no uncertain part is shared, a task's predecessors occur independently and

    P(task) = 1 - prod over predecessors u of (1 - P(u) * p(u -> task))

is exact. Where predecessors share an uncertain ancestor (a fork that joins again after a
link of probability below 1), they do not: the uncertain links and roots upstream of a
join through more than one of its predecessors are *shared*. Conditioned on the outcomes
of the shared elements, the predecessors of every join are again independent, so the
formula above holds for each outcome, and the chance is the average over the outcomes
weighted by their probabilities: exact, by enumerating them, up to ``2 ** EXACT_SHARED``
outcomes (and ``EXACT_WORK`` task-outcome pairs). Past that, ``SAMPLES`` Monte Carlo
draws of every uncertain element estimate each chance, with its standard error.

References
----------
.. [1] Ball, M. O. (1986). Computational complexity of network reliability analysis: an
   overview. IEEE Transactions on Reliability, R-35(3), 230-239 (reliability by
   factoring on edges; exact computation is #P-hard in general).
"""

from __future__ import annotations

import zlib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["EXACT_SHARED", "EXACT_WORK", "SAMPLES", "ChainChance", "chain_chances"]

#: At most this many shared uncertain elements are enumerated (2 ** 20 outcomes).
EXACT_SHARED = 20
#: At most this many task-outcome pairs are computed exactly (a time and memory bound:
#: past it the draws below cost less than the enumeration).
EXACT_WORK = 1 << 21
#: Monte Carlo draws past the exact bound (tool assumption; methods document).
SAMPLES = 100_000


@dataclass(frozen=True)
class ChainChance:
    """Each task's chance in one happening; ``se`` holds the Monte Carlo standard error
    of each chance where they were estimated (``None`` where they are exact)."""

    chance: dict[str, float]
    se: dict[str, float] | None = None

    @property
    def approximate(self) -> bool:
        return self.se is not None


def _members(
    roots: Mapping[str, float],
    successors: Mapping[str, Sequence[tuple[str, float]]],
    position: Mapping[str, int],
    applies: Callable[[str], bool],
) -> list[str]:
    """The tasks the chain can reach, roots included, in topological order."""
    reached = {root for root in roots if applies(root)}
    stack = list(reached)
    while stack:
        for target, _p in successors.get(stack.pop(), ()):
            if target not in reached and applies(target):
                reached.add(target)
                stack.append(target)
    return sorted(reached, key=position.__getitem__)


def chain_chances(
    roots: Mapping[str, float],
    successors: Mapping[str, Sequence[tuple[str, float]]],
    position: Mapping[str, int],
    applies: Callable[[str], bool] = lambda _task: True,
    *,
    key: str = "",
) -> ChainChance:
    """The chance of each task in one happening of a chain.

    Parameters
    ----------
    roots : mapping
        The chain's root tasks and each one's own probability.
    successors : mapping
        Task id to its ``precedes`` successors as ``(task id, link probability)``.
    position : mapping
        Task id to its place in a topological order of the ``precedes`` links.
    applies : callable
        Whether a task is done at all; the chain does not go through one that is not.
    key : str
        Seeds the Monte Carlo draws (the trigger's id), so results repeat.

    Returns
    -------
    ChainChance

    Examples
    --------
    A fork that joins again after a step of probability 0.5: A leads on to B half the
    time, B to C and D, both to E. E occurs exactly when B does.

    >>> links = {"A": [("B", 0.5)], "B": [("C", 1.0), ("D", 1.0)],
    ...          "C": [("E", 1.0)], "D": [("E", 1.0)]}
    >>> order = {task: place for place, task in enumerate("ABCDE")}
    >>> chain_chances({"A": 1.0}, links, order).chance["E"]
    0.5
    """
    members = _members(roots, successors, position, applies)
    if not members:
        return ChainChance({})
    place = {task: index for index, task in enumerate(members)}
    predecessors: dict[str, list[tuple[str, float]]] = {task: [] for task in members}
    for source in members:
        for target, p in successors.get(source, ()):
            if target in place and target not in roots:
                predecessors[target].append((source, float(p)))
    shared = _shared(members, roots, predecessors, place)
    if not shared:
        return ChainChance(_propagate(members, roots, predecessors, {}, 1))
    outcomes = 1 << len(shared)
    if len(shared) <= EXACT_SHARED and outcomes * len(members) <= EXACT_WORK:
        return ChainChance(_enumerate(members, roots, predecessors, shared))
    return _sample(members, roots, predecessors, key)


def _shared(members, roots, predecessors, place) -> list[tuple[str, str | None, float]]:
    """The uncertain roots ``(root, None, p)`` and links ``(source, target, p)`` that
    lie upstream of some join through more than one of its predecessors."""
    ancestry: dict[str, int] = {}
    twice_anywhere = 0
    for task in members:
        mask = 1 << place[task]
        seen = twice = 0
        for source, _p in predecessors[task]:
            twice |= seen & ancestry[source]
            seen |= ancestry[source]
        ancestry[task] = mask | seen
        twice_anywhere |= twice
    found: list[tuple[str, str | None, float]] = []
    for task in members:
        if task in roots and roots[task] < 1 and twice_anywhere >> place[task] & 1:
            found.append((task, None, float(roots[task])))
        # A link into ``task`` is upstream of whatever ``task`` is upstream of.
        if twice_anywhere >> place[task] & 1:
            found += [(source, task, p) for source, p in predecessors[task] if p < 1]
    return found


def _propagate(members, roots, predecessors, fixed, size) -> dict:
    """Each task's chance by the product rule, with the shared elements' outcomes in
    ``fixed`` (arrays of 0 and 1 over ``size`` outcomes, or nothing)."""
    chance: dict[str, Any] = {}
    for task in members:
        if task in roots:
            chance[task] = fixed.get((task, None), float(roots[task]))
            continue
        missed = 1.0
        for source, p in predecessors[task]:
            missed = missed * (1.0 - chance[source] * fixed.get((source, task), p))
        chance[task] = 1.0 - missed
    if size == 1:
        return {task: float(value) for task, value in chance.items()}
    return chance


def _enumerate(members, roots, predecessors, shared) -> dict[str, float]:
    """Average the product rule over every outcome of the shared elements."""
    outcomes = np.arange(1 << len(shared))
    weight = np.ones(outcomes.size)
    fixed = {}
    for bit, (source, target, p) in enumerate(shared):
        came = (outcomes >> bit & 1).astype(float)
        fixed[(source, target)] = came
        weight *= np.where(came > 0, p, 1.0 - p)
    chance = _propagate(members, roots, predecessors, fixed, outcomes.size)
    # One product for the tasks whose chance depends on the outcomes; the others' chance
    # is the same in every outcome, weighted by the outcomes' total.
    varying = [task for task, value in chance.items() if np.ndim(value)]
    averaged: Any = np.vstack([chance[task] for task in varying]) @ weight if varying else []
    result = dict(zip(varying, map(float, averaged), strict=True))
    total = float(weight.sum())
    return {
        task: result[task] if task in result else float(value) * total
        for task, value in chance.items()
    }


def _draw(rng: np.random.Generator, p: float) -> np.ndarray:
    """``SAMPLES`` draws that come out with probability ``p``, to within 2 ** -17: 16-bit
    random integers (four from each 64 raw bits of the generator) against a threshold,
    many times faster than comparing floats."""
    bits = rng.bit_generator.random_raw(-(-SAMPLES // 4)).view(np.uint16)[:SAMPLES]
    return bits < round(p * (1 << 16))


def _sample(members, roots, predecessors, key: str) -> ChainChance:
    """Draw every uncertain root and link ``SAMPLES`` times, as the simulation does."""
    rng = np.random.default_rng(zlib.crc32(key.encode("utf-8")))
    occurred: dict[str, np.ndarray] = {}
    for task in members:
        if task in roots:
            own = roots[task]
            occurred[task] = _draw(rng, own) if own < 1 else np.ones(SAMPLES, bool)
            continue
        here = np.zeros(SAMPLES, bool)
        for source, p in predecessors[task]:
            came = occurred[source]
            here |= came & _draw(rng, p) if p < 1 else came
        occurred[task] = here
    # The share of draws in which each task occurred (a count: the mean, faster).
    chance = {task: int(np.count_nonzero(draws)) / SAMPLES for task, draws in occurred.items()}
    se = {task: (p * (1 - p) / SAMPLES) ** 0.5 for task, p in chance.items()}
    return ChainChance(chance, se)
