"""The edit API: how a service changes a stored study, checked as an import would be.

Every edit of a study's content goes through :func:`study_edit`::

    with study_edit(study=study, action="agent.save", target="agent A1") as edit:
        version_check(study=edit.study, ...)      # optional: refuse a stale form
        edit.document["agents"].append(item)      # 1. change the copy of the document
        edit.check()                              # 2. the core reads it as an import
        ...                                       # 3. write the same change to the rows
    # 4. recorded in the audit trail, new version, checked document cached

1. The study row is locked (``select_for_update``) inside a transaction, so that two
   edits of one study take turns; ``edit.before`` is the study's document as it is,
   ``edit.document`` a copy of it for the service to change.
2. :meth:`StudyEdit.check` reads the changed document through the core exactly as an
   import is read. An edit that adds an error (errors the study already had do not
   count) raises :class:`~allocation.core.StudyInvalid`, whose JSON paths the views map
   back to the fields; nothing is written.
3. The service writes the same change to the rows.
4. When the block ends, the change (only the parts that differ) is recorded in the audit
   trail, the study moves to a new version (:func:`study_touch`), and the checked
   document with what the core made of it serve that version
   (``selectors.study_remember``), so that the next read costs no rebuild.

Any exception inside the block (a refusal, a conflict, a database error) rolls back
everything the block wrote. The deletions written without a check pass ``check=False``:
the audit trail still sees what they removed.

The small helpers below (:func:`study_locked`, :func:`next_position`, :func:`row_bump` …)
serve the services inside their edits, and the spreadsheet import, which locks, writes a
whole file's rows and moves the version with them directly.
"""

from __future__ import annotations

import copy
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any, Protocol

from django.db import models, transaction
from django.db.models import F, Max

from allocation import audit, selectors
from allocation import models as m
from allocation.core import LoadResult, Problem, StudyInvalid, load_study
from allocation.core.rowedit import reassigned

__all__ = [
    "BUMPED",
    "Consequence",
    "Document",
    "StudyEdit",
    "agents_by_key",
    "item_find",
    "item_index",
    "item_named",
    "next_position",
    "row_bump",
    "row_upsert",
    "study_edit",
    "study_locked",
    "study_touch",
    "tasks_by_key",
]

#: A study's document: its study-file form, as ``selectors.study_document`` gives it.
Document = dict[str, Any]

#: For queryset updates of rows changed along with another (renames, deletions).
BUMPED = F("version") + 1

#: How much of a target the audit trail keeps.
TARGET_LENGTH = 300


@dataclass(frozen=True)
class Consequence:
    """Something else a deletion takes with it, in words, for the confirmation."""

    kind: str
    text: str


# -- the edit -----------------------------------------------------------------------


@dataclass(eq=False)
class StudyEdit:
    """One edit of a study in progress (made by :func:`study_edit`; see the module).

    Attributes
    ----------
    study : Study
        The study row, locked until the transaction ends.
    action, target : str
        What the audit trail will call the edit (``task.save``; ``task T2``). A service
        may set ``target`` inside the block when it depends on the document.
    before : dict
        The study's document before the edit. Shared with the selectors' cache: never
        change it.
    result : LoadResult or None
        What the core made of the changed document, once :meth:`check` passed.
    entry : AuditEntry or None
        The audit entry, once the block has ended (``None`` when nothing differed).
    """

    study: m.Study
    action: str
    target: str
    before: Document
    checked: bool
    result: LoadResult | None = None
    entry: m.AuditEntry | None = None
    study_fields: list[str] = field(default_factory=list)
    unchanged: bool = False
    copied: Document | None = field(default=None, repr=False)
    #: The plan row a row edit changed (plan, task), for the analyses to follow it.
    row: tuple[str, str] | None = None

    @property
    def document(self) -> Document:
        """The copy of the document the service changes (made on first use)."""
        if self.copied is None:
            self.copied = copy.deepcopy(self.before)
        return self.copied

    @property
    def after(self) -> Document:
        """The document after the edit (the same object as :attr:`document`)."""
        return self.document

    def check(self) -> Document:
        """Read the changed document through the core, as an import is read; return it.

        Raises
        ------
        StudyInvalid
            Listing the errors the change adds, with their JSON paths; the service has
            written nothing yet, and the transaction is rolled back.
        """
        existing = {(p.path, p.message) for p in selectors.study_load(self.study).errors}
        result = load_study(self.document)
        added = [p for p in result.errors if (p.path, p.message) not in existing]
        if added:
            raise StudyInvalid(added)
        self.result = result
        return self.document

    def reassign_row(self, plan_key: str, task_key: str, item: dict[str, Any] | None) -> None:
        """Set one plan row (``item`` None: remove it) and check the row alone, as
        reading the whole changed document would (``allocation.core.rowedit``): the
        plan editor's save, whose cost follows the row, not the study.

        The document then shares every part but the row's plan with :attr:`before`:
        the service changes nothing else in it.

        Raises
        ------
        StudyInvalid
            Listing the errors the row adds, with their JSON paths.
        """
        loaded = selectors.study_load(self.study)
        if loaded.study is None or plan_key not in loaded.study.plans_by_id:
            # Not read as a study at all, or the plan is not one: the whole check says so.
            plan = self.document["plans"][item_index(self.document["plans"], plan_key)]
            _row_set(plan, task_key, item)
            self.check()
            return
        document = {**self.before, "plans": list(self.before["plans"])}
        index = item_index(document["plans"], plan_key)
        plan = document["plans"][index] = {
            **document["plans"][index],
            "assignments": dict(document["plans"][index]["assignments"]),
        }
        _row_set(plan, task_key, item)
        existing = {(p.path, p.message) for p in loaded.errors}
        result = reassigned(loaded, plan_key, task_key, item)
        added = [p for p in result.errors if (p.path, p.message) not in existing]
        if added:
            raise StudyInvalid(added)
        self.copied, self.result, self.row = document, result, (plan_key, task_key)

    def study_set(self, values: Mapping[str, Any]) -> None:
        """Change fields of the study row itself (its header, assumptions, risk policy):
        set now, counted as one more version of the study row, and saved with the new
        version when the block ends."""
        for name, value in values.items():
            setattr(self.study, name, value)
            if name not in self.study_fields:
                self.study_fields.append(name)
        self.study.version += 1
        if "version" not in self.study_fields:
            self.study_fields.append("version")

    def leave_unchanged(self) -> None:
        """End the edit without recording it or moving the study's version (the service
        found nothing to change and wrote nothing)."""
        self.unchanged = True


