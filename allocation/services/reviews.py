"""Review writes: comments in threads, their resolution, and the decision log.

Who may do what: reviewers and above comment; editors and above decide and change a
decision's status; a comment is resolved or reopened by an editor or above, or by its
author. The views check the role too; these services do not rely on them.

A comment or decision is about one thing of the study, named in the study's words (see
:mod:`allocation.selectors.reviews` for the keys). The thing must exist when the remark is
made: a comment on a task the study does not have is refused with
:class:`ReviewRefused` saying which field is wrong, and nothing is stored. Every write
records an audit entry in the same transaction.
"""

from __future__ import annotations

from typing import Any

from django.contrib.auth.models import AnonymousUser, User
from django.core.exceptions import PermissionDenied
from django.db import transaction

from allocation import audit, selectors
from allocation import models as m
from allocation.core import limits
from allocation.selectors.reviews import finding_key, handover_key

from .conflicts import version_check

__all__ = [
    "ReviewRefused",
    "comment_post",
    "comment_resolve",
    "decision_save",
    "decision_status_set",
    "review_role",
    "review_target_check",
]

#: The longest comment, decision or rationale accepted (a page of text).
TEXT_LIMIT = limits.REVIEW_TEXT_LENGTH
#: Kinds that belong to one plan, and those that belong to the study.
PLAN_KINDS = (
    m.ReviewTarget.PLAN,
    m.ReviewTarget.ASSIGNMENT,
    m.ReviewTarget.HANDOVER,
    m.ReviewTarget.FINDING,
)


class ReviewRefused(ValueError):
    """A comment or decision that cannot be stored; ``field`` names the value at fault
    (``"kind"``, ``"plan"``, ``"key"``, ``"parent"``, ``"body"``, ``"decision"``,
    ``"rationale"``, ``"status"``) and the message says why."""

    def __init__(self, field: str, message: str):
        self.field = field
        super().__init__(message)


def review_role(study: m.Study, user: User | AnonymousUser | None) -> str | None:
    """The user's role in the study, or ``None`` for a non-member."""
    if user is None or not user.is_authenticated:
        return None
    return (
        m.Membership.objects.filter(study=study, user=user).values_list("role", flat=True).first()
    )


def _require(study: m.Study, user: User, role: str, doing: str) -> str:
    held = review_role(study, user)
    if held is None or m.Role.rank(held) < m.Role.rank(role):
        raise PermissionDenied(f"{doing} needs the {role} role or above in the study.")
    return held


def _text(value: object, field: str, what: str, *, required: bool) -> str:
    text = (value if isinstance(value, str) else "").strip()
    if "\x00" in text:
        raise ReviewRefused(
            field, f"The {what} contains the NUL character, which text may not hold."
        )
    if required and not text:
        raise ReviewRefused(field, f"The {what} is empty; write something first.")
    if len(text) > TEXT_LIMIT:
        raise ReviewRefused(
            field, f"The {what} is {len(text):,} characters long; the limit is {TEXT_LIMIT:,}."
        )
    return text


def _plan_ids(document: dict[str, Any]) -> list[str]:
    return [plan.get("id") for plan in document.get("plans", [])]


