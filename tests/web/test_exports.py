"""Exports of a plan: the allocation table (CSV, XLSX), the report (HTML, PDF), the study
file from a snapshot, the download views and ``export_study --format``.

Hand-worked values: under the plan "manual" of the home-heating test study the
resident does T1 ([2, 5, 30] s) and T2 ([3, 10, 20] s) once a day (the "leave" event at
08:15, T2 follows T1 with probability 1), so person time, at the durations' triangular
means (min + typical + max) / 3, is 37/3 = 12.333 s and 11 s a day, and every stage
degree is 0. Under "auto", T2 is shared at level 7 on the ten-level scale, so each
stage's degree is (7 - 1) / 9 = 0.6667 and its words are level 7 of Table I of
Parasuraman, Sheridan & Wickens (2000): "executes automatically, then necessarily informs
the human".
"""

from __future__ import annotations

import copy
import hashlib
import html
import io
import json
import re
import xml.etree.ElementTree as ET
from datetime import UTC, datetime
from html.parser import HTMLParser

import openpyxl
import pandas as pd
import pytest
from django.conf import settings
from django.core.management import CommandError, call_command
from django.urls import reverse
from pandas.api.types import is_numeric_dtype
from pypdf import PdfReader

from allocation import models as m
from allocation.core import load_study
from allocation.core.analysis import analyse_plan
from allocation.core.cautions import CAUTIONS
from allocation.core.methods import methods_document, plain_text
from allocation.core.synthetic import synthetic_study
from allocation.exports import ExportSource, export_bytes
from allocation.exports.csv import allocation_csv
from allocation.exports.images import report_charts
from allocation.exports.report import report_html, report_pdf
from allocation.exports.table import ALLOCATION_COLUMNS, SHEETS, allocation_table
from allocation.exports.xlsx import allocation_xlsx
from tests.core.conftest import HOME_HEATING

EXPORTED = datetime(2025, 3, 1, 9, 30, tzinfo=UTC)
#: Text that is markup in HTML (and so in the PDF laid out from it), and a formula in a
#: sheet.
MARKUP_TITLE = '=HYPERLINK("http://example.invalid","x") <b>bold</b> & co'
MARKUP_RATIONALE = "@SUM(1+1) <script>alert(1)</script> ünïcödé → ok"


def source_of(document: dict, plan: str = "auto", **kwargs) -> ExportSource:
    result = load_study(document)
    assert result.ok, result.problems
    return ExportSource(
        analysis=analyse_plan(result.study, plan),
        document=document,
        snapshot=kwargs.pop("snapshot", None),
        exported=kwargs.pop("exported", EXPORTED),
        **kwargs,
    )


@pytest.fixture(scope="module")
def auto() -> ExportSource:
    return source_of(copy.deepcopy(HOME_HEATING))


@pytest.fixture(scope="module")
def marked() -> ExportSource:
    """The auto plan with markup and formula-like text in a title and a rationale."""
    document = copy.deepcopy(HOME_HEATING)
    document["tasks"][2]["title"] = MARKUP_TITLE
    document["plans"][1]["assignments"]["T2"]["rationale"] = MARKUP_RATIONALE
    return source_of(document)


def csv_table(data: bytes) -> pd.DataFrame:
    """The CSV's table, its ``#`` lines skipped as a reader does."""
    lines = data.decode("utf-8").split("\n")
    body = "\n".join(line for line in lines if not line.startswith("#"))
    return pd.read_csv(io.StringIO(body), keep_default_na=False, dtype=str)


def as_text(frame: pd.DataFrame) -> pd.DataFrame:
    """Every cell as the text a reader compares: empty for a missing value."""
    return frame.astype(object).where(frame.notna(), "").astype(str)


def normal(text: str) -> str:
    return " ".join(text.split())


# -- the table ------------------------------------------------------------------------


