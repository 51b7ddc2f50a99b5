"""Spreadsheet import: preview every row problem, apply a whole file or nothing.

The files are made here, cell by cell, in the layout the exports write (allocation.exports;
its writers are used only in the round trips); what each should do to the home-heating
test study (tests/core/conftest.py) is worked out by hand in each test and compared with what the
database holds afterwards.
"""

from __future__ import annotations

import copy
import csv
import importlib.util
import io
import re
import zipfile

import openpyxl
import pytest
from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core.spreadsheets.reading import (
    ALLOCATION_COLUMNS,
    LINK_COLUMNS,
    MAX_BYTES,
    TASK_COLUMNS,
    SpreadsheetInvalid,
    Upload,
    propose,
    read_tables,
)

XLSX_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"


# -- files ----------------------------------------------------------------------------


def xlsx(sheets: dict[str, list[list]]) -> bytes:
    """A workbook with one sheet per entry: its rows, the header first."""
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append(row)
    buffer = io.BytesIO()
    book.save(buffer)
    return buffer.getvalue()


def allocation_row(**cells) -> list:
    """An allocation-sheet row: the given cells, the computed ones filled with figures
    the import must ignore."""
    row = dict.fromkeys(ALLOCATION_COLUMNS, "")
    row.update(
        category="shared",
        level_words="(ignored)",
        degree_acquisition=0.6667,
        occurrences_per_day=1.0,
        person_s_per_day=12.5,
        handovers=3,
        findings=0,
        applies="yes",
    )
    row.update(cells)
    return [row[column] for column in ALLOCATION_COLUMNS]


def csv_file(rows: list[list], comments: list[str] = ()) -> bytes:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(ALLOCATION_COLUMNS)
    writer.writerows(rows)
    return ("".join(f"{line}\n" for line in comments) + buffer.getvalue()).encode("utf-8")


def good_workbook() -> bytes:
    """Changes T2's title, adds a leaf T3 under G1, replaces the one link by two, and
    sets plan "auto": T1 to the resident, T2 shared per stage, T3 to the thermostat."""
    return xlsx(
        {
            "about": [["key", "value"], ["study", "home-heating"], ["plan", "auto"]],
            "tasks": [
                list(TASK_COLUMNS),
                ["G1", "", "Keep the home comfortable", "", "", "", "", "", "", "", ""],
                [
                    "T2",
                    "G1",
                    "Lower the set point by two degrees",
                    "",
                    "[3,10,20]",
                    "",
                    2,
                    '{"visual":4.0,"auditory":0,"cognitive":1.2,"psychomotor":2.2}',
                    "",
                    "",
                    "",
                ],
                [
                    "T3",
                    "G1",
                    "Check the radiators",
                    '{"every_days":7}',
                    "[60,120,300]",
                    3600,
                    1,
                    "",
                    "",
                    "judgement, sensing",
                    "Added in the workshop",
                ],
            ],
            "links": [
                list(LINK_COLUMNS),
                ["T1", "T2", "precedes", "[0,120]", "", ""],
                ["T2", "T3", "informs", "", "", "the set point tells the check"],
            ],
            "allocation": [
                list(ALLOCATION_COLUMNS),
                allocation_row(task="T1", goal="G1", human="resident", status="agreed"),
                allocation_row(
                    task="T2",
                    human="resident",
                    automation="thermostat",
                    levels="acquisition 7; analysis 7; decision 5; action 6",
                    accountable="resident",
                    feedback="alert",
                    initiator="automation",
                    rationale="Asks before it acts",
                    status="proposed",
                ),
                allocation_row(task="T3", automation="thermostat"),
            ],
        }
    )


