"""Security: stored markup shows as text everywhere, uploads are never kept or served back
raw, the security headers and production settings, and the sign-in attempt limit.

Sources: OWASP Cross-Site Scripting Prevention Cheat Sheet (output encoding for HTML,
attributes and JavaScript data), OWASP CSV Injection, OWASP Authentication Cheat Sheet
(login throttling), Django's deployment checklist (``check --deploy``).
"""

from __future__ import annotations

import copy
import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from django.contrib.auth import authenticate
from django.core.cache import cache
from django.urls import reverse

from allocation import models as m
from allocation import security, services
from tests.core.conftest import HOME_HEATING

from .conftest import make_user
from .test_security_matrix import STUDY_RULES, url_for

REPO = Path(__file__).resolve().parents[2]
SCRIPT = "<script>alert(1)</script>"
IMAGE = '"><img src=x onerror=alert(1)>'
#: What must never reach a page, a chart's text or a report unescaped.
RAW = ("<script>alert(1)", "<img src=x onerror")


def marked_up(document: dict) -> dict:
    """The home-heating study with both payloads in every piece of free text."""
    doc = copy.deepcopy(document)
    doc["study"]["title"] = f"Heating {SCRIPT}"
    doc["study"]["description"] = f"About {IMAGE}"
    for agent in doc["agents"]:
        agent["name"] = f"{agent['name']} {IMAGE}"
        agent["notes"] = SCRIPT
    for event in doc["events"]:
        event["name"] = f"{event['name']} {SCRIPT}"
        event["notes"] = IMAGE
    for task in doc["tasks"]:
        task["title"] = f"{task['title']} {SCRIPT}{IMAGE}"
        task["notes"] = f"{IMAGE}{SCRIPT}"
    for link in doc["links"]:
        link["notes"] = SCRIPT
    for plan in doc["plans"]:
        plan["name"] = f"{plan['name']} {IMAGE}"
        plan["description"] = SCRIPT
        for assignment in plan["assignments"].values():
            assignment["rationale"] = f"Because {SCRIPT}{IMAGE}"
        for mode in plan.get("modes", {}).get("states", []):
            mode["name"] = f"{mode['name']} {SCRIPT}"
            mode["indication"] = IMAGE
            mode["notes"] = SCRIPT
        for transition in plan.get("modes", {}).get("transitions", []):
            transition["trigger"] = f"{transition['trigger']} {IMAGE}"
            transition["notes"] = SCRIPT
    return doc


@pytest.fixture
def hostile(owner, member_of):
    """A study full of markup, with a comment, a decision, a rating and a snapshot."""
    study = services.study_import(data=marked_up(HOME_HEATING), owner=owner)
    services.comment_post(
        study=study, user=owner, kind="task", key="T2", plan_key="auto", body=SCRIPT + IMAGE
    )
    services.decision_save(
        study=study,
        user=owner,
        kind="task",
        key="T2",
        plan_key="auto",
        decision=IMAGE,
        rationale=SCRIPT,
    )
    services.rating_record(
        study=study,
        user=owner,
        plan_key="auto",
        task_key="T2",
        session=SCRIPT,
        participant="P1",
        ratings=dict.fromkeys(
            ("mental", "physical", "temporal", "performance", "effort", "frustration"), 40
        ),
        notes=IMAGE,
    )
    services.snapshot_create(study=study, title=f"Agreed {SCRIPT}{IMAGE}", user=owner)
    return study


JSON_SCRIPT = re.compile(r'<script id="([^"]+)" type="application/json">(.*?)</script>', re.S)


def strings(value):
    if isinstance(value, str):
        yield value
    elif isinstance(value, dict):
        for item in value.values():
            yield from strings(item)
    elif isinstance(value, list):
        for item in value:
            yield from strings(item)


def unescaped(html: str) -> list[str]:
    """Where the payloads appear unescaped: in the page itself or in the text of its
    chart data (plotly reads hover texts, labels and titles as HTML)."""
    found = [raw for raw in RAW if raw in html]
    for block_id, text in JSON_SCRIPT.findall(html):
        for value in strings(json.loads(text)):
            if any(raw in value for raw in RAW):
                found.append(f"{block_id}: {value[:120]!r}")
    return found


GET_NAMES = sorted(name for name, (get, _post) in STUDY_RULES.items() if get is not None)
#: Data files: the text as stored is their content; they must never be read as a page.
FILE_NAMES = (
    "study-download",
    "plan-analysis-download",
    "study-history-csv",
    "study-history-json",
)
PAGE_NAMES = [name for name in GET_NAMES if name not in ("plan-export", *FILE_NAMES)]


