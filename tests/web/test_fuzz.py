"""Bad input, fuzzed: the study upload, the spreadsheet import and
every form, through Django's test client as a signed-in owner.

The properties are the project's rules for bad input: no input gives a
server error (the test client re-raises any exception a view lets through); every
rejection is a message saying where the problem is (a JSON path for study files; sheet,
row and column for spreadsheets; the field for forms); and a rejected input leaves the
database exactly as it was: every row of every table (sessions aside) is compared
before and after each input, not only counted. Inputs that are accepted must leave the
study with no more errors than it had. The number of inputs tried is counted per target
and printed at the end of the run.
"""

from __future__ import annotations

import io
import os
import re
import zipfile
from html.parser import HTMLParser
from typing import Any

import openpyxl
import pytest
from django.apps import apps
from django.contrib.messages import constants as message_levels
from django.contrib.messages import get_messages
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from allocation import models as m
from allocation import selectors
from allocation.core import load_study, study_to_json
from allocation.core.reading import parse_json_text
from tests.core.test_fuzz_reading import (
    JSON_VALUES,
    PATH,
    TEXTS,
    TRIED,
    mutated_studies,
    raw_texts,
    to_text,
)
from tests.report import write_past_capture
from tests.web.test_spreadsheets import (
    good_workbook,
)

#: Bounded per target so the whole suite stays within a few minutes;
#: BATON_FUZZ_SCALE=4 (say) multiplies them for a longer hunt.
SCALE = float(os.environ.get("BATON_FUZZ_SCALE", "1"))
UPLOAD_EXAMPLES = max(1, int(120 * SCALE))
SHEET_EXAMPLES = max(1, int(80 * SCALE))
FORM_EXAMPLES = max(1, int(40 * SCALE))

FUZZ = settings(
    # The same inputs on every run, so that CI is repeatable; BATON_FUZZ_SCALE and a
    # local run with derandomize off explore further.
    derandomize=os.environ.get("BATON_FUZZ_RANDOM") is None,
    deadline=None,
    suppress_health_check=[
        HealthCheck.function_scoped_fixture,
        HealthCheck.too_slow,
        HealthCheck.data_too_large,
    ],
)


@pytest.fixture(scope="session", autouse=True)
def inputs_tried(request):
    """Print how many inputs each target was sent, after the last test, past the
    output capture (which would otherwise hide it when everything passes)."""
    yield TRIED
    if TRIED:
        write_past_capture(
            request.config,
            [f"fuzzing: {sum(TRIED.values())} inputs tried"]
            + [f"  {name}: {count}" for name, count in sorted(TRIED.items())],
        )


# -- the database, before and after ---------------------------------------------------

#: Sessions hold the flash messages and the spreadsheet waiting for its preview is a
#: pending import row; they change on every upload or request by design.
UNWATCHED = {"sessions.session", "allocation.pendingimport"}


def database() -> dict[str, list[tuple]]:
    """Every row of every table, in primary-key order."""
    return {
        model._meta.label_lower: list(model.objects.order_by("pk").values_list())
        for model in apps.get_models()
        if model._meta.label_lower not in UNWATCHED and not model._meta.proxy
    }


def changed_tables(before: dict, after: dict) -> list[str]:
    return [name for name in before if before[name] != after[name]]


def study_errors(study: m.Study) -> int | None:
    """The study's error count now (``None`` when the study is gone)."""
    row = m.Study.objects.filter(pk=study.pk).first()
    if row is None:
        return None
    return len(selectors.study_load(row).errors)


# -- what a page offers to post ------------------------------------------------------


