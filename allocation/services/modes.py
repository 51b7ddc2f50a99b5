"""Edits to a plan's mode map: its modes, holder overrides and transitions.

Each edit changes the plan's ``modes`` in the study's document, which the core checks as
it checks an import (through :func:`~.edits.study_edit`); an edit that would add an
error is refused with those errors and nothing is written. Then the plan's mode rows are
written anew from the checked document, inside the same transaction, with the study row
locked.
A mode map is small (modes and transitions by the dozen), so rewriting it whole keeps
the rows exactly what the checked document says; the rewritten rows carry their versions
on (one more for each row whose values changed), so that optimistic versioning
(:mod:`.conflicts`) sees through the rewrite.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

from allocation import models as m
from allocation import selectors
from allocation.core import Problem, StudyInvalid

from .conflicts import version_check
from .edits import Consequence, Document, agents_by_key, item_index, study_edit, tasks_by_key
from .studies import modes_create

__all__ = [
    "mode_delete",
    "mode_delete_consequences",
    "mode_initial_set",
    "mode_map_delete",
    "mode_override_set",
    "mode_save",
    "transition_delete",
    "transition_save",
]

Modes = dict[str, Any]


def _plan_path(document: Document, plan_key: str) -> str:
    return f"$.plans[{item_index(document['plans'], plan_key)}].modes"


Versions = tuple[dict[str, int], dict[tuple[str, str], int], list[int]]


def _versions(plan_row: m.Plan) -> Versions:
    """The versions of a plan's mode rows: by mode, by (mode, task), by position."""
    states = dict(plan_row.mode_states.values_list("key", "version"))
    overrides = {
        (state, task): version
        for state, task, version in m.ModeOverride.objects.filter(
            state__plan=plan_row
        ).values_list("state__key", "task__key", "version")
    }
    transitions = list(plan_row.mode_transitions.values_list("version", flat=True))
    return states, overrides, transitions


def _bare(mode: dict[str, Any] | None) -> dict[str, Any] | None:
    return None if mode is None else {k: v for k, v in mode.items() if k != "overrides"}


def _carry_versions(
    plan_row: m.Plan,
    old: Versions,
    before: Modes | None,
    after: Modes,
    renamed: dict[str, str],
) -> None:
    """Give the rewritten mode rows their versions: the old one where the values are the
    same, one more where they changed, 1 for a new row. ``renamed`` maps a mode's new id
    to its old one."""
    old_states, old_overrides, old_transitions = old
    before_states = {mode["id"]: mode for mode in (before or {}).get("states", [])}
    after_states = {mode["id"]: mode for mode in after["states"]}
    states = list(plan_row.mode_states.all())
    for state in states:
        was = renamed.get(state.key, state.key)
        if was in old_states:
            alike = _bare(before_states.get(was)) == _bare(after_states[state.key])
            state.version = old_states[was] + (0 if was == state.key and alike else 1)
    m.ModeState.objects.bulk_update(states, ["version"])
    overrides = list(
        m.ModeOverride.objects.filter(state__plan=plan_row).select_related("state", "task")
    )
    for override in overrides:
        was = renamed.get(override.state.key, override.state.key)
        task_key = override.task.key
        if (was, task_key) in old_overrides:
            then = before_states[was].get("overrides", {}).get(task_key)
            now = after_states[override.state.key]["overrides"][task_key]
            override.version = old_overrides[was, task_key] + (0 if then == now else 1)
    m.ModeOverride.objects.bulk_update(overrides, ["version"])
    # Transitions have no id: match them by position, skipping the ones deleted.
    transitions = list(plan_row.mode_transitions.all())
    then_items = (before or {}).get("transitions", [])
    now_items = after["transitions"]
    deleted = len(now_items) < len(then_items)
    j = 0
    for transition, item in zip(transitions, now_items, strict=False):
        while deleted and j < len(then_items) and then_items[j] != item:
            j += 1
        if j < len(then_items):
            transition.version = old_transitions[j] + (0 if then_items[j] == item else 1)
            j += 1
    m.ModeTransition.objects.bulk_update(transitions, ["version"])


