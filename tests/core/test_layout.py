"""The layered layout of the task graph (allocation.core.layout).

References used by these tests:

- crossings are checked against a hand-written count over every pair of edges (two
  edges between the same two layers cross when their ends come in opposite orders),
  itself checked on small cases worked by hand;
- layers are checked against :func:`networkx.topological_generations` (longest-path
  layering) and against the edges themselves;
- the filters are checked on a hand-worked study drawn in the docstring below.
"""

from __future__ import annotations

import itertools
import random

import networkx as nx
import pytest

from allocation.core import load_study
from allocation.core.errors import UnknownReference
from allocation.core.graph import precedence_graph
from allocation.core.layout import (
    LayoutError,
    Selection,
    count_crossings,
    goal_leaves,
    layer_of,
    layered_layout,
    order_layers,
    select_tasks,
)
from allocation.core.model import Agent, Link, Study, Task
from allocation.core.synthetic import synthetic_study


def pair_crossings(layers, edges) -> int:
    """Crossings counted pair by pair: the reference for :func:`count_crossings`."""
    layer = {node: index for index, rank in enumerate(layers) for node in rank}
    place = {node: index for rank in layers for index, node in enumerate(rank)}
    total = 0
    for (a, b), (c, d) in itertools.combinations(edges, 2):
        if layer[a] != layer[c]:
            continue
        if (place[a] - place[c]) * (place[b] - place[d]) < 0:
            total += 1
    return total


def random_layered_graph(seed: int) -> tuple[list[list[str]], list[tuple[str, str]]]:
    """Random layers of 2-9 nodes with random edges between neighbouring layers."""
    rng = random.Random(seed)
    layers = [
        [f"n{depth}.{i}" for i in range(rng.randint(2, 9))] for depth in range(rng.randint(2, 6))
    ]
    edges = set()
    for upper, lower in itertools.pairwise(layers):
        for _ in range(rng.randint(1, 3 * len(upper))):
            edges.add((rng.choice(upper), rng.choice(lower)))
    return layers, sorted(edges)


# -- crossings --------------------------------------------------------------------------


def test_pair_count_on_hand_worked_cases():
    """Worked by hand: a-d and b-c cross once; a-c shares c with b-c, so adds none; a
    full reversal of three edges crosses every pair, 3 times."""
    assert pair_crossings([["a", "b"], ["c", "d"]], [("a", "d"), ("b", "c")]) == 1
    assert pair_crossings([["a", "b"], ["c", "d"]], [("a", "d"), ("b", "c"), ("a", "c")]) == 1
    reversal = [("a", "f"), ("b", "e"), ("c", "d")]
    assert pair_crossings([["a", "b", "c"], ["d", "e", "f"]], reversal) == 3
    assert pair_crossings([["a", "b", "c"], ["d", "e", "f"]], [("a", "d"), ("b", "e")]) == 0


def test_count_crossings_on_hand_worked_cases():
    assert count_crossings([["a", "b"], ["c", "d"]], [("a", "d"), ("b", "c")]) == 1
    reversal = [("a", "f"), ("b", "e"), ("c", "d")]
    assert count_crossings([["a", "b", "c"], ["d", "e", "f"]], reversal) == 3
    # Parallel edges and edges sharing an end never cross.
    assert count_crossings([["a", "b"], ["c"]], [("a", "c"), ("b", "c"), ("a", "c")]) == 0


@pytest.mark.parametrize("seed", range(40))
def test_count_crossings_equals_the_pair_count(seed):
    layers, edges = random_layered_graph(seed)
    assert count_crossings(layers, edges) == pair_crossings(layers, edges)


def test_count_crossings_refuses_edges_that_skip_a_layer():
    with pytest.raises(LayoutError, match="adjacent layers"):
        count_crossings([["a"], ["b"], ["c"]], [("a", "c")])


@pytest.mark.parametrize("seed", range(40))
def test_reduction_never_adds_crossings(seed):
    layers, edges = random_layered_graph(seed)
    ordered, before, after = order_layers(layers, edges)
    assert [sorted(rank) for rank in ordered] == [sorted(rank) for rank in layers]
    assert before == pair_crossings(layers, edges)
    assert after == pair_crossings(ordered, edges)
    assert after <= before


def test_reduction_untangles_a_reversal():
    """Three edges in reverse order cross 3 times; barycentre ordering removes them all."""
    reversal = [("a", "f"), ("b", "e"), ("c", "d")]
    ordered, before, after = order_layers([["a", "b", "c"], ["d", "e", "f"]], reversal)
    assert (before, after) == (3, 0)
    assert pair_crossings(ordered, reversal) == 0


