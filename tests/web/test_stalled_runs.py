"""A simulation run whose worker died: after ten minutes without progress it fails as
stalled, keeping its chunks, and a restart (or the same question asked again) simulates
only the rest (``services.simulation_fail_stalled``, limit ``SIMULATION_STALLED_S``).

Times are set by hand on the run's ``progress_at`` against a fixed "now"; the limit is
the one the README states (ten minutes). The reference for every result is the core's
one-process simulation, as in test_simulation_runs.py.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.urls import reverse
from django.utils import timezone
from django.utils.http import urlencode

from allocation import models as m
from allocation import services
from allocation.management.commands.worker import fail_stalled_runs
from tests.web.test_simulation_runs import DAYS, SEED, reference_summary, request, run_chunks

#: Ten minutes, the stated limit.
TEN_MINUTES = 600


@pytest.fixture
def queued(settings):
    from django_tasks import task_backends

    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
    return task_backends["default"]


def enqueued_for(backend, run) -> list[int]:
    return [r.kwargs["chunk"] for r in backend.results if r.kwargs["run_id"] == run.pk]


def still_for(run: m.SimulationRun, seconds: float, now: dt.datetime) -> None:
    """The run last moved ``seconds`` before ``now``."""
    m.SimulationRun.objects.filter(pk=run.pk).update(
        progress_at=now - dt.timedelta(seconds=seconds)
    )


@pytest.fixture
def stalled_run(study, owner, queued):
    """Chunks 0 and 2 of three stored, then nothing for eleven minutes."""
    run = request(study, owner)
    assert run_chunks(run, [0, 2]) == ["stored", "stored"]
    now = timezone.now()
    still_for(run, 11 * 60, now)
    assert services.simulation_fail_stalled(now=now) == [run.pk]
    run.refresh_from_db()
    return run


def test_a_run_without_progress_past_the_limit_fails_as_stalled_keeping_its_chunks(
    study, owner, queued
):
    run = request(study, owner)
    run_chunks(run, [0, 2])
    now = timezone.now()
    still_for(run, 11 * 60, now)
    assert services.simulation_fail_stalled(study=study, now=now) == [run.pk]
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED and run.stalled
    assert run.error == (
        "nothing was simulated for 11 min (the limit is 10 min): its worker stopped; "
        "restart the run to simulate the rest (2 of 3 parts are kept)"
    )
    assert run.finished_at == now and run.result is None
    assert sorted(run.chunks.values_list("index", flat=True)) == [0, 2]
    # Failed once: a second look finds nothing more to fail.
    assert services.simulation_fail_stalled(now=now) == []


def test_a_run_inside_the_limit_or_still_queued_is_left_going(study, owner, queued):
    running = request(study, owner)
    run_chunks(running, [0])
    waiting = request(study, owner, seed=SEED + 1)  # no worker has taken it yet
    now = timezone.now()
    still_for(running, TEN_MINUTES - 1, now)
    still_for(waiting, 60 * 60, now)
    assert services.simulation_fail_stalled(now=now) == []
    running.refresh_from_db()
    waiting.refresh_from_db()
    assert running.status == m.SimulationStatus.RUNNING and not running.stalled
    assert waiting.status == m.SimulationStatus.QUEUED


def test_a_worker_taking_or_storing_a_chunk_moves_the_run(study, owner, queued):
    run = request(study, owner)
    now = timezone.now()
    still_for(run, 60 * 60, now)
    services.simulation_start(run_id=run.pk)  # a worker takes a chunk
    run.refresh_from_db()
    assert run.progress_at >= now
    still_for(run, 60 * 60, now)
    run_chunks(run, [1])  # a chunk stored
    run.refresh_from_db()
    assert run.progress_at >= now
    assert services.simulation_fail_stalled(now=now + dt.timedelta(seconds=60)) == []


def test_only_the_given_study_is_looked_at(study, owner, queued, heating_document):
    run = request(study, owner)
    run_chunks(run, [0])
    other_document = {**heating_document, "study": {**heating_document["study"], "id": "other"}}
    other = services.study_import(data=other_document, owner=owner)
    now = timezone.now()
    still_for(run, 11 * 60, now)
    assert services.simulation_fail_stalled(study=other, now=now) == []
    assert services.simulation_fail_stalled(study=study, now=now) == [run.pk]


def test_a_late_chunk_of_a_stalled_run_is_dropped(stalled_run):
    """Its worker was only slow: what it brings back is dropped; the run stays failed."""
    assert run_chunks(stalled_run, [1]) == ["dropped"]
    stalled_run.refresh_from_db()
    assert stalled_run.status == m.SimulationStatus.FAILED
    assert stalled_run.chunks.count() == 2


def test_restarting_a_stalled_run_simulates_only_the_rest(
    stalled_run, owner, queued, heating_document
):
    new = services.simulation_restart(run=stalled_run, user=owner)
    stalled_run.refresh_from_db()
    assert new.pk != stalled_run.pk and new.status == m.SimulationStatus.QUEUED
    assert (new.chunks_done, new.chunks_total) == (2, 3)
    assert enqueued_for(queued, new) == [1]
    assert stalled_run.error.endswith("; restarted by olive after 2 of 3 parts")
    assert stalled_run.error.startswith("nothing was simulated for 11 min")
    assert not stalled_run.stalled and not stalled_run.chunks.exists()
    # Restarted once: a second restart of the old run changes nothing.
    assert services.simulation_restart(run=stalled_run, user=owner).pk == stalled_run.pk
    assert run_chunks(new, [1]) == ["done"]
    new.refresh_from_db()
    assert new.result["summary"] == reference_summary(heating_document)


def test_asking_the_same_question_again_keeps_the_stalled_chunks(
    stalled_run, study, member_of, queued, heating_document
):
    """Any member asking for the same days and seed gets a new run that takes the
    stalled run's chunks (a viewer may not restart, but may ask)."""
    viewer = member_of("viewer")
    new = request(study, viewer)
    assert new.pk != stalled_run.pk and new.chunks_done == 2
    assert enqueued_for(queued, new) == [1]
    stalled_run.refresh_from_db()
    assert not stalled_run.stalled and not stalled_run.chunks.exists()
    assert run_chunks(new, [1]) == ["done"]
    new.refresh_from_db()
    assert new.result["summary"] == reference_summary(heating_document)


