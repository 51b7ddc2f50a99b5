"""Background tasks, on Django's tasks framework (the ``django_tasks`` backport).

A simulation run (``models.SimulationRun``) is split into chunks of ``CHUNK_DAYS`` days,
one task each. Any worker may take any chunk: the core draws a chunk from the run's seed
and the chunk's number alone, so the days are the same however the chunks are spread.
Each task

1. stops at once if the run is finished or its cancellation was asked for;
2. simulates its chunk with the study as it is now, and stores it only if the study
   still has the version the run was made for (otherwise the run fails with
   :data:`STUDY_CHANGED`);
3. counts the chunk under a lock on the run row; the one task whose chunk makes the
   count complete combines all chunks into the run's result. The lock makes that
   exactly one task, however many workers share the database.
"""

from __future__ import annotations

from typing import Any

from django.db import transaction
from django.utils import timezone
from django_tasks import task

from allocation import models as m
from allocation import selectors
from allocation.core.simulation import (
    CHUNK_DAYS,
    SimulationChunk,
    combine,
    day_timeline,
    sim_plan,
    simulate_chunk,
)

__all__ = ["STUDY_CHANGED", "simulate_run_chunk", "simulation_result"]

STUDY_CHANGED = "the study changed; run it again"


class _RunOver(Exception):
    """The run finished (or went) while this task worked; its work is dropped."""


class _StudyChanged(Exception):
    pass


def _locked(run_id: int) -> m.SimulationRun | None:
    """The run with its row locked until the transaction ends, or ``None`` once it is not
    active; a run whose cancellation was asked for is marked cancelled here."""
    run = m.SimulationRun.objects.select_for_update().filter(pk=run_id).first()
    if run is None or run.status not in m.SimulationStatus.active():
        return None
    if run.cancel_requested:
        _end(run, m.SimulationStatus.CANCELLED)
        return None
    return run


def _end(run: m.SimulationRun, status: str, *, error: str = "", result: Any = None) -> None:
    """Finish a locked run: only a done run keeps a result; the chunks are not kept."""
    run.status = status
    run.error = error
    run.result = result
    run.finished_at = timezone.now()
    run.save(update_fields=["status", "error", "result", "finished_at"])
    run.chunks.all().delete()


def _changed(run: m.SimulationRun) -> bool:
    """Whether the study has moved on from the version the run was made for."""
    version = m.Study.objects.filter(pk=run.study_id).values_list("updated_at", flat=True).first()
    return version != run.study_version


# Each step below decides inside its transaction and raises after it, so that what the
# step wrote (a cancellation seen, a status) is committed, not rolled back by the raise.


def _start(run_id: int) -> m.SimulationRun:
    with transaction.atomic():
        run = _locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed and run.status == m.SimulationStatus.QUEUED:
            run.status = m.SimulationStatus.RUNNING
            run.save(update_fields=["status"])
    if run is None:
        raise _RunOver
    if changed:
        raise _StudyChanged
    return run


def _store(run_id: int, chunk: int, data: dict[str, Any]) -> bool:
    """Store one chunk; whether it was the one that completed the run."""
    completed = changed = False
    with transaction.atomic():
        run = _locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed:
            before = run.chunks_done
            # update_or_create: a chunk that runs twice (a retried task) counts once.
            m.SimulationChunk.objects.update_or_create(
                run=run, index=chunk, defaults={"result": data}
            )
            run.chunks_done = run.chunks.count()
            run.save(update_fields=["chunks_done"])
            completed = before < run.chunks_total == run.chunks_done
    if run is None:
        raise _RunOver
    if changed:
        raise _StudyChanged
    return completed


def simulation_result(study: Any, run: m.SimulationRun, chunks: list[Any]) -> dict[str, Any]:
    """What a done run stores: the combined simulation, its summary, and the full
    timelines of its typical and its worst day."""
    simulation = combine(study, run.plan_key, seed=run.seed, days=run.days, chunks=chunks)
    tables = sim_plan(study, run.plan_key)  # shared by the two days drawn again
    days = {"typical": simulation.typical_day, "worst": simulation.worst_day}
    return {
        "simulation": simulation.to_json(),
        "summary": simulation.summary(),
        **{
            name: day_timeline(
                study, run.plan_key, seed=run.seed, day=day, days=run.days, plan=tables
            ).to_json()
            for name, day in days.items()
        },
    }


def _finish(run_id: int, study: Any) -> None:
    with transaction.atomic():
        run = _locked(run_id)
        rows = [] if run is None else list(run.chunks.values_list("result", flat=True))
    if run is None:
        raise _RunOver
    # Combining runs outside the lock, so that a cancel or a progress read need not wait.
    result = simulation_result(study, run, [SimulationChunk.from_json(row) for row in rows])
    with transaction.atomic():
        run = _locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed:
            _end(run, m.SimulationStatus.DONE, result=result)
    if run is None:
        raise _RunOver
    if changed:
        raise _StudyChanged


def _fail(run_id: int, message: str) -> None:
    with transaction.atomic():
        run = _locked(run_id)
        if run is not None:
            _end(run, m.SimulationStatus.FAILED, error=message)


@task()
def simulate_run_chunk(run_id: int, chunk: int) -> str:
    """Simulate chunk ``chunk`` of run ``run_id`` (days ``chunk * CHUNK_DAYS`` onwards)
    and, if it is the last to arrive, combine the run. Returns what became of it:
    ``"stored"``, ``"done"`` (it combined the run), ``"dropped"`` (the run had finished
    or was cancelled) or ``"failed"`` (the study changed)."""
    doing = f"simulating days {chunk * CHUNK_DAYS:,} onwards"
    try:
        run = _start(run_id)
        if not 0 <= chunk < run.chunks_total:
            raise ValueError(f"the run has chunks 0 to {run.chunks_total - 1}, not {chunk}")
        last = min((chunk + 1) * CHUNK_DAYS, run.days) - 1
        doing = f"simulating days {chunk * CHUNK_DAYS:,} to {last:,}"
        result = selectors.study_load(run.study)
        if not result.ok:
            # It had no errors when the run was asked for, so it has changed since.
            raise _StudyChanged
        part = simulate_chunk(
            result.study, run.plan_key, seed=run.seed, chunk=chunk, days=run.days
        )
        if _store(run_id, chunk, part.to_json()):
            doing = "combining the chunks"
            _finish(run_id, result.study)
            return "done"
        return "stored"
    except _RunOver:
        return "dropped"
    except _StudyChanged:
        _fail(run_id, STUDY_CHANGED)
        return "failed"
    except Exception as error:
        _fail(run_id, f"{doing} failed: {error}")
        # Raised again so that the task backend records the traceback too.
        raise
