"""The background worker when the database goes away (``manage.py worker``,
``allocation/ops/worker.py``): its waits, what it does with the task in hand, and that a
run it works through an outage ends as a fresh run would.

The database's going away is simulated by raising the errors the PostgreSQL driver
gives (``OperationalError`` "server closed the connection unexpectedly", "connection
refused") at the point where each would arise; .ci/run stops and starts a real
PostgreSQL under a running worker and gunicorn (``python -m loadtest.db_restart``).
The references: the wait schedule worked by hand from the stated rule (1 s, doubled
after each failed attempt, at most 30 s); for every run, the core's one-process
simulation ``simulate(study, plan, days=N, seed=S)``, as in test_simulation_runs.py;
and the task queue's own rows (django-tasks-db's ``DBTaskResult``: status, and the
workers that took each task).
"""

from __future__ import annotations

from io import StringIO

import pytest
from django.core.management import call_command
from django.db import InterfaceError, OperationalError
from django_tasks_db.models import DBTaskResult, DBTaskResultQuerySet

from allocation import models as m
from allocation import services
from allocation.ops.worker import Worker, retry_delay
from allocation.services import simulation as simulation_service
from tests.web.conftest import make_user
from tests.web.test_simulation_runs import reference_summary, request

DROPPED = "server closed the connection unexpectedly"
REFUSED = 'connection to server at "127.0.0.1", port 5432 failed: Connection refused'


def make_worker(waits: list[float], **options) -> Worker:
    """A worker of the default queue that records its waits instead of sleeping, and
    stops once the queue is empty (``--batch``)."""
    settings = {
        "queue_names": ["default"],
        "interval": 0,
        "batch": True,
        "backend_name": "default",
        "startup_delay": False,
        "max_tasks": None,
        "worker_id": "test-worker",
        "excluded_queue_names": [],
        "pause": waits.append,
    }
    settings.update(options)
    return Worker(**settings)


def chunk_tasks(run: m.SimulationRun) -> dict[int, DBTaskResult]:
    """The queue's row of each chunk of ``run``."""
    rows = DBTaskResult.objects.all()
    return {
        row.args_kwargs["kwargs"]["chunk"]: row
        for row in rows
        if row.args_kwargs["kwargs"]["run_id"] == run.pk
    }


def failing(times: int, error: Exception):
    """A function that raises ``error`` the first ``times`` calls, then calls on."""
    left = [times]

    def wrap(real):
        def call(*args, **kwargs):
            if left[0] > 0:
                left[0] -= 1
                raise error
            return real(*args, **kwargs)

        return call

    return wrap


@pytest.fixture
def queued_run(heating_document):
    """A run of three chunks queued in the database (the settings' task backend)."""
    owner = make_user("olive")
    study = services.study_import(data=heating_document, owner=owner)
    run = request(study, owner)
    assert run.status == m.SimulationStatus.QUEUED
    return run


# -- the wait ----------------------------------------------------------------------------


def test_the_wait_doubles_from_one_second_up_to_thirty():
    # Worked by hand: 1, then 2, 4, 8, 16; 32 is over the cap, so 30 from then on.
    assert [retry_delay(n) for n in range(8)] == [1, 2, 4, 8, 16, 30, 30, 30]
    assert retry_delay(10_000) == 30
    with pytest.raises(ValueError, match="attempt must be 0 or more; got -1"):
        retry_delay(-1)


# -- the database away while the worker looks for work ---------------------------------


@pytest.mark.django_db(transaction=True)
def test_the_worker_waits_for_the_database_then_runs_the_queue(
    queued_run, heating_document, monkeypatch
):
    """The first look at the queue finds the connection dropped; three attempts find the
    database refusing connections, the fourth reaches it: the waits are 1, 2, 4 and 8 s,
    and the worker then runs the whole queue, each task once."""
    monkeypatch.setattr(
        DBTaskResultQuerySet,
        "get_locked",
        failing(1, OperationalError(DROPPED))(DBTaskResultQuerySet.get_locked),
    )
    monkeypatch.setattr(
        Worker,
        "_check_database",
        staticmethod(failing(3, OperationalError(REFUSED))(Worker._check_database)),
    )
    waits: list[float] = []
    worker = make_worker(waits)
    worker.run()
    assert waits == [1, 2, 4, 8]
    assert worker.outages == 1
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE
    assert queued_run.result["summary"] == reference_summary(heating_document)
    tasks = chunk_tasks(queued_run)
    assert sorted(tasks) == [0, 1, 2]
    assert {row.status for row in tasks.values()} == {"SUCCESSFUL"}
    assert [len(row.worker_ids) for row in tasks.values()] == [1, 1, 1]


