"""Security: stored markup shows as text everywhere, uploads are never kept or served back
raw, the security headers and production settings, and the sign-in attempt limit.

Sources: OWASP Cross-Site Scripting Prevention Cheat Sheet (output encoding for HTML,
attributes and JavaScript data), OWASP CSV Injection, OWASP Authentication Cheat Sheet
(login throttling), Django's deployment checklist (``check --deploy``).
"""

from __future__ import annotations

import copy
import datetime as dt
import importlib.util
import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from axes.helpers import get_client_ip_address
from axes.models import AccessAttempt
from django.contrib.auth import authenticate, get_user_model
from django.core.cache import cache
from django.core.management import call_command
from django.db.models import F
from django.test import Client
from django.urls import reverse

from allocation import models as m
from allocation import services
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
# The limit (OWASP Authentication Cheat Sheet, login throttling): 5 failed attempts for
# one user name from one address lock that name from that address for 15 minutes. The
# failures are django-axes's records in the database.

WAIT_MESSAGE = "Too many failed sign-in attempts"


def _sign_in(client, username: str, password: str, address: str = "10.0.0.1", **extra):
    return client.post(
        reverse("login"),
        {"username": username, "password": password},
        REMOTE_ADDR=address,
        **extra,
    )


def _lock(client, username: str, address: str = "10.0.0.1"):
    """Fail five times; the fifth answer is the refusal."""
    for attempt in range(1, 6):
        response = _sign_in(client, username, "wrong", address)
        if attempt < 5:
            assert "did not match" in response.content.decode(), attempt
    return response


def _age_attempts(**delta) -> None:
    """Move every recorded failure back in time, as if that much time had passed."""
    AccessAttempt.objects.update(attempt_time=F("attempt_time") - dt.timedelta(**delta))


def _signed_in(response, client) -> bool:
    return response.status_code == 302 and "_auth_user_id" in client.session


def test_five_failures_lock_the_user_name_from_that_address(client, db):
    make_user("alice")
    response = _lock(client, "alice")
    # The fifth failure already answers with Baton's sign-in page and the wait.
    page = response.content.decode()
    assert response.status_code == 429 and WAIT_MESSAGE in page and "15 minutes" in page
    assert 'action="/accounts/login/"' in page and 'value="alice"' in page
    assert 14 * 60 < int(response["Retry-After"]) <= 15 * 60
    # Locked: even the right password is refused, with the same clear message.
    response = _sign_in(client, "alice", "correct horse battery")
    page = response.content.decode()
    assert response.status_code == 429 and "_auth_user_id" not in client.session
    assert WAIT_MESSAGE in page and "15 minutes" in page


def test_another_user_from_the_same_address_is_not_locked(client, db):
    make_user("alice"), make_user("bob")
    _lock(client, "alice", "10.0.0.1")
    assert _signed_in(_sign_in(client, "bob", "correct horse battery", "10.0.0.1"), client)


def test_the_same_user_from_another_address_is_not_locked(client, db):
    """Name and address are locked together: one person's mistakes lock out nobody else,
    and a guesser at one address does not lock the owner of the name out."""
    make_user("alice")
    _lock(client, "alice", "10.0.0.1")
    assert _signed_in(_sign_in(client, "alice", "correct horse battery", "10.0.0.2"), client)


def test_the_lock_ends_fifteen_minutes_after_the_fifth_failure(client, db):
    make_user("alice")
    _lock(client, "alice")
    _age_attempts(minutes=14)
    page = _sign_in(client, "alice", "correct horse battery").content.decode()
    assert WAIT_MESSAGE in page and "1 minute;" in page
    _age_attempts(minutes=1, seconds=1)
    assert _signed_in(_sign_in(client, "alice", "correct horse battery"), client)


def test_attempts_while_locked_neither_count_nor_extend_the_lock(client, db):
    make_user("alice")
    _lock(client, "alice")
    _age_attempts(minutes=10)
    for _ in range(3):
        page = _sign_in(client, "alice", "wrong").content.decode()
        assert WAIT_MESSAGE in page and "5 minutes" in page
    assert AccessAttempt.objects.get().failures_since_start == 5
    _age_attempts(minutes=5, seconds=1)
    assert _signed_in(_sign_in(client, "alice", "correct horse battery"), client)


