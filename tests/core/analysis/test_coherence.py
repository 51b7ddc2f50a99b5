"""Coherence of an allocation (allocation.core.analysis.coherence; methods document,
#coherence): the share of link weight crossing agents, and Newman's modularity of the
partition of the tasks by principal holder.

networkx is the reference on random graphs (``networkx.community.modularity`` on a graph
the test builds itself, summing the weights of links between the same two tasks); the
formula Q = sum_c [L_c/m - (k_c/2m)^2] (Newman 2006, PNAS 103(23)) is also evaluated
directly; the two-triangles value 5/14 is worked by hand from that formula.
"""

from __future__ import annotations

import random
from collections import defaultdict

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.analysis.coherence import coherence

TRIANGLES = [
    ("t1", "t2", 1.0),
    ("t1", "t3", 1.0),
    ("t2", "t3", 1.0),
    ("t4", "t5", 1.0),
    ("t4", "t6", 1.0),
    ("t5", "t6", 1.0),
    ("t3", "t4", 1.0),
]


def test_two_triangles_joined_by_one_edge():
    """Newman (2006)'s modularity, worked by hand (and agreeing with networkx): two
    triangles joined by one edge, split into the triangles, Q = 5/14.

    Hand-worked: m = 7; each triangle has L_c = 3 and k_c = 7, so
    Q = 2 * (3/7 - (7/14)^2) = 6/7 - 1/2 = 5/14. One edge of seven crosses: cut 1/7.
    """
    holders = {"t1": "A", "t2": "A", "t3": "A", "t4": "B", "t5": "B", "t6": "B"}
    result = coherence(holders, TRIANGLES)
    assert result.modularity == pytest.approx(5 / 14)
    assert result.cut_ratio == pytest.approx(1 / 7)
    assert result.groups == 2
    assert result.link_weight == pytest.approx(7)


def test_one_holder_has_no_modularity_and_no_cut():
    # Newman (2006): one community -> Q = 1 - 1 = 0.
    holders = dict.fromkeys(("t1", "t2", "t3", "t4", "t5", "t6"), "A")
    result = coherence(holders, TRIANGLES)
    assert result.modularity == pytest.approx(0.0)
    assert result.cut_ratio == 0.0
    assert result.groups == 1


def test_cut_ratio_weighs_links_by_their_occurrences():
    """Hand-worked: links a-b 3/day (same holder), b-c 1/day (crosses), c-d 0.5/day
    (crosses): cut = 1.5 / 4.5 = 1/3."""
    holders = {"a": "pat", "b": "pat", "c": "pump", "d": "pat"}
    links = [("a", "b", 3.0), ("b", "c", 1.0), ("c", "d", 0.5)]
    assert coherence(holders, links).cut_ratio == pytest.approx(1 / 3)


def test_tasks_held_by_nobody_and_links_without_weight_are_left_out():
    """c is held by nobody (not applicable); the link to it and the zero-weight link
    count for nothing: only a-b (same holder) and b-d (crossing) remain: cut 1/2."""
    holders = {"a": "pat", "b": "pat", "c": None, "d": "pump"}
    links = [("a", "b", 1.0), ("b", "c", 5.0), ("a", "d", 0.0), ("b", "d", 1.0)]
    result = coherence(holders, links)
    assert result.cut_ratio == pytest.approx(0.5)
    assert result.link_weight == pytest.approx(2.0)


def test_no_links_means_no_modularity_and_no_cut():
    result = coherence({"a": "pat", "b": "pump"}, [])
    assert (result.cut_ratio, result.modularity) == (0.0, 0.0)


def newman(holders: dict[str, str], links: list[tuple[str, str, float]]) -> float:
    """Q = sum over groups c of [L_c/m - (k_c/2m)^2] on the weighted, undirected graph
    (Newman 2006, PNAS 103(23)), written out from the formula."""
    weight: dict[frozenset, float] = defaultdict(float)
    for source, target, w in links:
        if source != target and w > 0:
            weight[frozenset((source, target))] += w
    m = sum(weight.values())
    inside: dict[str, float] = defaultdict(float)
    degree: dict[str, float] = defaultdict(float)
    for pair, w in weight.items():
        source, target = tuple(pair)
        degree[holders[source]] += w
        degree[holders[target]] += w
        if holders[source] == holders[target]:
            inside[holders[source]] += w
    return sum(inside[c] / m - (degree[c] / (2 * m)) ** 2 for c in set(holders.values()))


@st.composite
def weighted_partitions(draw):
    """A random task graph (links may repeat or run both ways), weights and holders."""
    size = draw(st.integers(min_value=2, max_value=12))
    tasks = [f"t{i}" for i in range(size)]
    holders = {task: draw(st.sampled_from(["pat", "sam", "pump", "app"])) for task in tasks}
    pairs = st.tuples(st.sampled_from(tasks), st.sampled_from(tasks)).filter(
        lambda pair: pair[0] != pair[1]
    )
    links = draw(
        st.lists(
            st.tuples(pairs, st.floats(min_value=0.01, max_value=50, allow_nan=False)),
            min_size=1,
            max_size=30,
        )
    )
    return holders, [(a, b, w) for (a, b), w in links]


@settings(deadline=None, max_examples=100)
@given(weighted_partitions())
def test_modularity_equals_networkx_on_random_weighted_graphs(case):
    """networkx as reference: nx.community.modularity on the graph built here."""
    holders, links = case
    graph = nx.Graph()
    graph.add_nodes_from(holders)
    for source, target, w in links:
        previous = graph.get_edge_data(source, target, {"weight": 0.0})["weight"]
        graph.add_edge(source, target, weight=previous + w)
    groups = defaultdict(set)
    for task, holder in holders.items():
        groups[holder].add(task)
    expected = nx.community.modularity(graph, list(groups.values()), weight="weight")
    result = coherence(holders, links)
    assert result.modularity == pytest.approx(expected, abs=1e-9)
    assert result.modularity == pytest.approx(newman(holders, links), abs=1e-9)
    crossing = sum(w for a, b, w in links if holders[a] != holders[b])
    assert result.cut_ratio == pytest.approx(crossing / sum(w for _a, _b, w in links))


@pytest.mark.parametrize("seed", range(5))
def test_modularity_equals_networkx_on_seeded_random_graphs(seed):
    """networkx as reference on larger graphs: gnm random graphs with random weights and
    a random partition into three holders."""
    rng = random.Random(seed)
    graph = nx.gnm_random_graph(30, 80, seed=seed)
    links = [(f"t{a}", f"t{b}", rng.uniform(0.1, 10)) for a, b in graph.edges]
    holders = {f"t{n}": rng.choice(["pat", "pump", "app"]) for n in graph.nodes}
    reference = nx.Graph()
    reference.add_nodes_from(holders)
    reference.add_weighted_edges_from(links)
    groups = defaultdict(set)
    for task, holder in holders.items():
        groups[holder].add(task)
    expected = nx.community.modularity(reference, list(groups.values()), weight="weight")
    assert coherence(holders, links).modularity == pytest.approx(expected, abs=1e-12)
