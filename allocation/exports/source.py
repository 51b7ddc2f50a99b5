"""What every export starts from: one plan's analysis, frozen or current, and its stamp.

An export names the study, the plan, the snapshot it comes from (its SHA-256, or "not
frozen"), its date (the snapshot's time when frozen, else the time of the export) and
Baton's version. From a snapshot, the figures are computed from the snapshot's own
canonical study file, so they reproduce whatever has changed in the study since.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from django.http import Http404
from django.utils import timezone

from allocation import __version__, selectors
from allocation import models as m
from allocation.core import Study, load_study
from allocation.core.analysis import PlanAnalysis, analyse_plan

__all__ = [
    "NOT_FROZEN",
    "ExportSource",
    "Rating",
    "export_source",
    "snapshot_by_prefix",
    "snapshot_of_study",
]

NOT_FROZEN = "not frozen"


@dataclass(frozen=True)
class Rating:
    """One recorded NASA-TLX rating, as the workload sheet lists it."""

    task: str
    session: str
    participant: str
    ratings: dict[str, float]
    weighted: bool
    score: float
    notes: str = ""


@dataclass(frozen=True)
class ExportSource:
    """One plan's analysis with the stamp every export carries."""

    analysis: PlanAnalysis
    document: dict[str, Any]
    snapshot: str | None
    exported: datetime
    baton_version: str = __version__
    ratings: tuple[Rating, ...] = field(default_factory=tuple)

    @property
    def study(self) -> Study:
        return self.analysis.study

    @property
    def snapshot_text(self) -> str:
        return self.snapshot or NOT_FROZEN

    @property
    def exported_text(self) -> str:
        """The date as ISO 8601 in UTC, to the second: ``2025-03-01T09:30:00Z``."""
        moment = self.exported.astimezone(UTC).replace(microsecond=0, tzinfo=None)
        return moment.isoformat() + "Z"

    def about(self) -> list[tuple[str, str]]:
        """The ``about`` rows of the spreadsheet layout, in order."""
        study, plan = self.study, self.analysis.plan
        return [
            ("study", study.id),
            ("study_title", study.title),
            ("plan", plan.id),
            ("plan_name", plan.name),
            ("snapshot", self.snapshot_text),
            ("exported", self.exported_text),
            ("baton_version", self.baton_version),
            ("scale", study.scale),
        ]


def snapshot_of_study(row: m.Study, snapshot_id: int) -> m.Snapshot:
    """Snapshot ``snapshot_id`` of the study; 404 when the study has no such snapshot."""
    snapshot = m.Snapshot.objects.filter(study=row, pk=snapshot_id).first()
    if snapshot is None:
        raise Http404("This study has no such snapshot.")
    return snapshot


def snapshot_by_prefix(row: m.Study, prefix: str) -> m.Snapshot:
    """The study's one snapshot whose hash starts with ``prefix``.

    Raises
    ------
    LookupError
        When none or more than one match, with a message naming the prefix.
    """
    prefix = prefix.strip().lower()
    if not prefix or any(char not in "0123456789abcdef" for char in prefix):
        raise LookupError(f"{prefix!r} is not the start of a SHA-256 hash (hex digits)")
    matches = list(m.Snapshot.objects.filter(study=row, sha256__startswith=prefix)[:2])
    if not matches:
        raise LookupError(f"the study has no snapshot whose hash starts with {prefix!r}")
    if len(matches) > 1:
        raise LookupError(f"more than one snapshot's hash starts with {prefix!r}; give more")
    return matches[0]


def _ratings(row: m.Study, plan_id: str) -> tuple[Rating, ...]:
    rows = m.WorkloadRating.objects.filter(study=row, plan_key=plan_id).order_by(
        "task_key", "session", "participant", "created_at", "pk"
    )
    return tuple(
        Rating(
            task=rating.task_key,
            session=rating.session,
            participant=rating.participant,
            ratings=dict(rating.ratings or {}),
            weighted=bool(rating.weights),
            score=float(rating.score),
            notes=rating.notes or "",
        )
        for rating in rows
    )


def export_source(
    row: m.Study,
    plan_id: str,
    *,
    snapshot: m.Snapshot | None = None,
    now: datetime | None = None,
) -> ExportSource:
    """The analysis of ``plan_id`` to export, from the study now or from ``snapshot``.

    Raises
    ------
    Http404
        When the study (or snapshot) has no such plan, or has errors to fix first.
    """
    if snapshot is None:
        analysis = selectors.plan_analysis(row, plan_id)
        if analysis is None:
            raise Http404("No such plan, or the study has errors to fix first.")
        document = selectors.study_document(row)
        exported = now or timezone.now()
        stamp = None
    else:
        document = json.loads(snapshot.canonical)
        result = load_study(document)
        if not result.ok or plan_id not in result.study.plans_by_id:
            raise Http404("The snapshot has no such plan, or it cannot be analysed.")
        analysis = analyse_plan(result.study, plan_id)
        exported = snapshot.created_at
        stamp = snapshot.sha256
    return ExportSource(
        analysis=analysis,
        document=document,
        snapshot=stamp,
        exported=exported,
        ratings=_ratings(row, plan_id),
    )
