"""A layered drawing of the task graph: which task sits where on the dependency screen.

The layout follows the four steps of Sugiyama, Tagawa & Toda (1981) [1]_:

1. **Layers** from the ``precedes`` links: longest-path layering, read off
   :func:`networkx.topological_generations`, then every task with no predecessor moved
   right to sit just before its first successor (a source has no reason to wait at the
   far left, and shorter links cross less). Every ``precedes`` link then runs from a
   lower layer to a higher one. A task only ``informs`` links touch goes one layer after
   the task informing it (or one before the task it informs).
2. **Proper graph**: a link that spans several layers passes through one dummy point per
   layer in between, so that it is routed around the tasks and its crossings count.
   ``informs`` links carry no timing; they are routed the same way from their lower to
   their higher end, and drawn straight when both ends share a layer.
3. **Crossing reduction**: the barycentre heuristic [1]_ in alternating down and up
   sweeps, starting from an order grouped by goal; the best order seen is kept, so the
   result never has more crossings than the start. Crossings between two layers are
   counted as inversions (Barth, Jünger & Mutzel 2004 [2]_).
4. **Coordinates**: ``x`` is the layer and ``y`` the position within it. Each connected
   part is ordered on its own and drawn in its own band of rows, parts in goal order,
   each layer centred in its band, so links of different parts never cross.

Tasks with no link at all are set apart below the linked part, in rows grouped by goal,
each goal's rows headed by an empty row for its name.

A :class:`Selection` narrows the drawing to the leaves of one goal or to the tasks one
agent principally holds, with their immediate neighbours outside it kept as context.

References
----------
.. [1] Sugiyama, K., Tagawa, S., & Toda, M. (1981). Methods for visual understanding of
   hierarchical system structures. IEEE Trans. Systems, Man, and Cybernetics, 11(2),
   109-125.
.. [2] Barth, W., Jünger, M., & Mutzel, P. (2004). Simple and efficient bilayer cross
   counting. Journal of Graph Algorithms and Applications, 8(2), 179-194.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import cast

import networkx as nx

from .errors import BatonError, UnknownReference
from .model import Study

__all__ = [
    "Layout",
    "LayoutError",
    "PlacedEdge",
    "PlacedNode",
    "Selection",
    "UnlinkedGroup",
    "count_crossings",
    "goal_leaves",
    "layer_of",
    "layered_layout",
    "order_layers",
    "select_tasks",
]

#: Rows of unlinked tasks are at least this many columns wide (tool assumption, for a
#: block that reads as a group rather than a column).
MIN_UNLINKED_COLUMNS = 6
#: Rows left empty between two connected parts.
PART_GAP = 1.0


class LayoutError(BatonError):
    """The links cannot be laid out: they form a cycle of ``precedes`` links, or (for the
    crossing functions) an edge does not join two neighbouring layers."""


# -- selection --------------------------------------------------------------------------


@dataclass(frozen=True)
class Selection:
    """The tasks and links one view of the graph draws.

    ``focus`` holds the tasks the filter asks for, ``context`` their immediate
    neighbours outside it (drawn faded), both in file order; ``links`` are indices into
    ``study.links``: every link with at least one end in the focus.
    """

    focus: tuple[str, ...]
    context: tuple[str, ...]
    links: tuple[int, ...]
    filtered: bool = False

    @property
    def tasks(self) -> tuple[str, ...]:
        return self.focus + self.context


def goal_leaves(study: Study, goal: str) -> list[str]:
    """The leaf tasks under ``goal`` at any depth, in file order.

    Raises :class:`~allocation.core.errors.UnknownReference` when ``goal`` is not a goal
    of the study.
    """
    if not study.is_goal(goal):
        raise UnknownReference("goal", goal)
    below: set[str] = set()
    stack = [goal]
    while stack:
        for child in study.children[stack.pop()]:
            if child not in below:
                below.add(child)
                stack.append(child)
    return [task.id for task in study.leaves if task.id in below]


def select_tasks(
    study: Study,
    *,
    goal: str | None = None,
    agent: str | None = None,
    holders: Mapping[str, str | None] | None = None,
) -> Selection:
    """The tasks a filtered view draws.

    Parameters
    ----------
    study : Study
    goal : str, optional
        Keep the leaves under this goal.
    agent : str, optional
        Keep the tasks ``agent`` principally holds, according to ``holders``.
    holders : mapping, optional
        Each leaf task's principal holder under a plan (needed with ``agent``).

    Returns
    -------
    Selection
        With both filters, the tasks that pass both; without any, every leaf and link.
    """
    leaves = [task.id for task in study.leaves]
    focus_set = set(leaves)
    if goal is not None:
        focus_set &= set(goal_leaves(study, goal))
    if agent is not None:
        if agent not in study.agents_by_id:
            raise UnknownReference("agent", agent)
        holders = holders or {}
        focus_set &= {task_id for task_id in leaves if holders.get(task_id) == agent}
    filtered = goal is not None or agent is not None
    links = tuple(
        index
        for index, link in enumerate(study.links)
        if link.source in focus_set or link.target in focus_set
    )
    touched = {
        end for index in links for end in (study.links[index].source, study.links[index].target)
    }
    return Selection(
        focus=tuple(task_id for task_id in leaves if task_id in focus_set),
        context=tuple(task_id for task_id in leaves if task_id in touched - focus_set),
        links=links,
        filtered=filtered,
    )


# -- step 1: layers ---------------------------------------------------------------------


def layer_of(graph: nx.DiGraph) -> dict[Hashable, int]:
    """The layer of every node: longest-path layering with sources pulled right.

    A node's layer is the length of the longest path reaching it from a source (its
    topological generation); a source with successors then moves to one layer before
    its nearest successor. Every edge runs from a lower layer to a higher one.

    Raises :class:`LayoutError` when the graph has a cycle.
    """
    layer: dict[Hashable, int] = {}
    try:
        for index, generation in enumerate(nx.topological_generations(graph)):
            for node in generation:
                layer[node] = index
    except nx.NetworkXUnfeasible:
        raise LayoutError("the precedes links form a cycle; the graph cannot be layered") from None
    for node in graph:
        if graph.in_degree(node) == 0 and graph.out_degree(node) > 0:
            layer[node] = min(layer[successor] for successor in graph.successors(node)) - 1
    return layer


# -- step 3: crossings ------------------------------------------------------------------


def _inversions(values: Sequence[int], size: int) -> int:
    """Pairs i < j with values[i] > values[j], with a Fenwick tree over 0..size-1."""
    tree = [0] * (size + 1)
    total = 0
    for seen, value in enumerate(values):
        index, at_most = value + 1, 0
        while index > 0:
            at_most += tree[index]
            index -= index & -index
        total += seen - at_most
        index = value + 1
        while index <= size:
            tree[index] += 1
            index += index & -index
    return total


def _check_proper(layers: Sequence[Sequence[Hashable]], edges: Iterable[tuple]) -> dict:
    where = {node: index for index, layer in enumerate(layers) for node in layer}
    for source, target in edges:
        if where[target] != where[source] + 1:
            raise LayoutError(f"edge {source!r} -> {target!r} does not join adjacent layers")
    return where


def count_crossings(
    layers: Sequence[Sequence[Hashable]], edges: Iterable[tuple[Hashable, Hashable]]
) -> int:
    """Edge crossings of a layered drawing whose edges join adjacent layers.

    Two edges between the same pair of layers cross when their ends are in opposite
    orders; edges sharing an end do not cross. Counted per pair of layers as the
    inversions of the lower ends sorted by their upper ends [2]_, in O(E log V).

    Parameters
    ----------
    layers : sequence of sequences
        The nodes of each layer, in drawing order.
    edges : iterable of (node, node)
        Each from a node in layer i to a node in layer i + 1.
    """
    edges = list(edges)
    where = _check_proper(layers, edges)
    position = {node: index for layer in layers for index, node in enumerate(layer)}
    between: dict[int, list[tuple[int, int]]] = defaultdict(list)
    for source, target in edges:
        between[where[source]].append((position[source], position[target]))
    total = 0
    for upper, segments in between.items():
        segments.sort()
        total += _inversions([lower for _upper, lower in segments], len(layers[upper + 1]))
    return total


def _sort_by_barycentre(
    layer: list[Hashable], neighbours: Mapping[Hashable, list[Hashable]], position: dict
) -> None:
    def key(node: Hashable) -> tuple[float, int]:
        around = neighbours.get(node)
        here = position[node]
        if not around:
            return (here, here)
        return (sum(position[other] for other in around) / len(around), here)

    layer.sort(key=key)
    for index, node in enumerate(layer):
        position[node] = index


def order_layers(
    layers: Sequence[Sequence[Hashable]],
    edges: Iterable[tuple[Hashable, Hashable]],
    *,
    sweeps: int = 4,
) -> tuple[list[list[Hashable]], int, int]:
    """Reorder the nodes within layers to reduce edge crossings (barycentre heuristic).

    Each sweep orders every layer by the mean position of its neighbours in the layer
    above (top to bottom), then in the layer below (bottom to top) [1]_. A node with no
    neighbour on that side keeps its place. The best order seen is returned, so it never
    has more crossings than the given one.

    Parameters
    ----------
    layers : sequence of sequences
        The starting order of each layer.
    edges : iterable of (node, node)
        Each from a node in layer i to a node in layer i + 1.
    sweeps : int
        Down-and-up sweeps at most; stops early once there is no crossing left.

    Returns
    -------
    (layers, crossings_before, crossings_after)
    """
    edges = list(edges)
    current = [list(layer) for layer in layers]
    position = {node: index for layer in current for index, node in enumerate(layer)}
    above: dict[Hashable, list[Hashable]] = defaultdict(list)
    below: dict[Hashable, list[Hashable]] = defaultdict(list)
    for source, target in edges:
        below[source].append(target)
        above[target].append(source)
    before = count_crossings(current, edges)
    best, best_count = [list(layer) for layer in current], before
    for _sweep in range(sweeps):
        if best_count == 0:
            break
        for layer in current[1:]:
            _sort_by_barycentre(layer, above, position)
        for layer in reversed(current[:-1]):
            _sort_by_barycentre(layer, below, position)
        count = count_crossings(current, edges)
        if count < best_count:
            best, best_count = [list(layer) for layer in current], count
    return best, before, best_count


# -- the layout -------------------------------------------------------------------------


@dataclass(frozen=True)
class PlacedNode:
    """A task's place: ``layer`` is ``None`` for a task with no link in the view."""

    id: str
    x: float
    y: float
    layer: int | None
    faded: bool = False


