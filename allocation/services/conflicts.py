"""Optimistic versioning: a save names the version it started from.

Every row people edit carries ``version`` (1 when created, one more with every service
write). A form sends back the version it was rendered from; a service given that
``expected_version`` compares it with the stored one, under the study's row lock, before
anything is written. When the row has moved on (or was created or deleted meanwhile) it
raises :class:`EditConflict` with the row's current values in study-file form, so that
the screen can show theirs beside yours; nothing is written.

``expected_version`` 0 means "there was no such row when the form was opened": a create
that finds a row with the same id is a conflict too. ``None`` (commands, imports, the
admin, older callers) skips the check.
"""

from __future__ import annotations

import datetime
import json
from dataclasses import dataclass
from typing import Any

from allocation import models as m
from allocation.core import Problem, StudyInvalid

__all__ = ["ConflictField", "EditConflict", "conflict_fields", "version_check"]


def _last_change(study: m.Study, target: str) -> tuple[str, datetime.datetime | None]:
    """Who last changed ``target`` (the audit trail's words for it), and when."""
    entries = m.AuditEntry.objects.filter(study=study)
    entry = (
        entries.filter(target=target).first()
        or entries.filter(target__startswith=target + " ").first()
    )
    if entry is None:
        return "", None
    return entry.username or entry.get_source_display().lower(), entry.at


class EditConflict(StudyInvalid):
    """A save against a version older than the stored one; nothing was written.

    Attributes
    ----------
    what : str
        The row in words ("task T2", "plan auto / task T2").
    current : dict or None
        The row's values now, in study-file form; ``None`` when it was deleted.
    version : int
        The stored version now (0 when the row is gone): a form that insists ("Use
        mine") sends this one.
    who, at
        Who changed it last and when, from the audit trail ("" and None if unknown).
    """

    def __init__(
        self,
        *,
        path: str,
        what: str,
        current: dict[str, Any] | None,
        version: int,
        who: str = "",
        at: datetime.datetime | None = None,
    ):
        self.what = what
        self.current = current
        self.version = version
        self.who = who
        self.at = at
        by = who or "someone else"
        if current is None:
            message = f"{what} was deleted by {by} since you opened it"
        else:
            message = f"{what} was changed by {by} since you opened it"
        self.message = message[0].upper() + message[1:]
        super().__init__([Problem(path, self.message)])


def version_check(
    *,
    study: m.Study,
    stored: int,
    expected: int | None,
    path: str,
    what: str,
    current: dict[str, Any] | None,
    target: str | None = None,
) -> None:
    """Refuse a save that started from ``expected`` when the row is at ``stored``.

    ``stored`` is 0 when there is no row; ``target`` is the audit trail's words for the
    row (``what`` if not given), to say who changed it.

    Raises
    ------
    EditConflict
        When ``expected`` is given and differs from ``stored``.
    """
    if expected is None or expected == stored:
        return
    who, at = _last_change(study, target or what)
    raise EditConflict(path=path, what=what, current=current, version=stored, who=who, at=at)


@dataclass(frozen=True)
class ConflictField:
    """One field of a conflict, as the screen shows it: their value, yours."""

    name: str
    theirs: str
    yours: str

    @property
    def differs(self) -> bool:
        return self.theirs != self.yours


def _shown(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False)


def conflict_fields(
    current: dict[str, Any] | None, mine: dict[str, Any] | None
) -> list[ConflictField]:
    """Field by field, the stored values beside the ones submitted (differences first,
    in the order the study file gives them)."""
    theirs, yours = current or {}, mine or {}
    names = list(theirs) + [name for name in yours if name not in theirs]
    fields = [ConflictField(n, _shown(theirs.get(n)), _shown(yours.get(n))) for n in names]
    return [f for f in fields if f.differs] + [f for f in fields if not f.differs]
