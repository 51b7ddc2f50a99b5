"""Background tasks, on Django's tasks framework (the ``django_tasks`` backport).

A simulation run (``models.SimulationRun``) is split into chunks of ``CHUNK_DAYS`` days,
one task each; what a task does with its chunk is a service
(:func:`allocation.services.simulation.simulation_chunk_run`), which also enqueues the
tasks. This module imports the services; the services reach this module only when they
enqueue.
"""

from __future__ import annotations

from django_tasks import task

from allocation.services.simulation import simulation_chunk_run

__all__ = ["simulate_run_chunk"]


@task()
def simulate_run_chunk(run_id: int, chunk: int) -> str:
    """Simulate chunk ``chunk`` of run ``run_id`` and, if it is the last to arrive,
    combine the run. Returns what became of it: ``"stored"``, ``"done"``, ``"dropped"``
    or ``"failed"`` (see :func:`~allocation.services.simulation.simulation_chunk_run`);
    any other error is raised again, so that the task backend records its traceback."""
    return simulation_chunk_run(run_id=run_id, chunk=chunk)
