"""Chain analysis is bounded: the task-in-chain entries of a study are counted with a
budget and refused over ``CHAIN_ENTRIES_MAX`` before any analysis.

The counts are checked against hand-worked sums (a chain of n tasks each with its own
schedule holds n(n+1)/2 entries: the triangular numbers) and against networkx's
``descendants``.
"""

from __future__ import annotations

import networkx as nx

from allocation.core import load_study
from allocation.core.graph import chain_entries, precedence_graph, triggers
from allocation.core.limits import CHAIN_ENTRIES_MAX, STUDY_MAX_TASKS
from allocation.core.synthetic import long_chain_study, synthetic_study
from tests.capped import run_capped


def test_long_chain_entries_are_the_triangular_number():
    # Hand-worked: T0 reaches 10 tasks, T1 9, ... T9 1: 10 * 11 / 2 = 55.
    study = load_study(long_chain_study(10)).require_valid()
    total, counted = chain_entries(study, 1000)
    assert total == 55
    assert [count for _trigger, count in counted] == list(range(10, 0, -1))


def test_entries_match_networkx_descendants_on_a_synthetic_study():
    study = load_study(synthetic_study(tasks=200, seed=3)).study
    graph = precedence_graph(study)
    expected = 0
    for trigger in triggers(study):
        reached = set(trigger.roots)
        for root in trigger.roots:
            reached |= nx.descendants(graph, root)
        expected += len(reached)
    assert chain_entries(study, 10**9)[0] == expected


def test_counting_stops_once_over_the_budget():
    study = load_study(long_chain_study(2000)).study
    total, counted = chain_entries(study, 5000)
    # Over the budget by at most one task's successors (one here): "at least 5,001".
    assert total == 5001
    assert len(counted) == 3  # 2000 + 1999 + 1002


def _refusals_of_long_chain(tasks: int) -> list[list[str]]:
    result = run_capped(
        f"""
        import json
        from allocation.core import load_study_text
        from allocation.core.synthetic import long_chain_study
        text = json.dumps(long_chain_study({tasks}), separators=(",", ":"))
        result = load_study_text(text)
        outcome = [[p.path, p.message] for p in result.errors]
        """,
        seconds=60,
        megabytes=1500,
    )
    return result.outcome


def test_a_long_chain_file_is_refused_by_the_reader_within_a_cap():
    # 5,000 tasks, the most a study holds: its chain would hold 12,502,500 entries
    # (n(n+1)/2, hand-worked). Counting stops at the 21st trigger, T20: the first twenty
    # reach 5,000 + 4,999 + ... + 4,981 = 99,810 tasks, the 21st passes 100,000.
    assert STUDY_MAX_TASKS == 5_000, "the hand-worked figures below are for 5,000 tasks"
    [(path, message)] = _refusals_of_long_chain(STUDY_MAX_TASKS)
    assert path == "$.tasks[20].occurs"
    assert f"at least {CHAIN_ENTRIES_MAX + 1:,} task-in-chain entries" in message
    assert f"the limit is {CHAIN_ENTRIES_MAX:,}" in message
    assert f"schedule:T0 ({STUDY_MAX_TASKS:,} tasks)" in message


def test_the_30000_task_chain_file_is_refused_by_its_size_within_a_cap():
    # The 30,000-task chain (about 4.9 MB compact) is refused for its count of tasks (and
    # of links, 29,999) before its chains are counted: no refusal is about an item.
    refusals = dict(_refusals_of_long_chain(30_000))
    assert set(refusals) == {"$.tasks", "$.links"}
    assert "30,000 tasks" in refusals["$.tasks"] and "STUDY_MAX_TASKS" in refusals["$.tasks"]
    assert "29,999 links" in refusals["$.links"] and "STUDY_MAX_LINKS" in refusals["$.links"]


def test_a_study_just_under_the_limit_is_accepted_and_analysed_within_a_cap():
    # 446 tasks: 446 * 447 / 2 = 99,681 entries, the largest such chain under the limit.
    assert 446 * 447 // 2 <= CHAIN_ENTRIES_MAX < 447 * 448 // 2
    result = run_capped(
        """
        from allocation.core import load_study
        from allocation.core.analysis import analyse_plan
        from allocation.core.synthetic import long_chain_study
        study = load_study(long_chain_study(446)).require_valid()
        analysis = analyse_plan(study, "P")
        outcome = sum(len(chain.tasks) for chain in analysis.chains)
        """,
        seconds=60,
        megabytes=1500,
    )
    assert result.outcome == 99_681
