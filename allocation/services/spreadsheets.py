"""Spreadsheet import: what a CSV or XLSX file would change (preview), and applying it.

The preview stores nothing. Applying reads the file again against the study as it is
then, refuses it with every problem when it has any error, and otherwise writes its
tasks, links and the plan's assignments and the audit entry in one transaction, with
the study row locked: the whole file is stored, or nothing.

Between the upload and the apply the file waits in the database (:class:`PendingImport`),
for the user who uploaded it only, never in the session: a session is read on every
request, and files there made every page of their user slow. What waits is bounded per
user (``PENDING_IMPORTS_PER_USER`` files, ``PENDING_IMPORT_BYTES_PER_USER`` bytes; an
upload past either drops that user's oldest files, and says which) and in time
(``PENDING_IMPORT_LIFETIME_S``): expired files are deleted when their user next looks,
on every upload by anyone, and by ``manage.py housekeeping``.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass, field
from typing import Any

from django.contrib.auth import get_user_model
from django.contrib.auth.models import User
from django.db import transaction
from django.utils import timezone

from allocation import audit, selectors
from allocation import models as m
from allocation.core.limits import (
    PENDING_IMPORT_BYTES_PER_USER,
    PENDING_IMPORT_LIFETIME_S,
    PENDING_IMPORTS_PER_USER,
)
from allocation.core.spreadsheets.reading import (
    Changes,
    Proposal,
    SpreadsheetInvalid,
    Upload,
    changes_between,
    propose,
)

from . import rows
from .edits import next_position, study_locked, study_touch

__all__ = [
    "PendingKept",
    "SpreadsheetPreview",
    "pending_import",
    "pending_import_discard",
    "pending_import_keep",
    "pending_imports_expire",
    "spreadsheet_apply",
    "spreadsheet_apply_pending",
    "spreadsheet_preview",
]


@dataclass
class SpreadsheetPreview:
    """A file read against a study: its problems, and what applying it would change
    (``changes`` is ``None`` when the file could not be read at all)."""

    proposal: Proposal
    changes: Changes | None

    @property
    def ok(self) -> bool:
        return self.proposal.ok

    @property
    def problems(self):
        return self.proposal.problems


def _preview(study: m.Study, plan_key: str, upload: Upload) -> SpreadsheetPreview:
    document = selectors.study_document(study)
    proposal = propose(document, plan_key, upload)
    changes = None
    if proposal.document is not None:
        changes = changes_between(document, proposal.document, plan_key, proposal.parts)
    return SpreadsheetPreview(proposal, changes)


def spreadsheet_preview(*, study: m.Study, plan_key: str, upload: Upload) -> SpreadsheetPreview:
    """Read ``upload`` against the study's plan ``plan_key``; stores nothing."""
    return _preview(study, plan_key, upload)


def spreadsheet_apply(
    *, study: m.Study, plan_key: str, upload: Upload, user: User | None
) -> SpreadsheetPreview:
    """Apply ``upload`` to the study's tasks, links and plan ``plan_key``, as ``user``.

    Returns the preview that was applied (its ``changes`` say what changed; a file that
    changes nothing writes nothing).

    Raises
    ------
    SpreadsheetInvalid
        When the file has any error, checked against the study as it is now; nothing
        is stored then.
    """
    with audit.acting(user, m.AuditSource.IMPORT), transaction.atomic():
        study = study_locked(study)
        preview = _preview(study, plan_key, upload)
        if not preview.ok:
            raise SpreadsheetInvalid(preview.problems)
        changes = preview.changes
        document = preview.proposal.document
        if changes is None or changes.empty or document is None:
            return preview
        tasks = _write_tasks(study, document, changes)
        if changes.links:
            _write_links(study, document, tasks)
        if changes.assignments:
            _write_assignments(study, document, plan_key, tasks)
        before, after = changes.audit()
        # The file itself stands beside what it changed, to trace an entry to it.
        source = {"name": upload.name, "sha256": hashlib.sha256(upload.data).hexdigest()}
        audit.record(
            study=study,
            action="spreadsheet.import",
            target=f"plan {plan_key} from {upload.name}"[:300],
            before=before,
            after={**after, "file": source},
        )
        study_touch(study)
    return preview


