"""Reads for the workload ratings screen: a plan's ratings, and the simulation run whose
figures stand beside them."""

from __future__ import annotations

from django.db.models import QuerySet

from allocation import models as m
from allocation import selectors

__all__ = ["plan_ratings", "rating_simulation_run"]


def plan_ratings(study: m.Study, plan_key: str) -> QuerySet[m.WorkloadRating]:
    """The ratings of every task under ``plan_key``, by task, then as recorded."""
    return (
        m.WorkloadRating.objects.filter(study=study, plan_key=plan_key)
        .select_related("recorded_by")
        .order_by("task_key", "created_at", "pk")
    )


def rating_simulation_run(study: m.Study, plan_key: str) -> m.SimulationRun | None:
    """The newest finished simulation of the plan made for the study as it is now (any
    number of days and seed), with its result; ``None`` if there is none."""
    newest = (
        selectors.simulation_runs(study)
        .filter(plan_key=plan_key, status=m.SimulationStatus.DONE, current=True)
        .first()
    )
    if newest is None:
        return None
    return selectors.simulation_run(study, newest.pk)