@pytest.mark.parametrize("name", PAGE_NAMES)
def test_stored_markup_shows_as_text_on_every_page(client, hostile, owner, name):
    client.force_login(owner)
    url = url_for(name, hostile.pk)
    for headers in ({}, {"HX-Request": "true"}):
        response = client.get(url, headers=headers)
        assert response.status_code == 200, (url, headers)
        text = response.content.decode()
        assert not unescaped(text), (url, headers, unescaped(text))


def test_simulated_days_show_markup_as_text(client, hostile, owner, settings):
    """The simulation's charts (a run is needed for them) hold only escaped text."""
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
    run = services.simulation_request(study=hostile, plan_key="auto", days=2, seed=1, user=owner)
    assert run.status == m.SimulationStatus.DONE
    client.force_login(owner)
    urls = [
        reverse("plan-simulation", args=[hostile.pk, "auto"]) + "?days=2&seed=1",
        reverse("study-simulation-compare", args=[hostile.pk]) + "?days=2&seed=1",
    ]
    for url in urls:
        page = client.get(url).content.decode()
        assert JSON_SCRIPT.search(page), url
        assert not unescaped(page), (url, unescaped(page))


@pytest.mark.parametrize("name", FILE_NAMES)
def test_data_files_are_attachments_never_pages(client, hostile, owner, name):
    client.force_login(owner)
    response = client.get(url_for(name, hostile.pk))
    assert response.status_code == 200
    assert not response["Content-Type"].startswith("text/html")
    assert response["Content-Disposition"].startswith("attachment")
    assert response["X-Content-Type-Options"] == "nosniff"


def test_the_payloads_reach_the_pages_escaped(client, hostile, owner):
    """The converse, so the test above cannot pass by showing nothing: the escaped forms
    are on the pages, and the chart data holds the text HTML-escaped for plotly."""
    client.force_login(owner)
    page = client.get(reverse("plan-dashboard", args=[hostile.pk, "auto"])).content.decode()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    charts = [json.loads(text) for _id, text in JSON_SCRIPT.findall(page)]
    assert charts and any("&lt;script&gt;" in s for c in charts for s in strings(c))


def test_exports_keep_markup_as_text(client, hostile, owner):
    from openpyxl import load_workbook
    from pypdf import PdfReader

    client.force_login(owner)

    def export(fmt: str) -> bytes:
        response = client.get(reverse("plan-export", args=[hostile.pk, "auto", fmt]))
        assert response.status_code == 200
        return response.content

    assert not unescaped(export("html").decode())
    pdf = "".join(page.extract_text() for page in PdfReader(io.BytesIO(export("pdf"))).pages)
    # The PDF prints the text as typed (the HTML it is laid out from escapes it).
    assert "<script>alert(1)</script>" in pdf.replace("\n", "")
    csv_text = export("csv").decode()
    assert SCRIPT in csv_text  # plain text in a text file, no formula
    workbook = load_workbook(io.BytesIO(export("xlsx")))
    cells = [c for sheet in workbook for row in sheet.iter_rows() for c in row]
    assert any(isinstance(c.value, str) and SCRIPT in c.value for c in cells)
    assert all(c.data_type != "f" for c in cells)


def test_exports_defuse_formulas(client, owner, heating_document):
    """A title starting with = is stored as text, never run by a spreadsheet program
    (OWASP CSV Injection): CSV cells get a leading quote, XLSX cells are strings."""
    from openpyxl import load_workbook

    heating_document["tasks"][2]["title"] = '=HYPERLINK("http://x.invalid","go")'
    study = services.study_import(data=heating_document, owner=owner)
    client.force_login(owner)
    csv_text = client.get(reverse("plan-export", args=[study.pk, "auto", "csv"])).content
    assert b"'=HYPERLINK" in csv_text
    book = client.get(reverse("plan-export", args=[study.pk, "auto", "xlsx"])).content
    cells = [c for s in load_workbook(io.BytesIO(book)) for r in s.iter_rows() for c in r]
    formula = [c for c in cells if isinstance(c.value, str) and "HYPERLINK" in c.value]
    assert formula and all(c.data_type == "s" for c in formula)


# -- uploads ---------------------------------------------------------------------------


def _files_under(folder: Path) -> set[Path]:
    return {path for path in folder.rglob("*") if path.is_file()}


