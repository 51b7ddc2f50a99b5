"""Spreadsheet import: what a CSV or XLSX file would change (preview), and applying it.

The preview stores nothing. Applying reads the file again against the study as it is
then, refuses it with every problem when it has any error, and otherwise writes its
tasks, links and the plan's assignments and the audit entry in one transaction, with
the study row locked: the whole file is stored, or nothing.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import User
from django.db import transaction

from allocation import audit, selectors
from allocation import models as m
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
    "SpreadsheetPreview",
    "spreadsheet_apply",
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
