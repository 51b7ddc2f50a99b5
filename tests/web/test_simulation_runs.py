"""Simulation runs in the background: requests, reuse, chunks, cancelling, study changes,
the database worker, the ``simulate`` command and ``start``'s worker (methods document,
#simulation).

The reference for every stored result is the core's own one-process run,
``simulate(study, plan, days=N, seed=S)``: a run spread over chunks, tasks and workers
must give exactly its summary (the core promises that chunks drawn from the seed and the
chunk number alone combine to the same run, in any order).
"""

from __future__ import annotations

import json
import os
import signal
import socket
import sqlite3
import subprocess
import sys
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from io import StringIO
from pathlib import Path

import pytest
from django.core.exceptions import PermissionDenied
from django.core.management import call_command
from django.core.management.base import CommandError
from django.db import IntegrityError, connection, connections, transaction
from django.http import Http404
from django_tasks import task_backends
from django_tasks_db.models import DBTaskResult

from allocation import models as m
from allocation import selectors, services, tasks
from allocation.core import load_study
from allocation.core.simulation import CHUNK_DAYS, simulate
from allocation.services import simulation as simulation_service
from tests.web.conftest import make_user

REPO = Path(__file__).resolve().parents[2]
IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
DUMMY = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
#: Three chunks, the last one short.
DAYS = 2 * CHUNK_DAYS + CHUNK_DAYS // 2
SEED = 20240611


@pytest.fixture
def immediate(settings):
    """Tasks run as they are enqueued, in this process."""
    settings.TASKS = IMMEDIATE


@pytest.fixture
def queued(settings):
    """Tasks are only recorded (``task_backends["default"].results``); tests run them."""
    settings.TASKS = DUMMY
    return task_backends["default"]


def reference_summary(heating_document: dict, plan: str = "auto", *, days=DAYS, seed=SEED):
    """The summary of the same run simulated in one process, through JSON as it is stored."""
    core_study = load_study(heating_document).study
    summary = simulate(core_study, plan, days=days, seed=seed).summary()
    return json.loads(json.dumps(summary))


def request(study, user, *, plan="auto", days=DAYS, seed=SEED) -> m.SimulationRun:
    return services.simulation_request(study=study, plan_key=plan, days=days, seed=seed, user=user)


def run_chunks(run: m.SimulationRun, order) -> list[str]:
    """Run the chunk tasks of ``run`` in the given order, as workers would."""
    return [tasks.simulate_run_chunk.call(run_id=run.pk, chunk=index) for index in order]


def bump_version(study, owner) -> None:
    """A real edit, through the services: it moves the study's version."""
    services.study_assumption_set(study=study, key="occupancy_limit", value=0.7, user=owner)


# -- a run from request to result ---------------------------------------------------


def test_request_simulates_every_chunk_and_stores_the_one_process_result(
    study, owner, immediate, heating_document
):
    run = request(study, owner)
    assert run.status == m.SimulationStatus.DONE
    assert (run.chunks_total, run.chunks_done) == (3, 3)
    assert run.seed == SEED and run.days == DAYS and run.error == ""
    assert run.finished_at is not None and run.requested_by == owner
    assert set(run.result) == {"simulation", "summary", "typical", "worst"}
    assert run.result["summary"] == reference_summary(heating_document)
    summary = run.result["summary"]
    assert run.result["typical"]["day"] == summary["typical_day"]
    assert run.result["worst"]["day"] == summary["worst_day"]
    assert set(run.result["typical"]["people"]) == {"resident"}
    # The chunks are folded into the result and not kept twice.
    assert not m.SimulationChunk.objects.exists()


def test_chunks_in_any_order_combine_to_the_one_process_result(
    study, owner, queued, heating_document
):
    run = request(study, owner)
    assert run.status == m.SimulationStatus.QUEUED
    enqueued = [result.kwargs for result in queued.results]
    assert enqueued == [{"run_id": run.pk, "chunk": k} for k in range(3)]
    assert run_chunks(run, [2, 0]) == ["stored", "stored"]
    run.refresh_from_db()
    assert (run.status, run.chunks_done, run.progress) == (m.SimulationStatus.RUNNING, 2, 2 / 3)
    assert run_chunks(run, [1]) == ["done"]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE
    assert run.result["summary"] == reference_summary(heating_document)


