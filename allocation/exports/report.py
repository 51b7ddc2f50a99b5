"""The printable report of one plan: an HTML page with print styles, and the same page
as a PDF.

One template, one layout: a header naming the study, plan, snapshot, date and Baton's
version; the headline figures; the dashboard's charts (SVG, :mod:`.images`); the
allocation, handover, finding and workload tables; the assumptions in force; the methods
with their sources; and the cautions. The HTML is a Django template (autoescaped: user
text stays text). The PDF is that HTML laid out by WeasyPrint under the template's print
styles (A4 pages, running header and footer, tables whose header rows repeat), in
DejaVu Sans so every character of a study prints; its dates are the export's, so the same
input gives the same bytes.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from typing import Any

from django.template.loader import render_to_string
from django.utils.safestring import SafeString, mark_safe

from allocation.core.analysis.compare import HEADLINE_FIGURES
from allocation.core.analysis.report import METHODS
from allocation.core.cautions import CAUTIONS
from allocation.core.methods import document_html, methods_document
from allocation.core.registry import PERSON_FIGURES, figure, figure_text

from .images import Chart, report_charts
from .source import ExportSource
from .table import allocation_rows, assumptions_table, workload_table

__all__ = ["ReportData", "TablePart", "report_data", "report_html", "report_pdf"]

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
#: The allocation table in two parts, as a page holds them: the decisions, then the
#: figures (each row starting with its task); their columns' shares of the page width.
ALLOCATION_DECISIONS = (
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
ALLOCATION_DECISION_WIDTHS = (
    0.045,
    0.04,
    0.11,
    0.06,
    0.065,
    0.065,
    0.08,
    0.14,
    0.075,
    0.06,
    0.06,
    0.055,
    0.04,
    0.105,
)
ALLOCATION_FIGURES = (
    "task",
    "degrees",
    "occurrences_per_day",
    "person_s_per_day",
    "awareness",
    "handovers",
    "findings",
)
_DECIMALS = {"occurrences_per_day": 4, "person_s_per_day": 2, "awareness": 3}
_NUMBERS = {"occurrences_per_day", "person_s_per_day", "awareness", "handovers", "findings"}
HANDOVER_HEADINGS = (
    "Source",
    "From",
    "To",
    "Agents",
    "Per day",
    "Time ratio",
    "Likelihood index",
    "Slips a year",
    "Severity",
    "Screening score",
    "Band",
    "Cue",
)
FINDING_HEADINGS = ("Kind", "Severity", "Tasks", "Message")
#: The people table: each person\'s daily figures, headed in the registry\'s words.
PEOPLE_HEADINGS = ("Person", *(figure(key).heading for key in PERSON_FIGURES))
ASSUMPTION_HEADINGS = ("Key", "Value in force", "Default", "Status", "Source")


@dataclass(frozen=True)
class TablePart:
    """Part of a table as the page prints it: headings, rows, column width shares
    (empty: the table's own) and which columns hold numbers (aligned right)."""

    title: str
    headings: list[str]
    rows: list[list[str]]
    widths: list[float]
    numbers: list[bool]

    @property
    def cells(self) -> list[list[tuple[str, bool]]]:
        """Each row's cells with whether each is a number."""
        return [list(zip(row, self.numbers, strict=True)) for row in self.rows]


@dataclass(frozen=True)
class ReportData:
    """Everything the report shows, as text cells (one template lays it out for the
    screen, the printer and the PDF)."""

    title: str
    stamp: list[tuple[str, str, str]]
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
    #: Baton's methods document, appended whole (its ids prefixed: see METHODS_ID_PREFIX).
    methods_document: SafeString
    cautions: str
    risk_note: str

    @property
    def allocation_headings(self) -> list[str]:
        return [heading for heading, _key in ALLOCATION_HEADINGS]

    @property
    def allocation_parts(self) -> list[TablePart]:
        keys = [key for _heading, key in ALLOCATION_HEADINGS]
        parts = []
        for title, part, widths in (
            ("Decisions", ALLOCATION_DECISIONS, list(ALLOCATION_DECISION_WIDTHS)),
            ("Figures", ALLOCATION_FIGURES, []),
        ):
            columns = [keys.index(key) for key in part]
            parts.append(
                TablePart(
                    title,
                    [self.allocation_headings[i] for i in columns],
                    [[row[i] for i in columns] for row in self.allocation],
                    widths,
                    [key in _NUMBERS for key in part],
                )
            )
        return parts

    @property
    def stamp_text(self) -> dict[str, str]:
        return {key: value for key, _label, value in self.stamp}

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
    rows = []
    for agent_id, person in source.analysis.people.items():
        figures = person.to_json()
        cells = [figure_text(key, figures[key]) for key in PERSON_FIGURES]
        rows.append([study.agents_by_id[agent_id].name, *cells])
    return rows


def _headline(source: ExportSource) -> list[tuple[str, str]]:
    figures = source.analysis.headline()
    return [(figure(key).label, figure_text(key, figures[key])) for key in HEADLINE_FIGURES]


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
                f"{handover.frequency_per_year:.3g} ({handover.frequency_band})",
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
        ("study", "Study", f"{study.title} ({study.id})"),
        ("plan", "Plan", f"{plan.name} ({plan.id})"),
        ("snapshot", "Snapshot", source.snapshot_text),
        ("date", "Date", source.exported_text),
        ("baton", "Baton", source.baton_version),
        ("scale", "Scale", study.scale),
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
        methods_document=_methods_document(),
        cautions=CAUTIONS,
        risk_note=str(policy.get("note", "")) if policy.get("is_example") else "",
    )


#: Before every id of the appended methods document, whose anchors ("handovers",
#: "assumptions" …) would otherwise clash with the report's own sections.
METHODS_ID_PREFIX = "method-"


@cache
def _methods_document() -> SafeString:
    # markdown-it escapes any HTML in the document (html=False), so the result is safe;
    # the document ships with the package, so it is rendered once per process.
    html = document_html(methods_document(), shift=1, id_prefix=METHODS_ID_PREFIX)
    return mark_safe(html)  # noqa: S308


def report_html(source: ExportSource) -> bytes:
    """The printable report as a standalone HTML page (UTF-8 bytes)."""
    text = render_to_string("exports/report.html", {"report": report_data(source)})
    return text.encode("utf-8")


def report_pdf(source: ExportSource) -> bytes:
    """The printable report as PDF bytes: the HTML report laid out on A4 pages.

    The PDF's dates are the export's (the template's ``dcterms`` meta tags) and its
    identifier is made from its content, so the same input gives the same bytes.
    """
    from weasyprint import HTML, URLFetcher

    # The page is whole (styles and charts inline): nothing is read from a file or the
    # network while it is laid out, whatever a study's text holds.
    closed = URLFetcher(allowed_protocols=())
    page = HTML(string=report_html(source).decode("utf-8"), url_fetcher=closed)
    return page.write_pdf()
