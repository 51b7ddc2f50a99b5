"""Edits to a stored study, one item at a time, checked as an import would be.

Every edit is made twice: first to the study's document (its study-file form), which the
core checks exactly as it checks an import; an edit that would add an error is refused
with those errors (their JSON paths name the field), and nothing is written. Then the
same change is written to the rows, inside one transaction with the study row locked,
so that two edits of one study never interleave.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import AbstractBaseUser
from django.db import transaction
from django.db.models import F, Max

from allocation import audit, selectors
from allocation import models as m
from allocation.core import Problem, StudyInvalid, load_study
from allocation.core.reading import FORMAT_NAME, FORMAT_VERSION

from . import rows
from .conflicts import EditConflict, version_check
from .studies import plan_create, study_create

__all__ = [
    "Consequence",
    "EditConflict",
    "agent_delete",
    "agent_delete_consequences",
    "agent_save",
    "assignment_set",
    "assignments_bulk_set",
    "event_delete",
    "event_delete_consequences",
    "event_save",
    "link_delete",
    "link_save",
    "plan_copy",
    "plan_delete",
    "plan_save",
    "study_header_save",
    "study_new",
    "task_delete",
    "task_delete_consequences",
    "task_save",
]

Document = dict[str, Any]


def _checked(study: m.Study, mutate: Callable[[Document], None]) -> Document:
    """The study's document with ``mutate`` applied, if that adds no error.

    The checked document and what the core made of it are kept on ``study`` so that
    :func:`_touch` can hand them to the selectors' cache for the new version.

    Raises
    ------
    StudyInvalid
        Listing the errors the change would add; nothing is written.
    """
    before = selectors.study_document(study)
    after = copy.deepcopy(before)
    mutate(after)
    existing = {(p.path, p.message) for p in selectors.study_load(study).errors}
    result = load_study(after)
    added = [p for p in result.errors if (p.path, p.message) not in existing]
    if added:
        raise StudyInvalid(added)
    study._checked_after = (after, result)
    study._audit_change = (before, after)
    return after


def _unchecked(study: m.Study, mutate: Callable[[Document], None]) -> Document:
    """The study's document with ``mutate`` applied, unchecked: for the deletions that
    are written without a check, so that the audit trail still sees what they removed."""
    before = selectors.study_document(study)
    after = copy.deepcopy(before)
    mutate(after)
    study._audit_change = (before, after)
    return after


def _recorded(study: m.Study, action: str, target: str) -> None:
    """Record the change :func:`_checked` (or :func:`_unchecked`) saw, in the audit
    trail, inside the caller's transaction; only the parts that differ are kept."""
    before, after = study._audit_change
    audit.record_change(
        study=study, action=action, target=target[:300], before=before, after=after
    )


def _named(kind: str, key: str | None, new: str) -> str:
    """An item in words for the audit trail, saying so when its id changed."""
    if key is None or key == new:
        return f"{kind} {new}"
    return f"{kind} {key} (now {new})"


def _link_named(link: dict[str, Any]) -> str:
    return f"link {link['from']} {link['kind']} {link['to']}"


def _locked(study: m.Study) -> m.Study:
    """The study row, locked for the rest of the transaction (on databases that lock)."""
    return m.Study.objects.select_for_update().get(pk=study.pk)


def _touch(study: m.Study) -> None:
    """Move the study to a new version; the document checked for it serves that version
    (so the next read need not rebuild it from the rows)."""
    study.save(update_fields=["updated_at"])
    checked = getattr(study, "_checked_after", None)
    if checked is not None:
        selectors.study_remember(study, *checked)


def _next_position(queryset) -> int:
    top = queryset.aggregate(top=Max("position"))["top"]
    return 0 if top is None else top + 1


def _upsert(related, key: str | None, values: dict[str, Any], **create: Any):
    """Add a row to ``related`` (``key`` None, placed last) or change the row ``key``;
    the caller saves it."""
    if key is None:
        return related.model(position=_next_position(related), **create, **values)
    row = related.get(key=key)
    for name, value in values.items():
        setattr(row, name, value)
    return row