# -- files waiting between the upload and the apply -----------------------------------


@dataclass
class PendingKept:
    """A file kept for its preview, and the same user's older files dropped to keep
    within the per-user bounds (each a dict: ``name``, ``size``, ``plan_key``,
    ``study_title``), with what the user had waiting before: ``files`` and ``bytes``."""

    pending: m.PendingImport
    dropped: list[dict] = field(default_factory=list)
    files: int = 0
    bytes: int = 0


def pending_imports_expire(now: dt.datetime | None = None) -> int:
    """Delete every file waiting past its lifetime, whoever uploaded it; return how many."""
    now = now or timezone.now()
    # No row points at a pending import, so this is one DELETE: the files are not read.
    deleted, _ = m.PendingImport.objects.filter(expires_at__lte=now).delete()
    return deleted


def pending_import_keep(
    *, user: User, study: m.Study, plan_key: str, upload: Upload, now: dt.datetime | None = None
) -> PendingKept:
    """Keep ``upload`` for ``user``'s preview of ``study``'s plan ``plan_key``.

    It replaces the file the user had waiting for the study (for any plan). When the
    user's other files and this one would pass ``PENDING_IMPORTS_PER_USER`` files or
    ``PENDING_IMPORT_BYTES_PER_USER`` bytes, the oldest are deleted until they do not;
    the caller says which (a file is at most ``SPREADSHEET_MAX_BYTES``, well under the
    byte bound, so the new file itself always fits).
    """
    now = now or timezone.now()
    pending_imports_expire(now)
    data = bytes(upload.data)
    with transaction.atomic():
        # The user's row is the lock: two uploads of one user take turns, so that the
        # bounds hold between them (other users' uploads go on).
        get_user_model().objects.select_for_update().filter(pk=user.pk).first()
        m.PendingImport.objects.filter(user=user, study=study).delete()
        others = list(
            m.PendingImport.objects.filter(user=user)
            .order_by("created_at", "pk")
            .values("pk", "name", "size", "plan_key", "study__title")
        )
        kept = PendingKept(
            pending=m.PendingImport(),
            files=len(others),
            bytes=sum(item["size"] for item in others),
        )
        total = kept.bytes + len(data)
        while others and (
            len(others) + 1 > PENDING_IMPORTS_PER_USER or total > PENDING_IMPORT_BYTES_PER_USER
        ):
            oldest = others.pop(0)
            total -= oldest["size"]
            kept.dropped.append(
                {
                    "name": oldest["name"],
                    "size": oldest["size"],
                    "plan_key": oldest["plan_key"],
                    "study_title": oldest["study__title"],
                }
            )
            m.PendingImport.objects.filter(pk=oldest["pk"]).delete()
        kept.pending = m.PendingImport.objects.create(
            user=user,
            study=study,
            plan_key=plan_key,
            name=upload.name[: m.text_limit(m.PendingImport, "name")],
            data=data,
            sha256=hashlib.sha256(data).hexdigest(),
            size=len(data),
            created_at=now,
            expires_at=now + dt.timedelta(seconds=PENDING_IMPORT_LIFETIME_S),
        )
    return kept


def pending_import(
    *, user: User, study: m.Study, plan_key: str, now: dt.datetime | None = None
) -> m.PendingImport | None:
    """The file ``user`` has waiting for ``study``'s plan ``plan_key``, if any, unexpired
    and intact (the user's expired files are deleted on the way)."""
    now = now or timezone.now()
    expired = m.PendingImport.objects.filter(user=user, expires_at__lte=now)
    if expired.exists():  # a page view writes only when there is something to delete
        expired.delete()
    pending = m.PendingImport.objects.filter(user=user, study=study, plan_key=plan_key).first()
    if pending is None:
        return None
    pending.data = bytes(pending.data)  # PostgreSQL gives a memoryview
    if hashlib.sha256(pending.data).hexdigest() != pending.sha256:
        pending.delete()
        return None
    return pending