def test_allocation_table_has_the_layout_columns_and_hand_worked_values():
    """One row per leaf task in file order, exactly the layout's columns; values worked by
    hand (module docstring)."""
    manual = allocation_table(source_of(copy.deepcopy(HOME_HEATING), "manual"))
    assert tuple(manual.columns) == ALLOCATION_COLUMNS
    assert list(manual["task"]) == ["T1", "T2"]
    assert list(manual["goal"]) == ["G1", "G1"]
    assert list(manual["category"]) == ["person", "person"]
    assert list(manual["occurrences_per_day"]) == [1.0, 1.0]
    assert list(manual["person_s_per_day"]) == [12.333, 11.0]  # rounded to 3 decimals
    assert (manual[[f"degree_{s}" for s in ("acquisition", "action")]] == 0).all().all()

    auto = allocation_table(source_of(copy.deepcopy(HOME_HEATING), "auto")).set_index("task")
    assert auto.loc["T1", "category"] == "device"
    assert auto.loc["T1", "degree_decision"] == 1.0
    assert auto.loc["T2", "category"] == "shared"
    assert auto.loc["T2", "levels"] == "7"
    assert auto.loc["T2", "level_words"] == (
        "executes automatically, then necessarily informs the human"
    )
    assert auto.loc["T2", "degree_action"] == round(6 / 9, 4) == 0.6667
    assert auto.loc["T2", "accountable"] == "resident"
    assert auto.loc["T2", "feedback"] == "display"
    assert auto.loc["T2", "initiator"] == "automation"
    assert auto.loc["T2", "status"] == "proposed"
    assert auto.loc["T2", "applies"] == "yes"
    assert auto.loc["T1", "human"] == "" and auto.loc["T1", "initiator"] == ""


def test_per_stage_levels_and_a_task_that_does_not_apply():
    document = copy.deepcopy(HOME_HEATING)
    assignments = document["plans"][1]["assignments"]
    assignments["T2"]["levels"] = {"acquisition": 7, "analysis": 7, "decision": 5, "action": 1}
    assignments["T1"] = {"applies": False}
    table = allocation_table(source_of(document)).set_index("task")
    assert table.loc["T2", "levels"] == "acquisition 7; analysis 7; decision 5; action 1"
    words = table.loc["T2", "level_words"].split("; ")
    assert words[2] == "executes that suggestion if the human approves"  # level 5, Table I
    assert words[3].startswith("offers no assistance")  # level 1
    assert table.loc["T2", "degree_decision"] == round(4 / 9, 4)
    assert table.loc["T1", "category"] == "not_applicable"
    assert table.loc["T1", "applies"] == "no"


# -- CSV ------------------------------------------------------------------------------


def test_csv_states_its_source_and_round_trips_through_pandas(auto):
    data = allocation_csv(auto)
    text = data.decode("utf-8")
    assert "\r" not in text
    comments = [line for line in text.split("\n") if line.startswith("#")]
    keys = [line[2:].split(":", 1)[0] for line in comments]
    assert keys == [
        "study",
        "study_title",
        "plan",
        "plan_name",
        "snapshot",
        "exported",
        "baton_version",
        "scale",
        "assumptions",
        "methods",
        "cautions",
    ]
    assert "# snapshot: not frozen" in comments
    assert "# exported: 2025-03-01T09:30:00Z" in comments
    assumptions = json.loads(comments[8].split(": ", 1)[1])
    assert assumptions["monitoring_s"] == 10
    assert "Parasuraman, Sheridan & Wickens" in comments[9]
    assert comments[10] == f"# cautions: {CAUTIONS}"
    # Column for column the table: numbers with a dot decimal.
    read = csv_table(data)
    assert list(read.columns) == list(ALLOCATION_COLUMNS)
    expected = allocation_table(auto)
    texts = [column for column in expected if not is_numeric_dtype(expected[column])]
    assert read[texts].values.tolist() == as_text(expected[texts]).values.tolist()
    for column in ("occurrences_per_day", "person_s_per_day", "awareness", "degree_action"):
        numbers = pd.to_numeric(read[column].replace("", None))
        assert numbers.tolist() == pytest.approx(expected[column].tolist(), nan_ok=True)


def test_csv_is_the_same_bytes_twice_and_defuses_formulas(auto, marked):
    assert allocation_csv(auto) == allocation_csv(auto)
    read = csv_table(allocation_csv(marked)).set_index("task")
    # OWASP CSV injection: a leading ' keeps a spreadsheet from running the cell.
    assert read.loc["T2", "title"] == "'" + MARKUP_TITLE
    assert read.loc["T2", "rationale"] == "'" + MARKUP_RATIONALE