class FormFields(HTMLParser):
    """The fields posting to one path: name -> values offered (options, radio and
    checkbox values, the value filled in). A field counts when it sits inside an element
    whose ``action`` or ``hx-post`` is the path (a form, or a table row that htmx posts),
    or names such a form in its ``form`` attribute."""

    VOID = {"input", "br", "img", "meta", "link", "hr", "col", "source", "wbr", "area"}

    def __init__(self, path: str):
        super().__init__()
        self.path = path
        self.stack: list[str] = []
        self.depth: int | None = None
        self.form_ids: set[str] = set()
        self.select: str | None = None
        self.fields: dict[str, list[str]] = {}

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if self.path in (a.get("action"), a.get("hx-post")):
            if self.depth is None:
                self.depth = len(self.stack)
            if tag == "form" and a.get("id"):
                self.form_ids.add(a["id"])
        inside = self.depth is not None or a.get("form") in self.form_ids
        if inside and tag in ("input", "textarea", "select", "button") and a.get("name"):
            name = a["name"]
            if name != "csrfmiddlewaretoken":
                offered = self.fields.setdefault(name, [])
                if a.get("value") is not None:
                    offered.append(a["value"])
                self.select = name if tag == "select" else None
        elif tag == "option" and self.select is not None:
            self.fields[self.select].append(a.get("value") or "")
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if tag == "select":
            self.select = None
        if tag in self.stack:
            while self.stack and self.stack.pop() != tag:
                pass
        if self.depth is not None and len(self.stack) <= self.depth:
            self.depth = None


def form_fields(client, page: str, path: str) -> dict[str, list[str]]:
    response = client.get(page)
    assert response.status_code == 200, page
    parser = FormFields(path)
    parser.feed(response.content.decode())
    return parser.fields


#: Values a person (or a script) might type: numbers at the edges, words the forms
#: know, markup, very long text, other scripts.
TYPED = st.one_of(
    TEXTS,
    st.integers(-(10**30), 10**30).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(
        [
            "0",
            "-1",
            "1e309",
            "NaN",
            "inf",
            "-0",
            "1,5",
            "9" * 400,
            "[1,2,3]",
            '{"5": 6}',
            "[",
            "{}",
            "null",
            "true",
            "new",
            "G1",
            "T1",
            "T2",
            "T9",
            "resident",
            "thermostat",
            "schedule",
            "hold",
            "manual",
            "auto",
            "23:00",
            "24:00",
            "7:5",
            "agreed",
            "alert",
            "<b>bold</b>",
            "x" * 20_000,
        ]
    ),
)


@st.composite
def posts(draw, fields: dict[str, list[str]]) -> dict[str, Any]:
    """A form post: each field left out, given a value the page offered, typed at
    random, or repeated; sometimes with fields the form does not have."""
    data: dict[str, Any] = {}
    for name, offered in fields.items():
        choice = draw(st.sampled_from(["missing", "offered", "typed", "typed", "list"]))
        if choice == "missing":
            continue
        if choice == "offered" and offered:
            data[name] = draw(st.sampled_from(offered))
        elif choice == "list":
            data[name] = draw(st.lists(TYPED, min_size=2, max_size=3))
        else:
            data[name] = draw(TYPED)
    extra = draw(
        st.dictionaries(
            st.sampled_from(["id", "key", "plan", "x", "remove", "reset"]), TYPED, max_size=2
        )
    )
    for name, value in extra.items():
        data.setdefault(name, value)
    return data


# -- responses: refused or accepted --------------------------------------------------

ERROR_MARKS = re.compile(
    r'class="[^"]*\b(error|errorlist|problems|field-problems|row-problems)\b|role="alert"'
)


def refusal(response) -> str | None:
    """Why the response refused the input (``None`` when it did not say it did): a
    status of 400 or more, a warning or error message, or a form with errors."""
    if response.status_code >= 400:
        return f"status {response.status_code}"
    # Only this request's messages: those still queued for the next page, and those an
    # htmx response showed at once in its messages slot (post_and_check sends no earlier
    # ones: they would be shown beside them).
    storage = getattr(response.wsgi_request, "_messages", None)
    queued = list(getattr(storage, "_queued_messages", []))
    if getattr(storage, "used", False):
        queued += getattr(storage, "_loaded_data", [])
    said = [str(message) for message in queued if message.level >= message_levels.WARNING]
    if said:
        return "; ".join(said)
    for context in response.context or []:
        form = context.get("form") if hasattr(context, "get") else None
        if form is not None and getattr(form, "is_bound", False) and form.errors:
            return "form errors"
    return None