@contextmanager
def study_edit(
    *, study: m.Study, action: str, target: str = "", check: bool = True
) -> Iterator[StudyEdit]:
    """Lock ``study`` and yield a :class:`StudyEdit` to change, check and write; when the
    block ends, record it as ``action`` on ``target``, move the study's version and
    cache the checked document (see the module).

    With ``check`` (the default) the changed document must pass :meth:`StudyEdit.check`;
    a block that has not called it is checked as it ends (and rolled back on an error),
    but services check before writing, since the rows follow the checked document.
    """
    with transaction.atomic():
        locked = study_locked(study)
        edit = StudyEdit(
            study=locked,
            action=action,
            target=target,
            before=selectors.study_document(locked),
            checked=check,
        )
        yield edit
        if edit.unchanged:
            return
        if edit.checked and edit.result is None:
            edit.check()
        if not edit.target:
            raise ValueError(f"the edit {action} names no target for the audit trail")
        edit.entry = audit.record_change(
            study=locked,
            action=action,
            target=edit.target[:TARGET_LENGTH],
            before=edit.before,
            after=edit.document,
        )
        study_touch(locked, fields=edit.study_fields)
        if edit.result is not None:
            # The cache hand-off: this document, checked, is the new version's.
            selectors.study_remember(
                locked, edit.document, edit.result, before=edit.before, row=edit.row
            )


# -- helpers ------------------------------------------------------------------------


def _row_set(plan: Document, task_key: str, item: dict[str, Any] | None) -> None:
    if item is None:
        plan["assignments"].pop(task_key, None)
    else:
        plan["assignments"][task_key] = item


def study_locked(study: m.Study) -> m.Study:
    """The study row read again and locked for the rest of the transaction (on
    databases that lock rows), so that edits of one study take turns."""
    return m.Study.objects.select_for_update().get(pk=study.pk)


def study_touch(study: m.Study, *, fields: Iterable[str] = ()) -> None:
    """Move the study to a new version (its ``updated_at``, which the selectors' cache
    and the simulation runs compare), saving ``fields`` of the row with it."""
    study.save(update_fields=["updated_at", *fields])


def next_position(queryset: models.QuerySet[Any] | models.Manager[Any]) -> int:
    """The position after the last row of ``queryset`` (0 when it is empty)."""
    top = queryset.aggregate(top=Max("position"))["top"]
    return 0 if top is None else top + 1


class Versioned(Protocol):
    """A row people edit: it carries a version (see :mod:`.conflicts`)."""

    pk: Any
    version: int


def row_bump(row: Versioned) -> None:
    """One more version for a row about to be saved (a new row keeps its 1); the study
    row is locked, so no other edit of the study reads the version in between."""
    if row.pk is not None:
        row.version += 1


def row_upsert(related: Any, key: str | None, values: Mapping[str, Any], **create: Any) -> Any:
    """A new row of the related manager ``related`` (``key`` None: placed last, made
    with ``create`` and ``values``) or its row ``key`` with ``values`` set; unsaved."""
    if key is None:
        return related.model(position=next_position(related), **create, **values)
    row = related.get(key=key)
    for name, value in values.items():
        setattr(row, name, value)
    return row


def item_index(items: list[dict[str, Any]], key: str, name: str = "id") -> int:
    """Where the item whose ``name`` is ``key`` stands in ``items``.

    Raises
    ------
    StudyInvalid
        When there is none (deleted meanwhile), at ``$``.
    """
    for index, item in enumerate(items):
        if item.get(name) == key:
            return index
    raise StudyInvalid([Problem("$", f"no {name} {key!r} in the study")])


def item_find(items: list[dict[str, Any]], key: str) -> dict[str, Any] | None:
    """The item with id ``key`` in ``items``, or ``None``."""
    return next((item for item in items if item.get("id") == key), None)


def item_named(kind: str, key: str | None, new: str) -> str:
    """An item in words for the audit trail (``task T2``), saying so when its id
    changed (``task T2 (now T2b)``)."""
    if key is None or key == new:
        return f"{kind} {new}"
    return f"{kind} {key} (now {new})"


def agents_by_key(study: m.Study) -> dict[str, m.Agent]:
    """The study's agent rows by id."""
    return {agent.key: agent for agent in study.agents.all()}


def tasks_by_key(study: m.Study) -> dict[str, m.Task]:
    """The study's task rows by id."""
    return {task.key: task for task in study.tasks.all()}