@dataclass(frozen=True)
class PlacedEdge:
    """A link's route from its source to its target, through its dummy points."""

    link: int
    source: str
    target: str
    kind: str
    points: tuple[tuple[float, float], ...]

    @property
    def same_layer(self) -> bool:
        return len(self.points) == 2 and self.points[0][0] == self.points[1][0]


@dataclass(frozen=True)
class UnlinkedGroup:
    """A block of tasks without links, all under one goal (``None``: top level).

    ``y`` is the block's first row; the row above it is left empty for a heading.
    """

    goal: str | None
    y: float
    tasks: tuple[str, ...]


@dataclass(frozen=True)
class Layout:
    """Positions of the tasks and routes of the links of one view.

    ``layers`` counts the layers of the linked part; ``height`` the rows the drawing
    uses (its largest ``y`` plus one); the crossings are those of the routed links
    before and after crossing reduction.
    """

    nodes: dict[str, PlacedNode]
    edges: tuple[PlacedEdge, ...]
    layers: int
    height: float
    unlinked: tuple[UnlinkedGroup, ...]
    crossings_before: int
    crossings_after: int

    @property
    def columns(self) -> int:
        """How many columns the drawing uses: its layers, or the unlinked rows' width."""
        return int(max((node.x for node in self.nodes.values()), default=-1)) + 1