def test_asking_again_after_the_study_changed_simulates_everything(
    stalled_run, study, owner, queued
):
    services.study_assumption_set(study=study, key="occupancy_limit", value=0.7, user=owner)
    new = request(study, owner)
    assert new.chunks_done == 0 and enqueued_for(queued, new) == [0, 1, 2]
    stalled_run.refresh_from_db()
    # Its chunks are of the study as it was, of no use to any run now: they go.
    assert not stalled_run.stalled and not stalled_run.chunks.exists()


def test_a_request_does_not_join_a_run_that_stalled(study, owner, queued):
    """Without the check the request would join the dead run (it is still "running")."""
    run = request(study, owner)
    run_chunks(run, [0])
    still_for(run, 11 * 60, timezone.now())
    new = request(study, owner)
    assert new.pk != run.pk
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED and run.stalled is False
    assert new.chunks_done == 1


def test_the_workers_housekeeping_fails_stalled_runs(study, owner, queued):
    run = request(study, owner)
    run_chunks(run, [0])
    still_for(run, 11 * 60, timezone.now())
    fail_stalled_runs()
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED and run.stalled


# -- on the simulation page --------------------------------------------------------------


def page_url(study) -> str:
    query = urlencode({"days": DAYS, "seed": SEED})
    return f"{reverse('plan-simulation', args=[study.pk, 'auto'])}?{query}"


def test_the_status_poll_sees_the_run_stalled_and_the_page_offers_the_restart(
    client, study, owner, member_of, queued
):
    run = request(study, owner)
    run_chunks(run, [0, 2])
    still_for(run, 11 * 60, timezone.now())
    client.force_login(owner)
    status_url = f"{reverse('plan-simulation-status', args=[study.pk, 'auto'])}?" + urlencode(
        {"days": DAYS, "seed": SEED}
    )
    polled = client.get(status_url, headers={"HX-Request": "true"})
    # The run has ended: the page reloads, as for any run that ends.
    assert polled["HX-Refresh"] == "true"
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.FAILED and run.stalled
    page = client.get(page_url(study)).content.decode()
    assert "nothing was simulated for 11 min (the limit is 10 min)" in page
    assert "Restart the run" in page
    client.force_login(member_of("viewer"))
    assert "Restart the run" not in client.get(page_url(study)).content.decode()


@pytest.mark.parametrize("htmx", [False, True])
def test_restarting_a_stalled_run_from_the_page(client, study, owner, queued, htmx):
    run = request(study, owner)
    run_chunks(run, [0, 2])
    now = timezone.now()
    still_for(run, 11 * 60, now)
    services.simulation_fail_stalled(now=now)
    client.force_login(owner)
    response = client.post(
        reverse("plan-simulation-restart", args=[study.pk, "auto"]),
        {"days": DAYS, "seed": SEED},
        headers={"HX-Request": "true"} if htmx else {},
    )
    assert response.status_code == 200 if htmx else 302
    page = client.get(page_url(study)).content.decode()
    assert "The run was restarted; 2 of 3 parts already simulated were kept." in page
    new = m.SimulationRun.objects.exclude(pk=run.pk).get()
    assert new.chunks_done == 2 and enqueued_for(queued, new) == [1]