def post_and_check(client, url: str, data: dict, study: m.Study, htmx: bool, **extra) -> Any:
    """Post one input; a refusal must say so and leave every table as it was."""
    errors_before = study_errors(study)
    before = database()
    headers = {"HX-Request": "true"} if htmx else {}
    client.cookies.pop("messages", None)  # the flash messages of earlier posts
    response = client.post(url, data, headers=headers, **extra)
    assert response.status_code < 500
    after = database()
    why = refusal(response)
    if why is not None and response.status_code not in (403, 404, 405):
        # Refused with a message where the person is looking.
        if response.status_code == 400:
            body = response.content.decode()
            # A form with its errors marked, or a one-line answer to a tampered post.
            assert ERROR_MARKS.search(body) or ("<" not in body and body.strip()), why
        assert changed_tables(before, after) == [], why
    if why is None and before != after:
        errors_after = study_errors(study)
        if errors_after is not None and errors_before is not None:
            assert errors_after <= errors_before, (data, errors_before, errors_after)
    return response


# -- (a) the study upload -------------------------------------------------------------


def upload_inputs() -> st.SearchStrategy[bytes]:
    """Study files: arbitrary JSON, mutated valid files, broken text."""
    return st.one_of(
        JSON_VALUES.map(lambda value: to_text(value).encode()),
        mutated_studies().map(lambda document: to_text(document).encode()),
        raw_texts().map(
            lambda damaged: (
                damaged[1]
                if isinstance(damaged[1], bytes)
                else damaged[1].encode("utf-8", errors="surrogatepass")
            )
        ),
    )


@pytest.mark.django_db
def test_fuzzed_study_uploads_never_fail_and_refusals_store_nothing(client, owner):
    client.force_login(owner)
    url = reverse("study-upload")

    @settings(FUZZ, max_examples=UPLOAD_EXAMPLES)
    @given(text=upload_inputs(), htmx=st.booleans())
    def upload(text: bytes, htmx: bool):
        TRIED["study upload (JSON)"] += 1
        before = database()
        headers = {"HX-Request": "true"} if htmx else {}
        upload = SimpleUploadedFile("fuzz.json", text, content_type="application/json")
        response = client.post(url, {"file": upload}, headers=headers)
        assert response.status_code in (200, 302, 400)
        data, problems = parse_json_text(text)
        expected = load_study(data) if not problems else None
        accepted = response.status_code == 302 or "HX-Redirect" in response
        if not accepted:
            assert database() == before
            shown = response.context["problems"]
            assert shown, "a refusal lists its problems"
            page = response.content.decode()
            assert "Nothing was stored" in page
            for problem in shown:
                assert PATH.fullmatch(problem.path) and problem.message.strip()
                # The path is on the page beside its message (escaped, as all text is).
                assert f"<code>{_escaped(problem.path)}</code>" in page
            assert expected is None or not expected.ok
            return
        # Accepted: exactly the study the core reads from the file, and nothing else.
        assert expected is not None and expected.ok
        stored = m.Study.objects.order_by("-pk").first()
        assert selectors.study_document(stored) == study_to_json(expected.study)
        stored.delete()

    upload()


def _escaped(text: str) -> str:
    from django.utils.html import escape

    return escape(text)


# -- (b) the spreadsheet import -------------------------------------------------------


def _sheets(data: bytes) -> dict[str, list[list]]:
    book = openpyxl.load_workbook(io.BytesIO(data))
    return {
        sheet.title: [list(row) for row in sheet.iter_rows(values_only=True)] for sheet in book
    }


GOOD_SHEETS = _sheets(good_workbook())

CELLS = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**18), 10**18),
    st.floats(allow_nan=False, allow_infinity=False),
    TEXTS.map(lambda text: re.sub(r"[\x00-\x08\x0b\x0c\x0e-\x1f]", "", text)),
    st.sampled_from(
        [
            "=1+1",
            '=HYPERLINK("http://x")',
            "+A1",
            "@SUM(A1)",
            "-2",
            "'=quoted",
            "T9",
            "G1",
            "T1",
            "resident",
            "thermostat",
            "nobody",
            "[1,2,3]",
            "[3,2,1]",
            '{"every_days":0}',
            '{"visual": 99}',
            "acquisition 11",
            "decision 7; action 0",
            "precedes",
            "informs",
            "yes",
            "no",
            "x" * 40_000,
        ]
    ),
)