def _bump(row) -> None:
    """One more version for a row about to be saved (a new row keeps its 1); the study
    row is locked, so no other edit of the study reads the version in between."""
    if row.pk is not None:
        row.version += 1


#: For queryset updates of rows changed along with another (renames, deletions).
BUMPED = F("version") + 1


def _item_of(items: list[dict[str, Any]], key: str) -> dict[str, Any] | None:
    return next((item for item in items if item.get("id") == key), None)


def _check_item(
    study: m.Study,
    related,
    kind: str,
    key: str | None,
    item: dict[str, Any],
    expected: int | None,
) -> None:
    """Refuse an edit of ``kind`` ``key`` (``None``: a new one, with ``item``'s id) that
    started from a version the row no longer has (see :mod:`.conflicts`)."""
    if expected is None:
        return
    looked_up = item["id"] if key is None else key
    row = related.filter(key=looked_up).only("version").first()
    items = selectors.study_document(study)[f"{kind}s"]
    index = next((i for i, x in enumerate(items) if x.get("id") == looked_up), len(items))
    version_check(
        study=study,
        stored=0 if row is None else row.version,
        expected=expected,
        path=f"$.{kind}s[{index}]",
        what=f"{kind} {looked_up}",
        current=_item_of(items, looked_up),
    )


def _index(items: list[dict[str, Any]], key: str, name: str = "id") -> int:
    for index, item in enumerate(items):
        if item.get(name) == key:
            return index
    raise StudyInvalid([Problem("$", f"no {name} {key!r} in the study")])


def _agents(study: m.Study) -> dict[str, m.Agent]:
    return {agent.key: agent for agent in study.agents.all()}


def _tasks(study: m.Study) -> dict[str, m.Task]:
    return {task.key: task for task in study.tasks.all()}


def _assignment_maps(document: Document):
    """Every assignment map of the document: each plan's, and each mode's overrides."""
    for plan in document["plans"]:
        yield plan["assignments"]
        for mode in (plan.get("modes") or {}).get("states", []):
            if "overrides" in mode:
                yield mode["overrides"]


@dataclass(frozen=True)
class Consequence:
    """Something else a deletion takes with it, in words, for the confirmation."""

    kind: str
    text: str


# -- studies ------------------------------------------------------------------------


def study_new(*, owner: AbstractBaseUser, key: str, title: str, scale: str) -> m.Study:
    """Start an empty study, owned by ``owner``; its id, title and scale are checked as
    an import would check them."""
    document = {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "study": {"id": key, "title": title, "scale": scale},
        "agents": [],
        "events": [],
        "tasks": [],
        "links": [],
        "plans": [],
    }
    result = load_study(document)
    if not result.ok:
        raise StudyInvalid(result.errors)
    return study_create(study=result.study, owner=owner, action="study.create")


@transaction.atomic
def study_header_save(
    *, study: m.Study, item: dict[str, Any], expected_version: int | None = None
) -> m.Study:
    """Change the study's id, title, description, scale or bin width."""
    study = _locked(study)
    header = selectors.study_document(study)["study"]
    version_check(
        study=study,
        stored=study.version,
        expected=expected_version,
        path="$.study",
        what="the study's header",
        current={k: v for k, v in header.items() if k not in ("assumptions", "risk_policy")},
        target="study header",
    )

    def mutate(document: Document) -> None:
        header = document["study"]
        for key in ("id", "title", "description", "scale", "bin_s"):
            if key in item:
                header[key] = item[key]
            elif key in ("description", "bin_s"):
                header.pop(key, None)

    document = _checked(study, mutate)
    for name, value in rows.header_values(document["study"]).items():
        setattr(study, name, value)
    study.version += 1
    study.save()
    _recorded(study, "study.save", "study header")
    selectors.study_remember(study, *study._checked_after)
    return study


# -- agents -------------------------------------------------------------------------