def test_a_chunk_run_twice_counts_once_and_the_run_is_combined_once(
    study, owner, queued, monkeypatch
):
    combined = []
    real = simulation_service.simulation_result

    def counting(*args, **kwargs):
        combined.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(simulation_service, "simulation_result", counting)
    run = request(study, owner)
    # A retried task (the same chunk twice), then the rest, then a late duplicate.
    assert run_chunks(run, [0, 0, 1, 2, 2, 1]) == [
        "stored",
        "stored",
        "stored",
        "done",
        "dropped",
        "dropped",
    ]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE and run.chunks_done == 3
    assert combined == [1]


def test_a_single_chunk_run(study, owner, immediate, heating_document):
    run = request(study, owner, days=1, seed=0)
    assert (run.status, run.chunks_total) == (m.SimulationStatus.DONE, 1)
    assert run.result["summary"] == reference_summary(heating_document, days=1, seed=0)


# -- reuse ---------------------------------------------------------------------------


def test_a_done_run_is_reused_not_run_again(study, owner, member_of, immediate):
    first = request(study, owner)
    viewer = member_of("viewer")
    again = request(study, viewer)
    assert again.pk == first.pk and again.requested_by == owner
    assert m.SimulationRun.objects.count() == 1
    # Another question is another run.
    assert request(study, owner, seed=SEED + 1).pk != first.pk
    assert request(study, owner, days=DAYS + 1).pk != first.pk
    assert request(study, owner, plan="manual").pk != first.pk
    assert m.SimulationRun.objects.count() == 4


def test_a_run_still_in_the_queue_is_joined_not_enqueued_twice(study, owner, queued):
    first = request(study, owner)
    again = request(study, owner)
    assert again.pk == first.pk
    assert len(queued.results) == first.chunks_total == 3


def test_a_new_study_version_makes_a_new_run(study, owner, immediate):
    old = request(study, owner)
    bump_version(study, owner)
    assert selectors.simulation_run_for(study, "auto", DAYS, SEED) is None
    new = request(study, owner)
    assert new.pk != old.pk and new.status == m.SimulationStatus.DONE
    study.refresh_from_db()
    assert new.study_version == study.updated_at != old.study_version
    # The occupancy limit the run used is the new one (0.7, set by bump_version).
    assert new.result["summary"]["limits"]["occupancy"] == 0.7
    assert selectors.simulation_run_for(study, "auto", DAYS, SEED).pk == new.pk
    listed = {run.pk: run.current for run in selectors.simulation_runs(study)}
    assert listed == {new.pk: True, old.pk: False}


def test_a_failed_or_cancelled_run_is_not_reused(study, owner, queued):
    first = request(study, owner)
    services.simulation_cancel(run=first)
    second = request(study, owner)
    assert second.pk != first.pk and second.status == m.SimulationStatus.QUEUED
    assert selectors.simulation_run_for(study, "auto", DAYS, SEED).pk == second.pk


# -- cancelling ----------------------------------------------------------------------


def test_cancel_midway_leaves_the_run_cancelled_without_result(study, owner, queued):
    run = request(study, owner)
    assert run_chunks(run, [0]) == ["stored"]
    run = services.simulation_cancel(run=run)
    assert run.status == m.SimulationStatus.CANCELLED and run.cancel_requested
    assert run.finished_at is not None
    # The tasks still queued find the run cancelled and do nothing.
    assert run_chunks(run, [1, 2]) == ["dropped", "dropped"]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.CANCELLED and run.result is None
    assert not m.SimulationChunk.objects.exists()
    # Cancelling a finished run changes nothing.
    assert services.simulation_cancel(run=run).status == m.SimulationStatus.CANCELLED