@st.composite
def mutated_sheets(draw) -> dict[str, list[list]]:
    """The good workbook's sheets with cells replaced, rows dropped or repeated,
    columns or sheets taken away or renamed."""
    sheets = {name: [list(row) for row in rows] for name, rows in GOOD_SHEETS.items()}
    for _ in range(draw(st.integers(1, 4))):
        name = draw(st.sampled_from(sorted(sheets)))
        rows = sheets[name]
        how = draw(
            st.sampled_from(
                [
                    "cell",
                    "cell",
                    "cell",
                    "drop row",
                    "repeat row",
                    "drop column",
                    "drop sheet",
                    "rename sheet",
                    "junk row",
                ]
            )
        )
        if how == "drop sheet" and len(sheets) > 1:
            del sheets[name]
        elif how == "rename sheet":
            sheets[draw(st.sampled_from(["Tasks", "links ", "allocation2", "x"]))] = sheets.pop(
                name
            )
        elif not rows:
            continue
        elif how == "cell":
            row = draw(st.integers(0, len(rows) - 1))
            column = draw(st.integers(0, max(len(rows[row]), 1) - 1 + 2))
            rows[row] += [None] * (column + 1 - len(rows[row]))
            rows[row][column] = draw(CELLS)
        elif how == "drop row":
            del rows[draw(st.integers(0, len(rows) - 1))]
        elif how == "repeat row":
            index = draw(st.integers(0, len(rows) - 1))
            rows.insert(index, list(rows[index]))
        elif how == "drop column":
            column = draw(st.integers(0, len(rows[0]) - 1))
            for row in rows:
                del row[column : column + 1]
        else:
            rows.append(draw(st.lists(CELLS, max_size=8)))
    return sheets


def _workbook(sheets: dict[str, list[list]]) -> bytes:
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name[:31])
        for row in rows:
            sheet.append(row)
    buffer = io.BytesIO()
    book.save(buffer)
    return buffer.getvalue()


def _csv(rows: list[list], about: list[str]) -> bytes:
    import csv

    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerows([["" if cell is None else cell for cell in row] for row in rows])
    return ("".join(f"{line}\n" for line in about) + buffer.getvalue()).encode("utf-8")


def _zip(members: dict[str, bytes]) -> bytes:
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w") as archive:
        for name, data in members.items():
            archive.writestr(name, data)
    return buffer.getvalue()


@st.composite
def spreadsheet_files(draw) -> tuple[str, bytes]:
    kind = draw(st.sampled_from(["xlsx", "xlsx", "csv", "csv", "bytes", "zip"]))
    if kind == "xlsx":
        return "fuzz.xlsx", _workbook(draw(mutated_sheets()))
    if kind == "csv":
        rows = draw(mutated_sheets()).get("allocation") or GOOD_SHEETS["allocation"]
        about = draw(
            st.lists(
                st.sampled_from(
                    [
                        "# study: home-heating",
                        "# plan: auto",
                        "# plan: manual",
                        "# study: other",
                        "#",
                        "# sheet: tasks",
                    ]
                ),
                max_size=3,
            )
        )
        return "fuzz.csv", _csv(rows, about)
    if kind == "zip":
        # Something that starts like a workbook but is not one (or is a broken one).
        members = draw(
            st.dictionaries(
                st.sampled_from(
                    [
                        "[Content_Types].xml",
                        "xl/workbook.xml",
                        "xl/worksheets/sheet1.xml",
                        "_rels/.rels",
                        "x.txt",
                    ]
                ),
                st.binary(max_size=200),
                min_size=1,
                max_size=4,
            )
        )
        return draw(st.sampled_from(["fuzz.xlsx", "fuzz.csv"])), _zip(members)
    prefix = draw(st.sampled_from([b"", b"PK\x03\x04", b"\xef\xbb\xbf", b"task,human\n"]))
    return draw(st.sampled_from(["fuzz.xlsx", "fuzz.csv", "fuzz"])), prefix + draw(
        st.binary(min_size=1, max_size=600)
    )


