"""Simulation runs: ask for N simulated days of a plan, stop a run, or restart one whose
worker died; and what the background task does with each chunk.

A request is answered by a stored run when one exists for the same question — the
study at its current version, the plan, N and the seed — that is done or still going;
otherwise a new run is stored and one background task per chunk of ``CHUNK_DAYS`` days
is enqueued on Django's tasks framework (``allocation.tasks``). With the database
backend the run row and its tasks are written in one transaction, so there is never a
run without its tasks or tasks without their run, and workers on any machine that
shares the database take the chunks.

Any worker may take any chunk: the core draws a chunk from the run's seed and the
chunk's number alone, so the days are the same however the chunks are spread. The task
calls :func:`simulation_chunk_run`, which

1. stops at once if the run is finished or its cancellation was asked for
   (:func:`simulation_start`);
2. simulates its chunk with the study as it is now, and stores it only if the study
   still has the version the run was made for (:func:`simulation_chunk_store`;
   otherwise the run fails with :data:`STUDY_CHANGED`);
3. counts the chunk under a lock on the run row; the one task whose chunk makes the
   count complete combines all chunks into the run's result
   (:func:`simulation_finish`). The lock makes that exactly one task, however many
   workers share the database.

A database that goes away while a chunk is simulated or stored does not fail the run:
the error goes to the worker (``manage.py worker``), which waits for the database and
puts the chunk back in the queue. A run whose worker died stops moving; once it has not
moved for ``limits.SIMULATION_STALLED_S`` it is failed as *stalled*
(:func:`simulation_fail_stalled`, when its page or status is read, when the same
question is asked again, and by the worker) and keeps its chunks for a restart.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from django.contrib.auth.models import User
from django.core.exceptions import PermissionDenied
from django.db import IntegrityError, InterfaceError, OperationalError, transaction
from django.utils import timezone

from allocation import models as m
from allocation import selectors
from allocation.core import Study, limits
from allocation.core.describe import seconds_text
from allocation.core.simulation import (
    CHUNK_DAYS,
    SimulationChunk,
    chunk_count,
    combine,
    day_timeline,
    sim_plan,
    simulate_chunk,
    simulation_memory_estimate,
)

__all__ = [
    "SIMULATION_MAX_DAYS",
    "SIMULATION_MAX_SEED",
    "SimulationRefused",
    "SimulationRunOver",
    "SimulationStudyChanged",
    "simulation_cancel",
    "simulation_check",
    "simulation_chunk_run",
    "simulation_chunk_store",
    "simulation_fail",
    "simulation_fail_stalled",
    "simulation_finish",
    "simulation_may_restart",
    "simulation_request",
    "simulation_restart",
    "simulation_result",
    "simulation_start",
]

#: The most days one request may ask for (the database allows up to
#: ``models.SIMULATION_DAYS_LIMIT``).
SIMULATION_MAX_DAYS = limits.SIMULATION_MAX_DAYS
#: Seeds are stored in a signed 64-bit column.
SIMULATION_MAX_SEED = 2**63 - 1


class SimulationRefused(ValueError):
    """A simulation request that cannot be run; ``field`` names the value at fault
    (``"days"``, ``"seed"``, ``"plan"`` or ``"study"``) and the message says why."""

    def __init__(self, field: str, message: str):
        self.field = field
        super().__init__(message)


def _whole_number(value: object, field: str, what: str) -> int:
    """An int, or the text of one as a form sends it; anything else is refused."""
    if isinstance(value, int) and not isinstance(value, bool):
        return value
    if isinstance(value, str):
        try:
            return int(value.strip())
        except ValueError:
            pass
    raise SimulationRefused(field, f"{what} must be a whole number; got {value!r}")


def simulation_check(*, days: object, seed: object) -> tuple[int, int]:
    """``days`` and ``seed`` as whole numbers within their limits, or
    :class:`SimulationRefused` saying which is wrong and what it may be."""
    days = _whole_number(days, "days", "The number of days")
    if not 1 <= days <= SIMULATION_MAX_DAYS:
        raise SimulationRefused(
            "days", f"The number of days must be 1 to {SIMULATION_MAX_DAYS:,}; got {days:,}"
        )
    seed = _whole_number(seed, "seed", "The seed")
    if not 0 <= seed <= SIMULATION_MAX_SEED:
        raise SimulationRefused(
            "seed", f"The seed must be a whole number from 0 to {SIMULATION_MAX_SEED}; got {seed}"
        )
    return days, seed


def _check_plan(study: m.Study, plan_key: str) -> Study:
    result = selectors.study_load(study)
    if result.study is None or not result.ok:
        raise SimulationRefused(
            "study",
            f"The study has {len(result.errors)} error(s); fix them before simulating it",
        )
    if plan_key not in result.study.plans_by_id:
        known = ", ".join(plan.id for plan in result.study.plans) or "none"
        raise SimulationRefused("plan", f"The study has no plan {plan_key!r} (its plans: {known})")
    return result.study


def _check_size(study: Study, plan_key: str, days: int) -> None:
    """Refuse a run whose estimated memory is over ``SIMULATION_MAX_BYTES``, before it
    is stored (the core refuses it too, but only once a worker has taken a chunk)."""
    estimate = simulation_memory_estimate(study, plan_key, days=days)
    if estimate.bytes > limits.SIMULATION_MAX_BYTES:
        message = estimate.refusal(limits.SIMULATION_MAX_BYTES)
        raise SimulationRefused("days", message[0].upper() + message[1:])


def simulation_request(
    *, study: m.Study, plan_key: str, days: object, seed: object, user: User
) -> m.SimulationRun:
    """The run that answers "simulate ``days`` days of ``plan_key`` with ``seed``".

    A done, queued or running run for the study's current version is returned as it is;
    otherwise a new run is stored and its chunks enqueued. Raises
    :class:`SimulationRefused` (nothing stored) for days outside 1 to
    ``SIMULATION_MAX_DAYS``, a negative seed, an unknown plan, a study with errors or a
    run whose estimated memory is over ``SIMULATION_MAX_BYTES``, and
    ``PermissionDenied`` for a user who is not a member of the study.
    """
    days, seed = simulation_check(days=days, seed=seed)
    # Any member may simulate: a run changes nothing in the study. The views check
    # access too; the service does not rely on them.
    if not m.Membership.objects.filter(study=study, user=user).exists():
        raise PermissionDenied("Only members of a study can simulate it.")
    _check_size(_check_plan(study, plan_key), plan_key, days)
    # A run of this question whose worker died is not joined: it fails as stalled here.
    simulation_fail_stalled(study=study)
    try:
        with transaction.atomic():
            # The study row lock makes concurrent identical requests take turns, so the
            # second finds the first's run; it also pins the version being simulated.
            version = (
                m.Study.objects.select_for_update()
                .values_list("updated_at", flat=True)
                .get(pk=study.pk)
            )
            existing = m.SimulationRun.objects.filter(
                study=study,
                study_version=version,
                plan_key=plan_key,
                days=days,
                seed=seed,
                status__in=m.SimulationStatus.reusable(),
            ).first()
            if existing is not None:
                return existing
            run = m.SimulationRun(
                study=study,
                plan_key=plan_key,
                days=days,
                seed=seed,
                study_version=version,
                chunks_total=chunk_count(days),
                requested_by=user,
            )
            run.full_clean()
            run.save()
            # The chunks of a run of the same question that stalled are not simulated
            # again (as a restart of it would keep them); those of a stalled run of an
            # earlier version of the study can serve no run any more and go.
            stalled = m.SimulationRun.objects.select_for_update().filter(
                study=study, plan_key=plan_key, days=days, seed=seed, stalled=True
            )
            todo: list[int] | range = range(run.chunks_total)
            for old in stalled.order_by("-progress_at", "-pk"):
                if old.study_version == version and run.chunks_done == 0:
                    todo = _hand_over(old, run, version)
                else:
                    _hand_over(old, None, version)
            _enqueue(run, todo)
    except IntegrityError:
        # Another process stored the same question between our look and our write
        # (databases without row locks); its run answers this request too.
        existing = selectors.simulation_run_for(study, plan_key, days, seed)
        if existing is None:
            raise
        return existing
    run.refresh_from_db()
    return run


def _enqueue(run: m.SimulationRun, chunks: range | list[int]) -> None:
    """Enqueue one background task per chunk of ``run``."""
    # The task module imports the services (its task calls simulation_chunk_run), so the
    # services reach the task only here, once both modules are loaded.
    from allocation.tasks import simulate_run_chunk

    for index in chunks:
        simulate_run_chunk.enqueue(run_id=run.pk, chunk=index)


def _hand_over(old: m.SimulationRun, new: m.SimulationRun | None, version: Any) -> list[int]:
    """Move the chunks ``old`` stored to ``new`` (both locked, ``new`` just stored) when
    the study still has the version they were simulated for, and return the chunks
    ``new`` still needs; ``old`` keeps no chunks and is no longer restartable (with no
    ``new``, its chunks are only dropped).

    A chunk depends only on the study, the seed and its number, so it is the chunk the
    new run would simulate. At least one is left to simulate, since the task that stores
    the last chunk is the one that combines the run.
    """
    kept: list[int] = []
    if new is not None and old.study_version == version and new.chunks_total == old.chunks_total:
        kept = sorted(old.chunks.values_list("index", flat=True))[: new.chunks_total - 1]
        old.chunks.filter(index__in=kept).update(run=new)
        new.chunks_done = len(kept)
        new.save(update_fields=["chunks_done"])
    old.chunks.all().delete()
    if old.stalled:
        old.stalled = False
        old.save(update_fields=["stalled"])
    if new is None:
        return []
    kept_set = set(kept)
    return [index for index in range(new.chunks_total) if index not in kept_set]


def simulation_cancel(*, run: m.SimulationRun, user: User | None = None) -> m.SimulationRun:
    """Stop ``run``: it becomes *cancelled* at once, keeps no chunks and gets no result.

    Chunks already being simulated are dropped when they finish; tasks not yet started
    see the run cancelled and do nothing. A run that has already finished (done, failed
    or cancelled) is left as it is. With ``user`` (a person on a screen), only who may
    restart the run may cancel it (``PermissionDenied`` otherwise); commands and tasks
    give none.
    """
    if user is not None and not simulation_may_restart(run=run, user=user):
        raise PermissionDenied("Only who asked for the run, or an editor, may cancel it.")
    with transaction.atomic():
        locked = m.SimulationRun.objects.select_for_update().get(pk=run.pk)
        if locked.status in m.SimulationStatus.active():
            locked.cancel_requested = True
            locked.status = m.SimulationStatus.CANCELLED
            locked.finished_at = timezone.now()
            locked.save(update_fields=["cancel_requested", "status", "finished_at"])
            locked.chunks.all().delete()
    run.refresh_from_db()
    return run


# -- restarting a run whose worker died ------------------------------------------------


def simulation_may_restart(*, run: m.SimulationRun, user: User) -> bool:
    """Whether ``user`` may restart ``run``: the member who asked for it, or an editor or
    owner of its study (a restart only re-asks the same question, but it throws away the
    work a live worker may still be doing, so not every viewer may)."""
    role = (
        m.Membership.objects.filter(study_id=run.study_id, user=user)
        .values_list("role", flat=True)
        .first()
    )
    if role is None:
        return False
    return run.requested_by_id == user.pk or m.Role.rank(role) >= m.Role.rank(m.Role.EDITOR)


def simulation_restart(*, run: m.SimulationRun, user: User) -> m.SimulationRun:
    """Restart a queued or running run whose worker stopped (killed, or its machine gone),
    or one that failed as stalled: the old run becomes (or stays) *failed* and a new run
    asks the same question.

    A run stops moving when the worker simulating it dies, and a request for the same
    question joins it until it fails as stalled (:func:`simulation_fail_stalled`); a
    restart is the way out, at once or after. The chunks the old run already
    stored are moved to the new run when the study still has the version they were
    simulated for (a chunk depends only on the study, the seed and its number, so it is
    the chunk the new run would simulate); only the missing chunks are enqueued, and at
    least one, since the task that stores the last chunk is the one that combines the
    run. A worker of the old run that is still alive finds its run failed and drops its
    work. Returns the new run (or the run that already answers the question for the
    study's current version); a run that has otherwise ended is returned unchanged.

    Raises ``PermissionDenied`` unless :func:`simulation_may_restart`, and
    :class:`SimulationRefused` when the study now has errors or lost the plan (the old
    run is left as it is then).
    """
    if not simulation_may_restart(run=run, user=user):
        raise PermissionDenied(
            "Only the member who asked for a run, or an editor or owner, can restart it."
        )
    if not run.restartable:
        return run
    _check_plan(run.study, run.plan_key)
    with transaction.atomic():
        # The study row first, as a request takes it: the two take turns, and the
        # version cannot move while the chunks are handed over.
        version = (
            m.Study.objects.select_for_update()
            .values_list("updated_at", flat=True)
            .get(pk=run.study_id)
        )
        old = m.SimulationRun.objects.select_for_update().get(pk=run.pk)
        if not old.restartable:
            return old
        restarted = (
            f"restarted by {user.get_username()} after {old.chunks_done} of "
            f"{old.chunks_total} parts"
        )
        if old.stalled:
            # Failed already: what stopped it stays said.
            old.error = f"{old.error}; {restarted}"
            old.save(update_fields=["error"])
        else:
            old.status = m.SimulationStatus.FAILED
            old.error = restarted
            old.finished_at = timezone.now()
            old.save(update_fields=["status", "error", "finished_at"])
        existing = m.SimulationRun.objects.filter(
            study_id=old.study_id,
            study_version=version,
            plan_key=old.plan_key,
            days=old.days,
            seed=old.seed,
            status__in=m.SimulationStatus.reusable(),
        ).first()
        if existing is not None:
            _hand_over(old, None, version)
            return existing
        new = m.SimulationRun(
            study_id=old.study_id,
            plan_key=old.plan_key,
            days=old.days,
            seed=old.seed,
            study_version=version,
            chunks_total=chunk_count(old.days),
            requested_by=user,
        )
        new.full_clean()
        new.save()
        _enqueue(new, _hand_over(old, new, version))
    new.refresh_from_db()
    return new


# -- the background task's work, chunk by chunk ----------------------------------------

#: The error of a run whose study changed while it ran.
STUDY_CHANGED = "the study changed; run it again"


class SimulationRunOver(Exception):
    """The run finished (or went) while a task worked on it; its work is dropped."""


class SimulationStudyChanged(Exception):
    """The study moved on from the version the run was made for."""


def _run_locked(run_id: int) -> m.SimulationRun | None:
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


def simulation_start(*, run_id: int) -> m.SimulationRun:
    """A task takes run ``run_id``: a queued run becomes *running*, and the run has moved
    (its ``progress_at``: a worker is alive).

    Raises
    ------
    SimulationRunOver
        When the run has ended or its cancellation was asked for (it is cancelled now).
    SimulationStudyChanged
        When the study moved on from the run's version.
    """
    with transaction.atomic():
        run = _run_locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed:
            run.status = m.SimulationStatus.RUNNING
            run.progress_at = timezone.now()
            run.save(update_fields=["status", "progress_at"])
    if run is None:
        raise SimulationRunOver
    if changed:
        raise SimulationStudyChanged
    return run


def simulation_chunk_store(*, run_id: int, chunk: int, data: dict[str, Any]) -> bool:
    """Store chunk ``chunk`` of run ``run_id`` (its JSON form ``data``) and count it;
    return whether the run now has every chunk, so that this task combines it. A chunk
    stored twice (a retried task) counts once.

    Every chunk counted normally means the count was just completed; it also holds for a
    chunk task taken again after the database went away while the run was being
    combined (every chunk stored, no result yet), which then combines it. Only a live
    run is combined, once: the result is stored under the run's lock.

    Raises :class:`SimulationRunOver` and :class:`SimulationStudyChanged` as
    :func:`simulation_start` does; the chunk is not stored then.
    """
    completed = changed = False
    with transaction.atomic():
        run = _run_locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed:
            # update_or_create: a chunk that runs twice (a retried task) counts once.
            m.SimulationChunk.objects.update_or_create(
                run=run, index=chunk, defaults={"result": data}
            )
            run.chunks_done = run.chunks.count()
            run.progress_at = timezone.now()
            run.save(update_fields=["chunks_done", "progress_at"])
            completed = run.chunks_done == run.chunks_total
    if run is None:
        raise SimulationRunOver
    if changed:
        raise SimulationStudyChanged
    return completed


def simulation_result(
    study: Study, run: m.SimulationRun, chunks: list[SimulationChunk]
) -> dict[str, Any]:
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


def simulation_finish(*, run_id: int, study: Study) -> None:
    """Combine the stored chunks of run ``run_id`` (simulated from ``study``, the core
    study) into its result (:func:`simulation_result`): the run is *done*.

    Raises :class:`SimulationRunOver` and :class:`SimulationStudyChanged` as
    :func:`simulation_start` does, checked again after the combining; the result is not
    stored then.
    """
    with transaction.atomic():
        run = _run_locked(run_id)
        rows = [] if run is None else list(run.chunks.values_list("result", flat=True))
    if run is None:
        raise SimulationRunOver
    # Combining runs outside the lock, so that a cancel or a progress read need not wait.
    result = simulation_result(study, run, [SimulationChunk.from_json(row) for row in rows])
    with transaction.atomic():
        run = _run_locked(run_id)
        changed = run is not None and _changed(run)
        if run is not None and not changed:
            _end(run, m.SimulationStatus.DONE, result=result)
    if run is None:
        raise SimulationRunOver
    if changed:
        raise SimulationStudyChanged


def simulation_fail_stalled(
    *, study: m.Study | None = None, now: dt.datetime | None = None
) -> list[int]:
    """Fail every running run (of ``study``, or of every study) that has not moved for
    ``limits.SIMULATION_STALLED_S``: its worker died. Returns their ids.

    Such a run becomes *failed* and ``stalled``, with an error naming how long it stood
    still and the limit; it keeps its chunks, so that a restart
    (:func:`simulation_restart`) or a new request for the same question simulates only
    the rest. Each run is checked again under its lock, so a chunk stored meanwhile
    keeps it going. A queued run is never failed here: it waits for a worker.
    """
    now = now or timezone.now()
    limit = limits.SIMULATION_STALLED_S
    cutoff = now - dt.timedelta(seconds=limit)
    still = m.SimulationRun.objects.filter(
        status=m.SimulationStatus.RUNNING, progress_at__lt=cutoff
    )
    if study is not None:
        still = still.filter(study=study)
    failed = []
    for run_id in list(still.values_list("pk", flat=True)):
        with transaction.atomic():
            run = still.select_for_update().filter(pk=run_id).first()
            if run is None:
                continue
            idle = (now - run.progress_at).total_seconds()
            run.status = m.SimulationStatus.FAILED
            run.stalled = True
            run.finished_at = now
            run.error = (
                f"nothing was simulated for {seconds_text(idle)} (the limit is "
                f"{seconds_text(limit)}): its worker stopped; restart the run to simulate "
                f"the rest ({run.chunks_done} of {run.chunks_total} parts are kept)"
            )
            run.save(update_fields=["status", "stalled", "finished_at", "error"])
        failed.append(run_id)
    return failed


def simulation_fail(*, run_id: int, message: str) -> None:
    """Run ``run_id`` fails with ``message`` (a run that has ended is left as it is)."""
    with transaction.atomic():
        run = _run_locked(run_id)
        if run is not None:
            _end(run, m.SimulationStatus.FAILED, error=message)


def simulation_chunk_run(*, run_id: int, chunk: int) -> str:
    """Simulate chunk ``chunk`` of run ``run_id`` (days ``chunk * CHUNK_DAYS`` onwards)
    and, if it is the last to arrive, combine the run: the background task's work.

    Returns what became of it: ``"stored"``, ``"done"`` (it combined the run),
    ``"dropped"`` (the run had finished or was cancelled) or ``"failed"`` (the study
    changed). A database error (``OperationalError``, ``InterfaceError``: the database
    went away) is raised as it is, leaving the run going, for the worker to take the
    chunk again once the database is back; any other error fails the run, saying what
    was being done, and is raised again.
    """
    doing = f"simulating days {chunk * CHUNK_DAYS:,} onwards"
    try:
        run = simulation_start(run_id=run_id)
        if not 0 <= chunk < run.chunks_total:
            raise ValueError(f"the run has chunks 0 to {run.chunks_total - 1}, not {chunk}")
        last = min((chunk + 1) * CHUNK_DAYS, run.days) - 1
        doing = f"simulating days {chunk * CHUNK_DAYS:,} to {last:,}"
        result = selectors.study_load(run.study)
        if result.study is None or not result.ok:
            # It had no errors when the run was asked for, so it has changed since.
            raise SimulationStudyChanged
        part = simulate_chunk(
            result.study,
            run.plan_key,
            seed=run.seed,
            chunk=chunk,
            days=run.days,
            # The tables of the analysis the pages show, shared by the chunks.
            plan=selectors.plan_sim_tables(run.study, run.plan_key),
        )
        if simulation_chunk_store(run_id=run_id, chunk=chunk, data=part.to_json()):
            doing = "combining the chunks"
            simulation_finish(run_id=run_id, study=result.study)
            return "done"
        return "stored"
    except SimulationRunOver:
        return "dropped"
    except SimulationStudyChanged:
        simulation_fail(run_id=run_id, message=STUDY_CHANGED)
        return "failed"
    except (OperationalError, InterfaceError):
        # Not the run's fault, and the run could not be written now anyway.
        raise
    except Exception as error:
        simulation_fail(run_id=run_id, message=f"{doing} failed: {error}")
        raise