def test_reduction_helps_on_random_graphs_overall():
    """Across seeded random graphs the heuristic removes crossings, not only keeps them."""
    before_total = after_total = 0
    for seed in range(40):
        layers, edges = random_layered_graph(seed)
        _ordered, before, after = order_layers(layers, edges)
        before_total += before
        after_total += after
    assert after_total < 0.8 * before_total


# -- layers -----------------------------------------------------------------------------


def synthetic(tasks: int, links: int, seed: int = 1) -> Study:
    result = load_study(synthetic_study(tasks=tasks, links=links, seed=seed))
    assert result.ok
    return result.study


@pytest.fixture(scope="module")
def big() -> Study:
    """The scale the screen must handle: 1,000 tasks and 3,000 links."""
    return synthetic(1000, 3000)


def test_layers_follow_topological_generations(big):
    """Non-sources sit in their networkx generation (longest path from a source);
    sources sit one layer before their nearest successor."""
    graph = precedence_graph(big)
    graph.remove_nodes_from([node for node in list(graph) if graph.degree(node) == 0])
    layer = layer_of(graph)
    generation = {
        node: index
        for index, nodes in enumerate(nx.topological_generations(graph))
        for node in nodes
    }
    for node in graph:
        if graph.in_degree(node):
            assert layer[node] == generation[node]
        else:
            assert layer[node] == min(layer[s] for s in graph.successors(node)) - 1
    assert all(layer[a] < layer[b] for a, b in graph.edges)


def test_layering_refuses_a_cycle():
    with pytest.raises(LayoutError, match="cycle"):
        layer_of(nx.DiGraph([("a", "b"), ("b", "a")]))


def test_big_layout_places_every_task_and_routes_every_link(big):
    layout = layered_layout(big)
    assert list(layout.nodes) == [task.id for task in big.leaves]
    places = {(node.x, node.y) for node in layout.nodes.values()}
    assert len(places) == len(layout.nodes)
    assert len(layout.edges) == len(big.links)
    for edge in layout.edges:
        link = big.links[edge.link]
        source, target = layout.nodes[link.source], layout.nodes[link.target]
        assert edge.points[0] == (source.x, source.y)
        assert edge.points[-1] == (target.x, target.y)
        # One point per layer passed: the route steps one layer at a time.
        xs = [x for x, _y in edge.points]
        assert all(abs(b - a) == 1 for a, b in itertools.pairwise(xs)) or len(xs) == 2
        if link.kind == "precedes":
            assert source.layer < target.layer
    assert layout.crossings_after <= layout.crossings_before


def drawn_crossings(layout) -> int:
    """Crossings of the drawn route segments, pair by pair (the reference)."""
    segments = [
        (a, b) for edge in layout.edges for a, b in itertools.pairwise(edge.points) if a[0] != b[0]
    ]
    segments = [(a, b) if a[0] < b[0] else (b, a) for a, b in segments]
    total = 0
    for (a, b), (c, d) in itertools.combinations(segments, 2):
        if a[0] == c[0] and (a[1] - c[1]) * (b[1] - d[1]) < 0:
            total += 1
    return total


def test_reported_crossings_are_the_drawn_ones():
    study = synthetic(160, 420, seed=3)
    layout = layered_layout(study)
    assert layout.crossings_after == drawn_crossings(layout)
    assert layout.crossings_after < layout.crossings_before


def test_goal_view_of_the_big_study_has_fewer_crossings(big):
    layout = layered_layout(big, select_tasks(big, goal="G0"))
    assert layout.crossings_after == drawn_crossings(layout)
    assert layout.crossings_after < layout.crossings_before


# -- a hand-worked study for the filters ------------------------------------------------


def hand_worked_study() -> Study:
    """Goal G over goals GA and GB and a leaf C1 with no links::

        GA: A1 --precedes--> A2 --precedes--> B1 (in GB)
        GB: B1 --precedes--> B2 --informs--> A3 (in GA)
        C1: no links

    Holders (given to the filter as a plan would): person holds A1 and B1; device
    holds A2, A3, B2; C1 has none.
    """
    tasks = (
        Task("G", "Root goal"),
        Task("GA", "Goal A", parent="G"),
        Task("A1", "First", parent="GA"),
        Task("A2", "Second", parent="GA"),
        Task("A3", "Told", parent="GA"),
        Task("GB", "Goal B", parent="G"),
        Task("B1", "Third", parent="GB"),
        Task("B2", "Fourth", parent="GB"),
        Task("C1", "Alone", parent="G"),
    )
    links = (
        Link("A1", "A2", "precedes"),
        Link("A2", "B1", "precedes"),
        Link("B1", "B2", "precedes"),
        Link("B2", "A3", "informs"),
    )
    agents = (Agent("person", "Person", "human"), Agent("device", "Device", "automation"))
    return Study("hand", "Hand", "sv10", agents=agents, tasks=tasks, links=links)