def test_a_chunk_in_hand_when_cancel_is_asked_for_is_dropped(study, owner, queued):
    """The flag alone (as another process sets it between a chunk's start and its end):
    the task checks it before storing and marks the run cancelled."""
    run = request(study, owner)
    run_chunks(run, [0])
    m.SimulationRun.objects.filter(pk=run.pk).update(cancel_requested=True)
    assert run_chunks(run, [1]) == ["dropped"]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.CANCELLED and run.result is None
    assert not run.chunks.exists()


def test_cancel_during_the_combining_keeps_no_result(study, owner, queued, monkeypatch):
    real = simulation_service.simulation_result

    def cancelled_meanwhile(study_, run_, chunks):
        result = real(study_, run_, chunks)
        services.simulation_cancel(run=run_)
        return result

    monkeypatch.setattr(simulation_service, "simulation_result", cancelled_meanwhile)
    run = request(study, owner)
    assert run_chunks(run, [0, 1, 2]) == ["stored", "stored", "dropped"]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.CANCELLED and run.result is None


# -- the study changes while a run goes on -------------------------------------------


def test_study_changed_while_running_fails_the_run_with_a_clear_message(study, owner, queued):
    run = request(study, owner)
    run_chunks(run, [0])
    bump_version(study, owner)
    assert run_chunks(run, [1, 2]) == ["failed", "dropped"]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED
    assert run.error == simulation_service.STUDY_CHANGED == "the study changed; run it again"
    assert run.result is None and not run.chunks.exists()


def test_study_changed_before_any_chunk_ran(study, owner, queued):
    run = request(study, owner)
    bump_version(study, owner)
    assert run_chunks(run, [0]) == ["failed"]
    run.refresh_from_db()
    assert (run.status, run.error) == (m.SimulationStatus.FAILED, simulation_service.STUDY_CHANGED)


def test_study_changed_while_combining(study, owner, queued, monkeypatch):
    real = simulation_service.simulation_result

    def edited_meanwhile(study_, run_, chunks):
        bump_version(run_.study, owner)
        return real(study_, run_, chunks)

    monkeypatch.setattr(simulation_service, "simulation_result", edited_meanwhile)
    run = request(study, owner)
    assert run_chunks(run, [0, 1, 2]) == ["stored", "stored", "failed"]
    run.refresh_from_db()
    assert (run.status, run.error, run.result) == (
        m.SimulationStatus.FAILED,
        simulation_service.STUDY_CHANGED,
        None,
    )


def test_an_error_in_the_simulation_fails_the_run_and_reaches_the_backend(
    study, owner, queued, monkeypatch
):
    def broken(*args, **kwargs):
        raise RuntimeError("no memory left")

    monkeypatch.setattr(simulation_service, "simulate_chunk", broken)
    run = request(study, owner)
    with pytest.raises(RuntimeError):
        run_chunks(run, [1])
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED
    last = min(2 * CHUNK_DAYS, DAYS) - 1
    assert run.error == f"simulating days {CHUNK_DAYS:,} to {last:,} failed: no memory left"


def test_an_error_while_combining_says_so(study, owner, queued, monkeypatch):
    def broken(*args, **kwargs):
        raise ValueError("chunks disagree")

    monkeypatch.setattr(simulation_service, "combine", broken)
    run = request(study, owner)
    with pytest.raises(ValueError):
        run_chunks(run, [0, 1, 2])
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED and run.result is None
    assert run.error == "combining the chunks failed: chunks disagree"


def test_a_deleted_study_takes_its_runs_and_their_tasks_find_nothing(study, owner, queued):
    run = request(study, owner)
    study.delete()
    assert not m.SimulationRun.objects.exists()
    assert run_chunks(run, [0]) == ["dropped"]


# -- refused requests ----------------------------------------------------------------