@transaction.atomic
def agent_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Agent:
    """Add an agent (``key`` None) or change one; a new id is followed everywhere.

    Raises :class:`EditConflict` when ``expected_version`` is given and the agent is not
    at that version (0: the agent did not exist)."""
    study = _locked(study)
    _check_item(study, study.agents, "agent", key, item, expected_version)

    def mutate(document: Document) -> None:
        if key is None:
            document["agents"].append(item)
            return
        document["agents"][_index(document["agents"], key)] = item
        if item["id"] != key:
            for assignments in _assignment_maps(document):
                for assignment in assignments.values():
                    for role in ("human", "automation", "accountable"):
                        if assignment.get(role) == key:
                            assignment[role] = item["id"]

    _checked(study, mutate)
    agent = _upsert(study.agents, key, rows.agent_values(item), study=study)
    _bump(agent)
    agent.save()
    _recorded(study, "agent.save", _named("agent", key, item["id"]))
    _touch(study)
    return agent


def agent_delete_consequences(*, study: m.Study, key: str) -> list[Consequence]:
    """What deleting an agent takes with it."""
    agent = study.agents.get(key=key)
    result = []
    for model, where in ((m.Assignment, "plan__study"), (m.ModeOverride, "state__plan__study")):
        scope = {where: study}
        for field in ("human", "automation", "accountable"):
            for row in model.objects.filter(**scope, **{field: agent}).select_related("task"):
                owner = row.plan.key if model is m.Assignment else f"mode {row.state.key}"
                what = {
                    "accountable": "is no longer named accountable for",
                    "human": "no longer does",
                    "automation": "no longer does",
                }[field]
                result.append(
                    Consequence("assignment", f"{agent.name} {what} {row.task.key} in {owner}")
                )
    return result


@transaction.atomic
def agent_delete(*, study: m.Study, key: str) -> None:
    """Delete an agent; assignments naming only this agent are removed (the task becomes
    unallocated there), others lose this agent (and their levels)."""
    study = _locked(study)

    def mutate(document: Document) -> None:
        document["agents"].pop(_index(document["agents"], key))
        for assignments in _assignment_maps(document):
            for task_id in list(assignments):
                assignment = assignments[task_id]
                if assignment.get("accountable") == key:
                    del assignment["accountable"]
                for role in ("human", "automation"):
                    if assignment.get(role) == key:
                        del assignment[role]
                        assignment.pop("levels", None)
                if (
                    "human" not in assignment
                    and "automation" not in assignment
                    and (assignment.get("applies", True))
                ):
                    del assignments[task_id]

    _checked(study, mutate)
    agent = study.agents.get(key=key)
    for model, where in ((m.Assignment, "plan__study"), (m.ModeOverride, "state__plan__study")):
        scope = model.objects.filter(**{where: study})
        scope.filter(accountable=agent).update(accountable=None, version=BUMPED)
        scope.filter(human=agent, automation__isnull=True).delete()
        scope.filter(automation=agent, human__isnull=True).delete()
        scope.filter(human=agent).update(human=None, levels=None, version=BUMPED)
        scope.filter(automation=agent).update(automation=None, levels=None, version=BUMPED)
    agent.delete()
    _recorded(study, "agent.delete", f"agent {key}")
    _touch(study)


# -- events -------------------------------------------------------------------------


@transaction.atomic
def event_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Event:
    """Add an event (``key`` None) or change one; a new id is followed by its tasks.

    Raises :class:`EditConflict` as :func:`agent_save` does."""
    study = _locked(study)
    _check_item(study, study.events, "event", key, item, expected_version)

    def mutate(document: Document) -> None:
        if key is None:
            document["events"].append(item)
            return
        document["events"][_index(document["events"], key)] = item
        for task in document["tasks"]:
            if (task.get("occurs") or {}).get("event") == key:
                task["occurs"]["event"] = item["id"]

    _checked(study, mutate)
    event = _upsert(study.events, key, rows.event_values(item), study=study)
    if key is not None and item["id"] != key:
        for task in study.tasks.filter(occurs__event=key):
            task.occurs = {**task.occurs, "event": item["id"]}
            task.version += 1
            task.save(update_fields=["occurs", "version"])
    _bump(event)
    event.save()
    _recorded(study, "event.save", _named("event", key, item["id"]))
    _touch(study)
    return event


def event_delete_consequences(*, study: m.Study, key: str) -> list[Consequence]:
    return [
        Consequence(
            "task",
            f"{task.key} ({task.title}) no longer occurs on this event; it "
            "occurs only in a chain until you give it another way",
        )
        for task in study.tasks.filter(occurs__event=key)
    ]


