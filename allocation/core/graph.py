"""The task graph: leaf tasks joined by links, its order, cycles and chains.

A **chain** is the set of tasks reachable through ``precedes`` links from the tasks an
event or a schedule starts (methods document, ``#chains``).
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from .model import Event, Occurs, Study

__all__ = [
    "Trigger",
    "chain_entries",
    "chain_tasks",
    "hierarchy_cycle",
    "never_occurring",
    "precedence_cycle",
    "precedence_graph",
    "precedence_order",
    "root_occurs",
    "task_graph",
    "trigger_rule",
    "triggers",
]


def task_graph(study: Study) -> nx.MultiDiGraph:
    """Every leaf task as a node, every link as an edge keyed by its kind.

    Node attributes: ``title``, ``parent``. Edge attributes: ``kind``, ``lag``,
    ``probability`` and ``index`` (the link's position in the study file).
    """
    graph = nx.MultiDiGraph(study=study.id)
    for task in study.leaves:
        graph.add_node(task.id, title=task.title, parent=task.parent)
    for index, link in enumerate(study.links):
        graph.add_edge(
            link.source,
            link.target,
            key=link.kind,
            kind=link.kind,
            lag=link.lag_s,
            probability=link.probability,
            index=index,
        )
    return graph


def precedence_graph(study: Study) -> nx.DiGraph:
    """Leaf tasks joined by their ``precedes`` links only."""
    graph = nx.DiGraph()
    graph.add_nodes_from(task.id for task in study.leaves)
    for index, link in enumerate(study.links):
        if link.kind == "precedes":
            graph.add_edge(
                link.source, link.target, lag=link.lag_s, probability=link.probability, index=index
            )
    return graph


def precedence_cycle(study: Study) -> list[str] | None:
    """The tasks on one cycle of ``precedes`` links, in order, or ``None``."""
    try:
        edges = nx.find_cycle(precedence_graph(study))
    except nx.NetworkXNoCycle:
        return None
    return [source for source, _target in edges]


def hierarchy_cycle(study: Study) -> list[str] | None:
    """The tasks on one cycle of ``parent`` references, in order, or ``None``."""
    graph = nx.DiGraph()
    graph.add_edges_from((task.id, task.parent) for task in study.tasks if task.parent is not None)
    try:
        edges = nx.find_cycle(graph)
    except nx.NetworkXNoCycle:
        return None
    return [source for source, _target in edges]


def precedence_order(study: Study) -> list[str]:
    """Leaf task ids in an order where every predecessor comes first.

    Ties are broken by the tasks' order in the file, so the order is stable.
    Raises ``networkx.NetworkXUnfeasible`` when the links form a cycle.
    """
    position = {task.id: index for index, task in enumerate(study.tasks)}
    return list(
        nx.lexicographical_topological_sort(precedence_graph(study), key=position.__getitem__)
    )


@dataclass(frozen=True)
class Trigger:
    """What starts a chain: an event, or a task's own schedule."""

    id: str
    kind: str
    name: str
    roots: tuple[str, ...]


def triggers(study: Study) -> list[Trigger]:
    """Every event with the tasks it starts, then every task that has its own schedule."""
    started: dict[str, list[str]] = {event.id: [] for event in study.events}
    scheduled = []
    for task in study.leaves:
        if task.occurs is None:
            continue
        if task.occurs.event is not None and task.occurs.event in started:
            started[task.occurs.event].append(task.id)
        elif task.occurs.is_schedule:
            scheduled.append(Trigger(f"schedule:{task.id}", "schedule", task.title, (task.id,)))
    by_event = [
        Trigger(event.id, "event", event.name, tuple(started[event.id])) for event in study.events
    ]
    return by_event + scheduled


def root_occurs(study: Study, task_id: str) -> Occurs:
    """How a trigger's root task occurs; every root has its own ``occurs`` (see
    :func:`triggers`), so a task without one raises ``ValueError``."""
    occurs = study.task(task_id).occurs
    if occurs is None:
        raise ValueError(f"task {task_id!r} starts no chain: it has no occurs")
    return occurs


def trigger_rule(study: Study, trigger: Trigger) -> Event | Occurs:
    """When a trigger happens: its event, or its task's own schedule."""
    if trigger.kind == "event":
        return study.events_by_id[trigger.id]
    return root_occurs(study, trigger.roots[0])


def chain_tasks(study: Study, trigger: Trigger, graph: nx.DiGraph | None = None) -> list[str]:
    """The tasks of a trigger's chain, predecessors first."""
    graph = precedence_graph(study) if graph is None else graph
    members = set(trigger.roots)
    for root in trigger.roots:
        members |= nx.descendants(graph, root)
    return [task_id for task_id in precedence_order(study) if task_id in members]


def chain_entries(study: Study, budget: int) -> tuple[int, list[tuple[Trigger, int]]]:
    """Count the task-in-chain entries of a study's chains, stopping once over ``budget``.

    An entry is one task reachable from one trigger by ``precedes`` links (its roots
    included); chain analysis times each entry, so the sum bounds its work. Counting
    stops as soon as the sum passes ``budget``, so it costs O(budget) whatever the study.

    Returns
    -------
    total : int
        The entries counted: the exact sum when at most ``budget``, else a number over
        ``budget`` ("at least").
    counted : list of (Trigger, int)
        Each trigger reached with the entries counted for it (the last one partial when
        counting stopped).
    """
    successors: dict[str, list[str]] = {}
    for link in study.links:
        if link.kind == "precedes":
            successors.setdefault(link.source, []).append(link.target)
    total = 0
    counted: list[tuple[Trigger, int]] = []
    for trigger in triggers(study):
        seen = set(trigger.roots)
        stack = list(seen)
        count = len(seen)
        total += count
        while stack and total <= budget:
            for target in successors.get(stack.pop(), ()):
                if target not in seen:
                    seen.add(target)
                    stack.append(target)
                    count += 1
                    total += 1
        counted.append((trigger, count))
        if total > budget:
            break
    return total, counted


def never_occurring(study: Study) -> list[str]:
    """Leaf tasks that no event, schedule or chain ever starts."""
    graph = precedence_graph(study)
    reached: set[str] = set()
    for trigger in triggers(study):
        for root in trigger.roots:
            if root not in reached:
                reached.add(root)
                reached |= nx.descendants(graph, root)
    return [task.id for task in study.leaves if task.id not in reached]