# -- XLSX -----------------------------------------------------------------------------


def test_xlsx_sheets_about_and_allocation_read_back_equal_the_table(auto):
    data = allocation_xlsx(auto)
    workbook = pd.read_excel(io.BytesIO(data), sheet_name=None, dtype=object)
    assert tuple(workbook) == SHEETS
    about = dict(zip(workbook["about"]["key"], workbook["about"]["value"], strict=True))
    assert about == {
        "study": "home-heating",
        "study_title": "Home heating schedule",
        "plan": "auto",
        "plan_name": "Thermostat does it, resident informed",
        "snapshot": "not frozen",
        "exported": "2025-03-01T09:30:00Z",
        "baton_version": auto.baton_version,
        "scale": "sv10",
    }
    expected = allocation_table(auto)
    read = workbook["allocation"]
    assert list(read.columns) == list(ALLOCATION_COLUMNS)
    for column in ALLOCATION_COLUMNS:
        mine, theirs = expected[column], read[column]
        if not is_numeric_dtype(mine):
            assert as_text(theirs.to_frame())[column].tolist() == mine.tolist(), column
        else:
            assert pd.to_numeric(theirs).tolist() == pytest.approx(mine.tolist(), nan_ok=True)
    # Numbers are numbers in the workbook, text is text.
    sheet = openpyxl.load_workbook(io.BytesIO(data))["allocation"]
    header = [cell.value for cell in sheet[1]]
    row = dict(zip(header, sheet[3], strict=True))
    assert row["person_s_per_day"].data_type == "n"
    assert row["levels"].data_type == "s" and row["levels"].value == "7"
    tasks = workbook["tasks"].set_index("id")
    assert tasks.loc["T1", "duration_s"] == "[2,5,30]"
    assert json.loads(tasks.loc["T1", "split"])["acquisition"] == 0.5
    assert tasks.loc["T1", "needs"] == "sensing"
    links = workbook["links"]
    assert links.loc[0, "lag_s"] == "[0,60]" and links.loc[0, "kind"] == "precedes"
    assert len(workbook["handovers"]) == len(auto.analysis.handovers)
    assert len(workbook["findings"]) == len(auto.analysis.findings)
    # A finding's kind is kept as a key and put in the registry's words beside it (in plan
    # "auto" the resident is accountable for T2, which the thermostat holds).
    findings = workbook["findings"]
    words = dict(zip(findings["kind"], findings["kind_words"], strict=True))
    assert words["accountability"] == "Accountable without holding the task"
    assert words["ambiguous_indication"] == "Modes that look alike"
    assert len(workbook["workload"]) == 0
    assert "monitoring_s" in set(workbook["assumptions"]["key"])
    # The methods sheet names each figure column with the registry's label, unit and the
    # anchor of its section of the methods document; every column it names exists.
    methods = workbook["methods"]
    person = methods[methods["columns"] == "person_s_per_day"].iloc[0]
    assert (person["sheet"], person["name"], person["unit"], person["method"]) == (
        "allocation",
        "Person time on the task",
        "s a day",
        "person-time",
    )
    assert "Likelihood index" in set(methods["name"])
    for sheet, columns in zip(methods["sheet"], methods["columns"], strict=True):
        assert set(columns.split(", ")) <= set(workbook[sheet].columns), (sheet, columns)
    cautions = pd.read_excel(io.BytesIO(data), sheet_name="cautions", header=None)
    assert cautions.shape == (1, 1) and cautions.iloc[0, 0] == CAUTIONS


def test_xlsx_is_the_same_bytes_twice_with_fixed_dates(auto):
    first = allocation_xlsx(auto)
    assert first == allocation_xlsx(auto)
    workbook = openpyxl.load_workbook(io.BytesIO(first))
    assert workbook.properties.created == datetime(2025, 3, 1, 9, 30)
    assert workbook.properties.modified == datetime(2025, 3, 1, 9, 30)
    import zipfile

    times = {info.date_time for info in zipfile.ZipFile(io.BytesIO(first)).infolist()}
    assert times == {(2025, 3, 1, 9, 30, 0)}


