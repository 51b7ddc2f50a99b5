"""Reading an allocation spreadsheet into a proposed change to a study.

The file is a CSV (the ``allocation`` sheet, after optional ``#`` comment lines) or an
XLSX workbook with the sheets ``tasks``, ``links`` and ``allocation`` in the layout the
exports write (:mod:`allocation.exports`); a sheet that is absent leaves that
part of the study as it is. :func:`propose` applies the file to a copy of the study's
document and returns that *proposal* with every problem found, each placed where the
user will look for it: sheet, row (the header is row 1), column.

Problems come from two places: reading the cells (an unknown column, bad JSON, a number
that is not a number, a level that is not a level …) and the core's own check of the
whole proposed study (:func:`allocation.core.load_study`), whose JSON paths are mapped
back to the sheet row and column they came from.

Nothing from the file is executed or evaluated: cells are read as stored values, a cell
holding a formula is refused (its cached result is not trusted), JSON cells are parsed
as data, and the workbook's XML is read through defusedxml (openpyxl uses it when it is
installed). The file size, the unpacked size of a workbook, the number of rows and the
number of columns are limited before anything else is read.

This module knows nothing of Django: the services call it with a document and bytes.
"""

from __future__ import annotations

import copy
import csv
import datetime
import io
import json
import math
import re
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from allocation.core import limits, load_study
from allocation.core.monitoring import parse_monitoring_cell
from allocation.core.needs import parse_needs
from allocation.core.reading import parse_json_text
from allocation.core.reliability_cell import parse_people_cell, parse_reliability_cell
from allocation.core.spreadsheets.layout import (
    ALLOCATION_COLUMNS,
    LINK_COLUMNS,
    PASS_THROUGH_WORDS,
    TASK_COLUMNS,
)
from allocation.core.vocabulary import STAGES

__all__ = [
    "ALLOCATION_COLUMNS",
    "ASSIGNMENT_COLUMNS",
    "LINK_COLUMNS",
    "MAX_BYTES",
    "MAX_COLUMNS",
    "MAX_ROWS",
    "MAX_UNPACKED_BYTES",
    "PARTS",
    "TASK_COLUMNS",
    "Changes",
    "FieldChange",
    "ItemChange",
    "Proposal",
    "RowProblem",
    "SpreadsheetInvalid",
    "Table",
    "Upload",
    "changes_between",
    "propose",
    "read_tables",
]

MAX_BYTES = limits.SPREADSHEET_MAX_BYTES
MAX_UNPACKED_BYTES = limits.SPREADSHEET_MAX_UNPACKED_BYTES
MAX_ROWS = limits.SPREADSHEET_MAX_ROWS
MAX_COLUMNS = limits.SPREADSHEET_MAX_COLUMNS

#: The parts of a study a file can change, in the order they are read.
PARTS = ("tasks", "links", "allocation")

#: The columns of the allocation sheet the import reads; the others are figures Baton
#: computes, and are ignored.
ASSIGNMENT_COLUMNS = (
    "task",
    "human",
    "automation",
    "levels",
    "accountable",
    "feedback",
    "initiator",
    "monitoring",
    "reliability",
    "escalate_after_s",
    "rationale",
    "status",
    "applies",
)

_COLUMNS = {"tasks": TASK_COLUMNS, "links": LINK_COLUMNS, "allocation": ALLOCATION_COLUMNS}
_REQUIRED = {
    "tasks": ("id", "title"),
    "links": ("from", "to", "kind"),
    "allocation": ("task", "human", "automation"),
}
#: Sheets an export writes that the import reads nothing from (``about`` only for the
#: study and plan the file names, to warn when they differ).
_OTHER_SHEETS = (
    "about",
    "handovers",
    "findings",
    "workload",
    "assumptions",
    "methods",
    "cautions",
)
#: An assignment's fields in the study file's order, for the summary of changes.
_ASSIGNMENT_FIELDS = (
    "human",
    "automation",
    "levels",
    "duration_s",
    "accountable",
    "feedback",
    "initiator",
    "monitoring",
    "status",
    "rationale",
    "applies",
    "pass_through",
    "reliability",
    "escalate_after_s",
)
_ZIP_MAGIC = b"PK\x03\x04"


@dataclass(frozen=True)
class Upload:
    """A file as uploaded: its name (for its kind and the messages) and its bytes."""

    name: str
    data: bytes


@dataclass(frozen=True)
class RowProblem:
    """One thing wrong with the file, where the user will find it.

    ``sheet`` is ``tasks``, ``links`` or ``allocation``; ``file`` for the file as a
    whole; ``study`` for a part of the study the file does not hold (``column`` then
    gives the JSON path). ``row`` counts the header as row 1 (``None``: the whole sheet).
    """

    sheet: str
    row: int | None
    column: str
    message: str
    level: str = "error"

    @property
    def is_error(self) -> bool:
        return self.level == "error"

    def __str__(self) -> str:
        where = self.sheet
        if self.row is not None:
            where += f" row {self.row}"
        if self.column:
            where += f" column {self.column}"
        return f"{where}: {self.message}"

    def as_dict(self) -> dict[str, Any]:
        return {
            "sheet": self.sheet,
            "row": self.row,
            "column": self.column,
            "message": self.message,
            "level": self.level,
        }