def _edit(
    study: m.Study,
    plan_key: str,
    change: Callable[[Modes | None, str], Modes | None],
    action: str,
    target: str,
    *,
    check: Callable[[m.Study, m.Plan, Modes | None, str], None] | None = None,
    renamed: dict[str, str] | None = None,
) -> None:
    """Apply ``change`` to a plan's mode map (``None`` when it has none; the JSON path of
    the map is passed for messages) and write the result, if it adds no error; the audit
    trail records it as ``action`` on ``target`` (words after the plan's).

    ``check`` runs first, under the lock, with the plan's row, mode map and its path: it
    refuses a stale edit (:class:`~.conflicts.EditConflict`). ``renamed`` maps a mode's
    new id to its old one, so that its version carries on."""
    with study_edit(study=study, action=action, target=f"plan {plan_key} / {target}") as edit:
        before_plans = edit.before["plans"]
        if check is not None:
            found = edit.study.plans.filter(key=plan_key).first()
            if found is not None:
                plan = before_plans[item_index(before_plans, plan_key)]
                check(edit.study, found, plan.get("modes"), _plan_path(edit.before, plan_key))

        def mutate(document: Document) -> None:
            plan = document["plans"][item_index(document["plans"], plan_key)]
            changed = change(plan.get("modes"), _plan_path(document, plan_key))
            if changed is None:
                plan.pop("modes", None)
            else:
                plan["modes"] = changed

        mutate(edit.document)
        document = edit.check()
        plan_item = document["plans"][item_index(document["plans"], plan_key)]
        plan_row = edit.study.plans.get(key=plan_key)
        old = _versions(plan_row)
        before = before_plans[item_index(before_plans, plan_key)].get("modes")
        # Transitions go with their modes (cascade); overrides with their modes too.
        plan_row.mode_transitions.all().delete()
        plan_row.mode_states.all().delete()
        modes = plan_item.get("modes")
        initial = modes["initial"] if modes else ""
        if plan_row.initial_mode != initial:
            plan_row.initial_mode = initial
            plan_row.version += 1
            plan_row.save(update_fields=["initial_mode", "version"])
        if modes:
            modes_create(
                plan_row=plan_row,
                modes=modes,
                agents=agents_by_key(edit.study),
                tasks=tasks_by_key(edit.study),
            )
            _carry_versions(plan_row, old, before, modes, renamed or {})


def _refuse(path: str, message: str) -> StudyInvalid:
    return StudyInvalid([Problem(path, message)])


def _mode_index(modes: Modes | None, key: str, path: str) -> int:
    for index, mode in enumerate((modes or {}).get("states", [])):
        if mode["id"] == key:
            return index
    raise _refuse(f"{path}.states", f"the plan has no mode {key!r} (any more)")