@pytest.mark.django_db(transaction=True)
def test_an_interface_error_is_waited_out_too(queued_run, monkeypatch):
    """psycopg's "the connection is closed" on a connection already known to be broken
    is an ``InterfaceError``: the same wait."""
    monkeypatch.setattr(
        DBTaskResultQuerySet,
        "get_locked",
        failing(2, InterfaceError("the connection is closed"))(DBTaskResultQuerySet.get_locked),
    )
    waits: list[float] = []
    worker = make_worker(waits)
    worker.run()
    # Two separate outages, each over at the first attempt.
    assert waits == [1, 1] and worker.outages == 2
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE


# -- the database away while a task runs -------------------------------------------------


@pytest.mark.django_db(transaction=True)
def test_a_chunk_the_database_went_away_under_is_taken_again_and_counted_once(
    queued_run, heating_document, monkeypatch
):
    """Storing chunk 1 loses the database: the run is not failed (not its fault), the
    worker waits, puts the task back in the queue, takes it again; the run ends as the
    one-process run, every chunk counted once."""
    real_store = simulation_service.simulation_chunk_store
    lost = []

    def store(*, run_id, chunk, data):
        if chunk == 1 and not lost:
            lost.append(chunk)
            raise OperationalError(DROPPED)
        return real_store(run_id=run_id, chunk=chunk, data=data)

    monkeypatch.setattr(simulation_service, "simulation_chunk_store", store)
    waits: list[float] = []
    make_worker(waits).run()
    assert lost == [1] and waits == [1]
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE and queued_run.error == ""
    assert (queued_run.chunks_done, queued_run.chunks_total) == (3, 3)
    assert queued_run.result["summary"] == reference_summary(heating_document)
    tasks = chunk_tasks(queued_run)
    assert {row.status for row in tasks.values()} == {"SUCCESSFUL"}
    # Chunk 1 was taken twice, by the same worker; the others once.
    assert {index: row.worker_ids for index, row in tasks.items()} == {
        0: ["test-worker"],
        1: ["test-worker", "test-worker"],
        2: ["test-worker"],
    }


@pytest.mark.django_db(transaction=True)
def test_a_run_the_database_went_away_under_while_combining_is_combined_by_the_retry(
    queued_run, heating_document, monkeypatch
):
    """Every chunk stored, then the database goes away as the last task combines them:
    the task is taken again, finds every chunk counted and combines the run, once."""
    real_finish = simulation_service.simulation_finish
    combined = []

    def finish(**kwargs):
        combined.append(kwargs["run_id"])
        if len(combined) == 1:
            raise OperationalError(DROPPED)
        return real_finish(**kwargs)

    monkeypatch.setattr(simulation_service, "simulation_finish", finish)
    waits: list[float] = []
    make_worker(waits).run()
    assert combined == [queued_run.pk, queued_run.pk] and waits == [1]
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE
    assert queued_run.chunks_done == 3
    assert queued_run.result["summary"] == reference_summary(heating_document)
    assert not m.SimulationChunk.objects.exists()
    assert [len(row.worker_ids) for _, row in sorted(chunk_tasks(queued_run).items())] == [
        1,
        1,
        2,
    ]


@pytest.mark.django_db(transaction=True)
def test_a_task_that_always_loses_the_database_is_failed_after_five_attempts(
    queued_run, monkeypatch
):
    """Chunk 0 loses the database on every attempt: it is taken five times (the limit),
    then recorded as failed with the error; the other chunks are stored and the run is
    left going (its worker did not die; it fails as stalled if nothing else moves it)."""
    real_store = simulation_service.simulation_chunk_store

    def store(*, run_id, chunk, data):
        if chunk == 0:
            raise OperationalError(DROPPED)
        return real_store(run_id=run_id, chunk=chunk, data=data)

    monkeypatch.setattr(simulation_service, "simulation_chunk_store", store)
    waits: list[float] = []
    make_worker(waits).run()
    assert waits == [1, 1, 1, 1, 1]
    tasks = chunk_tasks(queued_run)
    assert tasks[0].status == "FAILED" and len(tasks[0].worker_ids) == 5
    assert tasks[0].exception_class_path == "django.db.utils.OperationalError"
    assert DROPPED in tasks[0].traceback
    assert tasks[1].status == tasks[2].status == "SUCCESSFUL"
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.RUNNING and queued_run.error == ""
    assert queued_run.chunks_done == 2