class SpreadsheetInvalid(Exception):
    """The file cannot be applied; ``problems`` lists every problem found."""

    def __init__(self, problems: list[RowProblem]):
        self.problems = problems
        errors = [p for p in problems if p.is_error]
        shown = "; ".join(str(p) for p in errors[:5])
        more = f" (and {len(errors) - 5} more)" if len(errors) > 5 else ""
        super().__init__(f"{len(errors)} error(s) in the spreadsheet: {shown}{more}")


@dataclass
class Table:
    """One sheet as read: its header and its non-empty rows as ``(row number, cells)``."""

    name: str
    columns: list[str]
    rows: list[tuple[int, dict[str, Any]]]
    header_row: int = 1


@dataclass
class _Read:
    """What reading a file gave: its tables, what it says about itself, its problems."""

    kind: str
    tables: dict[str, Table] = field(default_factory=dict)
    about: dict[str, str] = field(default_factory=dict)
    problems: list[RowProblem] = field(default_factory=list)
    comment_lines: int = 0


@dataclass
class Proposal:
    """The study document with the file's changes applied, and every problem found."""

    document: dict[str, Any] | None
    problems: list[RowProblem]
    parts: tuple[str, ...] = ()
    kind: str = ""
    about: dict[str, str] = field(default_factory=dict)
    comment_lines: int = 0
    #: Errors the stored study had already (not counted against the file).
    existing_errors: int = 0

    @property
    def errors(self) -> list[RowProblem]:
        return [p for p in self.problems if p.is_error]

    @property
    def warnings(self) -> list[RowProblem]:
        return [p for p in self.problems if not p.is_error]

    @property
    def ok(self) -> bool:
        return self.document is not None and not self.errors


# -- reading the file -----------------------------------------------------------------


def _size_text(size: int) -> str:
    if size >= 1024 * 1024:
        return f"{size / (1024 * 1024):.1f} MiB"
    return f"{size / 1024:.0f} KiB" if size >= 1024 else f"{size} bytes"


def read_tables(upload: Upload, *, max_bytes: int = MAX_BYTES, max_rows: int = MAX_ROWS) -> _Read:
    """Read the sheets the import uses from a CSV or XLSX file; never raises for bad
    input: what cannot be read is a problem of the result."""
    name = upload.name.lower()
    data = upload.data
    if len(data) > max_bytes:
        return _Read(
            "",
            problems=[
                RowProblem(
                    "file",
                    None,
                    "",
                    f"the file is {_size_text(len(data))}; the import reads files of at "
                    f"most {_size_text(max_bytes)}",
                )
            ],
        )
    if not data:
        return _Read("", problems=[RowProblem("file", None, "", "the file is empty")])
    if name.endswith((".xls", ".xlsm", ".xlsb", ".ods", ".numbers")):
        extension = name.rsplit(".", 1)[-1]
        return _Read(
            "",
            problems=[
                RowProblem(
                    "file",
                    None,
                    "",
                    f"a .{extension} file is not read; save it as an Excel workbook (.xlsx) "
                    "or as CSV (UTF-8, comma-separated)",
                )
            ],
        )
    if name.endswith(".xlsx") or data.startswith(_ZIP_MAGIC):
        return _read_xlsx(data, max_rows)
    return _read_csv(data, max_rows)


def _column_letter(index: int) -> str:
    """The spreadsheet letter of a 1-based column number: 1 → A, 27 → AA."""
    letters = ""
    while index:
        index, rest = divmod(index - 1, 26)
        letters = chr(ord("A") + rest) + letters
    return letters


def _read_xlsx(data: bytes, max_rows: int) -> _Read:
    result = _Read("xlsx")
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            unpacked = sum(member.file_size for member in archive.infolist())
    except (zipfile.BadZipFile, ValueError):
        result.problems.append(
            RowProblem("file", None, "", "the file is not an XLSX workbook (it is not a zip)")
        )
        return result
    if unpacked > MAX_UNPACKED_BYTES:
        result.problems.append(
            RowProblem(
                "file",
                None,
                "",
                f"the workbook unpacks to {_size_text(unpacked)}; the import reads "
                f"workbooks of at most {_size_text(MAX_UNPACKED_BYTES)} unpacked",
            )
        )
        return result
    import openpyxl  # imported here: only workbooks need it

    try:
        # read_only streams the sheets; data_only=False keeps formulas as formulas, so
        # that they are refused rather than their cached results trusted.
        book = openpyxl.load_workbook(
            io.BytesIO(data), read_only=True, data_only=False, keep_links=False
        )
    except Exception as error:  # noqa: BLE001 - any failure of a foreign file is a problem
        first: BaseException = error
        # Name the first cause, not a wrapper.
        while (inner := first.__cause__ or first.__context__) is not None:
            first = inner
        result.problems.append(
            RowProblem(
                "file",
                None,
                "",
                f"the workbook cannot be read ({type(first).__name__}); save it again "
                "as an Excel workbook (.xlsx)",
            )
        )
        return result
    try:
        for title in book.sheetnames:
            name = title.strip().lower()
            sheet = book[title]
            if not hasattr(sheet, "iter_rows"):
                continue  # a chart sheet
            if name in PARTS:
                if name in result.tables:
                    result.problems.append(
                        RowProblem(name, None, "", f"the workbook has two sheets named {name}")
                    )
                    continue
                cells = _sheet_cells(sheet, name, max_rows, result.problems)
                if cells is not None:
                    table = _table(name, cells, result.problems)
                    if table is not None:
                        result.tables[name] = table
            elif name == "about":
                cells = _sheet_cells(sheet, name, max_rows, result.problems, formulas=False)
                for _number, row in cells or []:
                    if len(row) >= 2 and isinstance(row[0], str) and row[1] is not None:
                        result.about[row[0].strip()] = str(row[1]).strip()
            elif name not in _OTHER_SHEETS:
                result.problems.append(
                    RowProblem(
                        "file",
                        None,
                        "",
                        f"the sheet {title!r} is not read (the import reads the sheets "
                        "tasks, links and allocation)",
                        "warning",
                    )
                )
    finally:
        book.close()
    if not result.tables and not any(p.is_error for p in result.problems):
        result.problems.append(
            RowProblem(
                "file",
                None,
                "",
                "the workbook has none of the sheets tasks, links and allocation",
            )
        )
    return result