def test_xlsx_writes_formula_like_text_as_text(marked):
    sheet = openpyxl.load_workbook(io.BytesIO(allocation_xlsx(marked)))["allocation"]
    header = [cell.value for cell in sheet[1]]
    row = dict(zip(header, sheet[3], strict=True))
    assert row["title"].value == MARKUP_TITLE and row["title"].data_type == "s"
    assert row["rationale"].value == MARKUP_RATIONALE and row["rationale"].data_type == "s"


# -- report ---------------------------------------------------------------------------


def test_html_report_states_everything_and_keeps_markup_as_text(marked):
    html = report_html(marked)
    assert html == report_html(marked)
    text = html.decode("utf-8")
    assert "@media print" in text and "break-before: page" in text
    assert "Home heating schedule" in text and "not frozen" in text
    assert "2025-03-01T09:30:00Z" in text and marked.baton_version in text
    assert CAUTIONS in text
    assert "Parasuraman, Sheridan &amp; Wickens" in text
    assert "monitoring_s" in text  # the assumptions in force
    # The dashboard's charts, drawn inline: the auto plan has a person (her day, time by
    # goal), two handovers (the risk matrix), tasks with an awareness index and a mode map.
    assert list(chart_svgs(text)) == ["daily", "goals-1", "risk", "awareness-1", "modes"]
    assert "<b>bold</b>" not in text and "&lt;b&gt;bold&lt;/b&gt;" in text
    assert "<script>alert" not in text and "&lt;script&gt;alert(1)" in text


#: The screens' palette as the style sheet sets it.
STYLE_SHEET = (settings.BASE_DIR / "static" / "baton" / "baton.css").read_text("utf-8")
SVG = "{http://www.w3.org/2000/svg}"


def style_colour(selector: str) -> str:
    """The first colour the style sheet gives a custom property or a class."""
    match = re.search(
        re.escape(selector) + r"[\s:{]+(?:background:\s*)?(#[0-9a-f]{6})", STYLE_SHEET
    )
    assert match, selector
    return match.group(1)


def chart_svgs(html: str) -> dict[str, ET.Element]:
    """Each chart of the report by its key, as the parsed SVG drawing."""
    found = re.findall(r'<figure id="chart-([\w-]+)">.*?(<svg .*?</svg>)', html, re.DOTALL)
    return {key: ET.fromstring(svg) for key, svg in found}


def svg_fills(svg: ET.Element) -> set[str]:
    return {element.get("fill") for element in svg.iter() if element.get("fill")}


def svg_lines(svg: ET.Element) -> list[str]:
    """Every line of text in a drawing (a label broken over lines gives several)."""
    return [span.text or "" for span in svg.iter(f"{SVG}tspan")]


def test_report_charts_are_the_dashboards_figures_in_the_screens_palette(auto):
    text = report_html(auto).decode("utf-8")
    svgs = chart_svgs(text)
    human, automation = style_colour("--human"), style_colour("--automation")
    # The resident, the study's one person, in the style sheet's colour for people.
    assert human in svg_fills(svgs["daily"]) and "Resident" in svg_lines(svgs["daily"])
    assert human in svg_fills(svgs["goals-1"])
    assert "G1 Keep the home comfortable" in svg_lines(svgs["goals-1"])
    # The risk policy's three bands in the style sheet's band colours; the two
    # handovers (severity 2, both improbable: test_figures_dashboards) leave 24 of 25 cells
    # empty.
    bands = {style_colour(f".band-{band}") for band in ("acceptable", "review", "unacceptable")}
    assert bands <= svg_fills(svgs["risk"])
    assert svg_lines(svgs["risk"]).count("·") == 24
    # The thermostat's first mode (the initial one) in the devices' violet.
    assert automation in svg_fills(svgs["modes"])
    assert "schedule Following the schedule" in svg_lines(svgs["modes"])
    # And every trace of each figure the dashboard shows is drawn: its name (as the
    # author typed it: plotly's labels are escaped HTML), colour and axis titles.
    for chart in report_charts(auto):
        svg = svgs[chart.key]
        lines, fills = svg_lines(svg), svg_fills(svg)
        # plotly.js shows a legend when a figure has two traces or more, or asks for one.
        legend = chart.figure["layout"].get("showlegend", len(chart.figure["data"]) > 1)
        for trace in chart.figure["data"]:
            if legend and trace.get("name") and trace.get("showlegend") is not False:
                assert html.unescape(trace["name"]) in lines, (chart.key, trace["name"])
            colour = (trace.get("marker") or {}).get("color")
            if trace["type"] == "bar":  # a bar of length 0 shows no colour
                lengths = trace["x"] if trace.get("orientation") == "h" else trace["y"]
                if isinstance(colour, list):
                    colour = [c for c, length in zip(colour, lengths, strict=True) if length]
                elif not any(lengths):
                    colour = None
            for value in colour if isinstance(colour, list) else [colour]:
                assert value is None or value in fills, (chart.key, value)
        for key, axis in chart.figure["layout"].items():
            if re.fullmatch(r"[xy]axis\d*", key) and "title" in axis:
                assert axis["title"]["text"] in lines, (chart.key, key)