def _upload(pending: m.PendingImport) -> Upload:
    """The waiting file, as the spreadsheet reader takes it."""
    return Upload(pending.name, bytes(pending.data))


def pending_import_discard(*, user: User, study: m.Study, plan_key: str) -> bool:
    """Delete the file ``user`` has waiting for ``study``'s plan ``plan_key``; whether
    there was one."""
    deleted, _ = m.PendingImport.objects.filter(user=user, study=study, plan_key=plan_key).delete()
    return deleted > 0


def spreadsheet_apply_pending(
    *, pending: m.PendingImport, user: User, now: dt.datetime | None = None
) -> SpreadsheetPreview | None:
    """Apply the file ``user`` has waiting (:func:`spreadsheet_apply`) and delete it, in
    one transaction: on any error neither the study nor the waiting file changes.

    Returns ``None`` when the file is no longer waiting for ``user`` (applied from
    another tab, discarded, expired, or another user's).

    Raises
    ------
    SpreadsheetInvalid
        When the file has any error; it stays waiting, and nothing is stored.
    """
    now = now or timezone.now()
    with transaction.atomic():
        locked = (
            m.PendingImport.objects.select_for_update()
            .filter(pk=pending.pk, user=user, expires_at__gt=now)
            .select_related("study")
            .first()
        )
        if locked is None or locked.sha256 != pending.sha256:
            return None
        preview = spreadsheet_apply(
            study=locked.study,
            plan_key=locked.plan_key,
            upload=_upload(locked),
            user=user,
        )
        locked.delete()
    return preview


def _write_tasks(study: m.Study, document: dict[str, Any], changes: Changes) -> dict:
    """Write the tasks added or changed (existing rows are updated in place, so that
    other plans' assignments and mode overrides keep pointing at them); return every
    task row by id."""
    tasks = {task.key: task for task in study.tasks.all()}
    changed = {item.key for item in changes.tasks}
    if not changed:
        return tasks
    items = [item for item in document["tasks"] if item["id"] in changed]
    position = next_position(study.tasks)
    for item in items:
        row = tasks.get(item["id"])
        if row is None:
            row = m.Task(study=study, position=position)
            position += 1
        for name, value in rows.task_values(item).items():
            setattr(row, name, value)
        # Parents are set below, once every new task has a row to point at.
        row.full_clean(
            exclude=["study", "parent"], validate_unique=False, validate_constraints=False
        )
        row.save()
        tasks[row.key] = row
    for item in items:
        row = tasks[item["id"]]
        parent = tasks[item["parent"]] if "parent" in item else None
        if row.parent_id != (parent.pk if parent else None):
            row.parent = parent
            row.save(update_fields=["parent"])
    return tasks


def _write_links(study: m.Study, document: dict[str, Any], tasks: dict) -> None:
    """Replace the study's links by the document's, in its order."""
    study.links.all().delete()
    links = [
        m.Link(study=study, position=index, **rows.link_values(item, tasks))
        for index, item in enumerate(document["links"])
    ]
    for link in links:
        link.full_clean(
            exclude=["study", "source", "target"],
            validate_unique=False,
            validate_constraints=False,
        )
    m.Link.objects.bulk_create(links)


def _write_assignments(
    study: m.Study, document: dict[str, Any], plan_key: str, tasks: dict
) -> None:
    """Write the plan's assignments as the document has them, in its order."""
    plan = study.plans.get(key=plan_key)
    item = next(item for item in document["plans"] if item["id"] == plan_key)
    agents = {agent.key: agent for agent in study.agents.all()}
    plan.assignments.all().delete()
    m.Assignment.objects.bulk_create(
        [
            m.Assignment(
                plan=plan,
                task=tasks[task_id],
                position=index,
                **rows.assignment_values(assignment, agents),
            )
            for index, (task_id, assignment) in enumerate(item["assignments"].items())
        ]
    )
