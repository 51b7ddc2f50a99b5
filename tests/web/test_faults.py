"""Faults: the database going away mid-request, an import killed mid-write, a
simulation whose worker died, and SQLite in WAL mode with a busy timeout.

The references are outside the code under test: the database's own rows, read before and
after (every table, row by row); SQLite itself (``PRAGMA integrity_check``, ``PRAGMA
journal_mode``, read with Python's ``sqlite3`` module, not Django); a real ``SIGKILL`` of a
real ``manage.py import_study`` process; and, for a restarted run, the core's one-process
simulation ``simulate(study, plan, days=N, seed=S)``, as in test_simulation_runs.py.
"""

from __future__ import annotations

import json
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from django.apps import apps
from django.conf import settings as django_settings
from django.core.exceptions import PermissionDenied
from django.core.files.uploadedfile import SimpleUploadedFile
from django.db import IntegrityError, InterfaceError, OperationalError
from django.test import Client
from django.urls import reverse
from django.utils.http import urlencode

from allocation import audit, selectors, services
from allocation import models as m
from allocation.core.simulation import CHUNK_DAYS, simulate, simulate_chunk
from allocation.core.synthetic import synthetic_study
from allocation.web import faults
from tests.web.test_simulation_runs import (
    DAYS,
    SEED,
    reference_summary,
    request,
    run_chunks,
)

REPO = Path(__file__).resolve().parents[2]


def every_row() -> dict[str, list[dict]]:
    """Every row of every table Django knows, by model, in primary-key order."""
    return {
        model._meta.label: list(model._default_manager.order_by("pk").values())
        for model in apps.get_models()
    }


def assert_unavailable_page(response) -> str:
    assert response.status_code == 503
    assert response["Retry-After"] == str(faults.RETRY_AFTER_S)
    assert response["Cache-Control"] == "no-store"
    page = response.content.decode()
    assert 'id="fault-unavailable"' in page
    assert "The database could not be reached; nothing was saved; try again." in page
    # No stack trace and not the error's own words (which may name the server).
    assert "Traceback" not in page and "disk I/O error (injected)" not in page
    return page


# -- the database going away mid-request ------------------------------------------------


def test_an_import_that_loses_the_database_halfway_stores_nothing_and_says_so(
    client, owner, heating_document, monkeypatch
):
    """The upload writes the study row, its membership, its agents and its events, then
    the database goes away while the tasks are written: the page says so and every
    table holds exactly the rows it held before."""
    client.force_login(owner)
    before = every_row()
    real_bulk = services.studies._bulk
    written = []

    def bulk_then_fail(model, items):
        if model is m.Task:
            # Rows of this very import are in the database at this moment.
            written.append((m.Study.objects.count(), m.Agent.objects.count()))
            raise OperationalError("disk I/O error (injected)")
        return real_bulk(model, items)

    monkeypatch.setattr(services.studies, "_bulk", bulk_then_fail)
    upload = ("home.json", json.dumps(heating_document).encode())
    response = client.post(
        reverse("study-upload"), {"file": SimpleUploadedFile(*upload, "application/json")}
    )
    assert_unavailable_page(response)
    assert written == [(1, len(heating_document["agents"]))]
    assert every_row() == before


def test_an_edit_that_loses_the_database_after_its_row_write_is_rolled_back(
    client, study, owner, monkeypatch
):
    """A plan-editor row save (htmx) writes the assignment, then the connection drops
    while the audit entry is written: nothing of it stays, the answer is the 503 page,
    htmx is told to reload the page, and the reloaded page carries the message."""
    client.force_login(owner)
    before = every_row()
    document_before = selectors.study_document(study)
    seen = []

    def drop(**kwargs):
        stored = m.Assignment.objects.get(plan__study=study, plan__key="manual", task__key="T2")
        seen.append(stored.levels)
        raise InterfaceError("connection already closed (injected)")

    monkeypatch.setattr(audit, "record_change", drop)
    url = reverse("plan-row-save", args=[study.pk, "manual", "T2"])
    response = client.post(
        url,
        {"who": "shared", "human": "resident", "automation": "thermostat", "level": "7"},
        headers={"HX-Request": "true"},
    )
    assert_unavailable_page(response)
    assert response["HX-Refresh"] == "true"
    assert seen == [7]  # the assignment row had been written when the database went
    assert every_row() == before
    monkeypatch.undo()
    assert selectors.study_document(study) == document_before
    reloaded = client.get(reverse("plan-editor", args=[study.pk, "manual"]))
    assert reloaded.status_code == 200
    assert faults.UNAVAILABLE_MESSAGE in reloaded.content.decode()


