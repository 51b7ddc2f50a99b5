"""The audit trail: every change to a study, who made it, from where, before and after.

Who and from where are carried by a context variable that each entry point sets: the
middleware for requests (a screen, or the admin under ``/admin/``), the import and the
management commands. :func:`record` writes one :class:`~allocation.models.AuditEntry`
inside the caller's transaction, so a change and its entry are stored together or not
at all.
"""

from __future__ import annotations

import contextlib
import contextvars
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

from django.contrib.auth.models import AbstractBaseUser

from allocation import models as m

__all__ = ["Actor", "acting", "current_actor", "record"]


@dataclass(frozen=True)
class Actor:
    """Who is changing things, and through which entry point."""

    user: AbstractBaseUser | None
    source: str

    @property
    def username(self) -> str:
        if self.user is None or not getattr(self.user, "is_authenticated", False):
            return ""
        return self.user.get_username()


_ACTOR: contextvars.ContextVar[Actor | None] = contextvars.ContextVar("baton_actor", default=None)
#: Whoever changes things outside any request, command or import: the system itself.
SYSTEM = Actor(None, m.AuditSource.SYSTEM)


def current_actor() -> Actor:
    """The actor of the current request, command or task."""
    return _ACTOR.get() or SYSTEM


@contextlib.contextmanager
def acting(user: AbstractBaseUser | None, source: str) -> Iterator[Actor]:
    """Attribute every change made inside the block to ``user`` through ``source``."""
    token = _ACTOR.set(Actor(user, source))
    try:
        yield current_actor()
    finally:
        _ACTOR.reset(token)


def record(
    *,
    study: m.Study | None,
    action: str,
    target: str = "",
    before: Any = None,
    after: Any = None,
    study_key: str | None = None,
) -> m.AuditEntry:
    """Store one audit entry for the current actor.

    Parameters
    ----------
    study : Study or None
        The study changed (``None`` once it is deleted: give ``study_key`` then).
    action : str
        What was done, as ``thing.verb``: ``task.save``, ``assignment.set``, ``study.import``.
    target : str
        What it was done to, in the study's words: ``task T2``, ``plan auto / task T2``.
    before, after : JSON-serialisable
        The values before and after, in their study-file form (``None`` for none).
    """
    actor = current_actor()
    user = actor.user if actor.user is not None and actor.user.is_authenticated else None
    return m.AuditEntry.objects.create(
        study=study,
        study_key=study_key or (study.key if study is not None else ""),
        user=user,
        username=actor.username,
        source=actor.source,
        action=action,
        target=target,
        before=before,
        after=after,
    )