def _digits_in(error: ValueError) -> str:
    """The digit count Python's refusal of a long integer names ("value has 5000 digits")."""
    found = re.search(r"has (\d+) digits", str(error))
    return f"{int(found[1]):,}" if found else "too many"


def _sheet_cells(
    sheet: Any,
    name: str,
    max_rows: int,
    problems: list[RowProblem],
    *,
    formulas: bool = True,
) -> list[tuple[int, list[Any]]] | None:
    """The sheet's non-empty rows as ``(row number, values)``; ``None`` when the sheet
    is refused (too many rows or columns, or formulas in it)."""
    rows: list[tuple[int, list[Any]]] = []
    refused = False
    header: list[Any] = []
    # A declared size much larger than the data (padding) is walked, but not for ever.
    walk = enumerate(sheet.iter_rows(min_row=1, max_col=MAX_COLUMNS + 1), 1)
    number = 0
    while True:
        try:
            number, cells = next(walk)
        except StopIteration:
            break
        except ValueError as error:
            # openpyxl converts a number cell as it reads the row: one of more than
            # INTEGER_DIGITS digits cannot be converted (its column is not known yet).
            problems.append(
                RowProblem(
                    name,
                    number + 1,
                    "",
                    f"a number cell of this row has {_digits_in(error)} digits; the "
                    f"import reads integers of at most {limits.INTEGER_DIGITS:,} digits "
                    "(limit INTEGER_DIGITS)",
                )
            )
            return None
        if number > 20 * max_rows + 1:
            break
        values: list[Any] = []
        for cell in cells:
            value = cell.value
            if formulas and getattr(cell, "data_type", None) == "f":
                position = len(values)
                column = _column_letter(position + 1)
                if rows and position < len(header) and isinstance(header[position], str):
                    column = header[position]  # the header's name, once there is one
                problems.append(
                    RowProblem(
                        name,
                        number,
                        column,
                        "holds a formula; the import reads values only and never "
                        "evaluates formulas: type the value itself",
                    )
                )
                refused = True
                value = None
            elif isinstance(value, str):
                value = value.strip()
            values.append(None if value == "" else value)
        if len(values) > MAX_COLUMNS and values[MAX_COLUMNS] is not None:
            problems.append(
                RowProblem(
                    name,
                    number,
                    _column_letter(MAX_COLUMNS + 1),
                    f"the sheet has more than {MAX_COLUMNS} columns",
                )
            )
            return None
        values = values[:MAX_COLUMNS]
        while values and values[-1] is None:
            values.pop()
        if values:
            rows.append((number, values))
            header = header or values
            if len(rows) > max_rows + 1:
                problems.append(
                    RowProblem(
                        name,
                        None,
                        "",
                        f"the sheet has more than {max_rows} rows; the import reads at "
                        f"most {max_rows} rows per sheet",
                    )
                )
                return None
    return None if refused else rows


_ABOUT_LINE = re.compile(r"^#\s*([A-Za-z_][\w ]*?)\s*:\s?(.*)$")


def _read_csv(data: bytes, max_rows: int) -> _Read:
    result = _Read("csv")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data[: error.start].count(b"\n") + 1
        # ED A0..BF is how a lone surrogate (U+D800..DFFF) would be written: not UTF-8.
        odd = data[error.start : error.start + 2]
        surrogate = len(odd) == 2 and odd[0] == 0xED and odd[1] >= 0xA0
        result.problems.append(
            RowProblem(
                "file",
                line,
                "",
                (
                    "holds a lone surrogate (not text: there is no UTF-8 for it); "
                    if surrogate
                    else ""
                )
                + "the file is neither an XLSX workbook nor UTF-8 text; save it as CSV UTF-8",
            )
        )
        return result
    if "\x00" in text:
        result.problems.append(
            RowProblem("file", None, "", "the file holds NUL characters; it is not CSV text")
        )
        return result
    lines = text.splitlines(keepends=True)
    skipped = 0
    while skipped < len(lines) and (lines[skipped].startswith("#") or not lines[skipped].strip()):
        match = _ABOUT_LINE.match(lines[skipped].rstrip("\r\n"))
        if match:
            result.about[match[1].strip()] = match[2].strip()
        skipped += 1
    result.comment_lines = skipped
    reader = csv.reader(io.StringIO("".join(lines[skipped:]), newline=""), strict=True)
    cells: list[tuple[int, list[Any]]] = []
    try:
        for number, record in enumerate(reader, 1):
            if len(record) > MAX_COLUMNS:
                result.problems.append(
                    RowProblem(
                        "allocation",
                        number,
                        _column_letter(MAX_COLUMNS + 1),
                        f"the row has more than {MAX_COLUMNS} columns",
                    )
                )
                return result
            values = [_undefused(value.strip()) or None for value in record]
            while values and values[-1] is None:
                values.pop()
            if values:
                cells.append((number, values))
                if len(cells) > max_rows + 1:
                    result.problems.append(
                        RowProblem(
                            "allocation",
                            None,
                            "",
                            f"the file has more than {max_rows} rows; the import reads at "
                            f"most {max_rows}",
                        )
                    )
                    return result
    except csv.Error as error:
        result.problems.append(
            RowProblem(
                "allocation",
                reader.line_num,
                "",
                f"the CSV cannot be read here: {error}",
            )
        )
        return result
    if not cells:
        result.problems.append(RowProblem("allocation", None, "", "the file has no header row"))
        return result
    header = cells[0][1]
    if len(header) == 1 and isinstance(header[0], str) and ";" in header[0]:
        result.problems.append(
            RowProblem(
                "allocation",
                cells[0][0],
                "",
                "the header is one column holding semicolons; save the file as "
                "comma-separated CSV",
            )
        )
        return result
    table = _table("allocation", cells, result.problems)
    if table is not None:
        result.tables["allocation"] = table
    return result