@pytest.mark.django_db(transaction=True)
def test_an_outcome_that_could_not_be_recorded_is_recorded_later_without_running_again(
    queued_run, monkeypatch
):
    """The chunk is simulated and stored, then recording the task's success loses the
    database: the worker waits and records it; the chunk is not simulated again."""
    simulated = []
    real_chunk = simulation_service.simulate_chunk

    def chunk(*args, **kwargs):
        simulated.append(kwargs["chunk"])
        return real_chunk(*args, **kwargs)

    monkeypatch.setattr(simulation_service, "simulate_chunk", chunk)
    monkeypatch.setattr(
        DBTaskResult,
        "set_successful",
        failing(1, OperationalError(DROPPED))(DBTaskResult.set_successful),
    )
    waits: list[float] = []
    make_worker(waits).run()
    assert simulated == [0, 1, 2] and waits == [1]
    tasks = chunk_tasks(queued_run)
    assert {row.status for row in tasks.values()} == {"SUCCESSFUL"}
    assert [len(row.worker_ids) for row in tasks.values()] == [1, 1, 1]
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE


@pytest.mark.django_db(transaction=True)
def test_a_worker_stopped_while_it_waits_stops_leaving_its_task_running(queued_run, monkeypatch):
    """Asked to stop (SIGTERM) while it waits for the database with a task in hand: it
    stops; the task stays *running* in the queue (no worker takes it twice), and the run
    stays going until it fails as stalled and is restarted."""
    monkeypatch.setattr(
        simulation_service,
        "simulation_chunk_store",
        failing(1, OperationalError(DROPPED))(simulation_service.simulation_chunk_store),
    )
    waits: list[float] = []

    def stopped(seconds: float) -> None:
        waits.append(seconds)
        worker.running = False  # what the SIGTERM handler does while a task is in hand

    worker = make_worker(waits, pause=stopped)
    worker.run()
    assert waits == [1]
    tasks = chunk_tasks(queued_run)
    assert tasks[0].status == "RUNNING"
    assert tasks[1].status == tasks[2].status == "READY"
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.RUNNING and queued_run.chunks_done == 0


def test_a_chunk_task_raises_a_lost_database_without_failing_the_run(
    study, owner, settings, monkeypatch
):
    """The service itself: a lost database is raised for the worker, the run keeps
    going (an error of any other kind fails it: test_simulation_runs.py)."""
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
    run = request(study, owner)

    def lost(**kwargs):
        raise OperationalError(DROPPED)

    monkeypatch.setattr(simulation_service, "simulation_chunk_store", lost)
    with pytest.raises(OperationalError, match=DROPPED):
        simulation_service.simulation_chunk_run(run_id=run.pk, chunk=0)
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.RUNNING and run.error == ""


# -- housekeeping and the command --------------------------------------------------------


@pytest.mark.django_db(transaction=True)
def test_the_worker_looks_after_housekeeping_between_tasks(queued_run):
    """Between looks at the queue the worker calls its housekeeping (the command's:
    failing stalled runs), at most once per interval; an error in it is logged, and the
    worker goes on."""
    calls = []

    def housekeeping():
        calls.append(1)
        raise RuntimeError("housekeeping broke")

    looks = []

    def idle(seconds: float) -> None:
        looks.append(seconds)
        if len(looks) == 3:
            worker.running = False

    worker = make_worker([], batch=False, interval=1, pause=idle, housekeeping=housekeeping)
    worker.housekeeping_every_s = 3600
    worker.run()
    assert looks == [1, 1, 1]
    assert calls == [1]  # once in the hour, though it failed
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE


@pytest.mark.django_db(transaction=True)
def test_manage_py_worker_runs_the_queue(queued_run, heating_document):
    """The command the README names, on the settings' backend."""
    call_command(
        "worker", "--batch", "--no-reload", "--no-startup-delay", verbosity=0, stdout=StringIO()
    )
    queued_run.refresh_from_db()
    assert queued_run.status == m.SimulationStatus.DONE
    assert queued_run.result["summary"] == reference_summary(heating_document)