@pytest.mark.parametrize(
    ("days", "seed", "field", "message"),
    [
        (0, 1, "days", "The number of days must be 1 to 20,000; got 0"),
        (20_001, 1, "days", "The number of days must be 1 to 20,000; got 20,001"),
        ("ten", 1, "days", "The number of days must be a whole number; got 'ten'"),
        (2.5, 1, "days", "The number of days must be a whole number; got 2.5"),
        (True, 1, "days", "The number of days must be a whole number; got True"),
        (10, -1, "seed", "The seed must be a whole number from 0 to 9223372036854775807; got -1"),
        (10, 2**63, "seed", "from 0 to 9223372036854775807; got 9223372036854775808"),
        (10, "", "seed", "The seed must be a whole number; got ''"),
    ],
)
def test_bad_days_or_seed_are_refused_and_nothing_is_stored(
    study, owner, settings, days, seed, field, message
):
    assert settings.TASKS["default"]["BACKEND"] == "django_tasks_db.DatabaseBackend"
    with pytest.raises(services.SimulationRefused, match=message.replace("(", r"\(")) as caught:
        request(study, owner, days=days, seed=seed)
    assert caught.value.field == field
    assert not m.SimulationRun.objects.exists() and not DBTaskResult.objects.exists()


def test_days_and_seed_typed_on_a_form_are_read(study, owner, queued):
    run = request(study, owner, days=" 120 ", seed="7")
    assert (run.days, run.seed) == (120, 7)


def test_an_unknown_plan_is_refused_naming_the_plans(study, owner, queued):
    with pytest.raises(
        services.SimulationRefused, match=r"no plan 'nope' \(its plans: manual, auto\)"
    ):
        request(study, owner, plan="nope")
    assert not m.SimulationRun.objects.exists() and not queued.results


def test_a_study_with_errors_is_refused(study, owner, queued):
    # A row edited outside the services (as a broken import would leave it): a duration
    # whose minimum exceeds its maximum.
    m.Task.objects.filter(study=study, key="T1").update(duration_s=[60, 30, 10])
    m.Study.objects.filter(pk=study.pk).update(title="Home heating (edited)")
    with pytest.raises(services.SimulationRefused, match="error") as caught:
        request(study, owner)
    assert caught.value.field == "study"
    assert not m.SimulationRun.objects.exists()


def test_a_non_member_cannot_simulate(study, queued):
    stranger = make_user("stranger")
    with pytest.raises(PermissionDenied):
        request(study, stranger)
    assert not m.SimulationRun.objects.exists() and not queued.results


# -- access --------------------------------------------------------------------------


def test_runs_of_another_users_study_are_not_reachable(study, owner, heating_document, queued):
    run = request(study, owner)
    other_owner = make_user("otto")
    other = services.study_import(data=heating_document, owner=other_owner)
    assert selectors.simulation_run(study, run.pk) == run
    with pytest.raises(Http404):
        selectors.simulation_run(other, run.pk)
    assert not selectors.simulation_runs(other).exists()
    assert selectors.simulation_run_for(other, "auto", DAYS, SEED) is None
    # The one gate: the other owner cannot reach the study the run belongs to.
    with pytest.raises(Http404):
        selectors.study_for_user(user=other_owner, pk=study.pk)


def test_the_database_refuses_runs_outside_its_limits(study, owner):
    base = {
        "study": study,
        "plan_key": "auto",
        "study_version": study.updated_at,
        "chunks_total": 1,
    }
    for bad in ({"days": 0, "seed": 1}, {"days": 100_001, "seed": 1}):
        with pytest.raises(IntegrityError), transaction.atomic():
            m.SimulationRun.objects.create(**base, **bad)
    with pytest.raises(IntegrityError), transaction.atomic():
        m.SimulationRun.objects.create(**base, days=1, seed=1, result={"x": 1})
    m.SimulationRun.objects.create(**base, days=1, seed=1)
    with pytest.raises(IntegrityError), transaction.atomic():
        m.SimulationRun.objects.create(**base, days=1, seed=1)  # the same question twice


# -- the real database backend and its worker ----------------------------------------