class _Shown(HTMLParser):
    """The text of every heading, caption, table cell, chart label and paragraph of an
    HTML page's body, one string each."""

    KEEP = {"h1", "h2", "h3", "th", "td", "dt", "dd", "p", "figcaption", "tspan"}

    def __init__(self) -> None:
        super().__init__()
        self.items: list[str] = []
        self.open: list[list[str]] = []

    def handle_starttag(self, tag, attrs):
        if tag in self.KEEP:
            self.open.append([])

    def handle_endtag(self, tag):
        if tag in self.KEEP and self.open:
            text = "".join(self.open.pop()).strip()
            if text:
                self.items.append(text)

    def handle_data(self, data):
        if self.open:
            self.open[-1].append(data)


def squashed(text: str) -> str:
    """Text without its white space (a PDF breaks a cell's lines where it must)."""
    return "".join(text.split())


def pdf_text(data: bytes) -> str:
    return "\n".join(page.extract_text() for page in PdfReader(io.BytesIO(data)).pages)


def pdf_body_text(data: bytes) -> str:
    """The PDF's text without each page's running header and footer (its last two
    lines), so that a paragraph broken across two pages reads as one. A list's markers
    drawn at the foot of a page whose items' text goes on over the page are left out
    too (text extraction reads them apart from their items)."""
    pages = [page.extract_text() for page in PdfReader(io.BytesIO(data)).pages]
    body = "\n".join(text.rsplit("\n", 2)[0] for text in pages)
    return "\n".join(line for line in body.split("\n") if line.strip() != "•")


def test_report_appends_the_methods_document_with_ids_that_do_not_clash(auto):
    """Every section of the methods document is in the report under its own id, every id
    of the page is used once, and every link inside the page reaches an id."""
    page = report_html(auto).decode("utf-8")
    document = methods_document()
    for anchor, section in document.sections.items():
        assert f'id="method-{anchor}"' in page, anchor
        assert html.escape(plain_text(section.title), quote=False) in page or "`" in section.title
    ids = re.findall(r'\sid="([^"]+)"', page)
    assert len(ids) == len(set(ids))
    assert set(re.findall(r'href="#([^"]+)"', page)) <= set(ids)
    # The document comes after the report's own methods table and before the last cautions.
    assert page.index('id="methods"') < page.index('id="methods-document"')
    assert page.index('id="methods-document"') < page.index('id="cautions"')


def test_pdf_prints_every_heading_figure_cell_and_caution_of_the_html(marked):
    """One template: whatever the HTML report shows as text, the PDF prints."""
    parser = _Shown()
    parser.feed(report_html(marked).decode("utf-8").split("<body>", 1)[1])
    printed = squashed(pdf_body_text(report_pdf(marked)))
    shown = parser.items
    assert "Allocation" in shown and "Handovers" in shown and CAUTIONS in shown
    assert "0.67 / 0.67 / 0.67 / 0.67" in shown  # T2 at level 7 (module docstring)
    assert "minutes a day" in shown and "Resident" in shown  # a chart's axis and legend
    missing = [text for text in shown if squashed(text) not in printed]
    assert not missing


