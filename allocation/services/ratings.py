"""Workload ratings: NASA-TLX ratings of a task under a plan, from a review or usability
session, scored by the core (:mod:`allocation.core.tlx`) and stored with an audit entry.

Reviewers and above record ratings; editors and owners delete them. A participant is
recorded by a code (``P07``), never by name. A rating changes nothing in the study
itself, so the study's version (and every analysis cached for it) stays as it is.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.db import transaction

from allocation import audit, selectors
from allocation import models as m
from allocation.core.tlx import SUBSCALES, RatingInvalid, tlx_score

__all__ = ["RatingRefused", "rating_delete", "rating_record"]

SESSION_MAX = m.text_limit(m.WorkloadRating, "session")
PARTICIPANT_MAX = m.text_limit(m.WorkloadRating, "participant")
NOTES_MAX = 4000


class RatingRefused(ValueError):
    """A rating that cannot be stored. ``errors`` maps each field at fault to its
    messages: ``plan``, ``task``, ``session``, ``participant``, ``notes``, a subscale
    (``mental`` …), ``pair_<n>`` (pair n, counted from 1), ``tally_<subscale>``,
    ``tallies`` or ``pairs`` (the comparisons as a whole)."""

    def __init__(self, errors: dict[str, list[str]]):
        self.errors = errors
        super().__init__("; ".join(f"{key}: {' '.join(texts)}" for key, texts in errors.items()))


def _require(study: m.Study, user: User, role: str, doing: str) -> None:
    """The views check the role too; the service does not trust them."""
    allowed = [r for r in m.Role.values if m.Role.rank(r) >= m.Role.rank(role)]
    if not m.Membership.objects.filter(study=study, user=user, role__in=allowed).exists():
        raise PermissionDenied(f"{doing} needs the {role} role or above in the study.")


def _field_of(path: str) -> str:
    """The form field a core problem's path points at."""
    if path.startswith("ratings."):
        return path.removeprefix("ratings.")
    if path.startswith("pairs["):
        return f"pair_{path[len('pairs[') : -1]}"
    if path.startswith("tallies."):
        return f"tally_{path.removeprefix('tallies.')}"
    return path


def _text(value: str, field: str, label: str, limit: int, errors, *, required: bool) -> str:
    value = (value or "").strip()
    if required and not value:
        errors.setdefault(field, []).append(f"{label} is required.")
    elif len(value) > limit:
        errors.setdefault(field, []).append(
            f"{label} is {len(value)} characters long; at most {limit} fit."
        )
    return value


def rating_snapshot(rating: m.WorkloadRating) -> dict[str, Any]:
    """A rating as the audit trail keeps it."""
    return {
        "plan": rating.plan_key,
        "task": rating.task_key,
        "session": rating.session,
        "participant": rating.participant,
        "ratings": rating.ratings,
        "weights": rating.weights,
        "score": rating.score,
        "notes": rating.notes,
    }


def rating_record(
    *,
    study: m.Study,
    user: User,
    plan_key: str,
    task_key: str,
    session: str,
    participant: str,
    ratings: Mapping[str, Any],
    tallies: Mapping[str, Any] | None = None,
    choices: Sequence[str | None] | None = None,
    notes: str = "",
) -> m.WorkloadRating:
    """Score and store one participant's NASA-TLX ratings of a task under a plan.

    Weighted when ``choices`` (the 15 pairwise choices in the order of
    :data:`allocation.core.tlx.PAIRS`) or ``tallies`` are given, raw otherwise. Every
    problem is collected and raised at once as :class:`RatingRefused`; nothing is stored
    then. The same participant rating the same task under the same plan twice in one
    session is refused (delete the first rating to replace it).
    """
    _require(study, user, m.Role.REVIEWER, "Recording a workload rating")
    errors: dict[str, list[str]] = {}
    loaded = selectors.study_load(study).study
    if loaded is None:
        raise RatingRefused({"plan": ["The study cannot be read; fix its errors first."]})
    if plan_key not in loaded.plans_by_id:
        errors["plan"] = [f"The study has no plan {plan_key!r}."]
    if task_key not in loaded.tasks_by_id:
        errors["task"] = [f"The study has no task {task_key!r}."]
    elif loaded.is_goal(task_key):
        errors["task"] = [f"{task_key} is a goal; rate one of the tasks under it."]
    session = _text(session, "session", "The session", SESSION_MAX, errors, required=True)
    participant = _text(
        participant, "participant", "The participant code", PARTICIPANT_MAX, errors, required=True
    )
    notes = _text(notes, "notes", "The notes", NOTES_MAX, errors, required=False)
    try:
        score = tlx_score(ratings, tallies=tallies, choices=choices)
    except RatingInvalid as invalid:
        for problem in invalid.errors:
            errors.setdefault(_field_of(problem.path), []).append(
                problem.message[:1].upper() + problem.message[1:] + "."
            )
        score = None
    if errors or score is None:
        raise RatingRefused(errors)
    with transaction.atomic():
        # One rating at a time per study, so the duplicate check below holds.
        m.Study.objects.select_for_update().filter(pk=study.pk).first()
        duplicate = m.WorkloadRating.objects.filter(
            study=study,
            plan_key=plan_key,
            task_key=task_key,
            session=session,
            participant=participant,
        ).exists()
        if duplicate:
            raise RatingRefused(
                {
                    "participant": [
                        f"{participant} has already rated {task_key} under this plan in "
                        f"session {session!r}; delete that rating first to replace it."
                    ]
                }
            )
        rating = m.WorkloadRating(
            study=study,
            plan_key=plan_key,
            task_key=task_key,
            session=session,
            participant=participant,
            ratings={key: _plain(score.ratings[key]) for key in SUBSCALES},
            weights=score.tallies,
            score=score.score,
            notes=notes,
            recorded_by=user,
        )
        rating.full_clean()
        rating.save()
        audit.record(
            study=study,
            action="rating.record",
            target=f"plan {plan_key} / task {task_key}",
            after=rating_snapshot(rating),
        )
    return rating


def _plain(value: float) -> int | float:
    """Whole ratings stored as whole numbers, as they were typed."""
    return int(value) if float(value).is_integer() else value


def rating_delete(*, study: m.Study, user: User, rating_id: int) -> dict[str, Any]:
    """Delete one rating of the study (editors and owners); returns what was deleted.

    A rating of another study is not found (:class:`WorkloadRating.DoesNotExist`).
    """
    _require(study, user, m.Role.EDITOR, "Deleting a workload rating")
    with transaction.atomic():
        rating = m.WorkloadRating.objects.select_for_update().get(study=study, pk=rating_id)
        before = rating_snapshot(rating)
        rating.delete()
        audit.record(
            study=study,
            action="rating.delete",
            target=f"plan {before['plan']} / task {before['task']}",
            before=before,
        )
    return before