SHEET_NAMES = {"file", "study", "about", "tasks", "links", "allocation"}


@pytest.mark.django_db
def test_fuzzed_spreadsheets_preview_and_apply_store_nothing_on_errors(client, owner, study):
    client.force_login(owner)
    page_url = reverse("plan-import", args=[study.pk, "auto"])
    upload_url = reverse("plan-import-upload", args=[study.pk, "auto"])
    apply_url = reverse("plan-import-apply", args=[study.pk, "auto"])

    @settings(FUZZ, max_examples=SHEET_EXAMPLES)
    @given(file=spreadsheet_files())
    def spreadsheet(file: tuple[str, bytes]):
        TRIED["spreadsheet import (CSV, XLSX, bytes)"] += 1
        name, data = file
        before = database()
        response = client.post(upload_url, {"file": SimpleUploadedFile(name, data)})
        assert response.status_code == 302
        assert database() == before, "an upload only keeps the file for the preview"
        response = client.get(page_url)
        assert response.status_code == 200
        preview = response.context["preview"]
        for problem in preview.problems:
            assert problem.sheet in SHEET_NAMES, problem
            assert problem.message.strip(), problem
            if problem.sheet in {"tasks", "links", "allocation"} and problem.row is not None:
                assert problem.row >= 1
        page = response.content.decode()
        if preview.problems:
            assert ERROR_MARKS.search(page) or "warning" in page
        pending = response.context["pending"]
        version = response.context["version"]
        response = client.post(apply_url, {"version": version, "sha256": pending.sha256})
        assert response.status_code == 302
        if not preview.ok:
            assert database() == before, [str(p) for p in preview.errors]
            said = [str(message) for message in get_messages(response.wsgi_request)]
            assert any("Nothing was stored" in text for text in said), said
        elif preview.changes is not None and not preview.changes.empty:
            assert selectors.study_document(study) == preview.proposal.document
            assert not selectors.study_load(study).errors
        else:
            assert database() == before

    spreadsheet()


# -- (c) every form -------------------------------------------------------------------


def _url(name: str, study: m.Study, *args: str) -> str:
    return reverse(name, args=[study.pk, *args])


#: (target URL name, its arguments, the page whose form posts there, fields added by
#: hand where the page shows its form only on demand).
FORMS: list[tuple[str, tuple[str, ...], str | None, dict[str, list[str]]]] = [
    ("inventory-item", ("agents", "resident"), None, {}),
    ("inventory-item", ("agents", "new"), None, {}),
    ("inventory-item", ("events", "leave"), None, {}),
    ("inventory-item", ("tasks", "T2"), None, {}),
    ("inventory-item", ("tasks", "new"), None, {}),
    ("inventory-item", ("links", "new"), None, {}),
    ("inventory-delete", ("agents", "thermostat"), None, {}),
    ("plan-row-save", ("auto", "T2"), "plan-editor", {}),
    ("plan-bulk", ("auto",), "plan-editor", {}),
    ("plan-new", (), "study-detail", {}),
    ("mode-edit", ("auto", "hold"), None, {}),
    ("mode-edit", ("auto", "new"), None, {}),
    ("mode-override", ("auto", "hold", "T2"), None, {}),
    ("transition-edit", ("auto", "0"), None, {}),
    ("transition-edit", ("auto", "new"), None, {}),
    ("transition-delete", ("auto", "0"), "plan-modes", {}),
    ("mode-initial", ("auto", "hold"), "plan-modes", {}),
    ("study-assumption-set", (), None, {"key": [], "value": []}),
    (
        "study-risk-policy-set",
        (),
        None,
        {
            "likelihood_bands": ["0.01 0.05 0.2 0.5"],
            "review": ["4"],
            "unacceptable": ["6"],
            "note": [],
        },
    ),
    ("study-compare-weights", (), "study-compare", {}),
    ("plan-simulation-run", ("auto",), "plan-simulation", {}),
    ("snapshot-create", (), "study-snapshots", {}),
    ("snapshot-restore", (), None, {"snapshot": [], "key": []}),
    ("review-comment", ("auto",), "plan-review", {"parent": []}),
    ("review-decide", ("auto",), "plan-review", {}),
    ("review-decision-status", ("auto",), None, {"decision": [], "status": ["open", "agreed"]}),
    ("plan-rating-record", ("auto",), "plan-ratings", {}),
    ("plan-rating-delete", ("auto",), None, {"rating": []}),
]


