"""Reads for snapshots: a study's snapshots, one of them, and differences between
versions (two snapshots, or a snapshot and the study as it is now)."""

from __future__ import annotations

import json
from dataclasses import dataclass
from typing import Any

from django.db.models import QuerySet

from allocation import models as m
from allocation import selectors
from allocation.core.canonical import CanonicalError, canonical_text, digest, read_canonical
from allocation.core.difference import Difference, study_difference
from allocation.core.writing import study_to_json

__all__ = [
    "Version",
    "snapshot_for_study",
    "snapshot_version",
    "snapshots_for_study",
    "study_now",
    "version_difference",
]


def snapshots_for_study(*, study: m.Study) -> QuerySet[m.Snapshot]:
    """The study's snapshots, newest first, without their text (a list needs none)."""
    return study.snapshots.defer("canonical").order_by("-created_at", "-pk")


def snapshot_for_study(*, study: m.Study, pk: Any) -> m.Snapshot | None:
    """The study's snapshot number ``pk`` with its text; ``None`` when it has none such
    (another study's snapshot included) or ``pk`` is not a number."""
    try:
        number = int(pk)
    except (TypeError, ValueError):
        return None
    return study.snapshots.filter(pk=number).first()


@dataclass(frozen=True)
class Version:
    """One side of a difference: a snapshot, or the study as it is now."""

    label: str
    document: dict[str, Any]
    headlines: dict[str, dict[str, float]]
    sha256: str | None
    snapshot: m.Snapshot | None = None


def study_now(study: m.Study) -> Version:
    """The study as it is now, written canonically like a snapshot (so that only real
    changes show), with its headline figures and the hash it would be frozen under
    (``None`` while it has errors, or holds a number too large to freeze)."""
    checked = selectors.study_load(study).valid_study
    if checked is None:
        return Version("now", selectors.study_document(study), {}, None)
    headlines = {
        plan: analysis.headline() for plan, analysis in selectors.study_analyses(study).items()
    }
    try:
        text = canonical_text(checked)
    except CanonicalError:
        return Version("now", study_to_json(checked), headlines, None)
    return Version("now", json.loads(text), headlines, digest(text))


def snapshot_version(snapshot: m.Snapshot) -> Version:
    return Version(
        snapshot.title,
        read_canonical(snapshot.canonical, snapshot.canonical_form),
        snapshot.headlines,
        snapshot.sha256,
        snapshot,
    )


def version_difference(before: Version, after: Version) -> Difference:
    """Every change from one version to the other, with the headline figures of both."""
    return study_difference(
        before.document,
        after.document,
        headlines_before=before.headlines,
        headlines_after=after.headlines,
    )