def _place_informs_only(precedence: nx.DiGraph, layer: dict, links: list, key) -> None:
    """Move tasks that only ``informs`` links touch next to what they inform or hear from.

    Layering leaves them in the first layer; one layer after their latest source (or one
    before their earliest target) keeps their links short. No ``precedes`` link touches
    them, so no ``precedes`` link is turned backwards.
    """
    loose = [node for node in precedence if precedence.degree(node) == 0]
    if not loose:
        return
    sources: dict[str, list[str]] = defaultdict(list)
    targets: dict[str, list[str]] = defaultdict(list)
    for _index, link in links:
        if link.kind == "informs" and link.source != link.target:
            sources[link.target].append(link.source)
            targets[link.source].append(link.target)
    for node in sorted(loose, key=key):
        if sources[node]:
            layer[node] = max(layer[other] for other in sources[node]) + 1
        elif targets[node]:
            layer[node] = max(min(layer[other] for other in targets[node]) - 1, 0)


def _connected_parts(
    layers: Sequence[Sequence[Hashable]], routes: Iterable[Sequence[Hashable]]
) -> dict[Hashable, int]:
    """Number the connected parts of the routed graph in the order they start.

    Parts are numbered by the first place any of their nodes has in the starting
    order (layer by layer), so parts keep the goal order the layers start from.
    """
    graph = nx.Graph()
    first: dict[Hashable, tuple[int, int]] = {}
    for index, rank in enumerate(layers):
        for place, node in enumerate(rank):
            graph.add_node(node)
            first[node] = (place, index)
    graph.add_edges_from(pair for route in routes for pair in zip(route, route[1:], strict=False))
    parts = sorted(
        nx.connected_components(graph), key=lambda part: min(first[node] for node in part)
    )
    return {node: number for number, part in enumerate(parts) for node in part}


