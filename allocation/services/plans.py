"""Edits to a study's plans: a plan's id, name and description, a copy of a plan, its
deletion, and its assignments one at a time or several at once.

Every edit goes through :func:`~.edits.study_edit`, as the inventory's edits do: made to
a copy of the study's document and checked by the core as an import would be, then
written to the rows with the study row locked. A plan's mode map has its own module
(:mod:`.modes`).
"""

from __future__ import annotations

import copy
from typing import Any

from allocation import models as m

from . import rows
from .conflicts import version_check
from .edits import (
    Document,
    StudyEdit,
    agents_by_key,
    item_find,
    item_index,
    item_named,
    next_position,
    row_bump,
    study_edit,
    tasks_by_key,
)
from .studies import plan_create

__all__ = [
    "assignment_set",
    "assignments_bulk_set",
    "plan_copy",
    "plan_delete",
    "plan_save",
]


def plan_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Plan:
    """Add an empty plan (``key`` None) or change a plan's id, name or description.

    Raises :class:`~.conflicts.EditConflict` when ``expected_version`` is given and the
    plan is not at that version (0: the plan did not exist)."""
    with study_edit(study=study, action="plan.save") as edit:
        if expected_version is not None:
            looked_up = item["id"] if key is None else key
            row = edit.study.plans.filter(key=looked_up).first()
            plans = edit.before["plans"]
            current = item_find(plans, looked_up)
            version_check(
                study=edit.study,
                stored=0 if row is None else row.version,
                expected=expected_version,
                path=f"$.plans[{len(plans) if current is None else plans.index(current)}]",
                what=f"plan {looked_up}",
                current=None
                if current is None
                else {k: current[k] for k in ("id", "name", "description") if k in current},
            )

        def mutate(document: Document) -> None:
            if key is None:
                document["plans"].append({**item, "assignments": {}})
                return
            plan = document["plans"][item_index(document["plans"], key)]
            for field in ("id", "name", "description"):
                if field in item:
                    plan[field] = item[field]
                else:
                    plan.pop(field, None)

        mutate(edit.document)
        edit.check()
        if key is None:
            plan = m.Plan(
                study=edit.study,
                position=next_position(edit.study.plans),
                key=item["id"],
                name=item["name"],
                description=item.get("description", ""),
            )
        else:
            plan = edit.study.plans.get(key=key)
            plan.key, plan.name = item["id"], item["name"]
            plan.description = item.get("description", "")
            plan.version += 1
        plan.save()
        edit.target = item_named("plan", key, item["id"])
    return plan


def plan_copy(*, study: m.Study, key: str, new_key: str, new_name: str) -> m.Plan:
    """Copy a plan, with its assignments and mode map, as the start of a new one."""
    target = f"plan {new_key} (copy of {key})"
    with study_edit(study=study, action="plan.copy", target=target) as edit:
        copied: dict[str, Any] = {}

        def mutate(document: Document) -> None:
            source = document["plans"][item_index(document["plans"], key)]
            copied.update(copy.deepcopy(source), id=new_key, name=new_name)
            document["plans"].append(copied)

        mutate(edit.document)
        edit.check()
        plan = plan_create(
            study_row=edit.study,
            item=copied,
            position=next_position(edit.study.plans),
            agents=agents_by_key(edit.study),
            tasks=tasks_by_key(edit.study),
        )
    return plan


def plan_delete(*, study: m.Study, key: str) -> None:
    """Delete a plan with its assignments and mode map."""
    with study_edit(study=study, action="plan.delete", target=f"plan {key}", check=False) as edit:
        edit.document["plans"] = [plan for plan in edit.document["plans"] if plan["id"] != key]
        edit.study.plans.filter(key=key).delete()


