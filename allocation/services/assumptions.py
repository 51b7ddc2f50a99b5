"""Writes to a study's assumptions and risk policy: checked by the core, then stored.

A value is checked twice before anything is written: on its own
(:func:`~allocation.core.assumptions.check_assumptions`, or the reader's rules for a risk
policy) and with the whole study, by reading the study's document with the new value
through the core (:func:`~allocation.core.load_study`). Any error the new value brings
raises :class:`~allocation.core.StudyInvalid` naming its JSON path, and nothing is
stored; errors the study already had elsewhere do not block the change.
"""

from __future__ import annotations

import re
from typing import Any

from django.contrib.auth.models import AbstractBaseUser
from django.core.exceptions import PermissionDenied
from django.db import transaction

from allocation import audit, selectors
from allocation import models as m
from allocation.core import Problem, StudyInvalid, load_study
from allocation.core.assumptions import ASSUMPTIONS, check_assumptions
from allocation.core.reading import child_path, parse_json_text

from .conflicts import version_check

__all__ = [
    "study_assumption_reset",
    "study_assumption_set",
    "study_risk_policy_reset",
    "study_risk_policy_set",
]

ASSUMPTION_KEYS = tuple(assumption.key for assumption in ASSUMPTIONS)
POLICY_KEYS = ("likelihood_bands", "review", "unacceptable", "note")
ASSUMPTIONS_PATH = "$.study.assumptions"
POLICY_PATH = "$.study.risk_policy"

_BARE_WORD = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*\Z")
# A key left unquoted after "{" or ",": {5: 6} reads as {"5": 6}.
_UNQUOTED_KEY = re.compile(r"([{,]\s*)([A-Za-z0-9_.]+)(\s*:)")


def assumption_value_parse(text: str, path: str) -> tuple[Any, list[Problem]]:
    """Read a value typed on a form: JSON, a table with unquoted keys, or a bare word.

    ``{"5": 6}``, ``{5: 6}``, ``12.5``, ``[5, 30, 120]`` and ``awake`` are all read;
    anything else is a problem at ``path`` saying where the text went wrong.
    """
    text = text.strip()
    if not text:
        return None, [Problem(path, "is empty; type a value, or reset to the default")]
    if _BARE_WORD.match(text) and text not in ("true", "false", "null"):
        return text, []
    quoted = _UNQUOTED_KEY.sub(r'\1"\2"\3', text)
    value, problems = parse_json_text(quoted)
    if problems:
        message = problems[0].message.replace("the file is not", "is not")
        if quoted != text:
            # Columns count in the text with its keys quoted, not in what was typed.
            message = message.split(" at line ")[0]
        return None, [Problem(path, message)]
    return value, []


def _require_editor(study: m.Study, user: AbstractBaseUser) -> None:
    """Editors and owners only; the views check this too, the service does not trust them."""
    allowed = (m.Role.OWNER, m.Role.EDITOR)
    if not m.Membership.objects.filter(study=study, user=user, role__in=allowed).exists():
        raise PermissionDenied("Changing assumptions needs the editor or owner role.")


def _new_errors(row: m.Study, part: str, value: Any) -> list[Problem]:
    """Errors the study would have with ``value`` as its header's ``part`` that it has not
    now (loading the whole study document through the core)."""
    before = set(selectors.study_load(row).errors)
    # The selectors share their document between readers: change a copy of the header.
    document = selectors.study_document(row)
    changed = {**document, "study": {**document["study"], part: value}}
    return [problem for problem in load_study(changed).errors if problem not in before]


def _locked(study: m.Study, expected: int | None, part: str, key: str | None = None) -> m.Study:
    """The study row, locked; refused with :class:`~.conflicts.EditConflict` when
    ``expected`` is given and the study's assumptions and policy have moved on from it.
    The conflict carries the current value of ``part`` (one assumption ``key``, or the
    risk policy)."""
    row = m.Study.objects.select_for_update().get(pk=study.pk)
    if key is not None:
        path, what, current = (
            child_path(ASSUMPTIONS_PATH, key),
            f"assumption {key}",
            {key: (row.assumptions or {}).get(key)},
        )
    else:
        path, what, current = POLICY_PATH, "risk policy", dict(row.risk_policy or {})
    version_check(
        study=row, stored=row.version, expected=expected, path=path, what=what, current=current
    )
    return row


