"""Edits to a plan's mode map: its modes, holder overrides and transitions.

Each edit changes the plan's ``modes`` in the study's document, which the core checks as
it checks an import (see :mod:`.editing`); an edit that would add an error is refused
with those errors and nothing is written. Then the plan's mode rows are written anew
from the checked document, inside the same transaction, with the study row locked.
A mode map is small (modes and transitions by the dozen), so rewriting it whole keeps
the rows exactly what the checked document says.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

from django.db import transaction

from allocation import models as m
from allocation import selectors
from allocation.core import Problem, StudyInvalid

from .editing import (
    Consequence,
    Document,
    _agents,
    _checked,
    _index,
    _locked,
    _recorded,
    _tasks,
    _touch,
)
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
    return f"$.plans[{_index(document['plans'], plan_key)}].modes"


def _edit(
    study: m.Study,
    plan_key: str,
    change: Callable[[Modes | None, str], Modes | None],
    action: str,
    target: str,
):
    """Apply ``change`` to a plan's mode map (``None`` when it has none; the JSON path of
    the map is passed for messages) and write the result, if it adds no error; the audit
    trail records it as ``action`` on ``target`` (words after the plan's)."""
    study = _locked(study)

    def mutate(document: Document) -> None:
        plan = document["plans"][_index(document["plans"], plan_key)]
        changed = change(plan.get("modes"), _plan_path(document, plan_key))
        if changed is None:
            plan.pop("modes", None)
        else:
            plan["modes"] = changed

    document = _checked(study, mutate)
    plan_item = document["plans"][_index(document["plans"], plan_key)]
    plan_row = study.plans.get(key=plan_key)
    # Transitions go with their modes (cascade); overrides with their modes too.
    plan_row.mode_transitions.all().delete()
    plan_row.mode_states.all().delete()
    modes = plan_item.get("modes")
    plan_row.initial_mode = modes["initial"] if modes else ""
    plan_row.save(update_fields=["initial_mode"])
    if modes:
        modes_create(plan_row=plan_row, modes=modes, agents=_agents(study), tasks=_tasks(study))
    _recorded(study, action, f"plan {plan_key} / {target}")
    _touch(study)


def _refuse(path: str, message: str) -> StudyInvalid:
    return StudyInvalid([Problem(path, message)])


def _mode_index(modes: Modes | None, key: str, path: str) -> int:
    for index, mode in enumerate((modes or {}).get("states", [])):
        if mode["id"] == key:
            return index
    raise _refuse(f"{path}.states", f"the plan has no mode {key!r} (any more)")


@transaction.atomic
def mode_save(*, study: m.Study, plan_key: str, key: str | None, item: dict[str, Any]) -> None:
    """Add a mode (``key`` None) or change a mode's id, name, indication or notes.

    The first mode of a plan starts its mode map and is its initial mode. A new id is
    followed by the transitions and by the initial mode; the mode's overrides stay.
    """

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

    _edit(study, plan_key, change, "mode.save", f"mode {key or item['id']}")


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


@transaction.atomic
def mode_delete(*, study: m.Study, plan_key: str, key: str) -> None:
    """Delete a mode with its transitions and overrides; deleting the last mode deletes
    the mode map. The initial mode cannot be deleted while other modes remain."""

    def change(modes: Modes | None, path: str) -> Modes | None:
        index = _mode_index(modes, key, path)
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


@transaction.atomic
def mode_initial_set(*, study: m.Study, plan_key: str, key: str) -> None:
    """Make a mode the one the device starts in."""

    def change(modes: Modes | None, path: str) -> Modes:
        _mode_index(modes, key, path)
        return {**modes, "initial": key}

    _edit(study, plan_key, change, "mode.initial", f"mode {key}")


@transaction.atomic
def mode_map_delete(*, study: m.Study, plan_key: str) -> None:
    """Remove a plan's whole mode map."""
    _edit(study, plan_key, lambda modes, path: None, "modes.delete", "mode map")


@transaction.atomic
def mode_override_set(
    *,
    study: m.Study,
    plan_key: str,
    mode_key: str,
    task_key: str,
    item: dict[str, Any] | None,
) -> None:
    """Set (or with ``item`` None, remove) who holds a task while in one mode; the
    override replaces the plan's assignment of that task in that mode."""

    def change(modes: Modes | None, path: str) -> Modes:
        index = _mode_index(modes, mode_key, path)
        modes = copy.deepcopy(modes)
        overrides = modes["states"][index].setdefault("overrides", {})
        if item is None:
            overrides.pop(task_key, None)
        else:
            overrides[task_key] = item
        return modes

    action = "override.delete" if item is None else "override.set"
    _edit(study, plan_key, change, action, f"mode {mode_key} / task {task_key}")


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


@transaction.atomic
def transition_save(
    *,
    study: m.Study,
    plan_key: str,
    index: int | None,
    item: dict[str, Any],
    expected: dict[str, Any] | None = None,
) -> None:
    """Add a transition (``index`` None, placed last) or change transition ``index``;
    ``expected`` (its from, to and trigger as the editor showed them) guards against
    changing a transition someone else has meanwhile moved or deleted."""

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
    _edit(study, plan_key, change, "transition.save", target)


@transaction.atomic
def transition_delete(
    *, study: m.Study, plan_key: str, index: int, expected: dict[str, Any] | None = None
) -> None:
    """Delete transition ``index`` (checked against ``expected`` as in
    :func:`transition_save`)."""

    def change(modes: Modes | None, path: str) -> Modes:
        modes = copy.deepcopy(modes)
        modes["transitions"].pop(_transition_index(modes, index, expected, path))
        return modes

    target = (
        f"transition {expected.get('from')} → {expected.get('to')} on {expected.get('trigger')!r}"
        if expected
        else f"transition number {index + 1}"
    )
    _edit(study, plan_key, change, "transition.delete", target)