def test_four_failures_then_success_resets_the_count(client, db):
    make_user("alice")
    for _ in range(4):
        _sign_in(client, "alice", "wrong")
    assert _signed_in(_sign_in(client, "alice", "correct horse battery"), client)
    assert not AccessAttempt.objects.exists()
    client.logout()
    for _ in range(4):  # four more: still not locked, the count started again
        assert "did not match" in _sign_in(client, "alice", "wrong").content.decode()
    assert _signed_in(_sign_in(client, "alice", "correct horse battery"), client)


def test_the_lock_is_in_the_database(client, db):
    """Another browser, another process's empty cache: the lock still holds."""
    make_user("alice")
    _lock(client, "alice", "10.0.0.9")
    attempt = AccessAttempt.objects.get()
    assert (attempt.username, attempt.ip_address) == ("alice", "10.0.0.9")
    assert attempt.failures_since_start == 5
    cache.clear()
    other = Client()
    response = _sign_in(other, "alice", "correct horse battery", "10.0.0.9")
    assert response.status_code == 429 and WAIT_MESSAGE in response.content.decode()
    assert "_auth_user_id" not in other.session


def test_the_backend_refuses_while_locked_whichever_form_asks(client, db, rf):
    make_user("carol")
    request = rf.post("/admin/login/", REMOTE_ADDR="10.0.0.8")
    for _ in range(5):
        assert authenticate(request, username="carol", password="wrong") is None
    fresh = rf.post("/admin/login/", REMOTE_ADDR="10.0.0.8")
    assert authenticate(fresh, username="carol", password="correct horse battery") is None
    # The admin's sign-in answers with Baton's sign-in page and the wait.
    response = client.post(
        reverse("admin:login"),
        {"username": "carol", "password": "correct horse battery", "next": "/admin/"},
        REMOTE_ADDR="10.0.0.8",
    )
    page = response.content.decode()
    assert response.status_code == 429 and WAIT_MESSAGE in page
    assert 'name="next" value="/admin/"' in page and "_auth_user_id" not in client.session


def test_the_refusal_page_keeps_the_security_headers(client, db):
    make_user("alice")
    response = _lock(client, "alice")
    assert "script-src 'self'" in response["Content-Security-Policy"]
    assert response["X-Frame-Options"] == "DENY"


def test_a_foreign_next_address_is_not_carried(client, db):
    make_user("alice")
    _lock(client, "alice")
    response = client.post(
        reverse("login"),
        {"username": "alice", "password": "x", "next": "https://elsewhere.invalid/"},
        REMOTE_ADDR="10.0.0.1",
    )
    assert "elsewhere.invalid" not in response.content.decode()


def test_sign_in_writes_no_audit_entries(client, db):
    make_user("dora")
    for _ in range(6):
        _sign_in(client, "dora", "wrong")
    assert m.AuditEntry.objects.count() == 0


def test_reset_commands_unlock(client, db):
    """django-axes's commands: by address and name, by name, by address, everything."""
    for name in ("alice", "bob", "carol"):
        make_user(name)
    _lock(client, "alice", "10.0.0.1")
    _lock(client, "bob", "10.0.0.2")
    _lock(client, "carol", "10.0.0.3")
    listed = io.StringIO()
    call_command("axes_list_attempts", stdout=listed)
    assert all(name in listed.getvalue() for name in ("alice", "bob", "carol"))

    call_command("axes_reset_ip_username", "10.0.0.1", "alice", stdout=io.StringIO())
    assert _signed_in(_sign_in(client, "alice", "correct horse battery", "10.0.0.1"), client)
    client.logout()
    assert _sign_in(client, "bob", "correct horse battery", "10.0.0.2").status_code == 429

    call_command("axes_reset_username", "bob", stdout=io.StringIO())
    assert _signed_in(_sign_in(client, "bob", "correct horse battery", "10.0.0.2"), client)
    client.logout()

    call_command("axes_reset_ip", "10.0.0.3", stdout=io.StringIO())
    assert _signed_in(_sign_in(client, "carol", "correct horse battery", "10.0.0.3"), client)
    client.logout()

    _lock(client, "alice", "10.0.0.4")
    out = io.StringIO()
    call_command("axes_reset", stdout=out)
    assert "1 attempts removed" in out.getvalue() and not AccessAttempt.objects.exists()


