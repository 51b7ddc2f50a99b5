"""The task graph (allocation.core.graph): order, chains, triggers, tasks that never occur.

The small cases are worked by hand; the property tests use networkx itself
(``is_directed_acyclic_graph``, ``descendants``) on a graph the test builds from the
links, as the reference.
"""

from __future__ import annotations

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.graph import (
    Trigger,
    chain_tasks,
    hierarchy_cycle,
    never_occurring,
    precedence_cycle,
    precedence_graph,
    precedence_order,
    task_graph,
    triggers,
)
from allocation.core.model import Event, Link, Occurs, Study, Task


def hand_worked_study() -> Study:
    """Goal P over nine leaves, listed out of dependency order on purpose.

    ::

        A (08:00) --precedes--> B
        A --informs--> C
        C --precedes--> E <--precedes-- D (on event e1)
        C --precedes--> F
        G (on an event the study lacks), H (2 a day), K (every 3 days)
        event e2 starts nothing
    """
    leaves = {
        "E": None,
        "A": Occurs(times=("08:00",)),
        "B": None,
        "C": None,
        "D": Occurs(event="e1"),
        "F": None,
        "G": Occurs(event="missing"),
        "H": Occurs(per_day=2),
        "K": Occurs(every_days=3),
    }
    tasks = (Task("P", "Goal"),) + tuple(
        Task(task_id, f"Task {task_id}", parent="P", occurs=occurs)
        for task_id, occurs in leaves.items()
    )
    links = (
        Link("A", "B", "precedes"),
        Link("A", "C", "informs"),
        Link("C", "E", "precedes"),
        Link("D", "E", "precedes"),
        Link("C", "F", "precedes"),
    )
    events = (Event("e1", "Event one", times=("07:00",)), Event("e2", "Event two", per_day=1))
    return Study("hand", "Hand-worked", "sv10", events=events, tasks=tasks, links=links)


def test_precedence_order_puts_predecessors_first_and_otherwise_keeps_file_order():
    # Worked by hand: A frees B; C then D free E; the rest follow in file order.
    assert precedence_order(hand_worked_study()) == ["A", "B", "C", "D", "E", "F", "G", "H", "K"]


def test_precedence_order_without_links_is_the_file_order_of_the_leaves():
    study = hand_worked_study()
    study = Study("s", "S", "sv10", tasks=study.tasks)
    assert precedence_order(study) == [task.id for task in study.tasks if task.id != "P"]


def test_precedence_order_raises_on_a_cycle():
    tasks = (Task("A", "A"), Task("B", "B"))
    links = (Link("A", "B", "precedes"), Link("B", "A", "precedes"))
    with pytest.raises(nx.NetworkXUnfeasible):
        precedence_order(Study("s", "S", "sv10", tasks=tasks, links=links))


def test_triggers_list_every_event_then_every_task_schedule():
    assert triggers(hand_worked_study()) == [
        Trigger("e1", "event", "Event one", ("D",)),
        Trigger("e2", "event", "Event two", ()),
        Trigger("schedule:A", "schedule", "Task A", ("A",)),
        Trigger("schedule:H", "schedule", "Task H", ("H",)),
        Trigger("schedule:K", "schedule", "Task K", ("K",)),
    ]


def test_an_event_lists_the_tasks_it_starts_in_file_order():
    tasks = (
        Task("B", "B", occurs=Occurs(event="e", probability=0.5)),
        Task("A", "A", occurs=Occurs(event="e")),
    )
    study = Study("s", "S", "sv10", events=(Event("e", "E", per_day=1),), tasks=tasks)
    assert triggers(study) == [Trigger("e", "event", "E", ("B", "A"))]


def test_chain_tasks_follow_precedes_links_only():
    study = hand_worked_study()
    by_id = {trigger.id: trigger for trigger in triggers(study)}
    assert chain_tasks(study, by_id["schedule:A"]) == ["A", "B"]  # A informs C: not a chain
    assert chain_tasks(study, by_id["e1"]) == ["D", "E"]
    assert chain_tasks(study, by_id["e2"]) == []
    assert chain_tasks(study, by_id["schedule:H"]) == ["H"]


def test_never_occurring_names_the_leaves_nothing_starts():
    # C is only informed, F follows C, G's event is missing; E is reached from D.
    assert never_occurring(hand_worked_study()) == ["C", "F", "G"]


def test_task_graph_keeps_both_kinds_of_link_between_the_same_tasks():
    tasks = (Task("A", "A"), Task("B", "B"))
    links = (Link("A", "B", "precedes"), Link("A", "B", "informs"))
    graph = task_graph(Study("s", "S", "sv10", tasks=tasks, links=links))
    assert sorted(graph["A"]["B"]) == ["informs", "precedes"]
    assert graph["A"]["B"]["informs"]["index"] == 1
    assert list(precedence_graph(Study("s", "S", "sv10", tasks=tasks, links=links)).edges) == [
        ("A", "B")
    ]