#: First characters a spreadsheet program reads as the start of a formula; the CSV
#: export puts an apostrophe before a text that starts with one (OWASP's advice on CSV
#: injection), which the import takes off again.
_FORMULA_STARTS = ("=", "+", "-", "@")


def _undefused(text: str) -> str:
    if text.startswith("'") and text[1:].startswith(_FORMULA_STARTS):
        return text[1:]
    return text


def _table(
    name: str, cells: list[tuple[int, list[Any]]], problems: list[RowProblem]
) -> Table | None:
    """Check a sheet's header and key its rows by column; ``None`` when a required
    column is missing (the sheet's rows cannot be read then)."""
    if not cells:
        problems.append(RowProblem(name, None, "", "the sheet is empty: it needs a header row"))
        return None
    header_row, header = cells[0]
    known = _COLUMNS[name]
    columns: list[str] = []
    usable = True
    for index, value in enumerate(header, 1):
        label = "" if value is None else str(value).strip()
        columns.append(label)
        if not label:
            if any(len(row) >= index and row[index - 1] is not None for _, row in cells[1:]):
                problems.append(
                    RowProblem(
                        name,
                        header_row,
                        _column_letter(index),
                        "the column has values but no name in the header row",
                    )
                )
            continue
        if label not in known:
            problems.append(
                RowProblem(
                    name,
                    header_row,
                    label,
                    f"unknown column; the {name} sheet has the columns {', '.join(known)}",
                )
            )
        elif columns.index(label) != index - 1:
            problems.append(RowProblem(name, header_row, label, "the column appears twice"))
            usable = False
    for required in _REQUIRED[name]:
        if required not in columns:
            problems.append(
                RowProblem(name, header_row, required, "missing column: the sheet needs it")
            )
            usable = False
    if not usable:
        return None
    rows = []
    refused = False
    for number, values in cells:
        for index, value in enumerate(values):
            message = _cell_refused(value)
            if message:
                label = columns[index] if index < len(columns) and columns[index] else ""
                column = label or _column_letter(index + 1)
                problems.append(RowProblem(name, number, column, message))
                refused = True
    if refused:
        return None
    for number, values in cells[1:]:
        row = {
            label: values[index]
            for index, label in enumerate(columns)
            if label in known and index < len(values)
        }
        rows.append((number, row))
    return Table(name, [c for c in columns if c in known], rows, header_row)


_DIGIT_RUN = re.compile(rf"\d{{{limits.INTEGER_DIGITS + 1},}}")


def _cell_refused(value: Any) -> str | None:
    """Why a cell's raw value is not read at all: it holds a lone surrogate (not text:
    no UTF-8 for it), is longer than any text of a study, or holds an integer longer
    than Python converts (``limits.INTEGER_DIGITS``)."""
    if isinstance(value, int) and not isinstance(value, bool):
        if abs(value) >= 10**limits.INTEGER_DIGITS:
            return f"holds an integer of more than {limits.INTEGER_DIGITS:,} digits"
        return None
    if not isinstance(value, str):
        return None
    for char in value:
        if "\ud800" <= char <= "\udfff":
            return f"contains a lone surrogate (U+{ord(char):04X}), which is not text"
    if len(value) > limits.NOTE_LENGTH:
        return (
            f"is {len(value):,} characters long; a cell holds at most "
            f"{limits.NOTE_LENGTH:,} (limit NOTE_LENGTH)"
        )
    run = _DIGIT_RUN.search(value)
    if run:
        return (
            f"holds a number of more than {limits.INTEGER_DIGITS:,} digits (limit INTEGER_DIGITS)"
        )
    return None


# -- cells to study-file values -------------------------------------------------------


class _CellError(Exception):
    """A cell's value cannot be used; the message says why."""


def _normal_number(value: int | float) -> int | float:
    """A number as the study file writes it: whole numbers without a decimal part."""
    if isinstance(value, float) and value.is_integer() and abs(value) < 2**53:
        return int(value)
    return value


def _refuse_odd(value: Any) -> None:
    if isinstance(value, bool):
        raise _CellError("is TRUE or FALSE; expected here is text or a number")
    if isinstance(value, datetime.date | datetime.time | datetime.timedelta):
        raise _CellError("is a date or time; type it as text or as a number of seconds")


