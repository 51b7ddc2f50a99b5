"""``manage.py worker``: the background worker for simulation runs, which waits out a
database that went away (:mod:`allocation.ops.worker`) and fails runs whose worker died.

It takes the options of django-tasks-db's ``db_worker`` (``--batch``, ``--interval``,
``--queue-name``, ``--max-tasks``, ``--worker-id``, ``--reload`` …) and runs the same
queue; run this one.
"""

from __future__ import annotations

import logging
import os

from django.core.management.base import CommandError
from django.utils.autoreload import DJANGO_AUTORELOAD_ENV, run_with_reloader
from django_tasks_db.management.commands import db_worker

from allocation import services
from allocation.core.limits import (
    SIMULATION_STALLED_S,
    WORKER_DATABASE_RETRY_FIRST_S,
    WORKER_DATABASE_RETRY_MAX_S,
)
from allocation.ops.worker import Worker

logger = logging.getLogger("allocation.ops.worker")

#: How often the worker looks for runs that stalled (seconds): a small share of the limit.
STALLED_CHECK_EVERY_S = max(1, SIMULATION_STALLED_S // 10)


def fail_stalled_runs() -> None:
    """Fail the running simulation runs that stopped moving (their worker died)."""
    failed = services.simulation_fail_stalled()
    if failed:
        logger.warning(
            "Simulation run(s) %s made no progress for %d s: failed as stalled.",
            ", ".join(map(str, failed)),
            SIMULATION_STALLED_S,
        )


class Command(db_worker.Command):
    help = (
        "Run the background worker for simulation runs: django-tasks-db's worker, made to "
        "keep running when the database goes away (it tries again after "
        f"{WORKER_DATABASE_RETRY_FIRST_S} s, doubling up to {WORKER_DATABASE_RETRY_MAX_S} "
        "s, and puts a task the database went away under back in the queue). It also "
        f"fails runs that made no progress for {SIMULATION_STALLED_S} s. Run this one "
        "rather than db_worker."
    )

    def handle(
        self,
        *,
        verbosity: int,
        queue_name: str,
        interval: float,
        batch: bool,
        backend_name: str,
        startup_delay: bool,
        reload: bool,
        max_tasks: int | None,
        worker_id: str,
        exclude_queues: str,
        **options,
    ) -> None:
        self.configure_logging(verbosity)
        if verbosity > 0:
            logger.setLevel(logging.INFO)
        if reload and batch:
            logger.warning("--reload and --batch cannot be used together: no reloading.")
            reload = False
        queue_names = queue_name.split(",")
        excluded = exclude_queues.split(",") if exclude_queues else []
        if excluded and "*" not in queue_names:
            raise CommandError("--exclude-queues can only be used with --queue-name=*")
        worker = Worker(
            queue_names=queue_names,
            interval=interval,
            batch=batch,
            backend_name=backend_name,
            startup_delay=startup_delay,
            max_tasks=max_tasks,
            worker_id=worker_id,
            excluded_queue_names=excluded,
            housekeeping=fail_stalled_runs,
            housekeeping_every_s=STALLED_CHECK_EVERY_S,
        )
        if reload:
            if os.environ.get(DJANGO_AUTORELOAD_ENV) == "true":
                # Only the reloader's child process runs the worker and takes signals.
                worker.configure_signals()
            run_with_reloader(worker.run)
        else:
            worker.configure_signals()
            worker.run()