def test_pdf_opens_and_names_the_study_the_cautions_and_the_typed_text(marked):
    data = report_pdf(marked)
    assert data == report_pdf(marked)
    reader = PdfReader(io.BytesIO(data))
    text = normal("\n".join(page.extract_text() for page in reader.pages))
    assert "Home heating schedule" in text
    assert normal(CAUTIONS) in text
    assert "not frozen" in text and "2025-03-01T09:30:00Z" in text
    assert "<b>bold</b>" in text  # printed as typed, not read as markup
    assert "ünïcödé → ok" in text
    assert reader.metadata["/CreationDate"].startswith("D:20250301093000")
    assert reader.metadata["/ModDate"].startswith("D:20250301093000")
    # Its fonts travel inside it.
    fonts = {
        font["/BaseFont"] for page in reader.pages for font in page["/Resources"]["/Font"].values()
    }
    assert fonts and all("DejaVu" in str(font) for font in fonts)


def test_pdf_dates_and_header_follow_the_export(auto):
    """Another date and a snapshot: the PDF's dates and every page's header change."""
    snapshot = "0123456789abcdef" * 4
    later = source_of(
        copy.deepcopy(HOME_HEATING),
        snapshot=snapshot,
        exported=datetime(2024, 1, 2, 3, 4, 5, tzinfo=UTC),
    )
    reader = PdfReader(io.BytesIO(report_pdf(later)))
    assert reader.metadata["/CreationDate"].startswith("D:20240102030405")
    pages = [normal(page.extract_text()) for page in reader.pages]
    header = (
        "Home heating schedule (home-heating) · plan Thermostat does it, resident informed (auto)"
    )
    for number, text in enumerate(pages, start=1):
        assert header in text
        assert squashed(f"snapshot {snapshot}") in squashed(text)
        assert f"page {number} of {len(pages)}" in text
        assert "2024-01-02T03:04:05Z" in text
    # The sections that start a page do (the appended methods document has sections of
    # the same names, which may also fall at the top of a page).
    for heading in ("Charts", "Allocation", "Handovers", "Assumptions in force"):
        assert any(text.startswith(heading + " ") for text in pages), heading


def test_pdf_tables_repeat_their_header_rows_on_every_page():
    """A study of 40 tasks: its 150-odd handovers run over several pages, each starting
    with the table's header row."""
    document = synthetic_study(tasks=40, links=120, events=5, plans=2, seed=3)
    source = source_of(document, document["plans"][1]["id"])
    pages = [
        normal(page.extract_text()) for page in PdfReader(io.BytesIO(report_pdf(source))).pages
    ]
    header = (
        "Source From To Agents Per day Time ratio Likelihood index Slips a year Severity "
        "Screening score Band Cue"
    )
    start = next(i for i, text in enumerate(pages) if text.startswith("Handovers "))
    assert pages[start].startswith("Handovers " + header)
    following = []
    for text in pages[start + 1 :]:
        if not text.startswith(header):
            break
        following.append(text)
    assert len(following) >= 2
    assert "Findings Kind Severity Tasks Message" in following[-1]


# -- views ----------------------------------------------------------------------------