def review_target_check(*, study: m.Study, kind: str, plan_key: str, key: str) -> tuple[str, str]:
    """The ``(plan_key, target_key)`` to store for a remark about ``kind`` ``key``.

    Tasks and the study itself belong to the study (their plan is stored empty); the
    plan, an assignment, a handover and a finding belong to one plan. Handovers and
    findings are those of the plan's analysis as it stands now.

    Raises
    ------
    ReviewRefused
        Naming the field at fault when the kind is unknown, the plan or the thing does
        not exist, or the study has errors that keep its analysis from being computed.
    """
    if kind not in m.ReviewTarget.values:
        known = ", ".join(m.ReviewTarget.values)
        raise ReviewRefused("kind", f"Unknown kind of item {kind!r}; it may be one of {known}.")
    document = selectors.study_document(study)
    key = (key or "").strip()
    if kind == m.ReviewTarget.STUDY:
        return "", ""
    if kind == m.ReviewTarget.TASK:
        task_ids = {task.get("id") for task in document.get("tasks", [])}
        if key not in task_ids:
            raise ReviewRefused("key", f"The study has no task {key!r}.")
        return "", key
    plans = _plan_ids(document)
    if plan_key not in plans:
        known = ", ".join(plans) or "none"
        raise ReviewRefused("plan", f"The study has no plan {plan_key!r} (its plans: {known}).")
    if kind == m.ReviewTarget.PLAN:
        return plan_key, ""
    if kind == m.ReviewTarget.ASSIGNMENT:
        tasks = document.get("tasks", [])
        parents = {task.get("parent") for task in tasks}
        if key not in {task.get("id") for task in tasks}:
            raise ReviewRefused("key", f"The study has no task {key!r}.")
        if key in parents:
            raise ReviewRefused(
                "key", f"Task {key!r} is a goal: only its leaf tasks are assigned in a plan."
            )
        return plan_key, key
    analysis = selectors.plan_analysis(study, plan_key)
    if analysis is None:
        raise ReviewRefused(
            "key",
            f"The study has errors, so plan {plan_key!r} has no {kind}s to comment on; "
            "fix the errors first.",
        )
    if kind == m.ReviewTarget.HANDOVER:
        keys = {handover_key(handover) for handover in analysis.handovers}
        what = "handover"
    else:
        keys = {finding_key(finding) for finding in analysis.findings}
        what = "finding"
    if key not in keys:
        raise ReviewRefused("key", f"Plan {plan_key!r} has no {what} {key!r} (any more).")
    return plan_key, key


def _target_words(kind: str, plan_key: str, key: str) -> str:
    """The audit entry's target: ``plan auto / finding error_state:T2``."""
    thing = kind if not key else f"{kind} {key}"
    return f"plan {plan_key} / {thing}" if plan_key else thing


def _comment_json(comment: m.Comment) -> dict[str, Any]:
    return {
        "id": comment.pk,
        "plan": comment.plan_key,
        "kind": comment.target_kind,
        "key": comment.target_key,
        "parent": comment.parent_id,
        "author": comment.author_name,
        "body": comment.body,
        "resolved": comment.resolved,
    }


def _decision_json(decision: m.Decision) -> dict[str, Any]:
    return {
        "id": decision.pk,
        "plan": decision.plan_key,
        "kind": decision.target_kind,
        "key": decision.target_key,
        "decision": decision.decision,
        "rationale": decision.rationale,
        "status": decision.status,
        "decided_by": decision.decided_by_name,
    }


def comment_post(
    *,
    study: m.Study,
    user: User,
    kind: str = "",
    key: str = "",
    plan_key: str = "",
    body: object,
    parent: int | str | None = None,
) -> m.Comment:
    """Post a comment on one thing of the study, or a reply in a thread (``parent``).

    A reply takes its thing from the comment it answers (which must be of this study);
    ``kind``, ``key`` and ``plan_key`` are then ignored. Raises ``PermissionDenied``
    below the reviewer role and :class:`ReviewRefused` for an empty or too long text, an
    unknown thing or an unknown parent; nothing is stored then.
    """
    _require(study, user, m.Role.REVIEWER, "Commenting")
    text = _text(body, "body", "comment", required=True)
    answered = None
    if parent is not None and parent != "":
        try:
            answered = m.Comment.objects.get(study=study, pk=int(parent))
        except (ValueError, TypeError, m.Comment.DoesNotExist):
            raise ReviewRefused(
                "parent", f"There is no comment {parent!r} in this study to reply to."
            ) from None
        plan_key, key, kind = answered.plan_key, answered.target_key, answered.target_kind
    else:
        plan_key, key = review_target_check(study=study, kind=kind, plan_key=plan_key, key=key)
    with transaction.atomic():
        comment = m.Comment(
            study=study,
            plan_key=plan_key,
            target_kind=kind,
            target_key=key,
            parent=answered,
            author=user,
            author_name=user.get_username(),
            body=text,
        )
        comment.full_clean()
        comment.save()
        audit.record(
            study=study,
            action="comment.reply" if answered else "comment.post",
            target=_target_words(kind, plan_key, key),
            after=_comment_json(comment),
        )
    return comment