def mode_save(
    *,
    study: m.Study,
    plan_key: str,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> None:
    """Add a mode (``key`` None) or change a mode's id, name, indication or notes.

    The first mode of a plan starts its mode map and is its initial mode. A new id is
    followed by the transitions and by the initial mode; the mode's overrides stay.
    With ``expected_version`` (0 for a new mode) a mode changed, added or deleted
    meanwhile raises :class:`~.conflicts.EditConflict`.
    """
    looked_up = item["id"] if key is None else key

    def check(row: m.Study, plan_row: m.Plan, modes: Modes | None, path: str) -> None:
        states = (modes or {}).get("states", [])
        index = next((i for i, s in enumerate(states) if s["id"] == looked_up), len(states))
        stored = plan_row.mode_states.filter(key=looked_up).values_list("version", flat=True)
        version_check(
            study=row,
            stored=stored.first() or 0,
            expected=expected_version,
            path=f"{path}.states[{index}]",
            what=f"mode {looked_up}",
            current=_bare(states[index]) if index < len(states) else None,
            target=f"plan {plan_key} / mode {looked_up}",
        )

    def change(modes: Modes | None, path: str) -> Modes:
        if modes is None:
            if key is not None:
                raise _refuse(path, "the plan has no mode map (any more)")
            return {"initial": item["id"], "states": [dict(item)], "transitions": []}
        modes = copy.deepcopy(modes)
        if key is None:
            modes["states"].append(dict(item))
            return modes
        index = _mode_index(modes, key, path)
        kept = modes["states"][index]
        updated = dict(item)
        if "overrides" in kept:
            updated["overrides"] = kept["overrides"]
        modes["states"][index] = updated
        new = item["id"]
        if new != key:
            if modes["initial"] == key:
                modes["initial"] = new
            for t in modes["transitions"]:
                for end in ("from", "to"):
                    if t[end] == key:
                        t[end] = new
        return modes

    _edit(
        study,
        plan_key,
        change,
        "mode.save",
        f"mode {key or item['id']}",
        check=None if expected_version is None else check,
        renamed={item["id"]: key} if key is not None and key != item["id"] else None,
    )


def mode_delete_consequences(*, study: m.Study, plan_key: str, key: str) -> list[Consequence]:
    """What deleting a mode takes with it: its transitions and its overrides."""
    plan = next(p for p in selectors.study_document(study)["plans"] if p["id"] == plan_key)
    modes = plan.get("modes") or {"states": [], "transitions": []}
    result = [
        Consequence("transition", f"{t['from']} → {t['to']} on '{t['trigger']}'")
        for t in modes["transitions"]
        if key in (t["from"], t["to"])
    ]
    for mode in modes["states"]:
        if mode["id"] == key and mode.get("overrides"):
            result.append(
                Consequence(
                    "override",
                    f"who holds {', '.join(mode['overrides'])} in this mode",
                )
            )
    return result


def mode_delete(*, study: m.Study, plan_key: str, key: str) -> None:
    """Delete a mode with its transitions and overrides; deleting the last mode deletes
    the mode map. The initial mode cannot be deleted while other modes remain."""

    def change(modes: Modes | None, path: str) -> Modes | None:
        index = _mode_index(modes, key, path)
        assert modes is not None  # _mode_index refuses a plan without a mode map
        if len(modes["states"]) == 1:
            return None
        if modes["initial"] == key:
            raise _refuse(
                f"{path}.initial",
                "this is the initial mode: choose another initial mode before deleting it",
            )
        modes = copy.deepcopy(modes)
        modes["states"].pop(index)
        modes["transitions"] = [t for t in modes["transitions"] if key not in (t["from"], t["to"])]
        return modes

    _edit(study, plan_key, change, "mode.delete", f"mode {key}")


def mode_initial_set(*, study: m.Study, plan_key: str, key: str) -> None:
    """Make a mode the one the device starts in."""

    def change(modes: Modes | None, path: str) -> Modes:
        _mode_index(modes, key, path)
        assert modes is not None  # _mode_index refuses a plan without a mode map
        return {**modes, "initial": key}

    _edit(study, plan_key, change, "mode.initial", f"mode {key}")


def mode_map_delete(*, study: m.Study, plan_key: str) -> None:
    """Remove a plan's whole mode map."""
    _edit(study, plan_key, lambda modes, path: None, "modes.delete", "mode map")


def mode_override_set(
    *,
    study: m.Study,
    plan_key: str,
    mode_key: str,
    task_key: str,
    item: dict[str, Any] | None,
    expected_version: int | None = None,
) -> None:
    """Set (or with ``item`` None, remove) who holds a task while in one mode; the
    override replaces the plan's assignment of that task in that mode. With
    ``expected_version`` (0: no override yet) an override changed meanwhile raises
    :class:`~.conflicts.EditConflict`."""

    def check(row: m.Study, plan_row: m.Plan, modes: Modes | None, path: str) -> None:
        states = (modes or {}).get("states", [])
        index = next((i for i, s in enumerate(states) if s["id"] == mode_key), None)
        current = None if index is None else states[index].get("overrides", {}).get(task_key)
        stored = m.ModeOverride.objects.filter(
            state__plan=plan_row, state__key=mode_key, task__key=task_key
        ).values_list("version", flat=True)
        version_check(
            study=row,
            stored=stored.first() or 0,
            expected=expected_version,
            path=f"{path}.states[{index or 0}].overrides.{task_key}",
            what=f"who holds {task_key} in mode {mode_key}",
            current=current,
            target=f"plan {plan_key} / mode {mode_key} / task {task_key}",
        )

    def change(modes: Modes | None, path: str) -> Modes:
        index = _mode_index(modes, mode_key, path)
        assert modes is not None  # _mode_index refuses a plan without a mode map
        modes = copy.deepcopy(modes)
        overrides = modes["states"][index].setdefault("overrides", {})
        if item is None:
            overrides.pop(task_key, None)
        else:
            overrides[task_key] = item
        return modes

    action = "override.delete" if item is None else "override.set"
    _edit(
        study,
        plan_key,
        change,
        action,
        f"mode {mode_key} / task {task_key}",
        check=None if expected_version is None else check,
    )


def _transition_index(modes: Modes | None, index: int, expected: dict | None, path: str) -> int:
    """Check that transition ``index`` is still the one the editor showed."""
    transitions = (modes or {}).get("transitions", [])
    if not 0 <= index < len(transitions):
        raise _refuse(f"{path}.transitions", "that transition is no longer in the mode map")
    if expected is not None:
        current = transitions[index]
        if any(current.get(name) != expected.get(name) for name in ("from", "to", "trigger")):
            raise _refuse(
                f"{path}.transitions[{index}]",
                "the mode map changed since the page was opened; reload it and try again",
            )
    return index


def transition_save(
    *,
    study: m.Study,
    plan_key: str,
    index: int | None,
    item: dict[str, Any],
    expected: dict[str, Any] | None = None,
    expected_version: int | None = None,
) -> None:
    """Add a transition (``index`` None, placed last) or change transition ``index``;
    ``expected`` (its from, to and trigger as the editor showed them) guards against
    changing a transition someone else has meanwhile moved or deleted, and
    ``expected_version`` against one changed meanwhile
    (:class:`~.conflicts.EditConflict`)."""

    def check(row: m.Study, plan_row: m.Plan, modes: Modes | None, path: str) -> None:
        if index is None:
            return
        transitions = (modes or {}).get("transitions", [])
        versions = list(plan_row.mode_transitions.values_list("version", flat=True))
        there = 0 <= index < len(transitions)
        version_check(
            study=row,
            stored=versions[index] if there else 0,
            expected=expected_version,
            path=f"{path}.transitions[{index}]",
            what=f"transition number {index + 1}",
            current=transitions[index] if there else None,
            target=f"plan {plan_key} / transition",
        )

    def change(modes: Modes | None, path: str) -> Modes:
        if modes is None:
            raise _refuse(path, "add a mode first: the plan has no mode map")
        modes = copy.deepcopy(modes)
        if index is None:
            modes["transitions"].append(item)
        else:
            modes["transitions"][_transition_index(modes, index, expected, path)] = item
        return modes

    target = f"transition {item.get('from')} → {item.get('to')} on {item.get('trigger')!r}"
    _edit(
        study,
        plan_key,
        change,
        "transition.save",
        target,
        check=None if expected_version is None else check,
    )


def transition_delete(
    *, study: m.Study, plan_key: str, index: int, expected: dict[str, Any] | None = None
) -> None:
    """Delete transition ``index`` (checked against ``expected`` as in
    :func:`transition_save`)."""

    def change(modes: Modes | None, path: str) -> Modes:
        position = _transition_index(modes, index, expected, path)
        assert modes is not None  # _transition_index refuses a plan without a mode map
        modes = copy.deepcopy(modes)
        modes["transitions"].pop(position)
        return modes

    target = (
        f"transition {expected.get('from')} → {expected.get('to')} on {expected.get('trigger')!r}"
        if expected
        else f"transition number {index + 1}"
    )
    _edit(study, plan_key, change, "transition.delete", target)
