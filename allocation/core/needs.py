"""The capabilities a task needs, in one line of text for forms, sheets and tables.

A plain list applies to every stage: ``judgement, dosing``. Needs per stage name the
stage first and separate the stages with semicolons: ``decision: judgement; action:
dosing``. The study file holds the same as a list or an object keyed by stage.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from .vocabulary import STAGES

__all__ = ["needs_text", "parse_needs"]

Needs = list[str] | dict[str, list[str]]


def needs_text(needs: Sequence[str] | Mapping[str, Sequence[str]] | None) -> str:
    """The one-line text of a task's needs ("" for none)."""
    if not needs:
        return ""
    if isinstance(needs, Mapping):
        return "; ".join(f"{stage}: {', '.join(names)}" for stage, names in needs.items())
    return ", ".join(needs)


def _names(text: str, where: str) -> list[str]:
    names = [part.strip() for part in text.split(",")]
    if any(not name for name in names):
        raise ValueError(f"{where}has an empty name between commas")
    return names


def parse_needs(text: str) -> Needs | None:
    """A task's needs from their one-line text; ``None`` for blank text.

    Raises
    ------
    ValueError
        With a message that says what is wrong: an unknown stage, a stage given twice, a
        stage without names, an empty name between commas.
    """
    text = text.strip()
    if not text:
        return None
    if ":" not in text:
        return _names(text, "")
    needs: dict[str, list[str]] = {}
    for part in text.split(";"):
        stage, colon, names = part.partition(":")
        stage = stage.strip()
        if not colon:
            raise ValueError(f"{part.strip()!r} names no stage: write 'stage: names'")
        if stage not in STAGES:
            raise ValueError(f"{stage!r} is not a stage (stages: {', '.join(STAGES)})")
        if stage in needs:
            raise ValueError(f"gives the stage {stage} twice")
        if not names.strip():
            raise ValueError(f"gives no capability for the stage {stage}")
        needs[stage] = _names(names, f"the stage {stage} ")
    return needs
