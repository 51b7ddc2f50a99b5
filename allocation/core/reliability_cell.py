"""An assignment's reliability and its people asked in turn, as cells of text, for the
allocation table.

The study file writes ``{"fails_per_1000": 5, "detected_by": "alert", "fallback": "sam",
"false_alerts_per_day": 0.2}``; a cell writes ``5 in 1000; detected by alert; fallback
sam; 0.2 false alerts a day`` (the parts in any order, each optional but the first). A
``human`` listing people asked in turn is written ``pat, sam``. The study reader judges
the values (bounds, references, with the JSON path); this module only turns one form
into the other.
"""

from __future__ import annotations

import re
from typing import Any

__all__ = ["people_cell", "parse_people_cell", "parse_reliability_cell", "reliability_cell"]

_HELP = (
    "write failures in 1,000 occurrences, then what else applies, separated by ';': "
    "5 in 1000; detected by alert; fallback sam; 0.2 false alerts a day"
)
_PARTS = (
    ("fails_per_1000", re.compile(r"^(\S+) in 1,?000$")),
    ("detected_by", re.compile(r"^detected by (\S+)$")),
    ("fallback", re.compile(r"^fallback (\S+)$")),
    ("false_alerts_per_day", re.compile(r"^(\S+) false alerts? a day$")),
)
_NUMBERS = ("fails_per_1000", "false_alerts_per_day")


def reliability_cell(value: Any) -> str:
    """The study file's ``reliability`` as a cell's text ("" for none)."""
    if not isinstance(value, dict):
        return ""
    words = {
        "fails_per_1000": "{:g} in 1000",
        "detected_by": "detected by {}",
        "fallback": "fallback {}",
        "false_alerts_per_day": "{:g} false alerts a day",
    }
    return "; ".join(form.format(value[key]) for key, form in words.items() if key in value)


def parse_reliability_cell(text: str) -> dict[str, Any]:
    """A cell's text as the study file's ``reliability``.

    Raises
    ------
    ValueError
        Where a part is not one of the four, is given twice, or a number is not one.
    """
    result: dict[str, Any] = {}
    for part in filter(None, (piece.strip() for piece in text.split(";"))):
        for key, pattern in _PARTS:
            match = pattern.match(part)
            if match is None:
                continue
            if key in result:
                raise ValueError(f"gives {key} twice: {_HELP}")
            value: Any = match[1]
            if key in _NUMBERS:
                try:
                    number = float(value.replace(",", ""))
                except ValueError:
                    raise ValueError(f"{value!r} is not a number: {_HELP}") from None
                value = int(number) if number.is_integer() else number
            result[key] = value
            break
        else:
            raise ValueError(f"{part!r} is not part of a reliability: {_HELP}")
    if "fails_per_1000" not in result:
        raise ValueError(f"{text!r} gives no failures in 1,000: {_HELP}")
    return {key: result[key] for key, _pattern in _PARTS if key in result}


def people_cell(value: Any) -> str:
    """The study file's ``human``: one id, or the ids asked in turn joined with ', '."""
    if isinstance(value, list):
        return ", ".join(str(item) for item in value)
    return "" if value is None else str(value)


def parse_people_cell(text: str) -> str | list[str]:
    """A ``human`` cell: one id, or ids asked in turn separated by commas."""
    if "," not in text:
        return text.strip()
    return [part.strip() for part in text.split(",")]
