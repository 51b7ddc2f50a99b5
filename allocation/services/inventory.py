"""Edits to a study's inventory, one item at a time: its header, agents, events, tasks
and links, and what their deletions take with them.

Every edit goes through :func:`~.edits.study_edit`: made first to a copy of the study's
document, which the core checks exactly as it checks an import (an edit that would add
an error is refused with those errors, whose JSON paths name the field, and nothing is
written), then to the rows, inside one transaction with the study row locked. Renames
are followed through every reference.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from django.contrib.auth.models import User
from django.db import models

from allocation import models as m
from allocation import selectors
from allocation.core import Problem, StudyInvalid, load_study
from allocation.core.reading import FORMAT_NAME, FORMAT_VERSION

from . import rows
from .conflicts import EditConflict, version_check
from .edits import (
    BUMPED,
    Consequence,
    Document,
    StudyEdit,
    item_find,
    item_index,
    item_named,
    next_position,
    row_bump,
    row_upsert,
    study_edit,
    tasks_by_key,
)
from .studies import study_create

__all__ = [
    "Consequence",
    "EditConflict",
    "agent_delete",
    "agent_delete_consequences",
    "agent_save",
    "event_delete",
    "event_delete_consequences",
    "event_save",
    "link_delete",
    "link_save",
    "study_header_save",
    "study_new",
    "task_delete",
    "task_delete_consequences",
    "task_save",
]


def _check_item(
    edit: StudyEdit,
    related: models.Manager[Any],
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
    items = edit.before[f"{kind}s"]
    index = next((i for i, x in enumerate(items) if x.get("id") == looked_up), len(items))
    version_check(
        study=edit.study,
        stored=0 if row is None else row.version,
        expected=expected,
        path=f"$.{kind}s[{index}]",
        what=f"{kind} {looked_up}",
        current=item_find(items, looked_up),
    )


def _assignment_maps(document: Document) -> Iterator[dict[str, Any]]:
    """Every assignment map of the document: each plan's, and each mode's overrides."""
    for plan in document["plans"]:
        yield plan["assignments"]
        for mode in (plan.get("modes") or {}).get("states", []):
            if "overrides" in mode:
                yield mode["overrides"]


# -- studies ------------------------------------------------------------------------


def study_new(*, owner: User, key: str, title: str, scale: str) -> m.Study:
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
    if result.study is None or not result.ok:
        raise StudyInvalid(result.errors)
    return study_create(study=result.study, owner=owner, action="study.create")


def study_header_save(
    *, study: m.Study, item: dict[str, Any], expected_version: int | None = None
) -> m.Study:
    """Change the study's id, title, description, scale or bin width."""
    with study_edit(study=study, action="study.save", target="study header") as edit:
        header = edit.before["study"]
        version_check(
            study=edit.study,
            stored=edit.study.version,
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

        mutate(edit.document)
        document = edit.check()
        edit.study_set(rows.header_values(document["study"]))
    return edit.study


# -- agents -------------------------------------------------------------------------


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
    with study_edit(study=study, action="agent.save") as edit:
        _check_item(edit, edit.study.agents, "agent", key, item, expected_version)

        def mutate(document: Document) -> None:
            if key is None:
                document["agents"].append(item)
                return
            document["agents"][item_index(document["agents"], key)] = item
            if item["id"] != key:
                for assignments in _assignment_maps(document):
                    for assignment in assignments.values():
                        for role in ("human", "automation", "accountable"):
                            if assignment.get(role) == key:
                                assignment[role] = item["id"]
                        if isinstance(assignment.get("human"), list):
                            assignment["human"] = [
                                item["id"] if person == key else person
                                for person in assignment["human"]
                            ]
                        reliability = assignment.get("reliability") or {}
                        if reliability.get("fallback") == key:
                            reliability["fallback"] = item["id"]

        mutate(edit.document)
        edit.check()
        if key is not None and item["id"] != key:
            _rename_in_escalations(edit.study, key, item["id"])
        agent: m.Agent = row_upsert(
            edit.study.agents, key, rows.agent_values(item), study=edit.study
        )
        row_bump(agent)
        agent.save()
        edit.target = item_named("agent", key, item["id"])
    return agent


def _escalating_rows(study: m.Study) -> Iterator[m.Assignment | m.ModeOverride]:
    """The assignment and override rows that ask people in turn."""
    yield from m.Assignment.objects.filter(
        plan__study=study, escalation__isnull=False
    ).select_related("task", "human")
    yield from m.ModeOverride.objects.filter(
        state__plan__study=study, escalation__isnull=False
    ).select_related("task", "human")


def _rename_in_escalations(study: m.Study, key: str, new_key: str) -> None:
    """Follow an agent's new id in the people asked in turn (kept as ids)."""
    for row in _escalating_rows(study):
        people = list(row.escalation or [])
        if key in people:
            row.escalation = [new_key if person == key else person for person in people]
            row_bump(row)
            row.save(update_fields=["escalation", "version"])


def _drop_from_escalations(study: m.Study, agent: m.Agent) -> None:
    """Take a deleted person out of the people asked in turn; where one is left, the
    assignment names them alone."""
    for row in _escalating_rows(study):
        people = [row.human.key if row.human else None, *(row.escalation or [])]
        if agent.key not in people:
            continue
        kept = [person for person in people if person not in (None, agent.key)]
        if kept:
            row.human = study.agents.get(key=kept[0])
        row.escalation = kept[1:] or None
        if row.escalation is None:
            row.escalate_after_s = None
        row_bump(row)
        row.save(update_fields=["human", "escalation", "escalate_after_s", "version"])


def agent_delete_consequences(*, study: m.Study, key: str) -> list[Consequence]:
    """What deleting an agent takes with it."""
    agent = study.agents.get(key=key)
    what = {
        "accountable": "is no longer named accountable for",
        "human": "no longer does",
        "automation": "no longer does",
        "fallback": "no longer takes over after a failure of",
    }
    result = []
    for field in what:
        for assignment in m.Assignment.objects.filter(
            plan__study=study, **{field: agent}
        ).select_related("task", "plan"):
            result.append(
                Consequence(
                    "assignment",
                    f"{agent.name} {what[field]} {assignment.task.key} in {assignment.plan.key}",
                )
            )
    for field in what:
        for override in m.ModeOverride.objects.filter(
            state__plan__study=study, **{field: agent}
        ).select_related("task", "state"):
            result.append(
                Consequence(
                    "assignment",
                    f"{agent.name} {what[field]} {override.task.key} in mode {override.state.key}",
                )
            )
    for row in _escalating_rows(study):
        if key in (row.escalation or []):
            result.append(
                Consequence(
                    "assignment", f"{agent.name} is no longer asked in turn for {row.task.key}"
                )
            )
    return result


def agent_delete(*, study: m.Study, key: str) -> None:
    """Delete an agent; assignments naming only this agent are removed (the task becomes
    unallocated there), others lose this agent (and their levels)."""
    with study_edit(study=study, action="agent.delete", target=f"agent {key}") as edit:

        def mutate(document: Document) -> None:
            document["agents"].pop(item_index(document["agents"], key))
            for assignments in _assignment_maps(document):
                for task_id in list(assignments):
                    assignment = assignments[task_id]
                    if assignment.get("accountable") == key:
                        del assignment["accountable"]
                    if (assignment.get("reliability") or {}).get("fallback") == key:
                        del assignment["reliability"]["fallback"]
                    people = assignment.get("human")
                    if isinstance(people, list) and key in people:
                        people = [person for person in people if person != key]
                        assignment["human"] = people if len(people) > 1 else people[0]
                        if len(people) == 1:
                            assignment.pop("escalate_after_s", None)
                    for role in ("human", "automation"):
                        if assignment.get(role) == key:
                            del assignment[role]
                            assignment.pop("levels", None)
                            if role == "automation":
                                # How often an automation fails goes with it.
                                assignment.pop("reliability", None)
                    if (
                        "human" not in assignment
                        and "automation" not in assignment
                        and (assignment.get("applies", True))
                    ):
                        del assignments[task_id]

        mutate(edit.document)
        edit.check()
        agent = edit.study.agents.get(key=key)
        _drop_from_escalations(edit.study, agent)
        scopes: list[models.QuerySet[Any]] = [
            m.Assignment.objects.filter(plan__study=edit.study),
            m.ModeOverride.objects.filter(state__plan__study=edit.study),
        ]
        for scope in scopes:
            scope.filter(accountable=agent).update(accountable=None, version=BUMPED)
            scope.filter(fallback=agent).update(fallback=None, version=BUMPED)
            scope.filter(automation=agent).update(reliability=None, fallback=None)
            scope.filter(human=agent, automation__isnull=True).delete()
            scope.filter(automation=agent, human__isnull=True).delete()
            scope.filter(human=agent).update(human=None, levels=None, version=BUMPED)
            scope.filter(automation=agent).update(automation=None, levels=None, version=BUMPED)
        agent.delete()


# -- events -------------------------------------------------------------------------


def event_save(
    *,
    study: m.Study,
    key: str | None,
    item: dict[str, Any],
    expected_version: int | None = None,
) -> m.Event:
    """Add an event (``key`` None) or change one; a new id is followed by its tasks.

    Raises :class:`EditConflict` as :func:`agent_save` does."""
    with study_edit(study=study, action="event.save") as edit:
        _check_item(edit, edit.study.events, "event", key, item, expected_version)

        def mutate(document: Document) -> None:
            if key is None:
                document["events"].append(item)
                return
            document["events"][item_index(document["events"], key)] = item
            for task in document["tasks"]:
                if (task.get("occurs") or {}).get("event") == key:
                    task["occurs"]["event"] = item["id"]
            for transition in _transitions_on(document, key):
                transition["event"] = item["id"]

        mutate(edit.document)
        edit.check()
        event: m.Event = row_upsert(
            edit.study.events, key, rows.event_values(item), study=edit.study
        )
        if key is not None and item["id"] != key:
            for task in edit.study.tasks.filter(occurs__event=key):
                task.occurs = {**(task.occurs or {}), "event": item["id"]}
                task.version += 1
                task.save(update_fields=["occurs", "version"])
        row_bump(event)
        event.save()
        edit.target = item_named("event", key, item["id"])
    return event


def _transitions_on(document: Document, key: str) -> list[dict[str, Any]]:
    """The mode-map transitions that happen with event ``key``."""
    return [
        transition
        for plan in document.get("plans", [])
        for transition in (plan.get("modes") or {}).get("transitions", [])
        if transition.get("event") == key
    ]


def event_delete_consequences(*, study: m.Study, key: str) -> list[Consequence]:
    """What deleting an event takes with it: the tasks it starts lose their start."""
    return [
        Consequence(
            "task",
            f"{task.key} ({task.title}) no longer occurs on this event; it "
            "occurs only in a chain until you give it another way",
        )
        for task in study.tasks.filter(occurs__event=key)
    ]


def event_delete(*, study: m.Study, key: str) -> None:
    """Delete an event; the tasks it started lose their ``occurs``."""
    with study_edit(study=study, action="event.delete", target=f"event {key}") as edit:

        def mutate(document: Document) -> None:
            document["events"].pop(item_index(document["events"], key))
            for task in document["tasks"]:
                if (task.get("occurs") or {}).get("event") == key:
                    del task["occurs"]
            for transition in _transitions_on(document, key):
                del transition["event"]  # made by someone from now on

        mutate(edit.document)
        edit.check()
        edit.study.tasks.filter(occurs__event=key).update(occurs=None, version=BUMPED)
        edit.study.events.filter(key=key).delete()


# -- tasks --------------------------------------------------------------------------


def _subtree(document: Document, key: str) -> list[str]:
    children: dict[str | None, list[str]] = {}
    for task in document["tasks"]:
        children.setdefault(task.get("parent"), []).append(task["id"])
    found, stack = [], [key]
    while stack:
        current = stack.pop()
        found.append(current)
        stack.extend(children.get(current, []))
    return found


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
    with study_edit(study=study, action="task.save") as edit:
        _check_item(edit, edit.study.tasks, "task", key, item, expected_version)

        def mutate(document: Document) -> None:
            if key is None:
                document["tasks"].append(item)
                return
            document["tasks"][item_index(document["tasks"], key)] = item
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

        mutate(edit.document)
        edit.check()
        task: m.Task = row_upsert(edit.study.tasks, key, rows.task_values(item), study=edit.study)
        task.parent = edit.study.tasks.get(key=item["parent"]) if "parent" in item else None
        row_bump(task)
        task.save()
        edit.target = item_named("task", key, item["id"])
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


def task_delete(*, study: m.Study, key: str) -> None:
    """Delete a task with its sub-tasks, their links, assignments and mode overrides."""
    with study_edit(study=study, action="task.delete", target=f"task {key}") as edit:
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

        mutate(edit.document)
        edit.check()
        # Children first, so that no parent disappears before the rows that point at it.
        edit.study.tasks.filter(key__in=doomed).delete()


# -- links --------------------------------------------------------------------------


def _link_named(link: dict[str, Any]) -> str:
    return f"link {link['from']} {link['kind']} {link['to']}"


def _link_rows(study: m.Study) -> list[m.Link]:
    return list(study.links.select_related("source", "target"))


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
    with study_edit(study=study, action="link.save") as edit:
        links = _link_rows(edit.study)
        index = next((i for i, link in enumerate(links) if link.pk == pk), None)
        if pk is not None and expected_version is not None:
            items = edit.before["links"]
            version_check(
                study=edit.study,
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

        mutate(edit.document)
        edit.check()
        values = rows.link_values(item, tasks_by_key(edit.study))
        if index is None:
            link = m.Link(study=edit.study, position=next_position(edit.study.links), **values)
        else:
            link = links[index]
            for name, value in values.items():
                setattr(link, name, value)
        row_bump(link)
        link.save()
        edit.target = _link_named(item)
    return link


def link_delete(*, study: m.Study, pk: int) -> None:
    """Delete a link."""
    with study_edit(study=study, action="link.delete", check=False) as edit:
        links = _link_rows(edit.study)
        index = next((i for i, link in enumerate(links) if link.pk == pk), None)
        if index is None:
            raise StudyInvalid([Problem("$.links", "the link is no longer in the study")])
        removed = edit.document["links"].pop(index)
        links[index].delete()
        edit.target = _link_named(removed)
