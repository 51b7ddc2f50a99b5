"""Writes to a study's assumptions and risk policy: checked by the core, then stored.

A value is checked twice before anything is written: on its own
(:func:`~allocation.core.assumptions.check_assumptions`, or the reader's rules for a risk
policy) and with the whole study, by reading the study's document with the new value
through the core, as every edit is (:func:`~.edits.study_edit`). Any error the new value
brings raises :class:`~allocation.core.StudyInvalid` naming its JSON path, and nothing is
stored; errors the study already had elsewhere do not block the change.
"""

from __future__ import annotations

import re
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied

from allocation import models as m
from allocation.core import Problem, StudyInvalid
from allocation.core.assumptions import ASSUMPTIONS, check_assumptions
from allocation.core.reading import RISK_POLICY_KEYS, child_path, parse_json_text

from .conflicts import version_check
from .edits import StudyEdit, study_edit

__all__ = [
    "study_assumption_reset",
    "study_assumption_set",
    "study_risk_policy_reset",
    "study_risk_policy_set",
]

ASSUMPTION_KEYS = tuple(assumption.key for assumption in ASSUMPTIONS)
POLICY_KEYS = RISK_POLICY_KEYS
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


def _require_editor(study: m.Study, user: User) -> None:
    """Editors and owners only; the views check this too, the service does not trust them."""
    allowed = (m.Role.OWNER, m.Role.EDITOR)
    if not m.Membership.objects.filter(study=study, user=user, role__in=allowed).exists():
        raise PermissionDenied("Changing assumptions needs the editor or owner role.")


def _version_check(row: m.Study, expected: int | None, key: str | None = None) -> None:
    """Refuse with :class:`~.conflicts.EditConflict` when ``expected`` is given and the
    (locked) study's assumptions and policy have moved on from it. The conflict carries
    the current value of one assumption ``key``, or (``key`` None) of the risk policy."""
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


def _save(edit: StudyEdit, field: str, value: Any) -> None:
    """Set the study header's ``field`` to ``value``: in the edit's document, checked by
    the core (unless the edit is made unchecked), then on the study row."""
    edit.document["study"][field] = value
    if edit.checked:
        edit.check()
    edit.study_set({field: value})
    edit.study.full_clean()


def study_assumption_set(
    *,
    study: m.Study,
    key: str,
    value: Any,
    user: User,
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
    with study_edit(study=study, action="assumption.set", target=f"assumption {key}") as edit:
        _version_check(edit.study, expected_version, key)
        assumptions = {**(edit.study.assumptions or {}), key: value}
        _save(edit, "assumptions", assumptions)
    return edit.study


def study_assumption_reset(
    *, study: m.Study, key: str, user: User, expected_version: int | None = None
) -> m.Study:
    """Drop the study's own value of one assumption, so that the default applies again
    (refused as :func:`study_assumption_set` is when the version moved on)."""
    _require_editor(study, user)
    with study_edit(study=study, action="assumption.reset", target=f"assumption {key}") as edit:
        _version_check(edit.study, expected_version, key)
        own = edit.study.assumptions or {}
        if key not in own:
            edit.leave_unchanged()
        else:
            assumptions = {name: v for name, v in own.items() if name != key}
            _save(edit, "assumptions", assumptions)
    return edit.study


def study_risk_policy_set(
    *,
    study: m.Study,
    policy: dict[str, Any],
    user: User,
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
    with study_edit(study=study, action="risk_policy.set", target="risk policy") as edit:
        _version_check(edit.study, expected_version)
        _save(edit, "risk_policy", policy)
    return edit.study


def study_risk_policy_reset(
    *, study: m.Study, user: User, expected_version: int | None = None
) -> m.Study:
    """Drop the study's risk policy: Baton's example policy applies again (and says so)."""
    _require_editor(study, user)
    # Unchecked: without a policy of its own the study takes the example policy.
    with study_edit(
        study=study, action="risk_policy.reset", target="risk policy", check=False
    ) as edit:
        _version_check(edit.study, expected_version)
        if not edit.study.risk_policy:
            edit.leave_unchanged()
        else:
            _save(edit, "risk_policy", {})
    return edit.study