def test_uploaded_files_are_read_in_memory_and_never_echoed_raw(
    client, owner, study, settings, tmp_path
):
    """Study JSON and spreadsheet uploads: nothing is written to disk (no temporary file,
    no media folder), and the answer is an HTML page with the content escaped."""
    settings.MEDIA_ROOT = tmp_path / "media"
    settings.FILE_UPLOAD_TEMP_DIR = tmp_path / "upload-tmp"
    (tmp_path / "upload-tmp").mkdir()
    client.force_login(owner)
    payload = f'{{"format": "baton.study", "study": "{SCRIPT}"}}'.encode()
    answers = [
        client.post(
            reverse("study-upload"),
            {"file": _named(payload, "x.json")},
        ),
        client.post(
            reverse("plan-import-upload", args=[study.pk, "auto"]),
            {"file": _named(f"task,title\nT2,{SCRIPT}\n".encode(), "x.csv")},
        ),
        client.post(
            reverse("plan-import-upload", args=[study.pk, "auto"]),
            {"file": _named(b"<html><script>alert(1)</script></html>", "x.html")},
        ),
    ]
    for response in answers:
        assert response.status_code < 500
        assert response["Content-Type"].startswith("text/html")
        assert not unescaped(response.content.decode())
        assert response["X-Content-Type-Options"] == "nosniff"
    assert not _files_under(tmp_path)  # no temporary upload file, nothing in media


def _named(content: bytes, name: str):
    from django.core.files.uploadedfile import SimpleUploadedFile

    return SimpleUploadedFile(name, content, content_type="text/html")


# -- headers and production settings ---------------------------------------------------


def test_security_headers_on_every_page(client, owner, study):
    client.force_login(owner)
    for url in (reverse("login"), reverse("study-detail", args=[study.pk])):
        response = client.get(url)
        assert response["X-Content-Type-Options"] == "nosniff"
        assert response["Referrer-Policy"] == "same-origin"
        assert response["X-Frame-Options"] == "DENY"
        assert response["Cross-Origin-Opener-Policy"] == "same-origin"
        policy = dict(
            part.strip().split(" ", 1) for part in response["Content-Security-Policy"].split(";")
        )
        assert policy["script-src"] == "'self'"  # no inline scripts, no eval
        assert policy["object-src"] == "'none'" and policy["frame-ancestors"] == "'none'"


def test_templates_have_no_inline_scripts_or_handlers():
    """The policy allows scripts from our origin only: no inline code in templates."""
    bad = []
    for path in (REPO / "templates").rglob("*.html"):
        text = path.read_text()
        for tag in re.findall(r"<script\b[^>]*>", text):
            if "src=" not in tag and "application/json" not in tag:
                bad.append(f"{path.name}: {tag}")
        bad += [f"{path.name}: {h}" for h in re.findall(r"\son[a-z]+=|hx-on|javascript:", text)]
    assert not bad, bad


def test_session_and_password_settings_are_djangos_defaults(settings):
    from django.conf import global_settings as default

    for name in (
        "SESSION_COOKIE_AGE",
        "SESSION_COOKIE_HTTPONLY",
        "SESSION_COOKIE_SAMESITE",
        "SESSION_EXPIRE_AT_BROWSER_CLOSE",
        "CSRF_COOKIE_SAMESITE",
        "SESSION_ENGINE",
    ):
        assert getattr(settings, name) == getattr(default, name), name
    validators = {v["NAME"].rsplit(".", 1)[1] for v in settings.AUTH_PASSWORD_VALIDATORS}
    assert validators == {
        "UserAttributeSimilarityValidator",
        "MinimumLengthValidator",
        "CommonPasswordValidator",
        "NumericPasswordValidator",
    }


PRODUCTION = {
    "BATON_DEBUG": "0",
    "BATON_SECRET_KEY": "x" * 40 + "-production-secret-for-the-deploy-check-0123456789",
    "BATON_ALLOWED_HOSTS": "baton.example.org",
}

HEADERS_SCRIPT = """
from django.conf import settings
from django.test import Client, override_settings
from django.test.utils import setup_test_environment
setup_test_environment()
# Static files are not collected here; the headers do not depend on their storage.
storages = {**settings.STORAGES, "staticfiles": {
    "BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"}}
with override_settings(STORAGES=storages):
    response = Client().get(
        "/accounts/login/", secure=True, headers={"host": "baton.example.org"})
import json
cookies = {k: dict(v) for k, v in response.cookies.items()}
print(json.dumps({"status": response.status_code, "headers": dict(response.headers),
                  "cookies": cookies}))
"""


