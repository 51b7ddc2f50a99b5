"""Reads: database rows -> study documents and core objects, one module per area.

The study reads and the simulation-run reads every screen needs are re-exported here, so
callers write ``selectors.study_load(study)``; the other areas are imported by name
(``from allocation.selectors import snapshots``).
"""

from .simulation import simulation_run, simulation_run_for, simulation_runs
from .studies import (
    plan_analysis,
    plan_sim_tables,
    studies_by_reference,
    studies_for_user,
    study_analyses,
    study_cache_clear,
    study_document,
    study_for_user,
    study_load,
    study_remember,
    study_rows,
)

__all__ = [
    "plan_analysis",
    "plan_sim_tables",
    "simulation_run",
    "simulation_run_for",
    "simulation_runs",
    "studies_by_reference",
    "studies_for_user",
    "study_analyses",
    "study_cache_clear",
    "study_document",
    "study_for_user",
    "study_load",
    "study_remember",
    "study_rows",
]