def _text(value: Any) -> str | None:
    """A text cell: ``None`` when empty; a number typed into it is taken as its text."""
    if value is None:
        return None
    _refuse_odd(value)
    if isinstance(value, int | float):
        return str(_normal_number(value))
    return str(value).strip() or None


def _number(value: Any) -> int | float | None:
    if value is None:
        return None
    _refuse_odd(value)
    if isinstance(value, str):
        try:
            number = float(value.strip())
        except ValueError:
            raise _CellError(f"{value!r} is not a number") from None
        value = number
    if isinstance(value, float) and not math.isfinite(value):
        raise _CellError("is not a finite number")
    return _normal_number(value)


def _json(value: Any) -> Any:
    """A cell holding compact JSON (a number may be typed as a number)."""
    if value is None:
        return None
    _refuse_odd(value)
    if isinstance(value, int | float):
        return _number(value)
    data, problems = parse_json_text(str(value))
    if problems:
        message = problems[0].message.replace("the file is not valid JSON", "not valid JSON")
        raise _CellError(message)
    return data


def _parsed(value: Any, parse: Callable[[str], Any]) -> Any:
    """A text cell read by ``parse`` (``None`` when empty); its ValueError is the cell's
    problem."""
    text = _text(value)
    if text is None:
        return None
    try:
        return parse(text)
    except ValueError as problem:
        raise _CellError(str(problem)) from None


def _needs(value: Any) -> list[str] | dict[str, list[str]] | None:
    """Capabilities, comma-separated, or per stage (``decision: a, b; action: c``)."""
    return _parsed(value, parse_needs)


def _reliability(value: Any) -> dict[str, Any] | None:
    """How often the automation fails: ``5 in 1000; detected by alert; …``."""
    return _parsed(value, parse_reliability_cell)


def _people(value: Any) -> str | list[str] | None:
    """A person's id, or the ids of people asked in turn, separated by commas."""
    text = _text(value)
    return None if text is None else parse_people_cell(text)


def _monitoring(value: Any) -> str | dict[str, Any] | None:
    """A monitoring style: each, exception, periodic N or continuous S."""
    return _parsed(value, parse_monitoring_cell)


_STAGE_LEVEL = re.compile(r"^([A-Za-z_]+)\s*[:=]?\s*(\S+)$")
_LEVELS_HELP = (
    "write one level (7) or one per stage (acquisition 7; analysis 7; decision 5; action 5)"
)


def _level_number(text: str) -> int:
    try:
        number = float(text)
    except ValueError:
        raise _CellError(f"{text!r} is not a level: {_LEVELS_HELP}") from None
    if not number.is_integer():
        raise _CellError(f"{text} is not a level: levels are whole numbers from 1 to 10")
    return int(number)


def _levels(value: Any) -> int | dict[str, int] | None:
    """The levels cell: empty, one level, or ``stage level`` pairs joined with ``;``."""
    if value is None:
        return None
    _refuse_odd(value)
    if isinstance(value, int | float):
        return _level_number(str(value))
    text = str(value).strip()
    if ";" not in text and not re.search(r"[A-Za-z]", text):
        return _level_number(text)
    levels: dict[str, int] = {}
    for part in filter(None, (p.strip() for p in text.split(";"))):
        match = _STAGE_LEVEL.match(part)
        if match is None:
            raise _CellError(f"{part!r} is not a stage and a level: {_LEVELS_HELP}")
        stage = match[1].lower()
        if stage not in STAGES:
            raise _CellError(f"{match[1]!r} is not a stage; the stages are {', '.join(STAGES)}")
        if stage in levels:
            raise _CellError(f"gives the {stage} stage twice")
        levels[stage] = _level_number(match[2])
    return levels


def _applies(value: Any) -> bool | str:
    """Yes, no, or "no, chain goes on" (not done, its chain going on: ``"pass"``)."""
    if value is None or value is True:
        return True
    if value is False:
        return False
    text = str(value).strip().lower()
    if text in ("yes", "y", "true"):
        return True
    if text in ("no", "n", "false"):
        return False
    if text == PASS_THROUGH_WORDS:
        return "pass"
    raise _CellError(f"{value!r} is not yes, no or {PASS_THROUGH_WORDS!r}")


_TASK_CELLS = {
    "id": _text,
    "parent": _text,
    "title": _text,
    "occurs": _json,
    "duration_s": _json,
    "window_s": _number,
    "severity": _number,
    "demands": _json,
    "split": _json,
    "needs": _needs,
    "notes": _text,
}
_LINK_CELLS = {
    "from": _text,
    "to": _text,
    "kind": _text,
    "lag_s": _json,
    "probability": _number,
    "notes": _text,
}
_ASSIGNMENT_CELLS = {
    "task": _text,
    "human": _people,
    "automation": _text,
    "levels": _levels,
    "accountable": _text,
    "feedback": _text,
    "initiator": _text,
    "monitoring": _monitoring,
    "reliability": _reliability,
    "escalate_after_s": _number,
    "rationale": _text,
    "status": _text,
    "applies": _applies,
}


