"""Where the study objective lives: ``study.objective`` in the file, the assumptions
``objective_weights`` and ``objective_reference`` inside Baton (methods document,
``#objective``).

The file keeps the objective apart from the other assumptions, as its own setting of the
study: ``{"weights": {...}, "reference": {...}}``. A file that still has them among its
assumptions is read as well; it is written back under ``study.objective``.
"""

from __future__ import annotations

import copy
from typing import Any

__all__ = ["OBJECTIVE_KEYS", "objective_from_header", "split_objective", "with_objective"]

#: The objective's keys in the file and the assumptions they set.
OBJECTIVE_KEYS = {"weights": "objective_weights", "reference": "objective_reference"}


def split_objective(
    assumptions: dict[str, Any] | None,
) -> tuple[dict[str, Any] | None, dict[str, Any] | None]:
    """The assumptions without the objective's, and the objective in its file form
    (``None`` for either when there is nothing; an empty assumptions object stays)."""
    if assumptions is None:
        return None, None
    rest = dict(assumptions)
    objective = {key: rest.pop(name) for key, name in OBJECTIVE_KEYS.items() if name in rest}
    if not rest and assumptions:
        return None, objective or None
    return rest, objective or None


def with_objective(document: dict[str, Any]) -> dict[str, Any]:
    """A study file (a copy) with the objective moved from the assumptions to
    ``study.objective``."""
    document = copy.deepcopy(document)
    header = document.get("study", {})
    rest, objective = split_objective(header.get("assumptions"))
    if objective is None:
        return document
    if rest is None:
        header.pop("assumptions", None)
    else:
        header["assumptions"] = rest
    header["objective"] = objective
    return document


def objective_from_header(header: dict[str, Any]) -> dict[str, Any] | None:
    """The header's assumptions with its ``objective`` merged in, as Baton keeps them."""
    assumptions = header.get("assumptions")
    objective = header.get("objective")
    if not isinstance(objective, dict):
        return assumptions
    merged = dict(assumptions or {})
    for key, name in OBJECTIVE_KEYS.items():
        if key in objective:
            merged[name] = objective[key]
    return merged