@transaction.atomic
def event_delete(*, study: m.Study, key: str) -> None:
    """Delete an event; the tasks it started lose their ``occurs``."""
    study = _locked(study)

    def mutate(document: Document) -> None:
        document["events"].pop(_index(document["events"], key))
        for task in document["tasks"]:
            if (task.get("occurs") or {}).get("event") == key:
                del task["occurs"]

    _checked(study, mutate)
    study.tasks.filter(occurs__event=key).update(occurs=None, version=BUMPED)
    study.events.filter(key=key).delete()
    _recorded(study, "event.delete", f"event {key}")
    _touch(study)


# -- tasks --------------------------------------------------------------------------


def _subtree(document: Document, key: str) -> list[str]:
    children: dict[str, list[str]] = {}
    for task in document["tasks"]:
        children.setdefault(task.get("parent"), []).append(task["id"])
    found, stack = [], [key]
    while stack:
        current = stack.pop()
        found.append(current)
        stack.extend(children.get(current, []))
    return found


@transaction.atomic
def task_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Task:
    """Add a task (``key`` None) or change one, moving it when its parent changes; a new
    id is followed by its children, links and assignments.

    Raises :class:`EditConflict` as :func:`agent_save` does."""
    study = _locked(study)
    _check_item(study, study.tasks, "task", key, item, expected_version)

    def mutate(document: Document) -> None:
        if key is None:
            document["tasks"].append(item)
            return
        document["tasks"][_index(document["tasks"], key)] = item
        new = item["id"]
        if new == key:
            return
        for task in document["tasks"]:
            if task.get("parent") == key:
                task["parent"] = new
        for link in document["links"]:
            for end in ("from", "to"):
                if link[end] == key:
                    link[end] = new
        for assignments in _assignment_maps(document):
            if key in assignments:
                # Keep the order of the map: rebuild it with the new key in place.
                rebuilt = {(new if k == key else k): v for k, v in assignments.items()}
                assignments.clear()
                assignments.update(rebuilt)

    _checked(study, mutate)
    task = _upsert(study.tasks, key, rows.task_values(item), study=study)
    task.parent = study.tasks.get(key=item["parent"]) if "parent" in item else None
    _bump(task)
    task.save()
    _recorded(study, "task.save", _named("task", key, item["id"]))
    _touch(study)
    return task


def task_delete_consequences(*, study: m.Study, key: str) -> list[Consequence]:
    """What deleting a task takes with it: sub-tasks, links, assignments."""
    document = selectors.study_document(study)
    doomed = set(_subtree(document, key))
    result = [
        Consequence("task", f"sub-task {task_id}")
        for task_id in [t["id"] for t in document["tasks"] if t["id"] in doomed and t["id"] != key]
    ]
    result += [
        Consequence("link", f"link {link['from']} {link['kind']} {link['to']}")
        for link in document["links"]
        if link["from"] in doomed or link["to"] in doomed
    ]
    for plan in document["plans"]:
        touched = sorted(doomed & set(plan["assignments"]))
        if touched:
            result.append(
                Consequence(
                    "assignment", f"the allocation of {', '.join(touched)} in plan {plan['id']}"
                )
            )
    return result


@transaction.atomic
def task_delete(*, study: m.Study, key: str) -> None:
    """Delete a task with its sub-tasks, their links, assignments and mode overrides."""
    study = _locked(study)
    doomed: set[str] = set()

    def mutate(document: Document) -> None:
        doomed.update(_subtree(document, key))
        document["tasks"] = [t for t in document["tasks"] if t["id"] not in doomed]
        document["links"] = [
            link
            for link in document["links"]
            if link["from"] not in doomed and link["to"] not in doomed
        ]
        for assignments in _assignment_maps(document):
            for task_id in doomed & set(assignments):
                del assignments[task_id]

    _checked(study, mutate)
    # Children first, so that no parent disappears before the rows that point at it.
    study.tasks.filter(key__in=doomed).delete()
    _recorded(study, "task.delete", f"task {key}")
    _touch(study)