HOLDERS = {"A1": "person", "B1": "person", "A2": "device", "A3": "device", "B2": "device"}


def test_goal_leaves_at_any_depth():
    study = hand_worked_study()
    assert goal_leaves(study, "GA") == ["A1", "A2", "A3"]
    assert goal_leaves(study, "G") == ["A1", "A2", "A3", "B1", "B2", "C1"]


def test_no_filter_keeps_everything():
    selection = select_tasks(hand_worked_study())
    assert selection == Selection(("A1", "A2", "A3", "B1", "B2", "C1"), (), (0, 1, 2, 3))


def test_goal_filter_keeps_its_leaves_and_their_neighbours():
    selection = select_tasks(hand_worked_study(), goal="GA")
    assert selection.focus == ("A1", "A2", "A3")
    assert selection.context == ("B1", "B2")
    assert selection.links == (0, 1, 3)  # B1 -> B2 joins two neighbours: left out
    assert selection.filtered


def test_agent_filter_keeps_what_the_agent_holds():
    selection = select_tasks(hand_worked_study(), agent="person", holders=HOLDERS)
    assert selection.focus == ("A1", "B1")
    assert selection.context == ("A2", "B2")
    assert selection.links == (0, 1, 2)


def test_both_filters_keep_what_passes_both():
    selection = select_tasks(hand_worked_study(), goal="GB", agent="device", holders=HOLDERS)
    assert selection.focus == ("B2",)
    assert selection.context == ("A3", "B1")
    assert selection.links == (2, 3)


def test_an_agent_holding_nothing_keeps_nothing():
    study = hand_worked_study()
    selection = select_tasks(study, agent="device", holders={})
    assert selection == Selection((), (), (), filtered=True)
    layout = layered_layout(study, selection)
    assert layout.nodes == {} and layout.edges == () and layout.height == 0


@pytest.mark.parametrize(
    ("goal", "agent", "kind"),
    [("GX", None, "goal"), ("A1", None, "goal"), (None, "nobody", "agent")],
)
def test_filters_name_what_they_do_not_know(goal, agent, kind):
    with pytest.raises(UnknownReference) as caught:
        select_tasks(hand_worked_study(), goal=goal, agent=agent, holders=HOLDERS)
    assert caught.value.kind == kind


def test_hand_worked_layout():
    """Layers worked by hand: A1 0, A2 1, B1 2, B2 3; A3 only hears from B2, so it
    goes one layer after it, 4. C1 has no links: below, in the block of goal G."""
    layout = layered_layout(hand_worked_study())
    layers = {task: node.layer for task, node in layout.nodes.items()}
    assert layers == {"A1": 0, "A2": 1, "B1": 2, "B2": 3, "A3": 4, "C1": None}
    assert layout.layers == 5
    assert [(group.goal, group.tasks) for group in layout.unlinked] == [("G", ("C1",))]
    assert layout.nodes["C1"].y > max(
        node.y for node in layout.nodes.values() if node.layer is not None
    )
    assert layout.crossings_after == 0
    informs = layout.edges[3]
    assert (informs.kind, informs.points) == ("informs", ((3.0, 0.0), (4.0, 0.0)))


def test_filtered_layout_fades_the_neighbours():
    study = hand_worked_study()
    layout = layered_layout(study, select_tasks(study, goal="GA"))
    assert {task for task, node in layout.nodes.items() if node.faded} == {"B1", "B2"}
    assert [edge.link for edge in layout.edges] == [0, 1, 3]


def test_a_link_across_layers_passes_a_point_per_layer():
    study = hand_worked_study()
    skipping = Link("A1", "B2", "precedes")
    study = Study(
        "hand",
        "Hand",
        "sv10",
        agents=study.agents,
        tasks=study.tasks,
        links=(*study.links, skipping),
    )
    layout = layered_layout(study)
    edge = layout.edges[-1]
    assert [x for x, _y in edge.points] == [0.0, 1.0, 2.0, 3.0]