def _check_assignment(
    edit: StudyEdit, plan_key: str, task_key: str, expected: int | None, stored: int | None
) -> None:
    """Refuse a change of a plan's assignment of a task that started from another version
    (``stored``: the row's version now, ``None`` when there is no row)."""
    if expected is None:
        return
    plans = edit.before["plans"]
    index = item_index(plans, plan_key)
    version_check(
        study=edit.study,
        stored=stored or 0,
        expected=expected,
        path=f"$.plans[{index}].assignments.{task_key}",
        what=f"plan {plan_key} / task {task_key}",
        current=plans[index]["assignments"].get(task_key),
    )


def assignment_set(
    *,
    study: m.Study,
    plan_key: str,
    task_key: str,
    item: dict[str, Any] | None,
    expected_version: int | None = None,
) -> m.Assignment | None:
    """Set (or with ``item`` None, remove) a plan's assignment of one leaf task.

    Raises :class:`~.conflicts.EditConflict` when ``expected_version`` is given and the
    assignment is not at that version (0: the task was not allocated in the plan)."""
    action = "assignment.delete" if item is None else "assignment.set"
    target = f"plan {plan_key} / task {task_key}"
    with study_edit(study=study, action=action, target=target) as edit:
        if expected_version is not None:
            stored = (
                m.Assignment.objects.filter(
                    plan__study=edit.study, plan__key=plan_key, task__key=task_key
                )
                .values_list("version", flat=True)
                .first()
            )
            _check_assignment(edit, plan_key, task_key, expected_version, stored)

        edit.reassign_row(plan_key, task_key, item)
        plan = edit.study.plans.get(key=plan_key)
        task = edit.study.tasks.get(key=task_key)
        existing = plan.assignments.filter(task=task).first()
        if item is None:
            if existing is not None:
                existing.delete()
            return None
        values = rows.assignment_values(item, agents_by_key(edit.study))
        if existing is None:
            existing = m.Assignment(plan=plan, task=task, position=next_position(plan.assignments))
        for name, value in values.items():
            setattr(existing, name, value)
        row_bump(existing)
        existing.save()
    return existing


def assignments_bulk_set(
    *,
    study: m.Study,
    plan_key: str,
    task_keys: list[str],
    changes: dict[str, Any],
    expected_versions: dict[str, int] | None = None,
) -> list[str]:
    """Apply the same change (a level, a status …) to several assignments of a plan.

    Levels go only to shared assignments (others take none); tasks not yet allocated are
    left as they are. Returns the tasks changed.

    ``expected_versions`` maps tasks to the versions of their assignments the page
    showed (0: not allocated); the first that differs raises
    :class:`~.conflicts.EditConflict` and nothing is changed.
    """
    with study_edit(study=study, action="assignment.bulk_set") as edit:
        if expected_versions:
            stored = dict(
                m.Assignment.objects.filter(
                    plan__study=edit.study, plan__key=plan_key, task__key__in=task_keys
                ).values_list("task__key", "version")
            )
            for task_id in task_keys:
                if task_id in expected_versions:
                    _check_assignment(
                        edit, plan_key, task_id, expected_versions[task_id], stored.get(task_id)
                    )
        changed: list[str] = []

        def mutate(document: Document) -> None:
            plan = document["plans"][item_index(document["plans"], plan_key)]
            for task_id in task_keys:
                assignment = plan["assignments"].get(task_id)
                if assignment is None:
                    continue
                shared = "human" in assignment and "automation" in assignment
                update = {k: v for k, v in changes.items() if k != "levels" or shared}
                if update:
                    assignment.update(update)
                    changed.append(task_id)

        mutate(edit.document)
        document = edit.check()
        plan_item = document["plans"][item_index(document["plans"], plan_key)]
        agents = agents_by_key(edit.study)
        plan = edit.study.plans.get(key=plan_key)
        for row in plan.assignments.filter(task__key__in=changed).select_related("task"):
            for name, value in rows.assignment_values(
                plan_item["assignments"][row.task.key], agents
            ).items():
                setattr(row, name, value)
            row_bump(row)
            row.save()
        edit.target = f"plan {plan_key} / tasks {', '.join(changed)}"
    return changed