def _source(name: str, args: tuple[str, ...], study: m.Study, source: str | None) -> str:
    if source is None:
        return _url(name, study, *args)
    plan_args = tuple(arg for arg in args[:1] if arg in {"auto", "manual"})
    return _url(source, study, *plan_args)


def _seed(client, study: m.Study, fields: dict[str, list[str]]) -> dict[str, list[str]]:
    """Real values for the hand-given fields: the study's assumption keys, a snapshot,
    a decision and a rating to act on."""
    pk = study.pk
    if "key" in fields and "value" in fields:
        page = client.get(reverse("study-assumptions", args=[pk])).content.decode()
        fields["key"] = sorted(set(re.findall(r'id="assumption-([\w.]+)"', page)))[:8]
    if "snapshot" in fields:
        client.post(reverse("snapshot-create", args=[pk]), {"title": "before fuzzing"})
        fields["snapshot"] = [str(s.pk) for s in m.Snapshot.objects.filter(study=study)]
    return fields


@pytest.mark.django_db
@pytest.mark.parametrize(
    ("name", "args", "source", "given_fields"),
    FORMS,
    ids=[f"{name}:{'/'.join(args)}" for name, args, _, _ in FORMS],
)
def test_fuzzed_forms_never_fail_and_refusals_change_nothing(
    client, owner, study, name, args, source, given_fields
):
    client.force_login(owner)
    url = _url(name, study, *args)
    fields = dict(given_fields)
    if source is not None or not given_fields:
        fields |= form_fields(client, _source(name, args, study, source), url)
    fields = _seed(client, study, {key: list(value) for key, value in fields.items()})

    @settings(FUZZ, max_examples=FORM_EXAMPLES)
    @given(data=posts(fields), htmx=st.booleans())
    def form(data: dict, htmx: bool):
        TRIED[f"form {name}"] += 1
        post_and_check(client, url, data, study, htmx)

    form()


# -- what the fuzzing found, kept as plain tests --------------------------------------


@pytest.mark.django_db
@pytest.mark.parametrize("level", ["?", "0", "11", "-1", "1e3"])
def test_a_refused_plan_row_with_an_odd_level_is_shown_back(client, owner, study, level):
    """Found by the fuzzing: the row shown back after a refused htmx save read the
    posted level with int() and looked its words up, so "?" or 0 was a server error."""
    client.force_login(owner)
    before = database()
    response = client.post(
        reverse("plan-row-save", args=[study.pk, "auto", "T2"]),
        {"who": "shared", "human": "resident", "automation": "thermostat", "level": level},
        headers={"HX-Request": "true"},
    )
    assert response.status_code == 200
    assert 'id="row-T2"' in response.content.decode()
    assert database() == before


@pytest.mark.django_db
@pytest.mark.parametrize("copy_of", ["/", "no such plan", "a/b"])
def test_a_refused_new_plan_goes_back_to_the_study_when_copy_of_is_odd(
    client, owner, study, copy_of
):
    """Found by the fuzzing: a refused new plan went back to the editor of ``copy_of``
    as posted, and reversing that URL for "/" was a server error."""
    client.force_login(owner)
    before = database()
    response = client.post(reverse("plan-new", args=[study.pk]), {"copy_of": copy_of, "id": ""})
    assert response.status_code == 302
    assert response["Location"] == reverse("study-detail", args=[study.pk])
    assert database() == before


