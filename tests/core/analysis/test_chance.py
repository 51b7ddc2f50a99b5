"""Exact chain probabilities (allocation.core.analysis.chance; methods document,
#occurrences): predecessors that share an uncertain ancestor are not independent.

Checked by hand on small graphs, against a Monte Carlo written here with numpy alone
(every link drawn once per happening, as the rule says) on random DAGs generated with
networkx, and against Baton's day simulation on a study.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest

from allocation.core import read_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.chance import EXACT_SHARED, chain_chances
from allocation.core.simulation import simulate
from tests.core.test_simulation import study_file


def _order(*tasks: str) -> dict[str, int]:
    return {task: place for place, task in enumerate(tasks)}


FORK = {
    "A": [("B", 0.5)],
    "B": [("C", 1.0), ("D", 1.0)],
    "C": [("E", 1.0)],
    "D": [("E", 1.0)],
}


def test_a_fork_that_joins_after_a_probabilistic_step():
    """E occurs exactly when B does: 0.5. Taken as independent, C and D (0.5 each) would
    give 1 - 0.5 x 0.5 = 0.75."""
    result = chain_chances({"A": 1.0}, FORK, _order(*"ABCDE"))
    assert result.chance == pytest.approx({"A": 1, "B": 0.5, "C": 0.5, "D": 0.5, "E": 0.5})
    assert not result.approximate


def test_a_diamond_of_independent_links_keeps_the_product_rule():
    """A certain; A -> B (0.5), A -> C (0.4), both on to D: D = 1 - 0.5 x 0.6 = 0.7."""
    links = {"A": [("B", 0.5), ("C", 0.4)], "B": [("D", 1.0)], "C": [("D", 1.0)]}
    assert chain_chances({"A": 1.0}, links, _order(*"ABCD")).chance["D"] == pytest.approx(0.7)


def test_a_shared_uncertain_root_and_two_uncertain_branches():
    """R occurs with 0.8; R -> A; A -> B (0.5), A -> C (0.4); B -> D (0.9), C -> D.
    D = 0.8 x (1 - (1 - 0.5 x 0.9)(1 - 0.4)) = 0.8 x 0.67 = 0.536, where the product rule
    on P(B) = 0.4 and P(C) = 0.32 would give 1 - 0.64 x 0.68 = 0.5648."""
    links = {
        "R": [("A", 1.0)],
        "A": [("B", 0.5), ("C", 0.4)],
        "B": [("D", 0.9)],
        "C": [("D", 1.0)],
    }
    chance = chain_chances({"R": 0.8}, links, _order(*"RABCD")).chance
    assert chance["D"] == pytest.approx(0.536)
    assert chance["C"] == pytest.approx(0.32)


def test_a_task_that_does_not_apply_cuts_the_chain_through_it():
    chance = chain_chances({"A": 1.0}, FORK, _order(*"ABCDE"), applies=lambda t: t != "C").chance
    assert "C" not in chance and chance["E"] == pytest.approx(0.5)


def _random_chain(seed: int, nodes: int, edge_chance: float):
    """A DAG on ``nodes`` tasks (edges only from lower to higher number), one root 0,
    each link with a probability drawn from {0.3, 0.5, 0.8, 1}."""
    rng = np.random.default_rng(seed)
    graph = nx.gnp_random_graph(nodes, edge_chance, seed=seed, directed=True)
    dag = nx.DiGraph((u, v) for u, v in graph.edges if u < v)
    dag.add_nodes_from(range(nodes))
    assert nx.is_directed_acyclic_graph(dag)
    successors = {
        str(u): [(str(v), float(rng.choice([0.3, 0.5, 0.8, 1.0]))) for v in sorted(dag[u])]
        for u in dag
    }
    return successors, {str(n): n for n in range(nodes)}


def _monte_carlo(successors, root: str, nodes: int, draws: int, seed: int) -> np.ndarray:
    """Each task's share of happenings it occurs in: every link drawn once per happening,
    a task occurring when an occurring predecessor's link comes out."""
    rng = np.random.default_rng(seed)
    occurred = np.zeros((nodes, draws), bool)
    occurred[int(root)] = True
    for u in range(nodes):
        for v, p in successors[str(u)]:
            occurred[int(v)] |= occurred[u] & (rng.random(draws) < p)
    return occurred.mean(axis=1)


@pytest.mark.parametrize("seed", range(6))
def test_random_chains_agree_with_an_independent_monte_carlo(seed):
    nodes = 12
    successors, order = _random_chain(seed, nodes, 0.3)
    result = chain_chances({"0": 1.0}, successors, order)
    draws = 200_000
    shares = _monte_carlo(successors, "0", nodes, draws, seed + 100)
    for task, share in enumerate(shares):
        exact = result.chance.get(str(task), 0.0)
        error = max((exact * (1 - exact) / draws) ** 0.5, 1e-9)
        assert abs(share - exact) <= 4 * error + 1e-12, (seed, task, share, exact)


def test_past_the_exact_bound_the_chance_is_estimated_with_its_standard_error():
    """A dense chain with more shared uncertain links than are enumerated."""
    nodes = 40
    successors, order = _random_chain(7, nodes, 0.35)
    result = chain_chances({"0": 1.0}, successors, order, key="dense")
    assert result.approximate
    shares = _monte_carlo(successors, "0", nodes, 100_000, 11)
    for task, share in enumerate(shares):
        estimate = result.chance.get(str(task), 0.0)
        pooled = (share + estimate) / 2  # two independent estimates of one chance
        spread = (2 * pooled * (1 - pooled) / 100_000) ** 0.5
        assert abs(share - estimate) <= 4 * spread + 1e-9, (task, share, estimate)
        assert result.se[str(task)] == pytest.approx((estimate * (1 - estimate) / 100_000) ** 0.5)
    assert EXACT_SHARED == 20


def test_the_analysis_and_the_simulation_agree_on_a_fork_that_joins():
    """Pat does E only; the pump does the rest. E's occurrences a day: 4 happenings of the
    event x 0.5 = 2 (not 3); the simulated daily interactions of Pat agree within 4
    standard errors."""
    tasks = [
        {"id": t, "title": t, "duration_s": 5, **({"occurs": {"event": "e"}} if t == "A" else {})}
        for t in "ABCDE"
    ]
    links = [
        {"from": a, "to": b, "kind": "precedes", **({"probability": 0.5} if a == "A" else {})}
        for a, b in ("AB", "BC", "BD", "CE", "DE")
    ]
    assignments = {t: {"automation": "pump"} for t in "ABCD"} | {"E": {"human": "pat"}}
    document = study_file(
        tasks,
        links,
        events=[{"id": "e", "name": "Event", "per_day": 4, "when": "any"}],
        plans=[{"id": "p", "name": "Plan", "assignments": assignments}],
    )
    study = read_study(document)
    assert analyse_plan(study, "p").tasks["E"].per_day == pytest.approx(2.0)
    daily = simulate(study, "p", days=3000, seed=5).figures["pat"]["interactions"]
    error = daily.std(ddof=1) / len(daily) ** 0.5
    assert abs(daily.mean() - 2.0) <= 4 * error