def _cells(
    table: Table, number: int, row: dict[str, Any], readers: dict, problems: list[RowProblem]
) -> dict[str, Any]:
    """The row's values for the columns the sheet has, read by ``readers``; a cell that
    cannot be read is a problem and left out."""
    values: dict[str, Any] = {}
    for column, reader in readers.items():
        if column not in table.columns:
            continue
        try:
            values[column] = reader(row.get(column))
        except _CellError as error:
            problems.append(RowProblem(table.name, number, column, str(error)))
    return values


def _with(item: dict[str, Any], values: dict[str, Any], order: tuple[str, ...]) -> dict:
    """``item`` with ``values`` set (an empty value removes the key), keys in ``order``."""
    merged = dict(item)
    for key, value in values.items():
        if value is None:
            merged.pop(key, None)
        else:
            merged[key] = value
    return {key: merged[key] for key in order if key in merged}


# -- the proposal ---------------------------------------------------------------------


@dataclass
class _Rows:
    """Where each item of the proposed document came from in the file."""

    tasks: dict[str, int] = field(default_factory=dict)
    links: dict[int, int] = field(default_factory=dict)
    assignments: dict[str, int] = field(default_factory=dict)


def propose(
    document: dict[str, Any],
    plan_key: str,
    upload: Upload,
    *,
    max_bytes: int = MAX_BYTES,
    max_rows: int = MAX_ROWS,
) -> Proposal:
    """The study ``document`` with the file's tasks, links and plan assignments applied.

    Parameters
    ----------
    document : dict
        The stored study in the study-file form (not changed).
    plan_key : str
        The plan whose assignments the ``allocation`` sheet sets.
    upload : Upload
        The CSV or XLSX file.

    Returns
    -------
    Proposal
        The proposed document (``None`` when the file could not be read at all) and
        every problem, new errors of the whole study included; it may be applied only
        when it has no error.
    """
    read = read_tables(upload, max_bytes=max_bytes, max_rows=max_rows)
    problems = list(read.problems)
    proposal = Proposal(
        None,
        problems,
        tuple(part for part in PARTS if part in read.tables),
        read.kind,
        read.about,
        read.comment_lines,
    )
    plan_index = next(
        (i for i, plan in enumerate(document.get("plans", [])) if plan.get("id") == plan_key),
        None,
    )
    if plan_index is None:
        problems.append(RowProblem("file", None, "", f"the study has no plan {plan_key!r}"))
        return proposal
    if any(p.is_error and p.sheet == "file" for p in problems) or not read.tables:
        return proposal
    _about_warnings(read.about, document, plan_key, problems)
    proposed = copy.deepcopy(document)
    rows = _Rows()
    if "tasks" in read.tables:
        _apply_tasks(proposed, read.tables["tasks"], rows, problems)
    if "links" in read.tables:
        _apply_links(proposed, read.tables["links"], rows, problems)
    if "allocation" in read.tables:
        _apply_assignments(
            proposed, proposed["plans"][plan_index], read.tables["allocation"], rows, problems
        )
    before = load_study(document)
    known = {(p.path, p.message) for p in before.problems}
    proposal.existing_errors = len(before.errors)
    # A cell that could not be read was left out of the proposal; what the core then
    # says about that cell, or about its row as a whole, follows from that and would
    # only mislead ("needs levels" under levels that were given but misspelt).
    unread_cells = {(p.sheet, p.row, p.column) for p in problems if p.row is not None}
    unread_rows = {(sheet, row) for sheet, row, _ in unread_cells}
    after = load_study(proposed)
    for problem in after.problems:
        if (problem.path, problem.message) in known:
            continue
        sheet, row, column, message = _locate(
            problem.path, problem.message, proposed, plan_index, rows
        )
        if (sheet, row, column) in unread_cells or (
            (sheet, row) in unread_rows and column in ("", "task")
        ):
            continue
        problems.append(RowProblem(sheet, row, column, message, problem.level))
    proposal.document = proposed
    proposal.problems = _ordered(problems)
    return proposal


def _about_warnings(
    about: dict[str, str], document: dict[str, Any], plan_key: str, problems: list[RowProblem]
) -> None:
    """Warn when the file says it was exported from another study or plan."""
    study_key = document.get("study", {}).get("id")
    if about.get("study") and about["study"] != study_key:
        problems.append(
            RowProblem(
                "file",
                None,
                "",
                f"the file was exported from the study {about['study']!r}; it is being "
                f"read into {study_key!r}",
                "warning",
            )
        )
    if about.get("plan") and about["plan"] != plan_key:
        problems.append(
            RowProblem(
                "file",
                None,
                "",
                f"the file was exported from the plan {about['plan']!r}; its allocation "
                f"will set the plan {plan_key!r}",
                "warning",
            )
        )


def _apply_tasks(
    document: dict[str, Any], table: Table, rows: _Rows, problems: list[RowProblem]
) -> None:
    """Upsert the sheet's tasks by id: an existing task keeps the values of columns the
    sheet does not have; a new one is added after the others."""
    index = {task["id"]: i for i, task in enumerate(document["tasks"])}
    for number, row in table.rows:
        values = _cells(table, number, row, _TASK_CELLS, problems)
        task_id = values.get("id")
        if task_id is None:
            if "id" in values:
                problems.append(RowProblem("tasks", number, "id", "the task has no id"))
            continue
        if task_id in rows.tasks:
            problems.append(
                RowProblem(
                    "tasks",
                    number,
                    "id",
                    f"the task {task_id} is on row {rows.tasks[task_id]} already",
                )
            )
            continue
        rows.tasks[task_id] = number
        if task_id in index:
            document["tasks"][index[task_id]] = _with(
                document["tasks"][index[task_id]], values, TASK_COLUMNS
            )
        else:
            index[task_id] = len(document["tasks"])
            document["tasks"].append(_with({}, values, TASK_COLUMNS))


