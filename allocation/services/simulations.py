"""Simulation runs: ask for N simulated days of a plan, or stop a run.

A request is answered by a stored run when one exists for the same question — the
study at its current version, the plan, N and the seed — that is done or still going;
otherwise a new run is stored and one background task per chunk of ``CHUNK_DAYS`` days
is enqueued on Django's tasks framework (``allocation.tasks``). With the database
backend the run row and its tasks are written in one transaction, so there is never a
run without its tasks or tasks without their run, and workers on any machine that
shares the database take the chunks.
"""

from __future__ import annotations

from django.contrib.auth.models import AbstractBaseUser
from django.core.exceptions import PermissionDenied
from django.db import IntegrityError, transaction
from django.utils import timezone

from allocation import models as m
from allocation import selectors
from allocation.core.simulation import chunk_count
from allocation.tasks import simulate_run_chunk

__all__ = [
    "SIMULATION_MAX_DAYS",
    "SIMULATION_MAX_SEED",
    "SimulationRefused",
    "simulation_cancel",
    "simulation_check",
    "simulation_request",
]

#: The most days one request may ask for (the database allows up to
#: ``models.SIMULATION_DAYS_LIMIT``).
SIMULATION_MAX_DAYS = 20_000
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


def _check_plan(study: m.Study, plan_key: str) -> None:
    result = selectors.study_load(study)
    if not result.ok:
        raise SimulationRefused(
            "study",
            f"The study has {len(result.errors)} error(s); fix them before simulating it",
        )
    if plan_key not in result.study.plans_by_id:
        known = ", ".join(plan.id for plan in result.study.plans) or "none"
        raise SimulationRefused("plan", f"The study has no plan {plan_key!r} (its plans: {known})")


def simulation_request(
    *, study: m.Study, plan_key: str, days: object, seed: object, user: AbstractBaseUser
) -> m.SimulationRun:
    """The run that answers "simulate ``days`` days of ``plan_key`` with ``seed``".

    A done, queued or running run for the study's current version is returned as it is;
    otherwise a new run is stored and its chunks enqueued. Raises
    :class:`SimulationRefused` (nothing stored) for days outside 1 to
    ``SIMULATION_MAX_DAYS``, a negative seed, an unknown plan or a study with errors, and
    ``PermissionDenied`` for a user who is not a member of the study.
    """
    days, seed = simulation_check(days=days, seed=seed)
    # Any member may simulate: a run changes nothing in the study. The views check
    # access too; the service does not rely on them.
    if not m.Membership.objects.filter(study=study, user=user).exists():
        raise PermissionDenied("Only members of a study can simulate it.")
    _check_plan(study, plan_key)
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
            _enqueue_chunks(run)
    except IntegrityError:
        # Another process stored the same question between our look and our write
        # (databases without row locks); its run answers this request too.
        existing = selectors.simulation_run_for(study, plan_key, days, seed)
        if existing is None:
            raise
        return existing
    run.refresh_from_db()
    return run


def _enqueue_chunks(run: m.SimulationRun) -> None:
    for index in range(run.chunks_total):
        simulate_run_chunk.enqueue(run_id=run.pk, chunk=index)


def simulation_cancel(*, run: m.SimulationRun) -> m.SimulationRun:
    """Stop ``run``: it becomes *cancelled* at once, keeps no chunks and gets no result.

    Chunks already being simulated are dropped when they finish; tasks not yet started
    see the run cancelled and do nothing. A run that has already finished (done, failed
    or cancelled) is left as it is.
    """
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