@pytest.mark.django_db(transaction=True)
def test_the_database_worker_runs_the_queued_chunks(heating_document):
    """The settings' backend: the request stores one task row per chunk in the database,
    and one pass of django-tasks-db's worker (``db_worker --batch``) completes the run."""
    owner = make_user("olive")
    study = services.study_import(data=heating_document, owner=owner)
    run = request(study, owner)
    assert run.status == m.SimulationStatus.QUEUED
    assert DBTaskResult.objects.filter(status="READY").count() == 3
    call_command(
        "db_worker", "--batch", "--no-reload", "--no-startup-delay", verbosity=0, stdout=StringIO()
    )
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE
    assert run.result["summary"] == reference_summary(heating_document)
    assert DBTaskResult.objects.filter(status="SUCCESSFUL").count() == 3


@pytest.mark.django_db(transaction=True)
def test_workers_storing_the_last_chunks_at_once_combine_the_run_once(
    heating_document, settings, monkeypatch
):
    """Three workers (threads, each with its own database connection) finish their chunks
    at the same moment; the lock on the run row lets exactly one of them combine."""
    if connection.vendor != "postgresql":
        pytest.skip("needs a database with row locks and concurrent writers (PostgreSQL)")
    settings.TASKS = DUMMY
    owner = make_user("olive")
    study = services.study_import(data=heating_document, owner=owner)
    together = threading.Barrier(3)
    real_chunk = simulation_service.simulate_chunk
    real_result = simulation_service.simulation_result
    combined = []

    def chunk_then_wait(*args, **kwargs):
        part = real_chunk(*args, **kwargs)
        together.wait(timeout=30)
        return part

    def counting(*args, **kwargs):
        combined.append(1)
        return real_result(*args, **kwargs)

    monkeypatch.setattr(simulation_service, "simulate_chunk", chunk_then_wait)
    monkeypatch.setattr(simulation_service, "simulation_result", counting)
    run = request(study, owner)

    def worker(index: int) -> str:
        try:
            return tasks.simulate_run_chunk.call(run_id=run.pk, chunk=index)
        finally:
            connections.close_all()

    with ThreadPoolExecutor(3) as pool:
        outcomes = sorted(pool.map(worker, range(3)))
    assert outcomes == ["done", "stored", "stored"]
    assert combined == [1]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE
    assert run.result["summary"] == reference_summary(heating_document)


# -- the simulate command ------------------------------------------------------------


def cli(*args: str) -> tuple[str, str]:
    out, err = StringIO(), StringIO()
    call_command("simulate", *args, stdout=out, stderr=err)
    return out.getvalue(), err.getvalue()


def test_simulate_json_equals_the_stored_runs_summary(study, owner, immediate):
    run = request(study, owner)
    output, _ = cli(
        str(study.pk), "--plan", "auto", "--days", str(DAYS), "--seed", str(SEED), "--json"
    )
    assert json.loads(output) == run.result["summary"]


def test_simulate_prints_a_table_per_person_and_the_chains(heating_document, tmp_path):
    source = tmp_path / "heating.json"
    source.write_text(json.dumps(heating_document))
    output, _ = cli(str(source), "--plan", "auto", "--days", "30", "--seed", "4")
    summary = reference_summary(heating_document, days=30, seed=4)
    burden = summary["people"]["resident"]["burden_s"]
    assert "Home heating schedule — plan auto" in output
    assert "30 simulated days, seed 4" in output
    assert "Resident (per day)" in output
    row = next(line for line in output.splitlines() if line.startswith("Person time, s a day"))
    # At the registry's precision for person time (one decimal, thousands grouped).
    assert row.split()[-3:] == [f"{burden[k]:,.1f}" for k in ("mean", "p50", "p95")]
    assert "Leave home" in output and "missed" in output
    words = " ".join(output.split())  # the method note and cautions are wrapped
    assert "Cautions: Baton supports human-factors analysis" in words
    assert "(Hyndman & Fan 1996, definition 7)" in words