# -- links --------------------------------------------------------------------------


def _link_rows(study: m.Study) -> list[m.Link]:
    return list(study.links.select_related("source", "target"))


@transaction.atomic
def link_save(
    *,
    study: m.Study,
    pk: int | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Link:
    """Add a link (``pk`` None) or change one.

    Raises :class:`EditConflict` when ``expected_version`` is given and the link is not
    at that version (deleted meanwhile: version 0)."""
    study = _locked(study)
    links = _link_rows(study)
    index = next((i for i, link in enumerate(links) if link.pk == pk), None)
    if pk is not None and expected_version is not None:
        items = selectors.study_document(study)["links"]
        version_check(
            study=study,
            stored=0 if index is None else links[index].version,
            expected=expected_version,
            path=f"$.links[{len(items) if index is None else index}]",
            what=_link_named(item if index is None else items[index]),
            current=None if index is None else items[index],
        )
    if pk is not None and index is None:
        raise StudyInvalid([Problem("$.links", "the link is no longer in the study")])

    def mutate(document: Document) -> None:
        if index is None:
            document["links"].append(item)
        else:
            document["links"][index] = item

    _checked(study, mutate)
    values = rows.link_values(item, _tasks(study))
    if index is None:
        link = m.Link(study=study, position=_next_position(study.links), **values)
    else:
        link = links[index]
        for name, value in values.items():
            setattr(link, name, value)
    _bump(link)
    link.save()
    _recorded(study, "link.save", _link_named(item))
    _touch(study)
    return link


@transaction.atomic
def link_delete(*, study: m.Study, pk: int) -> None:
    study = _locked(study)
    links = _link_rows(study)
    index = next((i for i, link in enumerate(links) if link.pk == pk), None)
    if index is None:
        raise StudyInvalid([Problem("$.links", "the link is no longer in the study")])
    _unchecked(study, lambda document: document["links"].pop(index))
    removed = study._audit_change[0]["links"][index]
    links[index].delete()
    _recorded(study, "link.delete", _link_named(removed))
    _touch(study)


# -- plans and assignments ----------------------------------------------------------


@transaction.atomic
def plan_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Plan:
    """Add an empty plan (``key`` None) or change a plan's id, name or description.

    Raises :class:`EditConflict` as :func:`agent_save` does."""
    study = _locked(study)
    if expected_version is not None:
        looked_up = item["id"] if key is None else key
        row = study.plans.filter(key=looked_up).first()
        plans = selectors.study_document(study)["plans"]
        current = _item_of(plans, looked_up)
        version_check(
            study=study,
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
        plan = document["plans"][_index(document["plans"], key)]
        for field in ("id", "name", "description"):
            if field in item:
                plan[field] = item[field]
            else:
                plan.pop(field, None)

    _checked(study, mutate)
    if key is None:
        plan = m.Plan(
            study=study,
            position=_next_position(study.plans),
            key=item["id"],
            name=item["name"],
            description=item.get("description", ""),
        )
    else:
        plan = study.plans.get(key=key)
        plan.key, plan.name = item["id"], item["name"]
        plan.description = item.get("description", "")
        plan.version += 1
    plan.save()
    _recorded(study, "plan.save", _named("plan", key, item["id"]))
    _touch(study)
    return plan


@transaction.atomic
def plan_copy(*, study: m.Study, key: str, new_key: str, new_name: str) -> m.Plan:
    """Copy a plan, with its assignments and mode map, as the start of a new one."""
    study = _locked(study)
    copied: dict[str, Any] = {}

    def mutate(document: Document) -> None:
        source = document["plans"][_index(document["plans"], key)]
        copied.update(copy.deepcopy(source), id=new_key, name=new_name)
        document["plans"].append(copied)

    _checked(study, mutate)
    plan = plan_create(
        study_row=study,
        item=copied,
        position=_next_position(study.plans),
        agents=_agents(study),
        tasks=_tasks(study),
    )
    _recorded(study, "plan.copy", f"plan {new_key} (copy of {key})")
    _touch(study)
    return plan


@transaction.atomic
def plan_delete(*, study: m.Study, key: str) -> None:
    study = _locked(study)

    def mutate(document: Document) -> None:
        document["plans"] = [plan for plan in document["plans"] if plan["id"] != key]

    _unchecked(study, mutate)
    study.plans.filter(key=key).delete()
    _recorded(study, "plan.delete", f"plan {key}")
    _touch(study)


def _check_assignment(
    study: m.Study, plan_key: str, task_key: str, expected: int | None, stored: int | None
) -> None:
    """Refuse a change of a plan's assignment of a task that started from another version
    (``stored``: the row's version now, ``None`` when there is no row)."""
    if expected is None:
        return
    plans = selectors.study_document(study)["plans"]
    index = _index(plans, plan_key)
    version_check(
        study=study,
        stored=stored or 0,
        expected=expected,
        path=f"$.plans[{index}].assignments.{task_key}",
        what=f"plan {plan_key} / task {task_key}",
        current=plans[index]["assignments"].get(task_key),
    )


@transaction.atomic
def assignment_set(
    *,
    study: m.Study,
    plan_key: str,
    task_key: str,
    item: dict[str, Any] | None,
    expected_version: int | None = None,
) -> m.Assignment | None:
    """Set (or with ``item`` None, remove) a plan's assignment of one leaf task.

    Raises :class:`EditConflict` when ``expected_version`` is given and the assignment is
    not at that version (0: the task was not allocated in the plan)."""
    study = _locked(study)
    if expected_version is not None:
        stored = (
            m.Assignment.objects.filter(plan__study=study, plan__key=plan_key, task__key=task_key)
            .values_list("version", flat=True)
            .first()
        )
        _check_assignment(study, plan_key, task_key, expected_version, stored)

    def mutate(document: Document) -> None:
        plan = document["plans"][_index(document["plans"], plan_key)]
        if item is None:
            plan["assignments"].pop(task_key, None)
        else:
            plan["assignments"][task_key] = item

    _checked(study, mutate)
    plan = study.plans.get(key=plan_key)
    task = study.tasks.get(key=task_key)
    existing = plan.assignments.filter(task=task).first()
    target = f"plan {plan_key} / task {task_key}"
    if item is None:
        if existing is not None:
            existing.delete()
        _recorded(study, "assignment.delete", target)
        _touch(study)
        return None
    values = rows.assignment_values(item, _agents(study))
    if existing is None:
        existing = m.Assignment(plan=plan, task=task, position=_next_position(plan.assignments))
    for name, value in values.items():
        setattr(existing, name, value)
    _bump(existing)
    existing.save()
    _recorded(study, "assignment.set", target)
    _touch(study)
    return existing


@transaction.atomic
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
    showed (0: not allocated); the first that differs raises :class:`EditConflict` and
    nothing is changed.
    """
    study = _locked(study)
    if expected_versions:
        stored = dict(
            m.Assignment.objects.filter(
                plan__study=study, plan__key=plan_key, task__key__in=task_keys
            ).values_list("task__key", "version")
        )
        for task_id in task_keys:
            if task_id in expected_versions:
                _check_assignment(
                    study, plan_key, task_id, expected_versions[task_id], stored.get(task_id)
                )
    changed: list[str] = []

    def mutate(document: Document) -> None:
        plan = document["plans"][_index(document["plans"], plan_key)]
        for task_id in task_keys:
            assignment = plan["assignments"].get(task_id)
            if assignment is None:
                continue
            shared = "human" in assignment and "automation" in assignment
            update = {k: v for k, v in changes.items() if k != "levels" or shared}
            if update:
                assignment.update(update)
                changed.append(task_id)

    document = _checked(study, mutate)
    plan_item = document["plans"][_index(document["plans"], plan_key)]
    agents = _agents(study)
    plan = study.plans.get(key=plan_key)
    for row in plan.assignments.filter(task__key__in=changed).select_related("task"):
        for name, value in rows.assignment_values(
            plan_item["assignments"][row.task.key], agents
        ).items():
            setattr(row, name, value)
        _bump(row)
        row.save()
    _recorded(study, "assignment.bulk_set", f"plan {plan_key} / tasks {', '.join(changed)}")
    _touch(study)
    return changed
