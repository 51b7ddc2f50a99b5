"""An assignment's monitoring style as one cell of text, for the allocation table.

The study file writes ``"each"``, ``"exception"``, ``{"style": "periodic", "per_day": 2}``
or ``{"style": "continuous", "share": 0.25}``; a sheet cell writes ``each``,
``exception``, ``periodic 2`` or ``continuous 0.25``. The study reader judges the values
(bounds, with the JSON path); this module only turns one form into the other.
"""

from __future__ import annotations

from typing import Any

__all__ = ["monitoring_cell", "parse_monitoring_cell"]

_AMOUNT = {"periodic": "per_day", "continuous": "share"}
_HELP = "write each, exception, periodic N (looks a day) or continuous S (a share, 0 to 1)"


def monitoring_cell(value: Any) -> str:
    """The study file's ``monitoring`` value as a cell's text ("" for the default)."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value
    style = value.get("style", "")
    amount = value.get(_AMOUNT.get(style, ""), None)
    return style if amount is None else f"{style} {amount:g}"


def parse_monitoring_cell(text: str) -> str | dict[str, Any]:
    """A cell's text as the study file's ``monitoring`` value.

    Raises
    ------
    ValueError
        Where the text names no style or its amount is not a number.
    """
    words = text.split()
    if not words or words[0] not in ("each", "exception", "periodic", "continuous"):
        raise ValueError(f"{text!r} is not a monitoring style: {_HELP}")
    style = words[0]
    if style in ("each", "exception"):
        if len(words) > 1:
            raise ValueError(f"{style} takes no amount: {_HELP}")
        return style
    if len(words) != 2:
        raise ValueError(f"{style} needs one amount: {_HELP}")
    try:
        amount = float(words[1])
    except ValueError:
        raise ValueError(f"{words[1]!r} is not a number: {_HELP}") from None
    number: int | float = int(amount) if amount.is_integer() else amount
    return {"style": style, _AMOUNT[style]: number}
