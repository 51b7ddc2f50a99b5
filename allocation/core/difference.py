"""Differences between two versions of a study: what was added, removed or changed.

Both versions are study files (the JSON form of format version 1, as
:func:`~allocation.core.writing.study_to_json` writes them). Every item is matched by
its identity, not its position, and compared field by field:

============  =====================================  ===================================
kind          identity (``key``)                     fields
============  =====================================  ===================================
study         ``study``                              title, description, scale, bin_s
assumptions   the assumption's name                  its value
risk_policy   the policy entry's name                its value
agents        agent id                               every key of the agent
events        event id                               every key of the event
tasks         task id                                every key of the task
links         ``T1 precedes T2``                     kind-free keys: lag_s, probability…
plans         plan id                                name, description
assignments   ``plan / task``                        human, automation, levels, …
modes         ``plan`` (the map) or ``plan / mode``  initial; name, indication, overrides
transitions   ``plan / from → to on trigger``        by, cue, per_day, notes
============  =====================================  ===================================

Nested objects are compared key by key and named with dots (``demands.visual``,
``levels.decision``, ``overrides.T2.human``); lists and plain values are compared whole.
An added or removed item is one change whose ``field`` is empty. An added or removed
plan or mode map is one change; its assignments, modes and transitions are not listed
one by one.

Headline figures are not computed here: the caller passes each version's figures per
plan (``PlanAnalysis.headline()``) and gets them side by side.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from typing import Any

__all__ = [
    "KINDS",
    "Change",
    "Difference",
    "HeadlineRow",
    "headline_rows",
    "study_difference",
]

#: The kinds of change, in the order they are reported, with their words.
KINDS: dict[str, str] = {
    "study": "Study",
    "assumptions": "Assumptions",
    "risk_policy": "Risk policy",
    "agents": "Agents",
    "events": "Events",
    "tasks": "Tasks",
    "links": "Links",
    "plans": "Plans",
    "assignments": "Assignments",
    "modes": "Modes",
    "transitions": "Mode transitions",
}

_MISSING = object()


@dataclass(frozen=True)
class Change:
    """One difference between the two versions.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    key : str
        The item's identity (``T2``, ``auto / T2``, ``T1 precedes T2``).
    change : str
        ``added``, ``removed`` or ``changed``.
    field : str
        The field that changed, dotted for nested keys; empty for a whole item.
    before, after : JSON value or None
        The value in each version; ``None`` where the item or field is absent.
    """

    kind: str
    key: str
    change: str
    field: str = ""
    before: Any = None
    after: Any = None


@dataclass(frozen=True)
class HeadlineRow:
    """One headline figure of one plan in both versions (``None`` where the plan is
    absent or was not analysed)."""

    plan: str
    figure: str
    before: float | None
    after: float | None

    @property
    def change(self) -> float | None:
        if self.before is None or self.after is None:
            return None
        return self.after - self.before


@dataclass
class Difference:
    """Every change from one version of a study to another, and the headline figures."""

    changes: list[Change] = field(default_factory=list)
    headlines: list[HeadlineRow] = field(default_factory=list)

    @property
    def same(self) -> bool:
        """Whether the two study files hold the same study."""
        return not self.changes

    def by_kind(self) -> dict[str, list[Change]]:
        """The changes grouped by kind, in :data:`KINDS` order, kinds without any left out."""
        groups: dict[str, list[Change]] = {}
        for kind in KINDS:
            items = [change for change in self.changes if change.kind == kind]
            if items:
                groups[kind] = items
        return groups

    def counts(self) -> dict[str, Counter]:
        """Per kind, how many items were added, removed and changed (an item with three
        changed fields counts once)."""
        counts: dict[str, Counter] = {}
        for kind, items in self.by_kind().items():
            counter: Counter = Counter()
            for what in ("added", "removed"):
                counter[what] = sum(1 for item in items if item.change == what)
            counter["changed"] = len({item.key for item in items if item.change == "changed"})
            counts[kind] = counter
        return counts


def study_difference(
    before: dict[str, Any],
    after: dict[str, Any],
    *,
    headlines_before: dict[str, dict[str, float]] | None = None,
    headlines_after: dict[str, dict[str, float]] | None = None,
) -> Difference:
    """What changed from the study file ``before`` to the study file ``after``.

    Parameters
    ----------
    before, after : dict
        Two study files (format version 1, decoded), usually two versions of one study.
    headlines_before, headlines_after : dict, optional
        Each version's headline figures per plan, ``{plan id: {figure: value}}``.

    Returns
    -------
    Difference
        The changes in :data:`KINDS` order (within a kind, in the order of ``after``,
        removed items after the others) and the headline rows, plan by plan.

    Examples
    --------
    >>> a = {"study": {"id": "s", "title": "A"}, "tasks": [{"id": "T1", "title": "x"}]}
    >>> b = {"study": {"id": "s", "title": "B"}, "tasks": []}
    >>> [(c.kind, c.key, c.change, c.field) for c in study_difference(a, b).changes]
    [('study', 'study', 'changed', 'title'), ('tasks', 'T1', 'removed', '')]
    """
    changes: list[Change] = []
    head_before = dict(before.get("study", {}))
    head_after = dict(after.get("study", {}))
    tables = ("assumptions", "risk_policy")
    tabled = {name: (head_before.pop(name, {}), head_after.pop(name, {})) for name in tables}
    changes += _fields("study", "study", head_before, head_after)
    for name in tables:
        old, new = tabled[name]
        changes += _items(name, dict(old), dict(new), whole=True)
    for kind in ("agents", "events", "tasks"):
        changes += _items(kind, _by_id(before.get(kind, [])), _by_id(after.get(kind, [])))
    changes += _items("links", _links(before.get("links", [])), _links(after.get("links", [])))
    changes += _plans(before.get("plans", []), after.get("plans", []))
    return Difference(
        changes=changes,
        headlines=headline_rows(headlines_before or {}, headlines_after or {}),
    )


def headline_rows(
    before: dict[str, dict[str, float]], after: dict[str, dict[str, float]]
) -> list[HeadlineRow]:
    """Each plan's headline figures before and after, plans in the order of ``after``
    then those only in ``before``; figures in the order the plan gives them."""
    rows = []
    for plan in dict.fromkeys([*after, *before]):
        old, new = before.get(plan, {}), after.get(plan, {})
        for figure in dict.fromkeys([*new, *old]):
            rows.append(HeadlineRow(plan, figure, old.get(figure), new.get(figure)))
    return rows


# -- matching items -----------------------------------------------------------------------


def _by_id(items: list[dict[str, Any]]) -> dict[str, dict[str, Any]]:
    return {item["id"]: item for item in items}


def _links(items: list[dict[str, Any]]) -> dict[str, dict[str, Any]]:
    # A link is one kind of link from one task to another (the reader refuses repeats).
    return {f"{item['from']} {item.get('kind', 'precedes')} {item['to']}": item for item in items}


def _transitions(items: list[dict[str, Any]], plan: str) -> dict[str, dict[str, Any]]:
    keyed: dict[str, dict[str, Any]] = {}
    seen: Counter = Counter()
    for item in items:
        base = f"{plan} / {item['from']} → {item['to']} on {item.get('trigger', '')}".rstrip()
        seen[base] += 1
        # Two transitions with the same modes and trigger are told apart by their order.
        keyed[base if seen[base] == 1 else f"{base} #{seen[base]}"] = item
    return keyed


def _items(
    kind: str,
    before: dict[str, Any],
    after: dict[str, Any],
    *,
    whole: bool = False,
    skip: tuple[str, ...] = (),
) -> list[Change]:
    """Items added, removed, or changed field by field (``whole``: the value as one)."""
    changes = []
    for key, new in after.items():
        if key not in before:
            changes.append(Change(kind, key, "added", after=new))
        elif whole:
            changes += _value(kind, key, "", before[key], new)
        else:
            changes += _fields(kind, key, before[key], new, skip=skip)
    changes += [
        Change(kind, key, "removed", before=old) for key, old in before.items() if key not in after
    ]
    return changes


def _fields(
    kind: str, key: str, before: dict[str, Any], after: dict[str, Any], skip: tuple = ()
) -> list[Change]:
    changes = []
    for name in dict.fromkeys([*before, *after]):
        if name in skip:
            continue
        changes += _value(kind, key, name, before.get(name, _MISSING), after.get(name, _MISSING))
    return changes


def _value(kind: str, key: str, name: str, old: Any, new: Any) -> list[Change]:
    """The changes between two values of one field; nested objects key by key."""
    if isinstance(old, dict) and isinstance(new, dict):
        changes = []
        for part in dict.fromkeys([*old, *new]):
            dotted = f"{name}.{part}" if name else part
            changes += _value(kind, key, dotted, old.get(part, _MISSING), new.get(part, _MISSING))
        return changes
    if _same(old, new):
        return []
    return [
        Change(
            kind,
            key,
            "changed",
            name,
            None if old is _MISSING else old,
            None if new is _MISSING else new,
        )
    ]


def _same(old: Any, new: Any) -> bool:
    # JSON has one kind of number: 2 and 2.0 are the same value, true and 1 are not.
    if isinstance(old, bool) or isinstance(new, bool):
        return type(old) is type(new) and old == new
    if isinstance(old, list) and isinstance(new, list):
        return len(old) == len(new) and all(_same(a, b) for a, b in zip(old, new, strict=True))
    if isinstance(old, dict) and isinstance(new, dict):
        return old.keys() == new.keys() and all(_same(old[k], new[k]) for k in old)
    return old == new and (old is _MISSING) == (new is _MISSING)


def _plans(before: list[dict[str, Any]], after: list[dict[str, Any]]) -> list[Change]:
    old_plans, new_plans = _by_id(before), _by_id(after)
    parts = ("assignments", "modes")
    changes = _items("plans", old_plans, new_plans, skip=parts)
    for plan, new in new_plans.items():
        old = old_plans.get(plan)
        if old is None:
            continue
        changes += _items(
            "assignments",
            {f"{plan} / {task}": item for task, item in old.get("assignments", {}).items()},
            {f"{plan} / {task}": item for task, item in new.get("assignments", {}).items()},
        )
        changes += _modes(plan, old.get("modes"), new.get("modes"))
    return changes


def _modes(plan: str, before: dict | None, after: dict | None) -> list[Change]:
    if before is None and after is None:
        return []
    if before is None or after is None:
        what = "added" if before is None else "removed"
        return [Change("modes", plan, what, "", before, after)]
    changes = _value("modes", plan, "initial", before.get("initial"), after.get("initial"))
    changes += _items(
        "modes",
        {f"{plan} / {mode['id']}": mode for mode in before.get("states", [])},
        {f"{plan} / {mode['id']}": mode for mode in after.get("states", [])},
    )
    changes += _items(
        "transitions",
        _transitions(before.get("transitions", []), plan),
        _transitions(after.get("transitions", []), plan),
    )
    return changes
