"""The audit trail: every change to a study, who made it, from where, before and after.

Who and from where are carried by a context variable that each entry point sets: the
middleware for requests (a screen, or the admin under ``/admin/``), the import and the
management commands. :func:`record` writes one :class:`~allocation.models.AuditEntry`
inside the caller's transaction, so a change and its entry are stored together or not
at all; :func:`record_change` keeps, of two versions of a study's document, only the
parts that differ (:func:`document_change`). Reading the trail is
:mod:`allocation.selectors.history`.
"""

from __future__ import annotations

import contextlib
import contextvars
from collections.abc import Callable, Hashable, Iterator
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import AnonymousUser, User

from allocation import models as m

__all__ = [
    "Actor",
    "acting",
    "current_actor",
    "document_change",
    "link_key",
    "record",
    "record_change",
]


@dataclass(frozen=True)
class Actor:
    """Who is changing things, and through which entry point."""

    user: User | AnonymousUser | None
    source: str

    @property
    def username(self) -> str:
        if self.user is None or not getattr(self.user, "is_authenticated", False):
            return ""
        return self.user.get_username()


_ACTOR: contextvars.ContextVar[Actor | None] = contextvars.ContextVar("baton_actor", default=None)
#: Whoever changes things outside any request, command or import: the system itself.
SYSTEM = Actor(None, m.AuditSource.SYSTEM)


def current_actor() -> Actor:
    """The actor of the current request, command or task."""
    return _ACTOR.get() or SYSTEM


@contextlib.contextmanager
def acting(user: User | AnonymousUser | None, source: str) -> Iterator[Actor]:
    """Attribute every change made inside the block to ``user`` through ``source``."""
    token = _ACTOR.set(Actor(user, source))
    try:
        yield current_actor()
    finally:
        _ACTOR.reset(token)


def record(
    *,
    study: m.Study | None,
    action: str,
    target: str = "",
    before: Any = None,
    after: Any = None,
    study_key: str | None = None,
) -> m.AuditEntry:
    """Store one audit entry for the current actor.

    Parameters
    ----------
    study : Study or None
        The study changed (``None`` once it is deleted: give ``study_key`` then).
    action : str
        What was done, as ``thing.verb``: ``task.save``, ``assignment.set``, ``study.import``.
    target : str
        What it was done to, in the study's words: ``task T2``, ``plan auto / task T2``.
    before, after : JSON-serialisable
        The values before and after, in their study-file form (``None`` for none).
    """
    actor = current_actor()
    user = actor.user if actor.user is not None and actor.user.is_authenticated else None
    return m.AuditEntry.objects.create(
        study=study,
        study_key=study_key or (study.key if study is not None else ""),
        user=user,
        username=actor.username,
        source=actor.source,
        action=action,
        target=target,
        before=before,
        after=after,
    )


# -- what changed -------------------------------------------------------------------

#: The study file's lists whose items carry an ``id``.
_ID_SECTIONS = ("agents", "events", "tasks")
#: A plan's own fields (its assignments and mode map are compared apart).
_PLAN_FIELDS = ("id", "name", "description")

Document = dict[str, Any]


def link_key(link: dict[str, Any]) -> tuple[str, str, str]:
    """A link's identity in a study file: its two ends and its kind."""
    return (link.get("from", ""), link.get("kind", ""), link.get("to", ""))


def _item_id(item: dict[str, Any]) -> Hashable:
    """An agent's, event's or task's identity in a study file: its id."""
    return item.get("id")


def _items_changed(
    before: list, after: list, key: Callable[[dict[str, Any]], Hashable]
) -> tuple[list, list]:
    """The items of two lists that differ, matched by ``key``, in their list order."""
    old = {key(item): item for item in before}
    new = {key(item): item for item in after}
    return (
        [item for item in before if new.get(key(item)) != item],
        [item for item in after if old.get(key(item)) != item],
    )


def _plan_part(before: dict | None, after: dict | None) -> tuple[dict | None, dict | None]:
    """What changed in one plan: its own fields, the assignments that differ, and its
    mode map whole (it is small and its parts refer to each other)."""
    if before is None or after is None:
        return before, after
    old, new = {"id": before["id"]}, {"id": after["id"]}
    for name in _PLAN_FIELDS[1:]:
        if before.get(name) != after.get(name):
            if name in before:
                old[name] = before[name]
            if name in after:
                new[name] = after[name]
    a, b = before.get("assignments", {}), after.get("assignments", {})
    changed = [task for task in dict.fromkeys([*a, *b]) if a.get(task) != b.get(task)]
    if changed:
        old["assignments"] = {task: a[task] for task in changed if task in a}
        new["assignments"] = {task: b[task] for task in changed if task in b}
    if before.get("modes") != after.get("modes"):
        old["modes"], new["modes"] = before.get("modes"), after.get("modes")
    if len(old) == len(new) == 1 and before["id"] == after["id"]:
        return None, None
    return old, new


def document_change(before: Document | None, after: Document | None) -> tuple[Any, Any]:
    """The parts of a study file that differ between two versions, in study-file form.

    Each side keeps only what changed: the header fields that differ, the agents, events,
    tasks and links that differ (matched by id; links by their ends and kind), and per
    plan its changed fields, the assignments that differ and its mode map if it changed.
    A study that did not exist on one side is ``None`` there; two equal documents give
    ``(None, None)``.
    """
    if before is None or after is None:
        return before, after
    old: dict[str, Any] = {}
    new: dict[str, Any] = {}
    header_old, header_new = before.get("study", {}), after.get("study", {})
    names = dict.fromkeys([*header_old, *header_new])
    changed = [name for name in names if header_old.get(name) != header_new.get(name)]
    if changed:
        old["study"] = {name: header_old[name] for name in changed if name in header_old}
        new["study"] = {name: header_new[name] for name in changed if name in header_new}
    for section in (*_ID_SECTIONS, "links"):
        key: Callable[[dict[str, Any]], Hashable] = link_key if section == "links" else _item_id
        gone, came = _items_changed(before.get(section, []), after.get(section, []), key)
        if gone or came:
            old[section], new[section] = gone, came
    plans_old = {plan["id"]: plan for plan in before.get("plans", [])}
    plans_new = {plan["id"]: plan for plan in after.get("plans", [])}
    for plan_id in dict.fromkeys([*plans_old, *plans_new]):
        part_old, part_new = _plan_part(plans_old.get(plan_id), plans_new.get(plan_id))
        if part_old is not None:
            old.setdefault("plans", []).append(part_old)
        if part_new is not None:
            new.setdefault("plans", []).append(part_new)
    if not old and not new:
        return None, None
    return old, new


def record_change(
    *,
    study: m.Study | None,
    action: str,
    target: str,
    before: Document | None,
    after: Document | None,
    study_key: str | None = None,
) -> m.AuditEntry | None:
    """Record the change between two versions of a study's document, keeping only the
    parts that differ (:func:`document_change`); nothing is recorded when nothing
    differs."""
    old, new = document_change(before, after)
    if old is None and new is None:
        return None
    return record(
        study=study, action=action, target=target, before=old, after=new, study_key=study_key
    )
