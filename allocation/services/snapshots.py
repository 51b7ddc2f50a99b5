"""Snapshots: freeze a study as its canonical text, restore one as a new study, verify one.

A snapshot holds the study file in canonical form (:mod:`allocation.core.canonical`:
RFC 8785, written by the ``rfc8785`` package), the name of that form, its SHA-256, and
every plan's headline figures when it was frozen; it is never changed afterwards. A
snapshot is verified and read in the form it records, so snapshots taken before Baton
adopted RFC 8785 (form ``baton-1``) still verify. Freezing and restoring each write one
audit entry in the same transaction as the rows they store.
"""

from __future__ import annotations

from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.db import transaction

from allocation import __version__, audit, selectors
from allocation import models as m
from allocation.core import Problem, StudyInvalid
from allocation.core.canonical import (
    CURRENT_FORM,
    CanonicalError,
    canonical_text,
    digest,
    read_canonical,
    verify,
)

from .studies import study_import

__all__ = [
    "SnapshotDamaged",
    "snapshot_create",
    "snapshot_restore",
    "snapshot_verify",
]

_WRITERS = (m.Role.EDITOR, m.Role.OWNER)


class SnapshotDamaged(Exception):
    """A stored snapshot no longer matches its hash, so it is not restored."""


def _require_editor(study: m.Study, user: User, doing: str) -> None:
    if not m.Membership.objects.filter(study=study, user=user, role__in=_WRITERS).exists():
        raise PermissionDenied(f"{doing} needs the editor or owner role in the study.")


def _name(user: User) -> str:
    full = user.get_full_name() if hasattr(user, "get_full_name") else ""
    return full or user.get_username()


@transaction.atomic
def snapshot_create(*, study: m.Study, title: str, user: User) -> m.Snapshot:
    """Freeze the study as it is now: its canonical text, hash and headline figures.

    Parameters
    ----------
    study : Study
        The study row.
    title : str
        What the snapshot is (``Agreed at the workshop of 3 March``); 1–200 characters.
    user : User
        Its author: an editor or owner of the study.

    Raises
    ------
    PermissionDenied
        When ``user`` is not an editor or owner.
    StudyInvalid
        When the title is empty or too long (path ``title``), the study has errors (a
        snapshot must be a study that can be restored and analysed), or it holds a value
        RFC 8785 cannot write: a whole number beyond ±(2**53 − 1), named by its path.
    """
    _require_editor(study, user, "Freezing a study")
    title = " ".join(title.split())
    if "\x00" in title:
        raise StudyInvalid(
            [Problem("title", "contains the NUL character, which text may not hold")]
        )
    if not title:
        raise StudyInvalid([Problem("title", "is empty; say what this snapshot is")])
    limit = m.text_limit(m.Snapshot, "title")
    if len(title) > limit:
        raise StudyInvalid([Problem("title", f"is {len(title)} characters; at most {limit}")])
    # Lock the study row so that no edit lands between reading and freezing it.
    row = m.Study.objects.select_for_update().get(pk=study.pk)
    study_now = selectors.study_load(row).require_valid()
    try:
        text = canonical_text(study_now)
    except CanonicalError as error:
        raise StudyInvalid([Problem(error.path, error.reason)]) from None
    headlines = {
        plan: analysis.headline() for plan, analysis in selectors.study_analyses(row).items()
    }
    snapshot = m.Snapshot(
        study=row,
        study_key=row.key,
        study_title=row.title,
        title=title,
        author=user,
        author_name=_name(user),
        sha256=digest(text),
        canonical=text,
        canonical_form=CURRENT_FORM,
        headlines=headlines,
        baton_version=__version__,
    )
    snapshot.full_clean()
    snapshot.save()
    audit.record(
        study=row,
        action="snapshot.create",
        target=f"snapshot {snapshot.sha256[:12]}",
        after={"title": title, "sha256": snapshot.sha256},
    )
    return snapshot


def snapshot_verify(snapshot: m.Snapshot) -> bool:
    """Whether the stored text still hashes to the stored SHA-256 and is still in the
    canonical form the snapshot records (:func:`allocation.core.canonical.verify`)."""
    return verify(snapshot.canonical, snapshot.sha256, snapshot.canonical_form)


@transaction.atomic
def snapshot_restore(*, snapshot: m.Snapshot, user: User, key: str | None = None) -> m.Study:
    """A new study, owned by ``user``, holding exactly what the snapshot froze.

    With ``key`` left out the new study keeps the snapshot's study id, so its canonical
    text hashes to the snapshot's hash; a ``key`` gives it another id (and so another
    hash). The one exception is a snapshot in form ``baton-1`` holding a whole number
    beyond ±(2**53 − 1): the new study keeps that number exactly, and cannot be frozen
    again until it is changed.

    Raises
    ------
    PermissionDenied
        When ``user`` is not an editor or owner of the snapshot's study.
    SnapshotDamaged
        When the stored text no longer matches its hash; nothing is stored.
    StudyInvalid
        When the text is not a study this version of Baton reads, or ``key`` is not a
        valid id (path ``$.study.id``); nothing is stored.
    """
    if snapshot.study is None:
        raise PermissionDenied("The snapshot's study is gone; only an administrator can reach it.")
    _require_editor(snapshot.study, user, "Restoring a snapshot")
    if not snapshot_verify(snapshot):
        raise SnapshotDamaged(
            f"Snapshot {snapshot.sha256[:12]} no longer matches its hash; it was not restored."
        )
    data = read_canonical(snapshot.canonical, snapshot.canonical_form)
    if key is not None:
        data["study"]["id"] = key.strip()
    row = study_import(data=data, owner=user)
    audit.record(
        study=row,
        action="snapshot.restore",
        target=f"snapshot {snapshot.sha256[:12]}",
        after={
            "sha256": snapshot.sha256,
            "title": snapshot.title,
            "from_study": snapshot.study_key,
        },
    )
    return row