def layered_layout(study: Study, selection: Selection | None = None, *, sweeps: int = 4) -> Layout:
    """Lay out the leaf tasks and links of a study (or of a selection) in layers.

    Parameters
    ----------
    study : Study
        A study whose ``precedes`` links form no cycle.
    selection : Selection, optional
        From :func:`select_tasks`; every leaf and link by default.
    sweeps : int
        Crossing-reduction sweeps at most (see :func:`order_layers`).

    Returns
    -------
    Layout

    References
    ----------
    .. [1] Sugiyama, Tagawa & Toda (1981), see the module notes.
    """
    if selection is None:
        selection = Selection(
            tuple(task.id for task in study.leaves), (), tuple(range(len(study.links)))
        )
    file_position = {task.id: index for index, task in enumerate(study.tasks)}
    goal_rank: dict[str | None, int] = {}
    for task_id in selection.tasks:
        goal_rank.setdefault(study.tasks_by_id[task_id].parent, len(goal_rank))

    def start_key(task_id: str) -> tuple[int, int]:
        return (goal_rank[study.tasks_by_id[task_id].parent], file_position[task_id])

    links = [(index, study.links[index]) for index in selection.links]
    precedence = nx.DiGraph()
    for _index, link in links:
        precedence.add_node(link.source)
        precedence.add_node(link.target)
        if link.kind == "precedes":
            precedence.add_edge(link.source, link.target)
    # networkx is untyped: the nodes it hands back are the task ids put in above.
    layer = cast("dict[str, int]", layer_of(precedence))
    _place_informs_only(precedence, layer, links, start_key)
    count = max(layer.values(), default=-1) + 1

    # Step 2: the proper graph, with a dummy point per layer a long link passes.
    layers: list[list[Hashable]] = [[] for _ in range(count)]
    starts: dict[Hashable, tuple[float, ...]] = {}
    for task_id in sorted(layer, key=start_key):
        layers[layer[task_id]].append(task_id)
        starts[task_id] = start_key(task_id)
    segments: list[tuple[Hashable, Hashable]] = []
    routes: dict[int, list[Hashable]] = {}
    for index, link in links:
        low, high = link.source, link.target
        if layer[low] > layer[high]:
            low, high = high, low
        route: list[Hashable] = [low]
        for step in range(layer[low] + 1, layer[high]):
            dummy = ("dummy", index, step)
            layers[step].append(dummy)
            starts[dummy] = (*start_key(low), index)
            route.append(dummy)
        route.append(high)
        if layer[low] != layer[high]:
            segments.extend(zip(route, route[1:], strict=False))
        routes[index] = route
    for rank in layers:
        rank.sort(key=starts.__getitem__)

    # Step 3: crossing reduction, one connected part at a time: the parts are then
    # stacked in each layer in goal order, so no link of one crosses a link of another.
    before = count_crossings(layers, segments)
    part_of = _connected_parts(layers, routes.values())
    parts = max(part_of.values(), default=-1) + 1
    own_layers: list[list[list[Hashable]]] = [[[] for _ in range(count)] for _ in range(parts)]
    own_segments: list[list[tuple[Hashable, Hashable]]] = [[] for _ in range(parts)]
    for index, rank in enumerate(layers):
        for node in rank:
            own_layers[part_of[node]][index].append(node)
    for edge in segments:
        own_segments[part_of[edge[0]]].append(edge)
    after = 0
    point: dict[Hashable, tuple[float, float]] = {}
    top = 0.0
    for part in range(parts):
        # Only the layers the part spans, so sweeps skip the empty ones.
        spans = [index for index, rank in enumerate(own_layers[part]) if rank]
        first_layer, end_layer = spans[0], spans[-1] + 1
        reordered, _before, crossings = order_layers(
            own_layers[part][first_layer:end_layer], own_segments[part], sweeps=sweeps
        )
        after += crossings
        # Step 4: coordinates. Each part has a band as tall as its fullest layer, and
        # each layer is centred in the band.
        band = max(len(rank) for rank in reordered)
        for column, rank in enumerate(reordered, start=first_layer):
            offset = top + (band - len(rank)) / 2
            for order, node in enumerate(rank):
                point[node] = (float(column), order + offset)
        top += band + PART_GAP
    linked_height = top - PART_GAP if parts else 0.0
    faded = set(selection.context)
    nodes: dict[str, PlacedNode] = {}
    for task_id in selection.tasks:
        if task_id in layer:
            x, y = point[task_id]
            nodes[task_id] = PlacedNode(task_id, x, y, layer[task_id], task_id in faded)
    edges = []
    for index, link in links:
        route = routes[index]
        if route[0] != link.source:
            route = route[::-1]
        edges.append(
            PlacedEdge(
                index, link.source, link.target, link.kind, tuple(point[node] for node in route)
            )
        )

    # Tasks without links: rows grouped by goal, below the linked part.
    columns = max(count, MIN_UNLINKED_COLUMNS)
    by_goal: dict[str | None, list[str]] = {}
    for task_id in selection.tasks:
        if task_id not in layer:
            by_goal.setdefault(study.tasks_by_id[task_id].parent, []).append(task_id)
    # Each goal's block is headed by an empty row, where a drawing can name the goal.
    y = linked_height + 2.0 if parts else 1.0
    groups = []
    for goal in sorted(by_goal, key=goal_rank.__getitem__):
        members = by_goal[goal]
        groups.append(UnlinkedGroup(goal, y, tuple(members)))
        for place, task_id in enumerate(members):
            row, column = divmod(place, columns)
            nodes[task_id] = PlacedNode(task_id, float(column), y + row, None, task_id in faded)
        y += math.ceil(len(members) / columns) + 1.0
    height = y - 1.0 if groups else linked_height
    ordered_nodes = {task_id: nodes[task_id] for task_id in selection.tasks}
    return Layout(
        nodes=ordered_nodes,
        edges=tuple(edges),
        layers=count,
        height=height,
        unlinked=tuple(groups),
        crossings_before=before,
        crossings_after=after,
    )