# -- oversized uploads ----------------------------------------------------------------

MIB = 1024 * 1024


def _multipart(client, url: str, name: str, size: int, headers=None):
    """Post a file of ``size`` bytes (its declared length is what the guard reads)."""
    upload = SimpleUploadedFile(name, b"{" + b" " * (size - 2) + b"}")
    return client.post(url, {"file": upload}, headers=headers or {})


@pytest.mark.django_db
@pytest.mark.parametrize("htmx", [False, True])
def test_an_oversized_study_file_is_refused_before_it_is_read(client, owner, htmx, monkeypatch):
    client.force_login(owner)
    before = database()
    read = []
    monkeypatch.setattr(
        "allocation.views.studies.parse_json_text", lambda text: read.append(text) or (None, [])
    )
    response = _multipart(
        client,
        reverse("study-upload"),
        "big.json",
        6 * MIB,
        {"HX-Request": "true"} if htmx else None,
    )
    assert response.status_code == (200 if htmx else 413)
    page = response.content.decode()
    assert "the study file is larger than 5 MiB" in page and "Nothing was stored" in page
    assert read == [], "the file was never parsed"
    assert not response.wsgi_request.FILES, "the handler skipped the file's bytes"
    assert database() == before


@pytest.mark.django_db
def test_a_study_file_just_under_the_limit_is_read(client, owner):
    # 5 MiB of white space around an empty object: read, and refused for what it says.
    client.force_login(owner)
    response = _multipart(client, reverse("study-upload"), "wide.json", 5 * MIB - 1024)
    assert response.status_code == 400
    assert "larger than" not in response.content.decode()
    assert any(p.path.startswith("$") for p in response.context["problems"])


@pytest.mark.django_db
@pytest.mark.parametrize("htmx", [False, True])
def test_an_oversized_spreadsheet_is_refused_before_it_is_kept(client, owner, study, htmx):
    client.force_login(owner)
    before = database()
    url = reverse("plan-import-upload", args=[study.pk, "auto"])
    # 3 MiB: over the import's 2 MiB, under the 5 MiB every upload may have.
    response = _multipart(
        client, url, "big.csv", 3 * MIB, {"HX-Request": "true"} if htmx else None
    )
    assert response.status_code == (200 if htmx else 413)
    assert "the spreadsheet is larger than 2 MiB" in response.content.decode()
    assert not any(key.startswith("baton.spreadsheet.") for key, _ in client.session.items())
    assert database() == before


@pytest.mark.django_db
def test_a_request_over_the_request_limit_keeps_no_file(client, owner, study):
    """Past BATON_MAX_REQUEST_BYTES the handler drops the file as it arrives, so the
    view sees no file at all, and still answers with the size message."""
    client.force_login(owner)
    url = reverse("plan-import-upload", args=[study.pk, "auto"])
    response = _multipart(client, url, "huge.xlsx", 7 * MIB)
    assert response.status_code == 413
    assert not response.wsgi_request.FILES
    assert "the spreadsheet is larger than 2 MiB" in response.content.decode()


def test_the_handler_skips_a_file_without_a_declared_length():
    """A chunked request declares no length: the handler counts the bytes instead
    (Django's upload handler protocol: SkipFile drops the rest of the file)."""
    from django.core.files.uploadhandler import SkipFile
    from django.test import RequestFactory

    from allocation.web.uploads import SizeLimitedUploadHandler, upload_refusal

    request = RequestFactory().post("/")
    request.META.pop("CONTENT_LENGTH", None)
    handler = SizeLimitedUploadHandler(request)
    handler.handle_raw_input(None, request.META, None, b"x")
    handler.new_file("file", "a.json", "application/json", None)
    chunk = b"x" * MIB
    for start in range(5):
        assert handler.receive_data_chunk(chunk, start * MIB) == chunk
    with pytest.raises(SkipFile):
        handler.receive_data_chunk(chunk, 5 * MIB)
    assert "larger than 5 MiB" in upload_refusal(request, 5 * MIB, "the study file")
