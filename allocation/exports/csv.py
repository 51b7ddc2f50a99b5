"""The allocation table as CSV: comment lines naming its source, then the table.

UTF-8, comma-separated, RFC 4180 quoting, ``\\n`` line ends. The first lines start with
``# `` and give the export's stamp (study, plan, snapshot, date, version, scale), the
assumptions in force as compact JSON, each figure column with the registry's label and
unit and its section of Baton's methods document, and the cautions; a reader skips lines
starting with ``#`` before the header row.

A text cell that begins with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return is
written with a leading ``'``, so that a spreadsheet program opening the file shows the
text instead of running it as a formula (OWASP, "CSV Injection").
"""

from __future__ import annotations

import json

from pandas.api.types import is_numeric_dtype

from allocation.core.cautions import CAUTIONS
from allocation.core.methods import methods_document

from .source import ExportSource
from .table import allocation_table, figure_columns

__all__ = ["FORMULA_STARTS", "allocation_csv", "csv_comment_lines", "defuse"]

#: First characters a spreadsheet program reads as the start of a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def defuse(value):
    """A text cell made safe to open in a spreadsheet program; other values unchanged."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def csv_comment_lines(source: ExportSource) -> list[str]:
    """The ``# key: value`` lines that open the CSV file."""
    lines = [f"# {key}: {_one_line(value)}" for key, value in source.about()]
    assumptions = json.dumps(
        source.analysis.assumptions, separators=(",", ":"), ensure_ascii=False, sort_keys=True
    )
    lines.append(f"# assumptions: {assumptions}")
    document = methods_document()
    figures = [
        f"{', '.join(columns)} = {spec.label}{f' ({spec.unit})' if spec.unit else ''}, "
        f"methods section #{spec.anchor}: {document.section(spec.anchor).summary}"
        for columns, spec in figure_columns("allocation")
    ]
    lines.append("# methods: " + " | ".join(figures))
    lines.append(f"# cautions: {CAUTIONS}")
    return lines


def allocation_csv(source: ExportSource) -> bytes:
    """The allocation table of one plan as the bytes of a CSV file."""
    frame = allocation_table(source)
    for column in frame.columns:
        if not is_numeric_dtype(frame[column]):
            frame[column] = frame[column].map(defuse)
    table = frame.to_csv(index=False, lineterminator="\n")
    return ("\n".join(csv_comment_lines(source)) + "\n" + table).encode("utf-8")