def test_the_admin_lists_and_resets_locks(client, db):
    admin = get_user_model().objects.create_superuser("root", password="correct horse battery")
    make_user("alice")
    _lock(client, "alice", "10.0.0.5")
    client.force_login(admin)
    index = client.get(reverse("admin:index")).content.decode()
    assert "Access attempts" in index and reverse("admin:axes_accessattempt_changelist") in index
    listing = client.get(reverse("admin:axes_accessattempt_changelist")).content.decode()
    assert "alice" in listing and "10.0.0.5" in listing
    attempt = AccessAttempt.objects.get()
    response = client.post(
        reverse("admin:axes_accessattempt_changelist"),
        {"action": "delete_selected", "_selected_action": [attempt.pk], "post": "yes"},
    )
    assert response.status_code == 302 and not AccessAttempt.objects.exists()
    client.logout()
    assert _signed_in(_sign_in(client, "alice", "correct horse battery", "10.0.0.5"), client)


def _proxy_settings(monkeypatch, settings, hops: int) -> None:
    """What allocation/settings.py makes of BATON_PROXY_HOPS, read from a fresh copy of
    the module, applied to this test's settings."""
    monkeypatch.setenv("BATON_PROXY_HOPS", str(hops))
    spec = importlib.util.spec_from_file_location(
        "_baton_settings_copy", REPO / "allocation" / "settings.py"
    )
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    for name in dir(module):
        if name.startswith(("AXES_IPWARE_", "IPWARE_")):
            setattr(settings, name, getattr(module, name))


@pytest.mark.parametrize(
    ("hops", "remote", "forwarded", "client_address"),
    [
        # No proxy: the connection's address; whatever the client forwards is ignored.
        (0, "127.0.0.1", "6.6.6.6, 10.1.2.3", "127.0.0.1"),
        (0, "10.0.0.1", None, "10.0.0.1"),
        # One proxy: the entry it appended (the last); the client's own entries before it
        # could name anyone and are never used.
        (1, "127.0.0.1", "6.6.6.6, 10.1.2.3", "10.1.2.3"),
        (1, "127.0.0.1", "not-an-address, 10.1.2.3", "10.1.2.3"),
        (1, "127.0.0.1", None, "127.0.0.1"),
        # Two proxies: the entry the outer one appended, second from the right.
        (2, "127.0.0.1", "6.6.6.6, 203.0.113.9, 10.0.0.2", "203.0.113.9"),
    ],
)
def test_behind_proxies_the_forwarded_address_counts(
    rf, settings, monkeypatch, hops, remote, forwarded, client_address
):
    """RFC 7239 §4, the convention X-Forwarded-For follows too: each proxy appends an entry
    for the address it received the request from, so the trusted entries are the last
    ``hops`` ones."""
    _proxy_settings(monkeypatch, settings, hops)
    headers = {"HTTP_X_FORWARDED_FOR": forwarded} if forwarded else {}
    request = rf.post("/accounts/login/", REMOTE_ADDR=remote, **headers)
    assert get_client_ip_address(request) == client_address


def test_behind_a_proxy_each_client_is_locked_on_its_own(client, db, settings, monkeypatch):
    _proxy_settings(monkeypatch, settings, 1)
    make_user("alice")

    def via_proxy(password: str, forwarded: str):
        return _sign_in(client, "alice", password, "127.0.0.1", HTTP_X_FORWARDED_FOR=forwarded)

    for _ in range(5):
        via_proxy("wrong", "10.1.2.3")
    assert AccessAttempt.objects.get().ip_address == "10.1.2.3"
    # The same client putting another address in front is still the same client.
    assert via_proxy("correct horse battery", "10.9.9.9, 10.1.2.3").status_code == 429
    # Another client behind the same proxy signs in.
    assert _signed_in(via_proxy("correct horse battery", "10.1.2.4"), client)
