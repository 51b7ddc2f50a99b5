"""The allocation workbook (XLSX): one sheet per table of the spreadsheet layout.

pandas writes the sheets through openpyxl. Text cells are stored as text, never as
formulas, whatever they begin with. The same export gives the same bytes: the workbook's
created and modified dates are the export's date, and every zip entry carries that date
too (openpyxl stamps both with the time of saving).
"""

from __future__ import annotations

import io
import re
import zipfile
from datetime import UTC

import pandas as pd
from openpyxl.utils import get_column_letter

from .source import ExportSource
from .table import sheet_tables

__all__ = ["allocation_xlsx"]

_CORE_PROPERTIES = "docProps/core.xml"
_DATE_ELEMENT = re.compile(r"(<dcterms:(created|modified)[^>]*>)[^<]*(</dcterms:\2>)")
#: Widest column, in characters, so long texts wrap instead of running off.
_MAX_WIDTH = 60


def _widths(frame: pd.DataFrame) -> list[int]:
    widths = []
    for column in frame.columns:
        texts = [str(column), *("" if pd.isna(v) else str(v) for v in frame[column])]
        widths.append(min(_MAX_WIDTH, max(len(text) for text in texts) + 2))
    return widths


def _as_text(sheet) -> None:
    """Store every formula-looking cell as the text it is (no formula injection)."""
    for row in sheet.iter_rows():
        for cell in row:
            if cell.data_type == "f":
                cell.data_type = "s"


def _fixed(data: bytes, stamp: str, date_time: tuple[int, ...]) -> bytes:
    """The workbook with fixed property dates and zip entry times."""
    source = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            content = source.read(info.filename)
            if info.filename == _CORE_PROPERTIES:
                text = content.decode("utf-8")
                text = _DATE_ELEMENT.sub(lambda match: match[1] + stamp + match[3], text)
                content = text.encode("utf-8")
            entry = zipfile.ZipInfo(info.filename, date_time=date_time)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o600 << 16
            target.writestr(entry, content)
    return out.getvalue()


def allocation_xlsx(source: ExportSource) -> bytes:
    """The workbook of one plan's export as bytes."""
    tables = sheet_tables(source)
    buffer = io.BytesIO()
    with pd.ExcelWriter(buffer, engine="openpyxl") as writer:
        for name, frame in tables.items():
            header = name != "cautions"
            frame.to_excel(writer, sheet_name=name, index=False, header=header)
            sheet = writer.sheets[name]
            _as_text(sheet)
            for index, width in enumerate(_widths(frame), start=1):
                sheet.column_dimensions[get_column_letter(index)].width = width
            if header:
                sheet.freeze_panes = "A2"
    moment = source.exported.astimezone(UTC).replace(microsecond=0)
    stamp = moment.strftime("%Y-%m-%dT%H:%M:%SZ")
    date_time = tuple(moment.timetuple())[:6]
    return _fixed(buffer.getvalue(), stamp, date_time)