def comment_resolve(
    *, study: m.Study, user: User, comment: int | str, resolved: bool
) -> m.Comment:
    """Mark a comment resolved (or open again): its author, or an editor or above."""
    try:
        row = m.Comment.objects.get(study=study, pk=int(comment))
    except (ValueError, TypeError, m.Comment.DoesNotExist):
        raise ReviewRefused("comment", f"There is no comment {comment!r} in this study.") from None
    role = review_role(study, user)
    is_author = row.author_id is not None and row.author_id == user.pk
    if role is None or not (is_author or m.Role.rank(role) >= m.Role.rank(m.Role.EDITOR)):
        raise PermissionDenied(
            "Resolving a comment needs the editor role or above, or being its author."
        )
    if row.resolved == resolved:
        return row
    with transaction.atomic():
        before = _comment_json(row)
        row.resolved = resolved
        row.save(update_fields=["resolved"])
        audit.record(
            study=study,
            action="comment.resolve" if resolved else "comment.reopen",
            target=_target_words(row.target_kind, row.plan_key, row.target_key),
            before=before,
            after=_comment_json(row),
        )
    return row


def _status(value: object) -> str:
    if value not in m.DecisionStatus.values:
        known = ", ".join(m.DecisionStatus.values)
        raise ReviewRefused("status", f"Unknown status {value!r}; it may be one of {known}.")
    return str(value)


def decision_save(
    *,
    study: m.Study,
    user: User,
    kind: str,
    key: str = "",
    plan_key: str = "",
    decision: object,
    rationale: object = "",
    status: object = m.DecisionStatus.OPEN,
) -> m.Decision:
    """Record a decision about one thing of the study (editors and above)."""
    _require(study, user, m.Role.EDITOR, "Recording a decision")
    text = _text(decision, "decision", "decision", required=True)
    why = _text(rationale, "rationale", "rationale", required=False)
    status = _status(status)
    plan_key, key = review_target_check(study=study, kind=kind, plan_key=plan_key, key=key)
    with transaction.atomic():
        row = m.Decision(
            study=study,
            plan_key=plan_key,
            target_kind=kind,
            target_key=key,
            decision=text,
            rationale=why,
            status=status,
            decided_by=user,
            decided_by_name=user.get_username(),
        )
        row.full_clean()
        row.save()
        audit.record(
            study=study,
            action="decision.save",
            target=_target_words(kind, plan_key, key),
            after=_decision_json(row),
        )
    return row


def decision_status_set(
    *,
    study: m.Study,
    user: User,
    decision: int | str,
    status: object,
    expected_version: int | None = None,
) -> m.Decision:
    """Change a decision's status (editors and above); the audit trail keeps the history.

    The decision's ``decided_by`` becomes whoever changed it last. With
    ``expected_version``, a decision changed meanwhile raises
    :class:`~.conflicts.EditConflict` carrying its current values; nothing is written.
    """
    _require(study, user, m.Role.EDITOR, "Changing a decision")
    status = _status(status)
    with transaction.atomic():
        try:
            row = m.Decision.objects.select_for_update().get(study=study, pk=int(decision))
        except (ValueError, TypeError, m.Decision.DoesNotExist):
            raise ReviewRefused(
                "decision", f"There is no decision {decision!r} in this study."
            ) from None
        if row.status == status:
            return row
        version_check(
            study=study,
            stored=row.version,
            expected=expected_version,
            path="$.decisions",
            what=f"the decision on {_target_words(row.target_kind, row.plan_key, row.target_key)}",
            current=_decision_json(row),
            target=_target_words(row.target_kind, row.plan_key, row.target_key),
        )
        before = _decision_json(row)
        row.version += 1
        row.status = status
        row.decided_by = user
        row.decided_by_name = user.get_username()
        row.save(
            update_fields=["status", "decided_by", "decided_by_name", "version", "updated_at"]
        )
        audit.record(
            study=study,
            action="decision.status",
            target=_target_words(row.target_kind, row.plan_key, row.target_key),
            before=before,
            after=_decision_json(row),
        )
    return row