def _apply_links(
    document: dict[str, Any], table: Table, rows: _Rows, problems: list[RowProblem]
) -> None:
    """The sheet's links replace the study's links, in the sheet's order."""
    document["links"] = []
    for number, row in table.rows:
        values = _cells(table, number, row, _LINK_CELLS, problems)
        rows.links[len(document["links"])] = number
        document["links"].append(_with({}, values, LINK_COLUMNS))


def _apply_assignments(
    document: dict[str, Any],
    plan: dict[str, Any],
    table: Table,
    rows: _Rows,
    problems: list[RowProblem],
) -> None:
    """Set the plan's assignment of each task on the sheet. Empty human and automation
    with applies "yes" means the task is not allocated; applies "no" means the task is
    not done under the plan. An assignment's duration override, which the sheet does not
    carry, is kept."""
    assignments = plan["assignments"]
    task_ids = {task.get("id") for task in document["tasks"]}
    for number, row in table.rows:
        values = _cells(table, number, row, _ASSIGNMENT_CELLS, problems)
        task_id = values.pop("task", None)
        if task_id is None:
            problems.append(RowProblem("allocation", number, "task", "the row names no task"))
            continue
        if task_id in rows.assignments:
            problems.append(
                RowProblem(
                    "allocation",
                    number,
                    "task",
                    f"the task {task_id} is on row {rows.assignments[task_id]} already",
                )
            )
            continue
        rows.assignments[task_id] = number
        if task_id not in task_ids:
            problems.append(
                RowProblem(
                    "allocation",
                    number,
                    "task",
                    f"no task {task_id} in the study or on the tasks sheet",
                )
            )
            continue
        existing = assignments.get(task_id, {})
        kept = "pass" if existing.get("pass_through") else existing.get("applies", True)
        applies = values.pop("applies", kept)
        merged = _with(existing, values, _ASSIGNMENT_FIELDS)
        merged.pop("applies", None)
        merged.pop("pass_through", None)
        if applies is not True:
            # Not done under the plan: keep what the row gives and the words kept from
            # before (an agent the row names is the core's to refuse).
            merged = {
                key: value
                for key, value in merged.items()
                if key in values or key in ("rationale", "status")
            }
            merged["applies"] = False
            if applies == "pass":
                merged["pass_through"] = True
        elif "human" not in merged and "automation" not in merged:
            # Not allocated: the row's other cells have nothing to belong to.
            assignments.pop(task_id, None)
            continue
        assignments[task_id] = merged


_PLAIN_PATH = re.compile(r"^\$\.(tasks|links)\[(\d+)\](?:\.(\w+)|\[[^\]]*\])?")
_ASSIGNMENT_PATH = re.compile(
    r"^\$\.plans\[(\d+)\]\.assignments(?:\.([A-Za-z0-9_-]+)|\[(\"(?:[^\"\\]|\\.)*\")\])?"
    r"(?:\.(\w+))?"
)


def _locate(
    path: str, message: str, document: dict[str, Any], plan_index: int, rows: _Rows
) -> tuple[str, int | None, str, str]:
    """Sheet, row, column and message of a core problem at ``path``. A problem about a
    part of the study the file does not hold keeps its JSON path (sheet ``study``)."""
    match = _PLAIN_PATH.match(path)
    if match:
        part, index, key = match[1], int(match[2]), match[3] or ""
        if part == "tasks" and index < len(document["tasks"]):
            task_id = document["tasks"][index].get("id")
            if task_id in rows.tasks:
                column = key if key in TASK_COLUMNS else ""
                return "tasks", rows.tasks[task_id], column, message
        if part == "links" and index in rows.links:
            column = key if key in LINK_COLUMNS else ""
            return "links", rows.links[index], column, message
        return "study", None, path, message
    match = _ASSIGNMENT_PATH.match(path)
    if match and int(match[1]) == plan_index:
        task_id = match[2] or (json.loads(match[3]) if match[3] else None)
        key = match[4] or ""
        if task_id is None:
            if rows.assignments:
                return "allocation", None, "", message
        elif task_id in rows.assignments:
            if key == "duration_s":
                return (
                    "allocation",
                    rows.assignments[task_id],
                    "",
                    f"the assignment's duration override (kept from the study) {message}",
                )
            column = key if key in ASSIGNMENT_COLUMNS else "task"
            return "allocation", rows.assignments[task_id], column, message
    return "study", None, path, message


_SHEET_ORDER = {"file": 0, "tasks": 1, "links": 2, "allocation": 3, "study": 4}


def _ordered(problems: list[RowProblem]) -> list[RowProblem]:
    """Errors first, then warnings; each by sheet, row, column; repeats removed."""
    unique = list(dict.fromkeys(problems))
    return sorted(
        unique,
        key=lambda p: (
            not p.is_error,
            _SHEET_ORDER.get(p.sheet, 9),
            p.row if p.row is not None else -1,
        ),
    )


# -- what would change ----------------------------------------------------------------


@dataclass(frozen=True)
class FieldChange:
    """One field of one item, before and after, as text for the screen."""

    field: str
    before: str
    after: str