def freeze(study: m.Study, document: dict, user) -> m.Snapshot:
    """A snapshot row as the snapshots part stores one: canonical text and its hash."""
    canonical = json.dumps(document, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return m.Snapshot.objects.create(
        study=study,
        study_key=study.key,
        study_title=study.title,
        title="Workshop 1",
        author=user,
        author_name=user.username,
        sha256=hashlib.sha256(canonical.encode("utf-8")).hexdigest(),
        canonical=canonical,
        headlines={plan["id"]: {} for plan in document["plans"]},
        baton_version="0.1.0",
    )


@pytest.mark.parametrize(
    ("fmt", "content_type", "suffix"),
    [
        ("csv", "text/csv; charset=utf-8", "auto.allocation.csv"),
        ("xlsx", "application/vnd.openxmlformats", "auto.allocation.xlsx"),
        ("html", "text/html; charset=utf-8", "auto.report.html"),
        ("pdf", "application/pdf", "auto.report.pdf"),
    ],
)
def test_plan_export_downloads_each_format(client, owner, study, fmt, content_type, suffix):
    client.force_login(owner)
    response = client.get(reverse("plan-export", args=[study.pk, "auto", fmt]))
    assert response.status_code == 200
    assert response["Content-Type"].startswith(content_type)
    assert response["Content-Disposition"] == f'attachment; filename="home-heating.{suffix}"'
    assert len(response.content) > 200


def test_plan_export_from_a_snapshot_uses_its_document_hash_and_time(client, owner, study):
    document = copy.deepcopy(HOME_HEATING)
    document["study"]["title"] = "Heating as agreed in the workshop"
    snapshot = freeze(study, document, owner)
    client.force_login(owner)
    url = reverse("plan-export", args=[study.pk, "auto", "csv"])
    first = client.get(url, {"snapshot": snapshot.pk})
    assert first.status_code == 200
    text = first.content.decode("utf-8")
    assert f"# snapshot: {snapshot.sha256}" in text
    assert "# study_title: Heating as agreed in the workshop" in text
    stamp = snapshot.created_at.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    assert f"# exported: {stamp}" in text
    name = f"home-heating.auto.{snapshot.sha256[:12]}.allocation.csv"
    assert first["Content-Disposition"] == f'attachment; filename="{name}"'
    # Frozen: the same request later gives the same bytes (the formats that carry dates
    # inside: the workbook's properties and zip entries, the PDF's metadata).
    for fmt in ("xlsx", "pdf"):
        url = reverse("plan-export", args=[study.pk, "auto", fmt])
        again = [client.get(url, {"snapshot": snapshot.pk}).content for _ in range(2)]
        assert again[0] == again[1], fmt


def test_plan_export_refuses_unknown_formats_plans_and_other_studies_snapshots(
    client, owner, study, heating_document
):
    from allocation import services

    other = services.study_import(data=heating_document, owner=owner)
    foreign = freeze(other, heating_document, owner)
    client.force_login(owner)
    assert client.get(reverse("plan-export", args=[study.pk, "auto", "docx"])).status_code == 404
    assert client.get(reverse("plan-export", args=[study.pk, "nope", "csv"])).status_code == 404
    url = reverse("plan-export", args=[study.pk, "auto", "csv"])
    assert client.get(url, {"snapshot": foreign.pk}).status_code == 404
    assert client.get(url, {"snapshot": "abc"}).status_code == 404


def test_viewer_may_export_and_a_stranger_may_not(client, study, member_of):
    from .conftest import make_user

    url = reverse("plan-export", args=[study.pk, "manual", "csv"])
    client.force_login(member_of("viewer"))
    assert client.get(url).status_code == 200
    client.force_login(make_user("stranger"))
    assert client.get(url).status_code == 404


def test_study_download_of_a_snapshot_is_its_canonical_text(client, owner, study):
    snapshot = freeze(study, copy.deepcopy(HOME_HEATING), owner)
    client.force_login(owner)
    response = client.get(reverse("study-download", args=[study.pk]), {"snapshot": snapshot.pk})
    assert response.status_code == 200
    assert hashlib.sha256(response.content).hexdigest() == snapshot.sha256
    assert response["X-Baton-Snapshot"] == snapshot.sha256
    assert snapshot.sha256[:12] in response["Content-Disposition"]
    # Without a snapshot the download is the study file as before.
    plain = client.get(reverse("study-download", args=[study.pk]))
    assert json.loads(plain.content)["study"]["id"] == "home-heating"


def test_workload_sheet_lists_ratings_beside_the_predicted_figures(client, owner, study):
    m.WorkloadRating.objects.create(
        study=study,
        plan_key="manual",
        task_key="T2",
        session="usability 1",
        participant="P01",
        ratings={
            "mental": 40,
            "physical": 10,
            "temporal": 30,
            "performance": 20,
            "effort": 35,
            "frustration": 15,
        },
        weights=None,
        score=25.0,
        recorded_by=owner,
    )
    client.force_login(owner)
    response = client.get(reverse("plan-export", args=[study.pk, "manual", "xlsx"]))
    sheet = pd.read_excel(io.BytesIO(response.content), sheet_name="workload")
    assert list(sheet.columns[4:10]) == [
        "mental",
        "physical",
        "temporal",
        "performance",
        "effort",
        "frustration",
    ]
    row = sheet.iloc[0]
    assert (row["task"], row["participant"], row["kind"], row["score"]) == ("T2", "P01", "raw", 25)
    assert row["predicted_person_s_per_day"] == 11.0  # hand-worked (module docstring)
    assert row["predicted_category"] == "person"


def test_exports_page_lists_plans_and_snapshots_as_page_and_fragment(client, owner, study):
    snapshot = freeze(study, copy.deepcopy(HOME_HEATING), owner)
    client.force_login(owner)
    url = reverse("study-exports", args=[study.pk])
    for headers in ({}, {"HX-Request": "true"}):
        response = client.get(url, headers=headers)
        assert response.status_code == 200
        text = response.content.decode()
        assert 'id="exports-now"' in text and 'id="exports-snapshots"' in text
        assert reverse("plan-export", args=[study.pk, "auto", "pdf"]) in text
        assert f"?snapshot={snapshot.pk}" in text and snapshot.sha256 in text
        assert "Hart &amp; Staveland" in text  # the method note
    detail = client.get(reverse("study-detail", args=[study.pk])).content.decode()
    assert 'id="exports"' in detail
    assert reverse("plan-export", args=[study.pk, "manual", "xlsx"]) in detail
    assert url in detail


# -- command --------------------------------------------------------------------------


def test_export_study_command_writes_each_format(study, owner, tmp_path):
    out = io.StringIO()
    call_command("export_study", "home-heating", "--format", "csv", "--plan", "auto", stdout=out)
    assert out.getvalue().startswith("# study: home-heating\n")
    assert "\nT2,G1,Lower the set point,shared," in out.getvalue()
    target = tmp_path / "auto.xlsx"
    call_command(
        "export_study",
        "home-heating",
        "--format",
        "xlsx",
        "--plan",
        "auto",
        "-o",
        str(target),
        stderr=io.StringIO(),
    )
    assert tuple(pd.read_excel(target, sheet_name=None)) == SHEETS
    target = tmp_path / "auto.pdf"
    call_command(
        "export_study",
        "home-heating",
        "--format",
        "pdf",
        "--plan",
        "auto",
        "-o",
        str(target),
        stderr=io.StringIO(),
    )
    assert "Home heating schedule" in PdfReader(target).pages[0].extract_text()
    out = io.StringIO()
    call_command("export_study", "home-heating", stdout=out)
    assert json.loads(out.getvalue())["study"]["id"] == "home-heating"


def test_export_study_command_from_a_snapshot_and_its_errors(study, owner, tmp_path):
    snapshot = freeze(study, copy.deepcopy(HOME_HEATING), owner)
    target = tmp_path / "frozen.json"
    err = io.StringIO()
    call_command(
        "export_study",
        "home-heating",
        "--snapshot",
        snapshot.sha256[:8],
        "-o",
        str(target),
        stderr=err,
    )
    assert hashlib.sha256(target.read_bytes()).hexdigest() == snapshot.sha256
    assert snapshot.sha256 in err.getvalue()
    out = io.StringIO()
    call_command(
        "export_study",
        "home-heating",
        "--format",
        "html",
        "--plan",
        "manual",
        "--snapshot",
        snapshot.sha256[:8],
        stdout=out,
    )
    assert snapshot.sha256 in out.getvalue()
    with pytest.raises(CommandError, match="--plan"):
        call_command("export_study", "home-heating", "--format", "csv")
    with pytest.raises(CommandError, match="-o"):
        call_command("export_study", "home-heating", "--format", "pdf", "--plan", "auto")
    with pytest.raises(CommandError, match="no plan 'nope'"):
        call_command("export_study", "home-heating", "--format", "csv", "--plan", "nope")
    with pytest.raises(CommandError, match="no snapshot whose hash starts with 'ffff"):
        call_command("export_study", "home-heating", "--snapshot", "ffffffff")
    with pytest.raises(CommandError, match="not the start of a SHA-256"):
        call_command("export_study", "home-heating", "--snapshot", "xyz")


def test_export_bytes_dispatches_by_format(auto):
    assert export_bytes(auto, "csv") == allocation_csv(auto)


@pytest.mark.parametrize("value", ["%20", "abc", "%C2%B2", "9" * 40])
def test_study_download_odd_snapshot_number_is_not_found(client, owner, study, value):
    """A blank, non-numeric, non-ASCII digit or overlong snapshot number: 404, not 500."""
    client.force_login(owner)
    url = reverse("study-download", args=[study.pk]) + "?snapshot=" + value
    assert client.get(url).status_code == 404
