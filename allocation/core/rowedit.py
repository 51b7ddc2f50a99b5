"""A study with one plan row changed, read and checked on its own.

The plan editor changes one task's assignment at a time. Reading and checking the whole
study file again costs the size of the study; the row alone is read as the study file
reader reads an assignment, and checked as the study checks check one (its agents, its
levels, its fallback person), with the plan's warning that a leaf task is left
unallocated. No other check reads a plan's assignments, so the problems of the study with
the row changed are its problems before, less the row's and the plan's warnings of
unallocated leaves (made again: an error elsewhere in the plan can hide them), with the
row's new ones (the tests compare the two ways over random rows, valid and not).

>>> after = reassigned(result, "hybrid-loop", "check-glucose", {"human": "pat"})
>>> after.ok, after.study.plan("hybrid-loop").assignments["check-glucose"]
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

from .checks import Checker, unallocated
from .errors import Problem
from .fileformat import LoadResult, ordered_problems
from .reading import StudyReader, child_path

__all__ = ["reassigned", "row_path"]


def row_path(result: LoadResult, plan_id: str, task_id: str) -> str:
    """The JSON path of a plan's assignment of a task in the study file."""
    assert result.study is not None
    index = next(i for i, plan in enumerate(result.study.plans) if plan.id == plan_id)
    return child_path(child_path(f"$.plans[{index}]", "assignments"), task_id)


def reassigned(
    result: LoadResult, plan_id: str, task_id: str, item: dict[str, Any] | None
) -> LoadResult:
    """``result`` (a study read from its file) with the plan's assignment of a task set
    to ``item`` (as the study file writes it; ``None``: removed), read and checked.

    Parameters
    ----------
    result : LoadResult
        The study before the change, with its problems; its study must have the plan.
    plan_id, task_id : str
        The row.
    item : dict or None
        The new assignment in the study file's form.

    Returns
    -------
    LoadResult
        The study with the new row and the problems the whole file would have.
    """
    study = result.study
    assert study is not None
    plan = study.plan(plan_id)
    path = row_path(result, plan_id, task_id)
    reader = StudyReader()
    assignment = None
    if item is not None and reader.identifier(task_id, path) is not None:
        assignment = reader.assignment(item, path)
    problems = list(reader.problems)
    checker = Checker(study)
    if assignment is not None:
        checker.assignments({task_id: assignment}, _parent(path))
    assignments = dict(plan.assignments)
    if assignment is None:
        assignments.pop(task_id, None)
    else:
        assignments[task_id] = assignment
    # The plan's warnings of unallocated leaves, all made again: one that an error in
    # another row hid (a warning above an error is dropped) comes back with that error.
    warnings = {unallocated(plan_id, task.id) for task in study.leaves}
    for task in study.leaves:
        if task.id not in assignments:
            checker.warn(_parent(path), unallocated(plan_id, task.id))
    problems += checker.problems
    kept = [
        problem
        for problem in result.problems
        if not _within(problem, path)
        and not (problem.path == _parent(path) and problem.message in warnings)
    ]
    changed = study.with_plan(replace(plan, assignments=assignments))
    return LoadResult(changed, ordered_problems(kept + problems))


def _parent(path: str) -> str:
    """The path of the assignments object a row's path is in."""
    return path[: path.rindex(".")] if not path.endswith("]") else path[: path.rindex("[")]


def _within(problem: Problem, path: str) -> bool:
    return problem.path == path or problem.path.startswith((path + ".", path + "["))
