"""Coherence: how well a plan keeps tightly coupled work together (methods document,
``#coherence``).

Two figures over the task graph, links weighted by how often they carry work per day:

- ``cut_ratio``: the share of link weight that crosses from one principal holder to
  another (incoherency, Pritchett, Kim & Feigh 2014);
- ``modularity``: Newman's modularity of the partition of the tasks by principal holder,
  Q = sum over groups c of [L_c / m - (k_c / 2m)^2], weighted (Newman 2006), where L_c
  is the weight of the links inside group c, k_c the weight of the links that touch it
  (both ends counted) and m the weight of all links.

Both are computed from arrays over the links, so that a plan's edit changes a few
entries and the figures follow at once (the tests check them against networkx).

References
----------
.. [1] Newman, M. E. J. (2006). Modularity and community structure in networks. PNAS,
   103(23), 8577-8582.
.. [2] Pritchett, A. R., Kim, S. Y., & Feigh, K. M. (2014). Measuring human-automation
   function allocation. JCEDM, 8(1), 52-77.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

__all__ = ["Coherence", "LinkPartition", "coherence"]


@dataclass(frozen=True)
class Coherence:
    cut_ratio: float
    modularity: float
    groups: int
    link_weight: float


class LinkPartition:
    """The links of a study with their weights and the group (principal holder) of each
    end, kept in arrays that an edit changes in place.

    Parameters
    ----------
    ends : sequence of (source, target)
        The links' tasks, in the study's order.
    """

    def __init__(self, ends: list[tuple[str, str]]):
        self.ends = ends
        self.weight = np.zeros(len(ends))
        self.source_group = np.full(len(ends), -1, dtype=np.int64)
        self.target_group = np.full(len(ends), -1, dtype=np.int64)
        self.group_of: dict[str, int] = {}  # holder to group number
        self.task_group: dict[str, int] = {}  # task to its holder's group, or -1
        self.held: dict[int, int] = {}  # group to the tasks it holds
        self.between = np.array([source != target for source, target in ends], dtype=bool)

    def hold(self, task: str, holder: str | None) -> None:
        """Set a task's principal holder (``None``: held by nobody)."""
        before = self.task_group.get(task, -1)
        if before >= 0:
            self.held[before] -= 1
            if not self.held[before]:
                del self.held[before]
        group = -1 if holder is None else self.group_of.setdefault(holder, len(self.group_of))
        self.task_group[task] = group
        if group >= 0:
            self.held[group] = self.held.get(group, 0) + 1

    def carry(self, index: int, weight: float) -> None:
        """Set the occurrences a day link ``index`` carries, and its ends' groups."""
        source, target = self.ends[index]
        self.weight[index] = weight
        self.source_group[index] = self.task_group.get(source, -1)
        self.target_group[index] = self.task_group.get(target, -1)

    def coherence(self) -> Coherence:
        """Cut ratio and modularity of the partition as it stands."""
        source, target, weight = self.source_group, self.target_group, self.weight
        # Links between held tasks with weight, not from a task to itself.
        counted = (source >= 0) & (target >= 0) & (weight > 0) & self.between
        weights = weight[counted]
        total = float(weights.sum())
        if total <= 0:
            return Coherence(0.0, 0.0, len(self.held), total)
        source, target = source[counted], target[counted]
        crossing = float(weights[source != target].sum())
        # Shares of the total: modularity does not change with the scale of the weights,
        # and shares keep very rare links from underflowing in its normalisation.
        shares = weights / total
        size = len(self.group_of)
        inside = np.bincount(source[source == target], shares[source == target], size)
        touching = np.bincount(source, shares, size) + np.bincount(target, shares, size)
        m = float(shares.sum())
        # Correctly rounded, so that the numbering of the groups (the order holders
        # first appeared in) does not matter.
        modularity = math.fsum((inside / m - (touching / (2 * m)) ** 2).tolist())
        return Coherence(crossing / total, modularity, len(self.held), total)


def coherence(
    holders: dict[str, str | None], weighted_links: Iterable[tuple[str, str, float]]
) -> Coherence:
    """Cut ratio and weighted modularity of the partition by principal holder.

    Parameters
    ----------
    holders : dict
        Task id to its principal holder; tasks held by nobody (not applicable,
        unallocated) are left out.
    weighted_links : iterable of (source, target, weight)
        Links between tasks with their weight (occurrences per day they carry).

    Returns
    -------
    Coherence
    """
    links = list(weighted_links)
    partition = LinkPartition([(source, target) for source, target, _w in links])
    for task, holder in holders.items():
        partition.hold(task, holder)
    for index, (_source, _target, weight) in enumerate(links):
        partition.carry(index, weight)
    return partition.coherence()