@dataclass(frozen=True)
class ItemChange:
    """An item added, changed (with its fields) or removed."""

    key: str
    change: str
    fields: tuple[FieldChange, ...] = ()
    before: Any = None
    after: Any = None


@dataclass
class Changes:
    """What applying a proposal would change, item by item and field by field."""

    parts: tuple[str, ...]
    plan: str
    tasks: list[ItemChange] = field(default_factory=list)
    links: list[ItemChange] = field(default_factory=list)
    links_before: int = 0
    links_after: int = 0
    assignments: list[ItemChange] = field(default_factory=list)

    @property
    def empty(self) -> bool:
        return not (self.tasks or self.links or self.assignments)

    def counts(self) -> dict[str, int]:
        def count(items: list[ItemChange], change: str) -> int:
            return sum(1 for item in items if item.change == change)

        return {
            "tasks_added": count(self.tasks, "added"),
            "tasks_changed": count(self.tasks, "changed"),
            "links_added": count(self.links, "added"),
            "links_changed": count(self.links, "changed"),
            "links_removed": count(self.links, "removed"),
            "assignments_added": count(self.assignments, "added"),
            "assignments_changed": count(self.assignments, "changed"),
            "assignments_removed": count(self.assignments, "removed"),
        }

    def sentence(self) -> str:
        """The changes in one sentence, for messages: "1 task added, 1 task changed;
        links replaced (1 before, 2 after: 1 link added); plan auto: 3 assignments
        changed"."""
        if self.empty:
            return "nothing changes"
        c = self.counts()

        def listed(kind: str, pairs: tuple[tuple[str, str], ...]) -> str:
            words = []
            for key, verb in pairs:
                if c[key]:
                    noun = kind if c[key] == 1 else f"{kind}s"
                    words.append(f"{c[key]} {noun} {verb}")
            return ", ".join(words)

        parts = []
        if self.tasks:
            parts.append(listed("task", (("tasks_added", "added"), ("tasks_changed", "changed"))))
        if self.links:
            detail = listed(
                "link",
                (
                    ("links_added", "added"),
                    ("links_changed", "changed"),
                    ("links_removed", "removed"),
                ),
            )
            parts.append(
                f"links replaced ({self.links_before} before, {self.links_after} after: {detail})"
            )
        if self.assignments:
            detail = listed(
                "assignment",
                (
                    ("assignments_added", "added"),
                    ("assignments_changed", "changed"),
                    ("assignments_removed", "no longer allocated"),
                ),
            )
            parts.append(f"plan {self.plan}: {detail}")
        return "; ".join(parts)

    def audit(self) -> tuple[dict[str, Any], dict[str, Any]]:
        """The changed parts before and after, shaped as a study file: the tasks and
        links that differ (an item absent on one side is left out there), and the plan
        with the assignments that differ, for the audit trail."""
        before: dict[str, Any] = {}
        after: dict[str, Any] = {}
        for name, items in (("tasks", self.tasks), ("links", self.links)):
            if items:
                before[name] = [item.before for item in items if item.before is not None]
                after[name] = [item.after for item in items if item.after is not None]
        if self.assignments:
            for side, attribute in ((before, "before"), (after, "after")):
                assignments = {
                    item.key: getattr(item, attribute)
                    for item in self.assignments
                    if getattr(item, attribute) is not None
                }
                side["plans"] = [{"id": self.plan, "assignments": assignments}]
        return before, after


def _shown(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False, separators=(",", ":"))


def _fields(before: dict[str, Any], after: dict[str, Any], order: tuple[str, ...]):
    names = [name for name in order if name in before or name in after]
    names += sorted((set(before) | set(after)) - set(order))
    return tuple(
        FieldChange(name, _shown(before.get(name)), _shown(after.get(name)))
        for name in names
        if before.get(name) != after.get(name)
    )


def _compare(
    before: dict[str, dict], after: dict[str, dict], order: tuple[str, ...]
) -> list[ItemChange]:
    result = []
    for key, item in after.items():
        if key not in before:
            result.append(ItemChange(key, "added", _fields({}, item, order), None, item))
        elif before[key] != item:
            result.append(
                ItemChange(key, "changed", _fields(before[key], item, order), before[key], item)
            )
    for key, item in before.items():
        if key not in after:
            result.append(ItemChange(key, "removed", _fields(item, {}, order), item, None))
    return result


def _link_key(link: dict[str, Any]) -> str:
    return f"{link.get('from')} {link.get('kind')} {link.get('to')}"


def changes_between(
    before: dict[str, Any], after: dict[str, Any], plan_key: str, parts: tuple[str, ...]
) -> Changes:
    """Compare two study documents in the parts a file changed, field by field."""
    changes = Changes(parts, plan_key)
    changes.tasks = _compare(
        {t["id"]: t for t in before["tasks"]}, {t["id"]: t for t in after["tasks"]}, TASK_COLUMNS
    )
    if "links" in parts:
        changes.links_before, changes.links_after = len(before["links"]), len(after["links"])
        changes.links = _compare(
            {_link_key(link): link for link in before["links"]},
            {_link_key(link): link for link in after["links"]},
            LINK_COLUMNS,
        )

    def plan(document: dict[str, Any]) -> dict[str, dict]:
        for item in document["plans"]:
            if item["id"] == plan_key:
                return item["assignments"]
        return {}

    changes.assignments = _compare(plan(before), plan(after), _ASSIGNMENT_FIELDS)
    return changes