def test_production_settings_send_every_header(tmp_path):
    """Under production settings (``check --deploy`` clean, see test_commands), the
    sign-in page is sent with HSTS, secure cookies and the headers above."""
    env = {**os.environ, **PRODUCTION, "BATON_DATA_DIR": str(tmp_path)}
    env.pop("DJANGO_ALLOW_ASYNC_UNSAFE", None)
    env["DJANGO_SETTINGS_MODULE"] = "allocation.settings"
    result = subprocess.run(
        [sys.executable, "manage.py", "shell", "-c", HEADERS_SCRIPT],
        cwd=REPO,
        env=env,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert result.returncode == 0, result.stderr
    answer = json.loads(result.stdout.strip().splitlines()[-1])
    headers = answer["headers"]
    assert answer["status"] == 200
    assert headers["Strict-Transport-Security"].startswith("max-age=31536000")
    assert headers["X-Frame-Options"] == "DENY"
    assert headers["Cross-Origin-Opener-Policy"] == "same-origin"
    assert "script-src 'self'" in headers["Content-Security-Policy"]
    assert answer["cookies"]["csrftoken"]["secure"] is True


# -- sign-in attempts ------------------------------------------------------------------


@pytest.fixture
def clean_cache():
    cache.clear()
    yield
    cache.clear()


def _sign_in(client, username: str, password: str, address: str = "10.0.0.1"):
    return client.post(
        reverse("login"), {"username": username, "password": password}, REMOTE_ADDR=address
    )


def test_five_failures_lock_the_user_name_for_fifteen_minutes(client, db, clean_cache):
    make_user("alice")
    for _ in range(5):
        response = _sign_in(client, "alice", "wrong")
        assert "did not match" in response.content.decode()
    # Locked: even the right password is refused, with a clear message.
    response = _sign_in(client, "alice", "correct horse battery")
    page = response.content.decode()
    assert response.status_code == 200 and "_auth_user_id" not in client.session
    assert "Too many failed sign-in attempts" in page and "15 minutes" in page
    # From another address too: the lock is on the name.
    assert "Too many" in _sign_in(client, "alice", "x", address="10.9.9.9").content.decode()


def test_the_lock_ends_after_fifteen_minutes(client, db, clean_cache, monkeypatch):
    import time

    make_user("alice")
    for _ in range(5):
        _sign_in(client, "alice", "wrong")
    now = time.time()
    monkeypatch.setattr(security.time, "time", lambda: now + 15 * 60 + 1)
    assert security.sign_in_locked("alice", "10.0.0.1") == 0
    response = _sign_in(client, "alice", "correct horse battery")
    assert response.status_code == 302 and "_auth_user_id" in client.session


def test_four_failures_then_success_resets_the_count(client, db, clean_cache):
    make_user("alice")
    for _ in range(4):
        _sign_in(client, "alice", "wrong")
    assert (
        _sign_in(client, "alice", "correct horse battery", address="10.0.0.2").status_code == 302
    )
    client.logout()
    for _ in range(4):  # four more: still not locked, the count started again
        _sign_in(client, "alice", "wrong", address="10.0.0.3")
    assert (
        _sign_in(client, "alice", "correct horse battery", address="10.0.0.4").status_code == 302
    )


def test_five_failures_from_one_address_lock_that_address(client, db, clean_cache):
    make_user("bob")
    for name in ("a1", "a2", "a3", "a4", "a5"):
        _sign_in(client, name, "guess")
    page = _sign_in(client, "bob", "correct horse battery").content.decode()
    assert "Too many failed sign-in attempts" in page
    # Another address is not affected.
    assert _sign_in(client, "bob", "correct horse battery", address="10.0.0.7").status_code == 302


def test_the_backend_refuses_while_locked_whichever_form_asks(db, clean_cache, rf):
    make_user("carol")
    request = rf.post("/admin/login/", REMOTE_ADDR="10.0.0.8")
    for _ in range(5):
        assert authenticate(request, username="carol", password="wrong") is None
    assert authenticate(request, username="carol", password="correct horse battery") is None
    assert security.sign_in_locked("CAROL ", None) > 0  # names compare case-blind


def test_sign_in_writes_no_audit_entries(client, db, clean_cache):
    make_user("dora")
    for _ in range(6):
        _sign_in(client, "dora", "wrong")
    assert m.AuditEntry.objects.count() == 0


def test_behind_a_proxy_the_forwarded_address_counts(rf, settings):
    """With one trusted proxy, its X-Forwarded-For entry is the client; what the client
    itself put before it is ignored (it could name anyone)."""
    request = rf.get("/", REMOTE_ADDR="127.0.0.1", HTTP_X_FORWARDED_FOR="6.6.6.6, 10.1.2.3")
    settings.BATON_PROXY_HOPS = 0
    assert security.client_address(request) == "127.0.0.1"
    settings.BATON_PROXY_HOPS = 1
    assert security.client_address(request) == "10.1.2.3"
    assert security.client_address(rf.get("/", REMOTE_ADDR="10.0.0.1")) == "10.0.0.1"
