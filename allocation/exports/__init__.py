"""Exports of a plan: the allocation table (CSV, XLSX), and the printable report (HTML, PDF).

Each export states the study, the plan, the snapshot it comes from (or "not frozen"), its
date, Baton's version, the assumptions in force, the methods with their sources and the
cautions; the same input gives the same bytes. No views here: the views and the
``export_study`` command call :func:`export_bytes`.
"""

from __future__ import annotations

from collections.abc import Callable

from .csv import allocation_csv
from .report import report_html, report_pdf
from .source import NOT_FROZEN, ExportSource, export_source, snapshot_by_prefix, snapshot_of_study
from .xlsx import allocation_xlsx

__all__ = [
    "FORMATS",
    "NOT_FROZEN",
    "ExportFormat",
    "ExportSource",
    "export_bytes",
    "export_filename",
    "export_source",
    "snapshot_by_prefix",
    "snapshot_of_study",
]


class ExportFormat:
    """One export format: its file name ending, media type and writer."""

    def __init__(self, suffix: str, content_type: str, write: Callable[[ExportSource], bytes]):
        self.suffix = suffix
        self.content_type = content_type
        self.write = write


#: The formats of a plan's export, by the name the URLs and the command use.
FORMATS: dict[str, ExportFormat] = {
    "csv": ExportFormat("allocation.csv", "text/csv; charset=utf-8", allocation_csv),
    "xlsx": ExportFormat(
        "allocation.xlsx",
        "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
        allocation_xlsx,
    ),
    "html": ExportFormat("report.html", "text/html; charset=utf-8", report_html),
    "pdf": ExportFormat("report.pdf", "application/pdf", report_pdf),
}


def export_bytes(source: ExportSource, fmt: str) -> bytes:
    """The export of ``source`` in format ``fmt`` (a key of :data:`FORMATS`)."""
    return FORMATS[fmt].write(source)


def export_filename(study_key: str, plan_id: str, fmt: str, snapshot: str | None) -> str:
    """A safe file name: ``home-heating.auto.3f2a9c1b0d4e.allocation.csv``."""
    from django.utils.text import slugify

    parts = [slugify(study_key) or "study", slugify(plan_id) or "plan"]
    if snapshot:
        parts.append(snapshot[:12])
    return ".".join([*parts, FORMATS[fmt].suffix])
