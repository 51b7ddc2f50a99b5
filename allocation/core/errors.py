"""Errors raised by the Baton core.

Every error names where in the input it arose, as a JSON path such as
``$.tasks[3].duration_s``, so the web pages and commands can show it beside the
offending value.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["BatonError", "Problem", "StudyInvalid", "UnknownReference"]


class BatonError(Exception):
    """Base class of every error the core raises."""


@dataclass(frozen=True, order=True)
class Problem:
    """One thing wrong (or doubtful) in a study.

    Parameters
    ----------
    path : str
        JSON path of the value concerned, ``$`` for the whole file.
    message : str
        A plain sentence saying what is wrong.
    level : str
        ``"error"`` (the study cannot be used) or ``"warning"`` (it can, but
        something looks unintended).
    """

    path: str
    message: str
    level: str = "error"

    @property
    def is_error(self) -> bool:
        return self.level == "error"

    def __str__(self) -> str:
        return f"{self.path}: {self.message}"

    def as_dict(self) -> dict[str, str]:
        return {"path": self.path, "message": self.message, "level": self.level}


class StudyInvalid(BatonError):
    """A study file or object has errors; ``problems`` lists them all."""

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        errors = [p for p in problems if p.is_error]
        shown = "; ".join(str(p) for p in errors[:5])
        more = f" (and {len(errors) - 5} more)" if len(errors) > 5 else ""
        super().__init__(f"{len(errors)} error(s) in the study: {shown}{more}")

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.is_error]


class UnknownReference(BatonError):
    """An id was looked up that the study does not have."""

    def __init__(self, kind: str, key: str):
        self.kind = kind
        self.key = key
        super().__init__(f"no {kind} with id {key!r} in the study")
