"""Reads for simulation runs: a study's runs, one run, the run made for given settings."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, TypedDict

from django.db.models import BooleanField, ExpressionWrapper, F, Q, QuerySet
from django.http import Http404

from allocation import models as m

if TYPE_CHECKING:
    from django_stubs_ext import WithAnnotations

__all__ = ["simulation_run", "simulation_run_for", "simulation_runs"]


class RunCurrent(TypedDict):
    """What :func:`simulation_runs` adds to each run: whether it is of the study now."""

    current: bool


def simulation_run_for(
    study: m.Study, plan_key: str, days: int, seed: int, *, version: Any = None
) -> m.SimulationRun | None:
    """The newest run of ``days`` days of ``plan_key`` with ``seed`` made for the study's
    current version (or ``version``), whatever its status; ``None`` if there is none.

    A run made for an earlier version is never returned: the study has changed since.
    """
    if version is None:
        version = m.Study.objects.filter(pk=study.pk).values_list("updated_at", flat=True).first()
    return (
        m.SimulationRun.objects.filter(
            study=study, study_version=version, plan_key=plan_key, days=days, seed=seed
        )
        .order_by("-created_at", "-pk")
        .first()
    )


def simulation_runs(study: m.Study) -> QuerySet[WithAnnotations[m.SimulationRun, RunCurrent]]:
    """Every run of the study, newest first, without their (large) results; each carries
    ``current``: whether it was made for the study's present version."""
    return (
        m.SimulationRun.objects.filter(study=study)
        .select_related("requested_by")
        .defer("result")
        .annotate(
            current=ExpressionWrapper(
                Q(study_version=F("study__updated_at")), output_field=BooleanField()
            )
        )
        .order_by("-created_at", "-pk")
    )


def simulation_run(study: m.Study, run_id: int) -> m.SimulationRun:
    """Run ``run_id`` of ``study``; 404 when the study has no such run (so a run of a
    study the user may not see is reached through ``study_for_user`` or not at all)."""
    run = m.SimulationRun.objects.filter(study=study, pk=run_id).first()
    if run is None:
        raise Http404("No such simulation run.")
    return run