def test_a_full_page_post_gets_the_page_without_the_htmx_reload(client, study, owner, monkeypatch):
    client.force_login(owner)

    def gone(*args, **kwargs):
        raise OperationalError("database is locked (injected)")

    monkeypatch.setattr(services, "simulation_request", gone)
    response = client.post(
        reverse("plan-simulation-run", args=[study.pk, "auto"]), {"days": "3", "seed": "1"}
    )
    assert_unavailable_page(response)
    assert "HX-Refresh" not in response
    assert not m.SimulationRun.objects.exists()


class BreakingMiddleware:
    """Raises what ``BREAK_WITH`` holds before any view runs (as a session or user
    lookup in a middleware would when the database is gone)."""

    BREAK_WITH: Exception | None = None

    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        if self.BREAK_WITH is not None:
            raise self.BREAK_WITH
        return self.get_response(request)


@pytest.mark.parametrize(
    ("error", "status", "marker"),
    [
        (OperationalError("could not connect to server (injected)"), 503, "fault-unavailable"),
        (RuntimeError("a bug (injected)"), 500, "fault-server-error"),
    ],
)
def test_errors_outside_the_views_get_the_friendly_pages(
    settings, owner, monkeypatch, error, status, marker
):
    settings.MIDDLEWARE = [*settings.MIDDLEWARE, "tests.web.test_faults.BreakingMiddleware"]
    monkeypatch.setattr(BreakingMiddleware, "BREAK_WITH", error)
    client = Client(raise_request_exception=False)
    client.force_login(owner)
    response = client.get(reverse("study-list"))
    assert response.status_code == status
    page = response.content.decode()
    assert f'id="{marker}"' in page
    assert "Traceback" not in page and "(injected)" not in page


def test_other_database_errors_are_not_called_an_outage(client, study, owner, monkeypatch):
    """An IntegrityError is a fault in the code, not the database going away: it is not
    answered with the 503 page (Django's handling, hence the 500 page, takes it)."""
    client.force_login(owner)

    def refused(*args, **kwargs):
        raise IntegrityError("refused (injected)")

    monkeypatch.setattr(services, "simulation_request", refused)
    with pytest.raises(IntegrityError):
        client.post(
            reverse("plan-simulation-run", args=[study.pk, "auto"]), {"days": "3", "seed": "1"}
        )


# -- SQLite: WAL, busy timeout, and an import killed mid-write ---------------------------

SETUP = """
import json, os
import django
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "allocation.settings")
django.setup()
from django.core.management import call_command
from django.contrib.auth import get_user_model
from django.db import connection
call_command("migrate", verbosity=0)
get_user_model().objects.create_user("importer")
with connection.cursor() as cursor:
    pragmas = {}
    for name in ("journal_mode", "synchronous", "busy_timeout"):
        cursor.execute(f"PRAGMA {name}")
        pragmas[name] = cursor.fetchone()[0]
pragmas["transaction_mode"] = connection.transaction_mode
print(json.dumps(pragmas))
"""


def sqlite_env(data_dir: Path) -> dict[str, str]:
    """The environment of a local Baton on a SQLite file in ``data_dir`` (no
    ``DATABASE_URL``, whatever the tests themselves run on)."""
    env = {k: v for k, v in os.environ.items() if k != "DATABASE_URL"}
    env.update(BATON_DATA_DIR=str(data_dir), BATON_DEBUG="1", PYTHONPATH=str(REPO))
    return env