def test_simulate_reports_progress_on_long_runs(heating_document, tmp_path):
    source = tmp_path / "heating.json"
    source.write_text(json.dumps(heating_document))
    days = 4 * CHUNK_DAYS
    _, err = cli(str(source), "--plan", "manual", "--days", str(days), "--seed", "1", "--json")
    assert f"simulated {days:,} of {days:,} days" in err


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--plan", "auto", "--days", "0", "--seed", "1"], "must be 1 to 20,000; got 0"),
        (["--plan", "auto", "--days", "5", "--seed", "-3"], "The seed must be"),
        (["--plan", "nope", "--days", "5", "--seed", "1"], "has no plan 'nope'"),
    ],
)
def test_simulate_refuses_bad_arguments_clearly(study, args, message):
    with pytest.raises(CommandError, match=message):
        cli("home-heating", *args)


# -- start runs a worker beside the server -------------------------------------------


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _wait_for(condition, timeout: float, what: str):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        value = condition()
        if value:
            return value
        time.sleep(0.2)
    raise AssertionError(f"timed out waiting for {what}")


def test_start_runs_a_worker_that_completes_runs_and_stops_with_the_server(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "DJANGO_ALLOW_ASYNC_UNSAFE"}
    env["BATON_DATA_DIR"] = str(tmp_path)
    env.pop("DATABASE_URL", None)  # the server and its worker share a SQLite file here
    log = tmp_path / "start.log"
    with log.open("w") as out:
        server = subprocess.Popen(
            [sys.executable, "manage.py", "start", "--port", str(_free_port())],
            cwd=REPO,
            env=env,
            stdout=out,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )
    try:
        line = _wait_for(
            lambda: next(
                (x for x in log.read_text().splitlines() if "background worker (process" in x),
                None,
            ),
            60,
            "the worker to start",
        )
        worker_pid = int(line.split("process ")[1].rstrip(")."))
        asked = subprocess.run(
            [sys.executable, "manage.py", "shell", "-c", REQUEST_FROM_SHELL],
            cwd=REPO,
            env=env,
            capture_output=True,
            text=True,
            timeout=60,
        )
        assert asked.returncode == 0, asked.stderr
        database = tmp_path / "baton.sqlite3"

        def status() -> str | None:
            with sqlite3.connect(database) as connection:
                row = connection.execute(
                    "SELECT status FROM allocation_simulationrun WHERE status = 'done'"
                ).fetchone()
            return row and row[0]

        assert _wait_for(status, 60, "the worker to finish the run") == "done"
        server.send_signal(signal.SIGTERM)
        server.wait(timeout=30)
        assert "Stopped the background worker" in log.read_text()
        assert not Path(f"/proc/{worker_pid}").exists()
    finally:
        if server.poll() is None:
            os.killpg(server.pid, signal.SIGKILL)
            server.wait()


REQUEST_FROM_SHELL = """
from django.contrib.auth import get_user_model
from allocation import models as m, services
user = get_user_model().objects.get(username="baton")
study = m.Study.objects.get(key="home-heating")
services.simulation_request(study=study, plan_key="auto", days=20, seed=1, user=user)
"""


def test_a_run_over_the_memory_limit_is_refused_before_anything_is_stored(
    study, owner, heating_document, settings
):
    """The leave event a hundred thousand times a day: its chain of two tasks makes 4e7
    occurrences in a 200-day part, far over SIMULATION_MAX_BYTES (1 GiB,
    allocation/core/limits.py); refused on the days asked for, no run nor task stored."""
    heating_document["events"][0] = {"id": "leave", "name": "Leave home", "per_day": 100_000}
    heating_document["study"]["id"] = "busy-heating"
    busy = services.study_import(data=heating_document, owner=owner)
    with pytest.raises(services.SimulationRefused, match="SIMULATION_MAX_BYTES") as caught:
        request(busy, owner, days=200)
    assert caught.value.field == "days"
    assert "Simulating 200 days would need about" in str(caught.value)
    assert not m.SimulationRun.objects.exists() and not DBTaskResult.objects.exists()