def _save(row: m.Study, field: str, value: Any, action: str, target: str) -> m.Study:
    before = selectors.study_document(row)
    header = {name: v for name, v in before["study"].items() if name != field}
    if value not in (None, ""):
        header[field] = value
    setattr(row, field, value)
    row.version += 1
    row.full_clean()
    row.save(update_fields=[field, "version", "updated_at"])
    audit.record_change(
        study=row, action=action, target=target, before=before, after={**before, "study": header}
    )
    return row


def study_assumption_set(
    *,
    study: m.Study,
    key: str,
    value: Any,
    user: AbstractBaseUser,
    expected_version: int | None = None,
) -> m.Study:
    """Set the study's own value of one assumption.

    Raises
    ------
    StudyInvalid
        When the value is wrong on its own or makes the study invalid; nothing is stored.
    PermissionDenied
        When ``user`` is not an editor or owner of the study.
    EditConflict
        When ``expected_version`` is given and the study is no longer at that version.
    """
    _require_editor(study, user)
    path = child_path(ASSUMPTIONS_PATH, key)
    problems = [Problem(path, message) for _key, message in check_assumptions({key: value})]
    if problems:
        raise StudyInvalid(problems)
    with transaction.atomic():
        row = _locked(study, expected_version, "assumptions", key)
        assumptions = {**(row.assumptions or {}), key: value}
        problems = _new_errors(row, "assumptions", assumptions)
        if problems:
            raise StudyInvalid(problems)
        return _save(row, "assumptions", assumptions, "assumption.set", f"assumption {key}")


def study_assumption_reset(
    *, study: m.Study, key: str, user: AbstractBaseUser, expected_version: int | None = None
) -> m.Study:
    """Drop the study's own value of one assumption, so that the default applies again
    (refused as :func:`study_assumption_set` is when the version moved on)."""
    _require_editor(study, user)
    with transaction.atomic():
        row = _locked(study, expected_version, "assumptions", key)
        if key not in (row.assumptions or {}):
            return row
        assumptions = {name: v for name, v in row.assumptions.items() if name != key}
        problems = _new_errors(row, "assumptions", assumptions)
        if problems:
            raise StudyInvalid(problems)
        return _save(row, "assumptions", assumptions, "assumption.reset", f"assumption {key}")


def study_risk_policy_set(
    *,
    study: m.Study,
    policy: dict[str, Any],
    user: AbstractBaseUser,
    expected_version: int | None = None,
) -> m.Study:
    """Set the study's risk policy (``likelihood_bands``, ``review``, ``unacceptable``,
    ``note``), checked by the study reader's rules.

    Raises
    ------
    StudyInvalid
        With each problem at its path under ``$.study.risk_policy``; nothing is stored.
    PermissionDenied
        When ``user`` is not an editor or owner of the study.
    EditConflict
        When ``expected_version`` is given and the study is no longer at that version.
    """
    _require_editor(study, user)
    unknown = [key for key in policy if key not in POLICY_KEYS]
    if unknown:
        raise StudyInvalid(
            [
                Problem(child_path(POLICY_PATH, key), "is not part of a risk policy")
                for key in unknown
            ]
        )
    with transaction.atomic():
        row = _locked(study, expected_version, "risk_policy")
        problems = _new_errors(row, "risk_policy", policy)
        if problems:
            raise StudyInvalid(problems)
        return _save(row, "risk_policy", policy, "risk_policy.set", "risk policy")


def study_risk_policy_reset(
    *, study: m.Study, user: AbstractBaseUser, expected_version: int | None = None
) -> m.Study:
    """Drop the study's risk policy: Baton's example policy applies again (and says so)."""
    _require_editor(study, user)
    with transaction.atomic():
        row = _locked(study, expected_version, "risk_policy")
        if not row.risk_policy:
            return row
        return _save(row, "risk_policy", {}, "risk_policy.reset", "risk policy")
