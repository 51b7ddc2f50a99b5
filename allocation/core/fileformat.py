"""Loading and dumping whole study files: the entry points of the file format.

>>> result = load_study(data)          # never raises for bad input
>>> result.ok, result.errors, result.warnings
>>> study = read_study(data)           # raises StudyInvalid with every problem
>>> data == study_to_json(study)       # True for every valid file
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

from .checks import check_study
from .errors import Problem, StudyInvalid
from .model import Study
from .reading import StudyReader, parse_json_text
from .writing import study_to_json

__all__ = [
    "LoadResult",
    "dump_study_text",
    "load_study",
    "load_study_text",
    "ordered_problems",
    "read_study",
    "study_to_json",
    "validate_study",
]


@dataclass
class LoadResult:
    """A study read from data, with every problem found (errors and warnings)."""

    study: Study | None
    problems: list[Problem] = field(default_factory=list)

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.is_error]

    @property
    def warnings(self) -> list[Problem]:
        return [p for p in self.problems if not p.is_error]

    @property
    def ok(self) -> bool:
        return self.study is not None and not self.errors

    @property
    def valid_study(self) -> Study | None:
        """The study when it has no errors (``ok``), else ``None``."""
        return self.study if self.ok else None

    def require_valid(self) -> Study:
        """The study; raises :class:`StudyInvalid` listing every problem unless ``ok``."""
        if self.study is None or self.errors:
            raise StudyInvalid(self.problems)
        return self.study


def load_study(data: Any) -> LoadResult:
    """Read and check decoded study data; never raises for bad input.

    Returns a :class:`LoadResult` whose ``study`` is ``None`` only when the data is not
    a study at all; otherwise the study as far as it could be read, with its problems.
    """
    reader = StudyReader()
    study = reader.study(data)
    problems = list(reader.problems)
    if study is not None:
        problems += check_study(study, reader.locate)
    return LoadResult(study, ordered_problems(problems))


def ordered_problems(problems: list[Problem]) -> list[Problem]:
    """Errors first, each group in the order found, with exact repeats removed.

    A warning about a value that already has an error inside it is dropped: an invalid
    duration is not also a missing one.
    """
    unique = list(dict.fromkeys(problems))
    errors = [p for p in unique if p.is_error]
    # Every path that holds an error, itself included: one set, so that thousands of
    # problems cost their total length, not their count squared.
    holding = {
        error.path[:end] for error in errors for end in (*_steps(error.path), len(error.path))
    }
    warnings = [p for p in unique if not p.is_error and p.path not in holding]
    return errors + warnings


def _steps(path: str) -> list[int]:
    """Where each step of a JSON path starts (a ``.`` or ``[``): the paths above it end
    there."""
    return [index for index, char in enumerate(path) if char in ".["]


def load_study_text(text: str | bytes) -> LoadResult:
    """Read and check a study from JSON text."""
    data, problems = parse_json_text(text)
    if problems:
        return LoadResult(None, problems)
    return load_study(data)


def read_study(data: Any) -> Study:
    """The study in ``data``; raises :class:`StudyInvalid` listing every problem."""
    return load_study(data).require_valid()


def validate_study(study: Study) -> list[Problem]:
    """Check a study built in code (for example from the database) as if it were read."""
    return load_study(study_to_json(study)).problems


def dump_study_text(study: Study) -> str:
    """The study as JSON text, indented, with a final newline."""
    return json.dumps(study_to_json(study), indent=2, ensure_ascii=False) + "\n"