def expected_after_good_workbook(document: dict) -> dict:
    """The study file the good workbook should leave, worked out by hand."""
    expected = copy.deepcopy(document)
    tasks = {task["id"]: task for task in expected["tasks"]}
    tasks["T2"]["title"] = "Lower the set point by two degrees"
    expected["tasks"].append(
        {
            "id": "T3",
            "parent": "G1",
            "title": "Check the radiators",
            "occurs": {"every_days": 7},
            "duration_s": [60, 120, 300],
            "window_s": 3600,
            "severity": 1,
            "needs": ["judgement", "sensing"],
            "notes": "Added in the workshop",
        }
    )
    expected["links"] = [
        {"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 120]},
        {"from": "T2", "to": "T3", "kind": "informs", "notes": "the set point tells the check"},
    ]
    auto = next(plan for plan in expected["plans"] if plan["id"] == "auto")
    auto["assignments"] = {
        "T1": {"human": "resident", "status": "agreed"},
        "T2": {
            "human": "resident",
            "automation": "thermostat",
            "levels": {"acquisition": 7, "analysis": 7, "decision": 5, "action": 6},
            "accountable": "resident",
            "feedback": "alert",
            "initiator": "automation",
            "status": "proposed",
            "rationale": "Asks before it acts",
        },
        "T3": {"automation": "thermostat"},
    }
    return expected


def everything(study: m.Study) -> dict:
    """Every row of every table a study owns (and the audit trail), for before/after."""
    plans = m.Plan.objects.filter(study=study)
    return {
        "study": list(m.Study.objects.filter(pk=study.pk).values()),
        "agents": list(m.Agent.objects.filter(study=study).values()),
        "events": list(m.Event.objects.filter(study=study).values()),
        "tasks": list(m.Task.objects.filter(study=study).values()),
        "links": list(m.Link.objects.filter(study=study).values()),
        "plans": list(plans.values()),
        "assignments": list(m.Assignment.objects.filter(plan__in=plans).values()),
        "modes": list(m.ModeState.objects.filter(plan__in=plans).values()),
        "overrides": list(m.ModeOverride.objects.filter(state__plan__in=plans).values()),
        "transitions": list(m.ModeTransition.objects.filter(plan__in=plans).values()),
        "audit": list(m.AuditEntry.objects.values()),
    }


def problem_cells(page: str) -> set[tuple[str, int, str]]:
    """The (sheet, row, column) of each error row of the problems table on a page."""
    pattern = re.compile(
        r'<tr class="error">\s*<td>(\w+)</td>\s*<td class="num">(\d+)</td>\s*'
        r"<td><code>([^<]*)</code></td>"
    )
    return {(sheet, int(row), column) for sheet, row, column in pattern.findall(page)}


def page_url(study: m.Study, plan: str = "auto", action: str = "") -> str:
    name = "plan-import" + (f"-{action}" if action else "")
    return reverse(name, args=[study.pk, plan])


def upload(client, study, data: bytes, name: str, plan: str = "auto", **extra):
    content_type = XLSX_TYPE if name.endswith(".xlsx") else "text/csv"
    file = io.BytesIO(data)
    file.name = name
    file.content_type = content_type
    return client.post(page_url(study, plan, "upload"), {"file": file}, **extra)


def apply(client, study, plan: str = "auto"):
    """Press "Apply" on the preview page as it is shown now (with its hidden fields)."""
    page = client.get(page_url(study, plan)).content.decode()
    fields = {}
    for name in ("version", "sha256"):
        marker = f'name="{name}" value="'
        start = page.index(marker) + len(marker)
        fields[name] = page[start : page.index('"', start)]
    return client.post(page_url(study, plan, "apply"), fields)


@pytest.fixture
def editor(client, member_of):
    user = member_of("editor")
    client.force_login(user)
    return user


# -- applying good files --------------------------------------------------------------


def test_good_workbook_previews_then_applies_and_the_rows_match(client, study, editor):
    before_document = copy.deepcopy(selectors.study_document(study))
    response = upload(client, study, good_workbook(), "heating.xlsx")
    assert response.status_code == 302
    page = client.get(page_url(study)).content.decode()
    assert "The file reads without errors" in page
    assert "Check the radiators" in page  # the added task, in the summary
    # The preview stored nothing.
    assert selectors.study_document(study) == before_document

    response = apply(client, study)
    assert response.status_code == 302
    page = client.get(response["Location"]).content.decode()
    assert (
        "Imported heating.xlsx: 1 task added, 1 task changed; links replaced (1 before, "
        "2 after: 1 link added, 1 link changed); plan auto: 1 assignment added, "
        "2 assignments changed."
    ) in page

    assert selectors.study_document(study) == expected_after_good_workbook(before_document)
    t3 = m.Task.objects.get(study=study, key="T3")
    assert (t3.parent.key, t3.duration_s, t3.window_s, t3.needs) == (
        "G1",
        [60, 120, 300],
        3600,
        ["judgement", "sensing"],
    )
    links = [
        (link.source.key, link.target.key, link.kind, link.lag_s)
        for link in m.Link.objects.filter(study=study)
    ]
    assert links == [("T1", "T2", "precedes", [0, 120]), ("T2", "T3", "informs", None)]
    auto = {
        a.task.key: a for a in m.Assignment.objects.filter(plan__study=study, plan__key="auto")
    }
    assert auto["T2"].levels == {"acquisition": 7, "analysis": 7, "decision": 5, "action": 6}
    assert auto["T3"].automation.key == "thermostat" and auto["T3"].human is None
    # The other plan and the mode map are untouched.
    manual = m.Assignment.objects.filter(plan__study=study, plan__key="manual")
    assert sorted(a.task.key for a in manual) == ["T1", "T2"]
    assert m.ModeOverride.objects.filter(state__plan__study=study).count() == 1
    # The file is no longer kept once applied.
    assert not m.PendingImport.objects.exists()


def test_good_csv_sets_the_plan_and_ignores_the_computed_columns(client, study, editor):
    """The CSV export's comment lines are skipped; "applies no" keeps only the words."""
    data = csv_file(
        [
            allocation_row(task="T1", human="resident", automation="thermostat", levels="4"),
            allocation_row(
                task="T2",
                category="not_applicable",
                applies="no",
                rationale="'-2 degrees is done by hand",  # the export's apostrophe
                status="open",
            ),
        ],
        comments=["# study: home-heating", "# plan: auto", "# cautions: estimates"],
    )
    assert upload(client, study, data, "auto.csv").status_code == 302
    page = client.get(page_url(study)).content.decode()
    assert "CSV" in page and "The file reads without errors" in page
    apply(client, study)
    assignments = selectors.study_document(study)["plans"][1]["assignments"]
    assert assignments == {
        "T1": {"human": "resident", "automation": "thermostat", "levels": 4},
        "T2": {"applies": False, "status": "open", "rationale": "-2 degrees is done by hand"},
    }


def test_empty_human_and_automation_means_not_allocated(study):
    data = csv_file([allocation_row(task="T1", human="", automation="")])
    proposal = propose(selectors.study_document(study), "auto", Upload("a.csv", data))
    assert "T1" not in proposal.document["plans"][1]["assignments"]
    # A leaf left unallocated is the core's warning, placed on the allocation sheet.
    assert [(p.sheet, p.level) for p in proposal.problems] == [("allocation", "warning")]
    assert proposal.ok


# -- files with errors ----------------------------------------------------------------


def bad_workbook() -> bytes:
    return xlsx(
        {
            "tasks": [
                list(TASK_COLUMNS),
                ["T2", "G1", "Lower the set point", "", "[3,10,20]", "", "high"],
                ["T3", "G1", "Check", '{"every_days":7}', "[60, 120", "", 1],
                ["T4", "G9", "Orphan", '{"every_days":7}', 5, -10, 1],
            ],
            "links": [
                list(LINK_COLUMNS),
                ["T1", "T2", "precedes", "[0,60]"],
                ["T1", "T9", "precedes"],
            ],
            "allocation": [
                list(ALLOCATION_COLUMNS),
                allocation_row(task="T1", human="resident"),
                allocation_row(task="T2", human="bob", automation="thermostat", levels="11"),
                allocation_row(task="T1", human="resident"),
                allocation_row(task="T3", automation="thermostat", applies="maybe"),
                allocation_row(task="T7", human="resident"),
                allocation_row(
                    task="T4", human="resident", automation="thermostat", levels="decision five"
                ),
            ],
        }
    )


#: Every error the bad workbook has, as (sheet, row, column), worked out by hand.
BAD_WORKBOOK_ERRORS = {
    ("tasks", 2, "severity"),  # "high" is not a number
    ("tasks", 3, "duration_s"),  # JSON cut short
    ("tasks", 4, "parent"),  # no goal G9 (the core's check, mapped back)
    ("tasks", 4, "window_s"),  # not > 0 (the core's check)
    ("links", 3, "to"),  # no task T9 (the core's check)
    ("allocation", 3, "human"),  # no agent bob (the core's check)
    ("allocation", 3, "levels"),  # 11 is not a level (the core's check)
    ("allocation", 4, "task"),  # T1 twice
    ("allocation", 5, "applies"),  # neither yes nor no
    ("allocation", 6, "task"),  # no task T7
    ("allocation", 7, "levels"),  # "decision five"
}


def test_errors_in_several_sheets_are_each_placed_by_sheet_row_and_column(study):
    preview = services.spreadsheet_preview(
        study=study, plan_key="auto", upload=Upload("bad.xlsx", bad_workbook())
    )
    errors = {(p.sheet, p.row, p.column) for p in preview.problems if p.is_error}
    assert errors == BAD_WORKBOOK_ERRORS
    assert not preview.ok


def test_a_file_with_errors_stores_nothing_even_when_applied(client, study, editor):
    upload(client, study, bad_workbook(), "bad.xlsx")
    page = client.get(page_url(study)).content.decode()
    assert f"{len(BAD_WORKBOOK_ERRORS)} errors:" in page
    assert "Apply to plan" not in page
    assert problem_cells(page) == BAD_WORKBOOK_ERRORS
    before = everything(study)
    waiting = m.PendingImport.objects.get(study=study, plan_key="auto")
    response = client.post(
        page_url(study, action="apply"),
        {"version": study_version(study), "sha256": waiting.sha256},
    )
    assert response.status_code == 302
    assert "was not imported: it has 11 error(s)" in client.get(page_url(study)).content.decode()
    assert everything(study) == before


def test_the_service_refuses_a_file_with_errors_and_writes_nothing(study, owner):
    before = everything(study)
    with pytest.raises(SpreadsheetInvalid) as raised:
        services.spreadsheet_apply(
            study=study, plan_key="auto", upload=Upload("bad.xlsx", bad_workbook()), user=owner
        )
    assert {(p.sheet, p.row, p.column) for p in raised.value.problems if p.is_error} == (
        BAD_WORKBOOK_ERRORS
    )
    assert everything(study) == before


def test_a_failure_while_writing_rolls_everything_back(study, owner, monkeypatch):
    """The transaction: an error after the tasks are written undoes them too."""
    from allocation.services import spreadsheets as spreadsheet_service

    def broken(*args, **kwargs):
        raise RuntimeError("disk full")

    monkeypatch.setattr(spreadsheet_service, "_write_assignments", broken)
    before = everything(study)
    with pytest.raises(RuntimeError):
        services.spreadsheet_apply(
            study=study, plan_key="auto", upload=Upload("g.xlsx", good_workbook()), user=owner
        )
    assert everything(study) == before


def test_formula_cells_are_refused_not_evaluated(study):
    data = xlsx(
        {
            "tasks": [
                list(TASK_COLUMNS),
                ["T1", "G1", "Notice", '{"event":"leave"}', "[2,5,30]", "=1800*2", 1],
            ]
        }
    )
    proposal = propose(selectors.study_document(study), "auto", Upload("f.xlsx", data))
    assert [(p.sheet, p.row, p.column) for p in proposal.errors] == [("tasks", 2, "window_s")]
    assert "formula" in proposal.errors[0].message


def test_an_oversized_file_is_refused_before_it_is_read(client, study, editor):
    data = b"task,human\n" + b"x" * MAX_BYTES
    response = upload(client, study, data, "huge.csv")
    assert response.status_code == 400
    assert "larger than 2 MiB" in response.content.decode()
    assert not m.PendingImport.objects.exists()


def test_limits_on_rows_and_on_unpacked_size(study):
    rows = [list(LINK_COLUMNS)] + [["T1", "T2", "informs"]] * 4
    read = read_tables(Upload("r.xlsx", xlsx({"links": rows})), max_rows=3)
    assert "more than 3 rows" in read.problems[0].message
    bomb = io.BytesIO()
    with zipfile.ZipFile(bomb, "w", zipfile.ZIP_DEFLATED) as archive:
        archive.writestr("xl/big.xml", b"\0" * (41 * 1024 * 1024))
    read = read_tables(Upload("b.xlsx", bomb.getvalue()))
    assert "unpacks to 41.0 MiB" in read.problems[0].message


def test_workbook_xml_with_entities_is_refused(study):
    """A "billion laughs" workbook: defusedxml, which openpyxl uses when installed,
    refuses entity declarations, so the file is a problem, not a hang."""
    assert openpyxl.xml.DEFUSEDXML
    source = zipfile.ZipFile(io.BytesIO(good_workbook()))
    bomb = io.BytesIO()
    with zipfile.ZipFile(bomb, "w") as archive:
        for item in source.infolist():
            data = source.read(item)
            if item.filename == "xl/workbook.xml":
                entities = '<!DOCTYPE w [<!ENTITY a "aaaaaaaaaa"><!ENTITY b "&a;&a;&a;&a;">]>'
                data = entities.encode() + data
            archive.writestr(item, data)
    proposal = propose(selectors.study_document(study), "auto", Upload("e.xlsx", bomb.getvalue()))
    assert "the workbook cannot be read (EntitiesForbidden)" in proposal.errors[0].message


@pytest.mark.parametrize(
    ("name", "data", "message"),
    [
        ("old.xls", b"\xd0\xcf\x11\xe0", "a .xls file is not read"),
        ("fake.xlsx", b"not a zip at all", "not an XLSX workbook"),
        ("latin.csv", "task,human\nT1,Zoë\n".encode("latin-1"), "save it as CSV UTF-8"),
        ("semi.csv", b"task;human;automation\nT1;resident;\n", "semicolons"),
        ("empty.csv", b"", "the file is empty"),
    ],
)
def test_files_that_cannot_be_read_say_why(study, name, data, message):
    proposal = propose(selectors.study_document(study), "auto", Upload(name, data))
    assert proposal.document is None or proposal.errors
    assert message in proposal.errors[0].message


def test_unknown_and_missing_columns_are_named(study):
    data = xlsx({"links": [["from", "kind", "colour"], ["T1", "informs", "red"]]})
    proposal = propose(selectors.study_document(study), "auto", Upload("c.xlsx", data))
    assert {(p.row, p.column, p.message.split(";")[0]) for p in proposal.errors} == {
        (1, "colour", "unknown column"),
        (1, "to", "missing column: the sheet needs it"),
    }


# -- screens, roles, audit ------------------------------------------------------------


def study_version(study: m.Study) -> str:
    return m.Study.objects.get(pk=study.pk).updated_at.isoformat()


@pytest.mark.parametrize("role", ["viewer", "reviewer"])
def test_below_editor_may_not_import(client, study, member_of, role):
    client.force_login(member_of(role))
    assert client.get(page_url(study)).status_code == 403
    assert upload(client, study, good_workbook(), "g.xlsx").status_code == 403
    assert client.post(page_url(study, action="apply"), {}).status_code == 403
    assert not m.Task.objects.filter(study=study, key="T3").exists()


@pytest.mark.parametrize("role", ["editor", "owner"])
def test_editors_and_owners_may_import(client, study, member_of, role):
    client.force_login(member_of(role))
    assert client.get(page_url(study)).status_code == 200
    upload(client, study, good_workbook(), "g.xlsx")
    apply(client, study)
    assert m.Task.objects.filter(study=study, key="T3").exists()


def test_the_inventory_links_to_the_import_for_editors(client, study, editor):
    page = client.get(reverse("study-inventory", args=[study.pk])).content.decode()
    assert page_url(study, "manual") in page


def test_applying_is_audited_with_the_changes_before_and_after(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    apply(client, study)
    entry = m.AuditEntry.objects.get(action="spreadsheet.import")
    assert (entry.study, entry.username, entry.source) == (study, editor.username, "import")
    assert entry.target == "plan auto from g.xlsx"
    # Only what changed, shaped as a study file (T3 was not there before).
    assert entry.before["tasks"] == [HOME_T2]
    assert [task["id"] for task in entry.after["tasks"]] == ["T2", "T3"]
    assert entry.before["links"] == [
        {"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 60]}
    ]
    assert entry.before["plans"][0]["id"] == "auto"
    assert entry.before["plans"][0]["assignments"]["T1"] == {"automation": "thermostat"}
    assert set(entry.after["plans"][0]["assignments"]) == {"T1", "T2", "T3"}
    assert entry.after["file"]["name"] == "g.xlsx" and len(entry.after["file"]["sha256"]) == 64


#: T2 of the home-heating test study, as stored before the import.
HOME_T2 = {
    "id": "T2",
    "parent": "G1",
    "title": "Lower the set point",
    "duration_s": [3, 10, 20],
    "severity": 2,
    "demands": {"visual": 4.0, "auditory": 0, "cognitive": 1.2, "psychomotor": 2.2},
}


def test_a_study_changed_since_the_preview_is_not_imported(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    page = client.get(page_url(study)).content.decode()
    assert "Apply to plan auto" in page
    seen_version = study_version(study)
    waiting = m.PendingImport.objects.get(study=study, plan_key="auto")
    services.task_save(
        study=study,
        key="T1",
        item={**selectors.study_document(study)["tasks"][1], "title": "Notice it"},
    )
    response = client.post(
        page_url(study, action="apply"), {"version": seen_version, "sha256": waiting.sha256}
    )
    assert response.status_code == 302
    assert "changed since that preview" in client.get(page_url(study)).content.decode()
    assert not m.Task.objects.filter(study=study, key="T3").exists()


def test_discard_forgets_the_file(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    client.post(page_url(study, action="discard"))
    assert not m.PendingImport.objects.exists()
    assert "Preview of" not in client.get(page_url(study)).content.decode()


def test_one_file_waits_per_study(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx", plan="manual")
    upload(client, study, good_workbook(), "g.xlsx", plan="auto")
    waiting = m.PendingImport.objects.values_list("study", "plan_key")
    assert list(waiting) == [(study.pk, "auto")]


def test_htmx_gets_the_region_alone(client, study, editor):
    headers = {"HX-Request": "true"}
    page = client.get(page_url(study), headers=headers).content.decode()
    assert page.startswith('<div id="import-region">') and "<html" not in page
    response = upload(client, study, good_workbook(), "g.xlsx", headers=headers)
    fragment = response.content.decode()
    assert response.status_code == 200
    assert fragment.startswith('<div id="import-region">')
    assert "Preview of g.xlsx" in fragment and "Apply to plan auto" in fragment


def test_cells_from_the_file_are_escaped(client, study, editor):
    data = csv_file([allocation_row(task="<script>alert(1)</script>", human="resident")])
    upload(client, study, data, "x.csv")
    page = client.get(page_url(study)).content.decode()
    assert "<script>alert(1)</script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page


# -- round trip with the exports ------------------------------------------------------

EXPORTS = importlib.util.find_spec("allocation.exports") is not None


@pytest.mark.skipif(not EXPORTS, reason="allocation.exports is not there yet")
@pytest.mark.parametrize("fmt", ["xlsx", "csv"])
def test_an_exported_plan_imports_back_with_no_change_and_no_error(study, fmt):
    from allocation import exports

    data = exports.export_bytes(exports.export_source(study, "auto"), fmt)
    preview = services.spreadsheet_preview(
        study=study, plan_key="auto", upload=Upload(f"auto.{fmt}", data)
    )
    assert preview.problems == []
    assert preview.changes.empty


@pytest.mark.skipif(not EXPORTS, reason="allocation.exports is not there yet")
def test_an_exported_workbook_edited_in_one_cell_changes_that_field_alone(study, owner):
    """Export, change one rationale cell the way a workshop would, import: the plan's
    assignment of T2 changes in its rationale and nowhere else."""
    from allocation import exports

    data = exports.export_bytes(exports.export_source(study, "auto"), "xlsx")
    book = openpyxl.load_workbook(io.BytesIO(data))
    sheet = book["allocation"]
    header = [cell.value for cell in sheet[1]]
    for row in sheet.iter_rows(min_row=2):
        if row[header.index("task")].value == "T2":
            row[header.index("rationale")].value = "Agreed in the workshop"
    buffer = io.BytesIO()
    book.save(buffer)
    before = copy.deepcopy(selectors.study_document(study))
    preview = services.spreadsheet_apply(
        study=study, plan_key="auto", upload=Upload("edited.xlsx", buffer.getvalue()), user=owner
    )
    assert [(c.key, [f.field for f in c.fields]) for c in preview.changes.assignments] == [
        ("T2", ["rationale"])
    ]
    assert not preview.changes.tasks and not preview.changes.links
    before["plans"][1]["assignments"]["T2"]["rationale"] = "Agreed in the workshop"
    assert selectors.study_document(study) == before


@pytest.mark.skipif(not EXPORTS, reason="allocation.exports is not there yet")
def test_the_insulin_example_imports_back_unchanged(owner):
    """The largest example, on its first plan with a mode map (whose overrides the
    import must keep): per-stage levels, links with lags, goals in depth."""
    from allocation import exports
    from allocation.examples import example_documents

    document = next(d for d in example_documents() if d["study"]["id"] == "closed-loop-insulin")
    row = services.study_import(data=document, owner=owner)
    for plan in [next(plan for plan in document["plans"] if "modes" in plan)]:
        data = exports.export_bytes(exports.export_source(row, plan["id"]), "xlsx")
        preview = services.spreadsheet_preview(
            study=row, plan_key=plan["id"], upload=Upload("x.xlsx", data)
        )
        assert (preview.problems, preview.changes.empty) == ([], True), plan["id"]


# -- text and numbers no cell may hold --------------------------------------------------
# Python's documented integer string conversion limit (4300 digits,
# sys.get_int_max_str_digits); RFC 3629 §3 (UTF-8 never encodes U+D800..DFFF: the bytes
# ED A0 80 are not UTF-8); Baton's own NOTE_LENGTH (allocation/core/limits.py).


def _patched(data: bytes, old: bytes, new: bytes) -> bytes:
    """An XLSX with ``old`` replaced by ``new`` in every member (the raw XML)."""
    source = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w") as target:
        for item in source.infolist():
            target.writestr(item, source.read(item.filename).replace(old, new))
    return out.getvalue()


def test_an_xlsx_number_past_4300_digits_is_refused_by_sheet_and_row(study):
    data = xlsx({"tasks": [list(TASK_COLUMNS), ["T2", "G1", "Lower", "", "", 123456789, 1]]})
    data = _patched(data, b">123456789<", b">" + b"9" * 5000 + b"<")
    proposal = propose(selectors.study_document(study), "auto", Upload("n.xlsx", data))
    assert [(p.sheet, p.row) for p in proposal.errors] == [("tasks", 2)]
    assert "5,000 digits" in proposal.errors[0].message
    assert "4,300" in proposal.errors[0].message


def test_a_csv_cell_past_4300_digits_or_too_long_is_refused_by_row_and_column(study):
    from allocation.core.limits import NOTE_LENGTH

    data = csv_file(
        [
            allocation_row(task="T1", human="resident", rationale="9" * 4301),
            allocation_row(task="T2", human="resident", rationale="r" * (NOTE_LENGTH + 1)),
            allocation_row(task="T2", human="resident", rationale="9" * 4300),
        ]
    )
    read = read_tables(Upload("n.csv", data))
    assert [(p.sheet, p.row, p.column) for p in read.problems] == [
        ("allocation", 2, "rationale"),
        ("allocation", 3, "rationale"),
    ]
    assert "more than 4,300 digits" in read.problems[0].message
    assert f"{NOTE_LENGTH + 1:,} characters long" in read.problems[1].message


def test_a_long_xlsx_text_cell_is_refused_by_sheet_row_and_column(study):
    from allocation.core.limits import NOTE_LENGTH

    rows = [list(LINK_COLUMNS), ["T1", "T2", "informs", "", "", "n" * (NOTE_LENGTH + 1)]]
    read = read_tables(Upload("l.xlsx", xlsx({"links": rows})))
    assert [(p.sheet, p.row, p.column) for p in read.problems] == [("links", 2, "notes")]


def test_a_lone_surrogate_in_a_csv_is_refused_with_its_line(study):
    data = csv_file([allocation_row(task="T1", human="resident")]).replace(
        b"resident", "resident\ud800".encode("utf-8", "surrogatepass")
    )
    read = read_tables(Upload("s.csv", data))
    assert [(p.sheet, p.row) for p in read.problems] == [("file", 2)]
    assert "lone surrogate" in read.problems[0].message


def test_a_task_whose_chain_goes_on_and_a_monitoring_style_read_from_cells(study):
    """The applies cell "no, chain goes on" and the monitoring cell as the export writes
    them; a plain "no" afterwards drops the pass-through."""
    data = csv_file(
        [
            allocation_row(
                task="T1", automation="thermostat", accountable="resident", monitoring="periodic 2"
            ),
            allocation_row(task="T2", category="not_applicable", applies="no, chain goes on"),
        ]
    )
    proposal = propose(selectors.study_document(study), "auto", Upload("a.csv", data))
    assignments = proposal.document["plans"][1]["assignments"]
    assert assignments["T1"]["monitoring"] == {"style": "periodic", "per_day": 2}
    assert assignments["T2"] == {"applies": False, "pass_through": True}
    again = csv_file([allocation_row(task="T2", category="not_applicable", applies="no")])
    proposal = propose(proposal.document, "auto", Upload("b.csv", again))
    assert proposal.document["plans"][1]["assignments"]["T2"] == {"applies": False}


@pytest.mark.skipif(not EXPORTS, reason="allocation.exports is not there yet")
def test_a_pass_through_exports_and_imports_back_unchanged(study, owner):
    from allocation import exports

    document = selectors.study_document(study)
    document["plans"][1]["assignments"]["T2"] = {"applies": False, "pass_through": True}
    document["study"]["id"] = "heating-through"
    row = services.study_import(data=document, owner=owner)
    data = exports.export_bytes(exports.export_source(row, "auto"), "csv")
    assert b"no, chain goes on" in data
    preview = services.spreadsheet_preview(
        study=row, plan_key="auto", upload=Upload("auto.csv", data)
    )
    assert preview.problems == [] and preview.changes.empty
