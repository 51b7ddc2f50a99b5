"""The printable report of one plan: an HTML page with print styles, and a PDF.

Both carry the same content: a header naming the study, plan, snapshot, date and Baton's
version; the headline figures; the charts (PNG, :mod:`.images`); the allocation,
handover, finding and workload tables; the assumptions in force; the methods with their
sources; and the cautions. The HTML is a Django template (autoescaped: user text stays
text); the PDF is laid out with reportlab's platypus in invariant mode, its dates fixed
to the export's date, with DejaVu Sans (shipped with matplotlib) so every character of a
study prints.
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from typing import Any
from xml.sax.saxutils import escape

from django.template.loader import render_to_string

from allocation.core.analysis.report import METHODS
from allocation.core.cautions import CAUTIONS
from allocation.core.describe import seconds_text

from .images import Chart, report_charts
from .source import ExportSource
from .table import allocation_rows, assumptions_table, workload_table

__all__ = ["ReportData", "report_data", "report_html", "report_pdf"]

#: The allocation table as the report prints it: heading and row key ("degrees" joins
#: the four stage degrees).
ALLOCATION_HEADINGS = (
    ("Task", "task"),
    ("Goal", "goal"),
    ("Title", "title"),
    ("Category", "category"),
    ("Person", "human"),
    ("Device", "automation"),
    ("Levels", "levels"),
    ("Level words", "level_words"),
    ("Degrees acq / ana / dec / act", "degrees"),
    ("Accountable", "accountable"),
    ("Feedback", "feedback"),
    ("Initiator", "initiator"),
    ("Status", "status"),
    ("Applies", "applies"),
    ("Occurrences / day", "occurrences_per_day"),
    ("Person s / day", "person_s_per_day"),
    ("Awareness", "awareness"),
    ("Handovers", "handovers"),
    ("Findings", "findings"),
    ("Rationale", "rationale"),
)
#: The PDF prints the allocation table in two parts: the decisions, then the figures.
_PDF_DECISIONS = (
    "task",
    "goal",
    "title",
    "category",
    "human",
    "automation",
    "levels",
    "level_words",
    "accountable",
    "feedback",
    "initiator",
    "status",
    "applies",
    "rationale",
)
_PDF_DECISION_WIDTHS = (
    0.045,
    0.04,
    0.12,
    0.06,
    0.065,
    0.065,
    0.08,
    0.14,
    0.065,
    0.06,
    0.06,
    0.055,
    0.04,
    0.105,
)
_PDF_FIGURES = (
    "task",
    "degrees",
    "occurrences_per_day",
    "person_s_per_day",
    "awareness",
    "handovers",
    "findings",
)
_DECIMALS = {"occurrences_per_day": 4, "person_s_per_day": 2, "awareness": 3}
HANDOVER_HEADINGS = (
    "Source",
    "From",
    "To",
    "Agents",
    "Per day",
    "Time ratio",
    "Likelihood",
    "Severity",
    "Risk",
    "Band",
    "Cue",
)
FINDING_HEADINGS = ("Kind", "Severity", "Tasks", "Message")
PEOPLE_HEADINGS = (
    "Person",
    "Time / day",
    "Interactions / day",
    "Interruptions / day",
    "At night / day",
    "Monitoring / day",
    "Share of waking day",
)
ASSUMPTION_HEADINGS = ("Key", "Value in force", "Default", "Status", "Source")


@dataclass(frozen=True)
class ReportData:
    """Everything the report shows, as text cells (the HTML and the PDF share it)."""

    title: str
    stamp: list[tuple[str, str]]
    headline: list[tuple[str, str]]
    people: list[list[str]]
    charts: list[Chart]
    allocation: list[list[str]]
    handovers: list[list[str]]
    findings: list[list[str]]
    workload_headings: list[str]
    workload: list[list[str]]
    assumptions: list[list[str]]
    methods: list[tuple[str, str]]
    cautions: str
    risk_note: str

    @property
    def allocation_headings(self) -> list[str]:
        return [heading for heading, _key in ALLOCATION_HEADINGS]

    handover_headings = HANDOVER_HEADINGS
    finding_headings = FINDING_HEADINGS
    people_headings = PEOPLE_HEADINGS
    assumption_headings = ASSUMPTION_HEADINGS


def _cell(value: Any, decimals: int | None = None) -> str:
    if value is None or value == "":
        return "—"
    if isinstance(value, float):
        if value != value:  # NaN: an empty cell of a table
            return "—"
        return f"{value:.{decimals if decimals is not None else 2}f}"
    return str(value)


def _allocation(source: ExportSource) -> list[list[str]]:
    rows = []
    for row in allocation_rows(source):
        cells = []
        for _heading, key in ALLOCATION_HEADINGS:
            if key == "degrees":
                stages = ("acquisition", "analysis", "decision", "action")
                cells.append(" / ".join(f"{row[f'degree_{stage}']:.2f}" for stage in stages))
            else:
                cells.append(_cell(row[key], _DECIMALS.get(key)))
        rows.append(cells)
    return rows


def _people(source: ExportSource) -> list[list[str]]:
    study = source.study
    return [
        [
            study.agents_by_id[agent_id].name,
            seconds_text(person.burden_s_per_day),
            f"{person.interactions_per_day:.1f}",
            f"{person.interruptions_per_day:.1f}",
            f"{person.night_interruptions_per_day:.2f}",
            seconds_text(person.monitoring_s_per_day),
            f"{person.load:.1%}",
        ]
        for agent_id, person in source.analysis.people.items()
    ]


def _headline(source: ExportSource) -> list[tuple[str, str]]:
    figures = source.analysis.headline()
    return [
        ("Person time per day", seconds_text(figures["burden_s_per_day"])),
        ("Interruptions per day", f"{figures['interruptions_per_day']:.1f}"),
        ("Interruptions at night per day", f"{figures['night_interruptions_per_day']:.2f}"),
        (
            "Handovers (to review)",
            f"{figures['handovers']} ({figures['handovers_to_review']})",
        ),
        ("Highest handover risk", str(figures["max_risk"])),
        ("Mean mode awareness", f"{figures['mean_awareness']:.3f}"),
        ("Cut ratio / modularity", f"{figures['cut_ratio']:.3f} / {figures['modularity']:.3f}"),
        ("Findings", str(figures["findings"])),
    ]


def _handovers(source: ExportSource) -> list[list[str]]:
    rows = []
    for handover in source.analysis.handovers:
        site = handover.site
        where = site.source + (f" ({site.stage})" if site.stage else "")
        if site.modes:
            where += " " + " → ".join(site.modes)
        rows.append(
            [
                where,
                site.from_task,
                site.to_task,
                f"{site.from_agent or '—'} → {site.to_agent or '—'}",
                f"{site.per_day:.2f}",
                _cell(handover.time_ratio),
                f"{handover.likelihood:.2f}",
                str(handover.severity),
                str(handover.risk),
                handover.band,
                site.cue or "—",
            ]
        )
    return rows


def _findings(source: ExportSource) -> list[list[str]]:
    return [
        [finding.kind, str(finding.severity), ", ".join(finding.tasks) or "—", finding.message]
        for finding in source.analysis.findings
    ]


def report_data(source: ExportSource) -> ReportData:
    """The report's content for one plan's export."""
    study, plan = source.study, source.analysis.plan
    stamp = [
        ("Study", f"{study.title} ({study.id})"),
        ("Plan", f"{plan.name} ({plan.id})"),
        ("Snapshot", source.snapshot_text),
        ("Date", source.exported_text),
        ("Baton", source.baton_version),
        ("Scale", study.scale),
    ]
    workload = workload_table(source)
    policy = source.analysis.policy
    return ReportData(
        title=f"{study.title} — {plan.name}",
        stamp=stamp,
        headline=_headline(source),
        people=_people(source),
        charts=report_charts(source),
        allocation=_allocation(source),
        handovers=_handovers(source),
        findings=_findings(source),
        workload_headings=[str(column) for column in workload.columns],
        workload=[
            [_cell(value) for value in row] for row in workload.itertuples(index=False, name=None)
        ],
        assumptions=[
            [_cell(value) for value in row]
            for row in assumptions_table(source).itertuples(index=False, name=None)
        ],
        methods=list(METHODS),
        cautions=CAUTIONS,
        risk_note=str(policy.get("note", "")) if policy.get("is_example") else "",
    )


def report_html(source: ExportSource) -> bytes:
    """The printable report as a standalone HTML page (UTF-8 bytes)."""
    text = render_to_string("exports/report.html", {"report": report_data(source)})
    return text.encode("utf-8")


# -- PDF ------------------------------------------------------------------------------

_FONTS_READY = False


def _fonts() -> tuple[str, str]:
    """Register DejaVu Sans (from matplotlib's data) once; its regular and bold names."""
    global _FONTS_READY
    if not _FONTS_READY:
        from pathlib import Path

        import matplotlib
        from reportlab.pdfbase import pdfmetrics
        from reportlab.pdfbase.ttfonts import TTFont

        folder = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
        pdfmetrics.registerFont(TTFont("BatonSans", str(folder / "DejaVuSans.ttf")))
        pdfmetrics.registerFont(TTFont("BatonSans-Bold", str(folder / "DejaVuSans-Bold.ttf")))
        _FONTS_READY = True
    return "BatonSans", "BatonSans-Bold"


def _pdf_timestamp(source: ExportSource):
    """reportlab's timestamp fixed to the export's date (UTC)."""
    import time
    from datetime import UTC

    from reportlab.lib.utils import TimeStamp

    stamp = TimeStamp(invariant=1)
    seconds = int(source.exported.astimezone(UTC).timestamp())
    stamp.t = seconds
    stamp.lt = time.gmtime(seconds)
    stamp.YMDhms = tuple(stamp.lt)[:6]
    return stamp


def report_pdf(source: ExportSource) -> bytes:
    """The printable report as PDF bytes (A4 landscape)."""
    from reportlab.lib import colors
    from reportlab.lib.pagesizes import A4, landscape
    from reportlab.lib.styles import ParagraphStyle
    from reportlab.lib.units import mm
    from reportlab.pdfgen.canvas import Canvas
    from reportlab.platypus import (
        Image,
        KeepTogether,
        PageBreak,
        Paragraph,
        SimpleDocTemplate,
        Spacer,
        Table,
        TableStyle,
    )

    regular, bold = _fonts()
    data = report_data(source)
    body = ParagraphStyle("body", fontName=regular, fontSize=8.5, leading=11)
    small = ParagraphStyle("small", parent=body, fontSize=6.5, leading=8)
    small_bold = ParagraphStyle("small-bold", parent=small, fontName=bold)
    h1 = ParagraphStyle("h1", parent=body, fontName=bold, fontSize=15, leading=19, spaceAfter=4)
    h2 = ParagraphStyle(
        "h2", parent=body, fontName=bold, fontSize=11, leading=14, spaceBefore=8, spaceAfter=4
    )

    def text(value: str, style=body) -> Paragraph:
        # Paragraph reads a markup language: user text is escaped so it prints as typed.
        return Paragraph(escape(value), style)

    def table(headings, rows, widths=None) -> Table:
        cells = [[text(str(h), small_bold) for h in headings]]
        cells += [[text(cell, small) for cell in row] for row in rows]
        grid = Table(cells, colWidths=widths, repeatRows=1, hAlign="LEFT")
        grid.setStyle(
            TableStyle(
                [
                    ("GRID", (0, 0), (-1, -1), 0.25, colors.HexColor("#9aa5b1")),
                    ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8edf2")),
                    ("VALIGN", (0, 0), (-1, -1), "TOP"),
                    ("LEFTPADDING", (0, 0), (-1, -1), 2),
                    ("RIGHTPADDING", (0, 0), (-1, -1), 2),
                ]
            )
        )
        return grid

    page = landscape(A4)
    width = page[0] - 24 * mm
    study = source.study
    title = study.title if len(study.title) <= 60 else study.title[:59] + "…"
    snapshot = source.snapshot[:16] + "…" if source.snapshot else source.snapshot_text
    header = (
        f"{title} · plan {source.analysis.plan.id} · snapshot {snapshot} · "
        f"{source.exported_text} · Baton {source.baton_version}"
    )

    def decorate(canvas, document) -> None:
        canvas.saveState()
        canvas.setFont(regular, 7)
        canvas.drawString(12 * mm, page[1] - 8 * mm, header)
        canvas.drawRightString(page[0] - 12 * mm, 7 * mm, f"page {document.page}")
        canvas.drawString(12 * mm, 7 * mm, "Model estimates under stated assumptions.")
        canvas.restoreState()

    timestamp = _pdf_timestamp(source)

    class FixedCanvas(Canvas):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self._doc._timeStamp = timestamp

    story: list[Any] = [text(data.title, h1)]
    story.append(table(["", ""], [list(pair) for pair in data.stamp], [30 * mm, width - 30 * mm]))
    story += [text("Headline figures", h2), table(["Figure", "Value"], data.headline)]
    story += [Spacer(1, 4), table(data.people_headings, data.people)]
    story += [text("Cautions", h2), text(data.cautions)]
    for chart in data.charts:
        image = Image(io.BytesIO(chart.png))
        scale = min(1.0, (width * 0.7) / image.imageWidth, (150 * mm) / image.imageHeight)
        image.drawWidth, image.drawHeight = image.imageWidth * scale, image.imageHeight * scale
        image.hAlign = "LEFT"
        story.append(KeepTogether([text(chart.title, h2), image, text(chart.caption, small)]))
    story += [PageBreak(), text("Allocation", h2)]
    # The page is too narrow for every column at once: the decisions first, then the
    # figures, each row starting with its task.
    keys = [key for _heading, key in ALLOCATION_HEADINGS]
    for part, share in ((_PDF_DECISIONS, _PDF_DECISION_WIDTHS), (_PDF_FIGURES, None)):
        columns = [keys.index(key) for key in part]
        widths = None if share is None else [width * w for w in share]
        story.append(
            table(
                [data.allocation_headings[i] for i in columns],
                [[row[i] for i in columns] for row in data.allocation],
                widths,
            )
        )
        story.append(Spacer(1, 6))
    story.append(text("Handovers", h2))
    story.append(
        table(data.handover_headings, data.handovers)
        if data.handovers
        else text("No handovers under this plan.")
    )
    if data.risk_note:
        story.append(text(data.risk_note, small))
    story.append(text("Findings", h2))
    story.append(
        table(data.finding_headings, data.findings, [35 * mm, 15 * mm, 30 * mm, width - 80 * mm])
        if data.findings
        else text("No findings under this plan.")
    )
    story.append(text("Workload ratings (NASA-TLX) beside the predicted figures", h2))
    story.append(
        table(data.workload_headings, data.workload)
        if data.workload
        else text("No workload ratings recorded for this plan.")
    )
    story += [PageBreak(), text("Assumptions in force", h2)]
    story.append(
        table(
            data.assumption_headings,
            data.assumptions,
            [38 * mm, 75 * mm, 75 * mm, 22 * mm, width - 210 * mm],
        )
    )
    story.append(text("Methods and sources", h2))
    story.append(table(["Method", "Source"], data.methods, [45 * mm, width - 45 * mm]))
    story += [text("Cautions", h2), text(data.cautions)]

    buffer = io.BytesIO()
    document = SimpleDocTemplate(
        buffer,
        pagesize=page,
        leftMargin=12 * mm,
        rightMargin=12 * mm,
        topMargin=14 * mm,
        bottomMargin=12 * mm,
        title=data.title,
        author=f"Baton {source.baton_version}",
        subject=f"Allocation report; snapshot {source.snapshot_text}",
        creator=f"Baton {source.baton_version}",
        producer=f"Baton {source.baton_version}",
        invariant=1,
    )
    document.build(story, onFirstPage=decorate, onLaterPages=decorate, canvasmaker=FixedCanvas)
    return buffer.getvalue()