@pytest.fixture(scope="module")
def sqlite_baton(tmp_path_factory):
    """A migrated SQLite file database with one user, made by the app's own settings;
    with the pragmas its connection reported."""
    data_dir = tmp_path_factory.mktemp("faults-sqlite")
    done = subprocess.run(
        [sys.executable, "-c", SETUP],
        env=sqlite_env(data_dir),
        cwd=REPO,
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    return data_dir, json.loads(done.stdout.strip().splitlines()[-1])


def table_counts(path: Path) -> dict[str, int]:
    """Rows per table, read by SQLite itself (which ignores uncommitted WAL frames)."""
    with sqlite3.connect(path) as db:
        names = [
            row[0]
            for row in db.execute(
                "SELECT name FROM sqlite_master WHERE type='table' AND name NOT LIKE 'sqlite_%'"
            )
        ]
        return {name: db.execute(f'SELECT COUNT(*) FROM "{name}"').fetchone()[0] for name in names}


def _regexp(pattern: str, value: object) -> bool:
    return value is not None and re.search(pattern, str(value)) is not None


def test_the_sqlite_settings_ask_for_wal_a_busy_timeout_and_immediate_writes():
    if os.environ.get("DATABASE_URL"):
        pytest.skip("the SQLite options apply when DATABASE_URL is unset")
    options = django_settings.DATABASES["default"]["OPTIONS"]
    assert "PRAGMA journal_mode=WAL" in options["init_command"]
    assert "PRAGMA synchronous=NORMAL" in options["init_command"]
    assert options["timeout"] == 20
    assert options["transaction_mode"] == "IMMEDIATE"


def test_a_sqlite_file_database_runs_in_wal_mode_with_a_busy_timeout(sqlite_baton):
    """What SQLite reports on the app's own connection to a file database: WAL journal,
    synchronous NORMAL (1), a 20 s busy timeout, writes that take the lock at BEGIN."""
    data_dir, pragmas = sqlite_baton
    assert pragmas == {
        "journal_mode": "wal",
        "synchronous": 1,
        "busy_timeout": 20_000,
        "transaction_mode": "IMMEDIATE",
    }
    # WAL is a property of the file: any later connection, Django's or not, sees it.
    with sqlite3.connect(data_dir / "baton.sqlite3") as db:
        assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_an_import_killed_mid_write_leaves_nothing_and_runs_again(sqlite_baton, tmp_path):
    """``import_study`` of a large synthetic study is killed with SIGKILL once its write
    transaction has spilled pages into the WAL (the rows are being written); SQLite then
    holds every table exactly as before, passes its integrity check, and the same
    command run again stores the whole study."""
    data_dir, _pragmas = sqlite_baton
    database = data_dir / "baton.sqlite3"
    wal = data_dir / "baton.sqlite3-wal"
    document = synthetic_study(tasks=3000, links=9000, plans=4, seed=8)
    source = tmp_path / "large.json"
    source.write_text(json.dumps(document))
    before = table_counts(database)
    command = [sys.executable, "manage.py", "import_study", str(source), "--owner", "importer"]
    process = subprocess.Popen(
        command,
        env=sqlite_env(data_dir),
        cwd=REPO,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    try:
        deadline = time.monotonic() + 120
        while process.poll() is None and time.monotonic() < deadline:
            # Pages of an uncommitted transaction reach the WAL once they outgrow the
            # page cache: the import is writing rows now.
            if wal.exists() and wal.stat().st_size > 64 * 1024:
                process.send_signal(signal.SIGKILL)
                break
            time.sleep(0.01)
        wal_at_kill = wal.stat().st_size if wal.exists() else 0
    finally:
        if process.poll() is None:
            process.kill()
        stdout, stderr = process.communicate(timeout=30)
    assert process.returncode == -signal.SIGKILL, (
        f"the import ended before it was killed: {stdout.decode()} {stderr.decode()}"
    )
    assert wal_at_kill > 64 * 1024
    with sqlite3.connect(database) as db:
        # The schema's CHECK constraints call REGEXP, which Django registers per
        # connection; the integrity check evaluates them, so it needs it too.
        db.create_function("REGEXP", 2, _regexp, deterministic=True)
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    assert table_counts(database) == before
    again = subprocess.run(
        command, env=sqlite_env(data_dir), cwd=REPO, capture_output=True, text=True, timeout=180
    )
    assert again.returncode == 0, again.stderr
    assert "Imported 'synthetic-3000-8'" in again.stdout
    after = table_counts(database)
    assert after["allocation_study"] == before["allocation_study"] + 1
    assert after["allocation_task"] == before["allocation_task"] + len(document["tasks"])
    assert after["allocation_link"] == before["allocation_link"] + len(document["links"])
    assert after["allocation_plan"] == before["allocation_plan"] + len(document["plans"])


# -- a simulation whose worker died -----------------------------------------------------


@pytest.fixture
def queued(settings):
    from django_tasks import task_backends

    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
    return task_backends["default"]


def enqueued_for(backend, run) -> list[int]:
    return [r.kwargs["chunk"] for r in backend.results if r.kwargs["run_id"] == run.pk]


def test_a_stalled_run_restarts_keeping_its_chunks_and_ends_as_a_fresh_run_would(
    study, owner, queued, heating_document
):
    """Chunks 0 and 2 were stored, then the worker died: the run stays *running*. The
    restart fails it, hands its two chunks to a new run, enqueues chunk 1 alone, and the
    new run's summary is the one-process run's."""
    run = request(study, owner)
    assert run_chunks(run, [0, 2]) == ["stored", "stored"]
    run.refresh_from_db()
    assert (run.status, run.chunks_done) == (m.SimulationStatus.RUNNING, 2)
    # A request for the same question joins the stalled run: the reason for a restart.
    assert request(study, owner).pk == run.pk

    new = services.simulation_restart(run=run, user=owner)
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED
    assert run.error == "restarted by olive after 2 of 3 parts"
    assert not run.chunks.exists() and run.result is None
    assert new.pk != run.pk and new.status == m.SimulationStatus.QUEUED
    assert (new.chunks_total, new.chunks_done) == (3, 2)
    assert sorted(new.chunks.values_list("index", flat=True)) == [0, 2]
    assert enqueued_for(queued, new) == [1]
    assert selectors.simulation_run_for(study, "auto", DAYS, SEED).pk == new.pk

    # The dead worker's leftover tasks find their run failed and drop their work.
    assert run_chunks(run, [1]) == ["dropped"]
    assert run_chunks(new, [1]) == ["done"]
    new.refresh_from_db()
    assert new.status == m.SimulationStatus.DONE
    assert new.result["summary"] == reference_summary(heating_document)


def test_a_run_that_died_while_combining_restarts_and_combines(
    study, owner, queued, heating_document
):
    """Every chunk stored, the combining never happened: one chunk is simulated again,
    so that one task exists to combine the run."""
    run = request(study, owner)
    services.simulation_start(run_id=run.pk)  # a worker took it
    for index in range(run.chunks_total):
        part = simulate_chunk(
            selectors.study_load(study).study, "auto", seed=SEED, chunk=index, days=DAYS
        )
        # Stored, never combined.
        services.simulation_chunk_store(run_id=run.pk, chunk=index, data=part.to_json())
    run.refresh_from_db()
    assert (run.status, run.chunks_done) == (m.SimulationStatus.RUNNING, 3)
    new = services.simulation_restart(run=run, user=owner)
    assert new.chunks_done == 2 and enqueued_for(queued, new) == [2]
    assert run_chunks(new, [2]) == ["done"]
    new.refresh_from_db()
    assert new.result["summary"] == reference_summary(heating_document)


def test_a_restart_after_the_study_changed_simulates_everything_again(study, owner, queued):
    """Chunks simulated for an earlier version of the study are not reused: the new run
    is for the study as it is now, and matches a one-process run of that."""
    run = request(study, owner)
    run_chunks(run, [0])
    services.study_assumption_set(study=study, key="occupancy_limit", value=0.7, user=owner)
    new = services.simulation_restart(run=run, user=owner)
    assert new.chunks_done == 0 and enqueued_for(queued, new) == [0, 1, 2]
    assert run_chunks(new, [0, 1, 2])[-1] == "done"
    new.refresh_from_db()
    now = selectors.study_load(study).study
    expected = json.loads(json.dumps(simulate(now, "auto", days=DAYS, seed=SEED).summary()))
    assert new.result["summary"] == expected


def test_who_may_restart_a_run(study, owner, member_of, queued):
    viewer, editor, asker = member_of("viewer"), member_of("editor"), member_of("viewer", "ask")
    run = request(study, asker, days=CHUNK_DAYS, seed=3)
    with pytest.raises(PermissionDenied):
        services.simulation_restart(run=run, user=viewer)
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.QUEUED  # untouched
    assert services.simulation_may_restart(run=run, user=asker)
    assert services.simulation_may_restart(run=run, user=editor)
    assert services.simulation_may_restart(run=run, user=owner)
    stranger = type(owner).objects.create_user("stranger")
    assert not services.simulation_may_restart(run=run, user=stranger)
    restarted = services.simulation_restart(run=run, user=asker)
    assert restarted.requested_by == asker and restarted.pk != run.pk


def test_a_finished_run_is_not_restarted(study, owner, queued):
    run = request(study, owner, days=CHUNK_DAYS, seed=4)
    services.simulation_cancel(run=run)
    assert services.simulation_restart(run=run, user=owner).pk == run.pk
    assert m.SimulationRun.objects.count() == 1


# -- the restart on the simulation page ------------------------------------------------


def page_url(study, days=DAYS, seed=SEED) -> str:
    query = urlencode({"days": days, "seed": seed})
    return f"{reverse('plan-simulation', args=[study.pk, 'auto'])}?{query}"


def test_the_page_offers_the_restart_to_whoever_may_use_it(
    client, study, owner, member_of, queued
):
    run = request(study, owner)
    run_chunks(run, [0])
    client.force_login(owner)
    page = client.get(page_url(study)).content.decode()
    assert "Restart the run" in page and "Asked for" in page and "by olive" in page
    status = client.get(
        f"{reverse('plan-simulation-status', args=[study.pk, 'auto'])}?days={DAYS}&seed={SEED}",
        headers={"HX-Request": "true"},
    ).content.decode()
    assert status.lstrip().startswith('<div id="simulation-status"')
    assert "Restart the run" in status
    client.force_login(member_of("viewer"))
    assert "Restart the run" not in client.get(page_url(study)).content.decode()


@pytest.mark.parametrize("htmx", [False, True])
def test_restarting_from_the_page(client, study, owner, queued, heating_document, htmx):
    run = request(study, owner)
    run_chunks(run, [1])
    client.force_login(owner)
    headers = {"HX-Request": "true"} if htmx else {}
    response = client.post(
        reverse("plan-simulation-restart", args=[study.pk, "auto"]),
        {"days": DAYS, "seed": SEED},
        headers=headers,
    )
    if htmx:
        assert response["HX-Redirect"] == page_url(study)
    else:
        assert response.status_code == 302 and response["Location"] == page_url(study)
    new = selectors.simulation_run_for(study, "auto", DAYS, SEED)
    assert new.pk != run.pk and new.chunks_done == 1
    page = client.get(page_url(study)).content.decode()
    assert "The run was restarted; 1 of 3 parts already simulated were kept." in page
    assert "1 of 3 parts" in page
    run_chunks(new, enqueued_for(queued, new))
    new.refresh_from_db()
    assert new.result["summary"] == reference_summary(heating_document)


def test_a_viewer_cannot_restart_someone_elses_run(client, study, owner, member_of, queued):
    run = request(study, owner)
    client.force_login(member_of("viewer"))
    response = client.post(
        reverse("plan-simulation-restart", args=[study.pk, "auto"]), {"days": DAYS, "seed": SEED}
    )
    assert response.status_code == 403
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.QUEUED
    assert m.SimulationRun.objects.count() == 1


def test_restarting_nothing_or_an_ended_run_says_so(client, study, owner, queued):
    client.force_login(owner)
    url = reverse("plan-simulation-restart", args=[study.pk, "auto"])
    follow = client.post(url, {"days": DAYS, "seed": SEED}, follow=True).content.decode()
    assert "There is no such run to restart." in follow
    run = request(study, owner)
    services.simulation_cancel(run=run)
    follow = client.post(url, {"days": DAYS, "seed": SEED}, follow=True).content.decode()
    assert "The run had already ended (cancelled)." in follow
