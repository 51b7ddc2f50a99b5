"""Coherence: how well a plan keeps tightly coupled work together (methods document,
``#coherence``).

Two figures over the task graph, links weighted by how often they carry work per day:

- ``cut_ratio``: the share of link weight that crosses from one principal holder to
  another (incoherency, Pritchett, Kim & Feigh 2014);
- ``modularity``: Newman's modularity of the partition of the tasks by principal holder,
  Q = sum over groups c of [L_c / m - (k_c / 2m)^2], weighted (Newman 2006), computed by
  networkx.

References
----------
.. [1] Newman, M. E. J. (2006). Modularity and community structure in networks. PNAS,
   103(23), 8577-8582.
.. [2] Pritchett, A. R., Kim, S. Y., & Feigh, K. M. (2014). Measuring human-automation
   function allocation. JCEDM, 8(1), 52-77.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from dataclasses import dataclass

import networkx as nx

__all__ = ["Coherence", "coherence"]


@dataclass(frozen=True)
class Coherence:
    cut_ratio: float
    modularity: float
    groups: int
    link_weight: float


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
    held = {task: holder for task, holder in holders.items() if holder is not None}
    graph = nx.Graph()
    graph.add_nodes_from(held)
    crossing = total = 0.0
    for source, target, weight in weighted_links:
        if source not in graph or target not in graph or weight <= 0 or source == target:
            continue
        total += weight
        if held[source] != held[target]:
            crossing += weight
        previous = graph.get_edge_data(source, target, {}).get("weight", 0.0)
        graph.add_edge(source, target, weight=previous + weight)
    groups: dict[str, set[str]] = defaultdict(set)
    for task in graph:
        groups[held[task]].add(task)
    modularity = 0.0
    if total > 0:
        # Modularity does not change with the scale of the weights; shares of the total
        # keep very rare links from underflowing in its normalisation.
        for _source, _target, data in graph.edges(data=True):
            data["share"] = data["weight"] / total
        modularity = nx.community.modularity(graph, list(groups.values()), weight="share")
    return Coherence(
        cut_ratio=crossing / total if total else 0.0,
        modularity=float(modularity),
        groups=len(groups),
        link_weight=total,
    )