def test_precedence_cycle_and_hierarchy_cycle_are_none_without_cycles():
    study = hand_worked_study()
    assert precedence_cycle(study) is None
    assert hierarchy_cycle(study) is None


def test_precedence_cycle_names_the_tasks_on_the_cycle_in_order():
    tasks = tuple(Task(name, name) for name in "ABCD")
    links = (
        Link("A", "B", "precedes"),
        Link("B", "C", "precedes"),
        Link("C", "D", "precedes"),
        Link("D", "B", "precedes"),
    )
    cycle = precedence_cycle(Study("s", "S", "sv10", tasks=tasks, links=links))
    assert sorted(cycle) == ["B", "C", "D"]
    start = cycle.index("B")
    assert cycle[start:] + cycle[:start] == ["B", "C", "D"]


def test_hierarchy_cycle_names_the_tasks_on_the_cycle():
    tasks = (Task("G1", "G1", parent="G2"), Task("G2", "G2", parent="G1"), Task("T", "T", "G1"))
    assert sorted(hierarchy_cycle(Study("s", "S", "sv10", tasks=tasks))) == ["G1", "G2"]


# -- properties, with networkx as the reference ---------------------------------------


@st.composite
def acyclic_studies(draw) -> Study:
    """Leaves with precedes links that go forward in a random order, informs links anywhere,
    and random ways of occurring."""
    count = draw(st.integers(1, 10), label="leaves")
    ids = [f"T{i}" for i in range(count)]
    order = draw(st.permutations(ids), label="hidden order")
    pairs = st.tuples(st.integers(0, count - 1), st.integers(0, count - 1))
    forward = draw(st.lists(pairs, max_size=20), label="precedes")
    precedes = {(order[min(a, b)], order[max(a, b)]) for a, b in forward if a != b}
    anywhere = draw(st.lists(pairs, max_size=6), label="informs")
    informs = {(ids[a], ids[b]) for a, b in anywhere if a != b}
    links = [Link(a, b, "precedes") for a, b in sorted(precedes)]
    links += [Link(a, b, "informs") for a, b in sorted(informs)]
    links = draw(st.permutations(links), label="link order")
    events = (Event("e0", "E0", per_day=1), Event("e1", "E1", times=("06:00",)))
    ways = st.sampled_from(
        [
            None,
            None,
            Occurs(times=("09:00",)),
            Occurs(per_day=3),
            Occurs(every_days=7),
            Occurs(event="e0"),
            Occurs(event="e1", probability=0.5),
        ]
    )
    tasks = [Task("G", "Goal")]
    tasks += [Task(task_id, task_id, parent="G", occurs=draw(ways)) for task_id in ids]
    return Study("random", "Random", "sv10", events=events, tasks=tuple(tasks), links=tuple(links))


def reference_graph(study: Study) -> nx.DiGraph:
    """The precedes links as a networkx graph, built here independently of the core."""
    graph = nx.DiGraph()
    graph.add_nodes_from(task.id for task in study.leaves)
    graph.add_edges_from(
        (link.source, link.target) for link in study.links if link.kind == "precedes"
    )
    return graph


@settings(max_examples=150, deadline=None)
@given(acyclic_studies())
def test_precedence_order_respects_every_precedes_link(study):
    order = precedence_order(study)
    assert sorted(order) == sorted(task.id for task in study.leaves)
    assert nx.is_directed_acyclic_graph(reference_graph(study))
    position = {task_id: index for index, task_id in enumerate(order)}
    for link in study.links:
        if link.kind == "precedes":
            assert position[link.source] < position[link.target], link


@settings(max_examples=150, deadline=None)
@given(acyclic_studies())
def test_a_chain_is_its_roots_and_all_their_descendants(study):
    graph = reference_graph(study)
    order = precedence_order(study)
    for trigger in triggers(study):
        expected = set(trigger.roots)
        for root in trigger.roots:
            expected |= nx.descendants(graph, root)
        chain = chain_tasks(study, trigger)
        assert set(chain) == expected
        assert chain == [task_id for task_id in order if task_id in expected]


@settings(max_examples=150, deadline=None)
@given(acyclic_studies())
def test_never_occurring_is_every_leaf_outside_every_chain(study):
    reached = set()
    for trigger in triggers(study):
        reached |= set(chain_tasks(study, trigger))
    assert never_occurring(study) == [t.id for t in study.leaves if t.id not in reached]


@settings(max_examples=100, deadline=None)
@given(acyclic_studies())
def test_triggers_cover_every_event_and_every_scheduled_leaf(study):
    found = triggers(study)
    assert [t.id for t in found if t.kind == "event"] == [e.id for e in study.events]
    scheduled = [t.id for t in study.leaves if t.occurs is not None and t.occurs.is_schedule]
    assert [t.roots for t in found if t.kind == "schedule"] == [(i,) for i in scheduled]
    for trigger in found:
        if trigger.kind == "event":
            assert trigger.roots == tuple(
                t.id for t in study.leaves if t.occurs is not None and t.occurs.event == trigger.id
            )
