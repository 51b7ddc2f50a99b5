"""Reads for the History page and its exports: a study's audit trail, narrowed by a
:class:`HistoryFilter`, and an entry's changes field by field."""

from __future__ import annotations

import datetime
from dataclasses import dataclass
from typing import Any

from django.db.models import QuerySet
from django.utils import timezone

from allocation import models as m
from allocation.audit import link_key

__all__ = [
    "MISSING",
    "NOBODY",
    "Change",
    "HistoryFilter",
    "changes",
    "entry_json",
    "history",
    "history_choices",
]


@dataclass(frozen=True)
class Change:
    """One field that differs between an entry's before and after (``MISSING`` where a
    side has no such field)."""

    path: str
    before: Any
    after: Any


class _Missing:
    def __repr__(self) -> str:
        return "MISSING"


MISSING: Any = _Missing()


def _flatten(value: Any, path: str, into: dict[str, Any]) -> None:
    """Every leaf of a study-file value by its path: items with an ``id`` are named by it
    (``tasks[T2].title``), links by their ends (``links[T1 triggers T2].lag_s``)."""
    if isinstance(value, dict) and value:
        for name, item in value.items():
            _flatten(item, f"{path}.{name}" if path else str(name), into)
    elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        for index, item in enumerate(value):
            if "id" in item:
                label = item["id"]
            elif {"from", "to"} <= set(item):
                label = " ".join(str(part) for part in link_key(item))
            else:
                label = index
            _flatten(item, f"{path}[{label}]", into)
    else:
        into[path] = value


def changes(before: Any, after: Any) -> list[Change]:
    """The fields that differ between two values, one line each, in reading order."""
    old: dict[str, Any] = {}
    new: dict[str, Any] = {}
    _flatten(before, "", old)
    _flatten(after, "", new)
    return [
        Change(path or "(value)", old.get(path, MISSING), new.get(path, MISSING))
        for path in dict.fromkeys([*old, *new])
        if old.get(path, MISSING) != new.get(path, MISSING)
    ]


@dataclass(frozen=True)
class HistoryFilter:
    """Which entries of a study's trail to show; empty values do not filter."""

    who: str = ""
    action: str = ""
    source: str = ""
    since: datetime.date | None = None
    until: datetime.date | None = None
    text: str = ""

    def as_pairs(self) -> list[tuple[str, str]]:
        """The filters in use, as (name, value) for query strings and export headers."""
        pairs = [
            ("who", self.who),
            ("action", self.action),
            ("source", self.source),
            ("since", self.since.isoformat() if self.since else ""),
            ("until", self.until.isoformat() if self.until else ""),
            ("text", self.text),
        ]
        return [(name, value) for name, value in pairs if value]


#: How the page and the exports name the entries made by nobody signed in.
NOBODY = "(system)"


def history(study: m.Study, chosen: HistoryFilter | None = None) -> QuerySet[m.AuditEntry]:
    """A study's audit entries, newest first, narrowed by ``chosen``.

    The dates are whole days in the site's time zone, both ends included.
    """
    entries = m.AuditEntry.objects.filter(study=study).order_by("-at", "-pk")
    chosen = chosen or HistoryFilter()
    if chosen.who == NOBODY:
        entries = entries.filter(username="")
    elif chosen.who:
        entries = entries.filter(username=chosen.who)
    if chosen.action:
        entries = entries.filter(action=chosen.action)
    if chosen.source:
        entries = entries.filter(source=chosen.source)
    zone = timezone.get_current_timezone()
    if chosen.since:
        start = datetime.datetime.combine(chosen.since, datetime.time.min, tzinfo=zone)
        entries = entries.filter(at__gte=start)
    if chosen.until:
        end = datetime.datetime.combine(
            chosen.until + datetime.timedelta(days=1), datetime.time.min, tzinfo=zone
        )
        entries = entries.filter(at__lt=end)
    if chosen.text:
        entries = entries.filter(target__icontains=chosen.text)
    return entries


def history_choices(study: m.Study) -> dict[str, list[str]]:
    """The people and actions that occur in a study's trail, for the filter's lists."""
    entries = m.AuditEntry.objects.filter(study=study)
    who = sorted(set(entries.values_list("username", flat=True)))
    actions = sorted(set(entries.values_list("action", flat=True)))
    return {"who": [name or NOBODY for name in who], "actions": actions}


def entry_json(entry: m.AuditEntry) -> dict[str, Any]:
    """One entry as the JSON export writes it."""
    return {
        "id": entry.pk,
        "at": entry.at.isoformat(),
        "who": entry.username or NOBODY,
        "source": entry.source,
        "action": entry.action,
        "target": entry.target,
        "study_id": entry.study_key,
        "before": entry.before,
        "after": entry.after,
    }
