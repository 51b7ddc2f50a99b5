"""The background worker: django-tasks-db's worker, made to outlive the database.

``manage.py db_worker`` stops with a traceback the first time the database cannot be
reached (a PostgreSQL restart, a network cut), and nothing starts it again.
:class:`Worker` (``manage.py worker``) takes tasks the same way — one at a time, claimed
in a transaction with ``SELECT … FOR UPDATE SKIP LOCKED`` and marked *running* before it
is run, so that no two workers take the same task — and, when the database goes away:

- **while it looks for work**: it closes its connections and tries again after
  :func:`retry_delay` seconds: ``WORKER_DATABASE_RETRY_FIRST_S`` (1 s), doubled after
  each failed attempt, at most ``WORKER_DATABASE_RETRY_MAX_S`` (30 s): 1, 2, 4, 8, 16,
  30, 30 … s. Once the database answers it takes work again, within 30 s of its return.
- **while a task runs** (the task raised ``OperationalError`` or ``InterfaceError``): it
  waits for the database the same way, then puts the task back in the queue, to be
  taken again by any worker; after ``WORKER_TASK_ATTEMPTS`` (5) such attempts the task
  is recorded as failed. A simulation chunk taken again is safe: a chunk stored twice
  counts once, and a run is combined under its lock, once
  (:mod:`allocation.services.simulation`).
- **while it records a task's outcome**: it waits for the database and records it then;
  the task is not run again.

Asked to stop (SIGTERM, SIGINT) while it waits, it stops: a task in hand then stays
*running* in the queue, and its simulation run fails as stalled after
``SIMULATION_STALLED_S`` and can be restarted. Every ``housekeeping_every_s`` seconds it
calls ``housekeeping`` (the command passes the stalled-run check), so that runs whose
worker died are failed even when no one looks at them.
"""

from __future__ import annotations

import contextlib
import logging
import random
import time
from collections.abc import Callable
from typing import Any

from django.db import InterfaceError, OperationalError, close_old_connections, connections
from django_tasks_db.compat import TaskContext, TaskResultStatus, task_finished, task_started
from django_tasks_db.management.commands import db_worker
from django_tasks_db.models import DBTaskResult
from django_tasks_db.utils import exclusive_transaction, is_locked_database_exception

from allocation.core.limits import (
    WORKER_DATABASE_RETRY_FIRST_S,
    WORKER_DATABASE_RETRY_MAX_S,
    WORKER_TASK_ATTEMPTS,
)

__all__ = ["DATABASE_ERRORS", "Worker", "retry_delay"]

logger = logging.getLogger("allocation.ops.worker")

#: The errors that mean the database could not be reached or dropped the connection.
DATABASE_ERRORS = (OperationalError, InterfaceError)
#: The longest the worker sleeps at a time while it waits, so that a stop is seen soon.
PAUSE_STEP_S = 0.5


def retry_delay(attempt: int) -> float:
    """Seconds to wait before attempt ``attempt + 1`` to reach the database (``attempt``
    from 0): the first wait doubled ``attempt`` times, at most the longest wait."""
    if attempt < 0:
        raise ValueError(f"attempt must be 0 or more; got {attempt}")
    # Past the cap the doubling no longer matters; bounding it keeps the number small.
    doubled = WORKER_DATABASE_RETRY_FIRST_S * 2 ** min(attempt, 62)
    return float(min(doubled, WORKER_DATABASE_RETRY_MAX_S))


def _first_line(error: BaseException) -> str:
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__


class Worker(db_worker.Worker):
    """django-tasks-db's worker, waiting out a database that went away (see the module).

    ``housekeeping`` is called at most every ``housekeeping_every_s`` seconds between
    tasks; ``pause`` sleeps (tests pass one that records the waits instead).
    """

    def __init__(
        self,
        *,
        housekeeping: Callable[[], Any] | None = None,
        housekeeping_every_s: float = 60.0,
        pause: Callable[[float], None] | None = None,
        **options: Any,
    ) -> None:
        super().__init__(**options)
        self.housekeeping = housekeeping
        self.housekeeping_every_s = housekeeping_every_s
        self._housekept_at: float | None = None
        self.pause = pause or self._pause
        #: How many times the worker found the database unreachable, and came back.
        self.outages = 0

    # -- the loop ------------------------------------------------------------------

    def run(self) -> None:
        logger.info(
            "Starting worker worker_id=%s queues=%s", self.worker_id, ",".join(self.queue_names)
        )
        if self.startup_delay and self.interval:
            # A small random delay, so that workers started together do not poll together.
            time.sleep(random.random())  # noqa: S311
        while self.running:
            try:
                task_result, looked = self._take()
            except DATABASE_ERRORS as error:
                if not self._wait_for_database(error):
                    return
                continue
            if task_result is not None:
                self.run_task(task_result)
            elif self.batch and looked:
                logger.info("No more tasks to run for worker_id=%s.", self.worker_id)
                return
            if self.max_tasks is not None and self._run_tasks >= self.max_tasks:
                logger.info("Ran %d tasks on worker_id=%s.", self._run_tasks, self.worker_id)
                return
            try:
                self._housekeep()
                close_old_connections()
            except DATABASE_ERRORS as error:
                if not self._wait_for_database(error):
                    return
                continue
            if self.running and task_result is None:
                self.pause(self.interval)

    def _take(self) -> tuple[DBTaskResult | None, bool]:
        """The next ready task, claimed for this worker (or ``None``), and whether the
        queue could be looked at (not when SQLite was locked by another writer)."""
        # A connection the database dropped is closed here, and checked before its use.
        close_old_connections()
        tasks = DBTaskResult.objects.ready().filter(backend_name=self.backend_name)
        if not self.process_all_queues:
            tasks = tasks.filter(queue_name__in=self.queue_names)
        if self.excluded_queue_names:
            tasks = tasks.exclude(queue_name__in=self.excluded_queue_names)
        with exclusive_transaction(tasks.db):
            try:
                task_result = tasks.get_locked()
                if task_result is not None:
                    task_result.claim(self.worker_id)
            except OperationalError as error:
                if is_locked_database_exception(error):
                    return None, False
                raise
        return task_result, True

    def _housekeep(self) -> None:
        if self.housekeeping is None:
            return
        now = time.monotonic()
        if self._housekept_at is not None and now - self._housekept_at < self.housekeeping_every_s:
            return
        self._housekept_at = now
        try:
            self.housekeeping()
        except DATABASE_ERRORS:
            raise
        except Exception:
            logger.exception("The worker's housekeeping failed; it goes on taking tasks.")

    # -- one task ------------------------------------------------------------------

    def run_task(self, db_task_result: DBTaskResult) -> None:
        """Run a claimed task and record its outcome; a task the database went away
        under is put back in the queue once the database is back."""
        self.running_task = True
        try:
            try:
                task = db_task_result.task
                task_result = db_task_result.task_result
                task_started.send(sender=type(task.get_backend()), task_result=task_result)
                if task.takes_context:
                    value = task.call(
                        TaskContext(task_result=task_result),
                        *task_result.args,
                        **task_result.kwargs,
                    )
                else:
                    value = task.call(*task_result.args, **task_result.kwargs)
            except DATABASE_ERRORS as error:
                self._database_lost(db_task_result, error)
                return
            except BaseException as error:
                self._record(db_task_result, error)
                return
            try:
                recorded = self._write(lambda: db_task_result.set_successful(value))
            except Exception as error:
                # A value that cannot be stored (not JSON): the task's failure.
                self._record(db_task_result, error)
                return
            if recorded:
                self._finished(db_task_result)
        finally:
            self.running_task = False
            self._run_tasks += 1

    def _record(self, db_task_result: DBTaskResult, error: BaseException) -> None:
        """Record the task as failed with ``error`` (waiting for the database if need be)."""
        if self._write(lambda: db_task_result.set_failed(error)):
            self._finished(db_task_result)

    def _finished(self, db_task_result: DBTaskResult) -> None:
        try:
            sender = type(db_task_result.task.get_backend())
            task_finished.send(sender=sender, task_result=db_task_result.task_result)
        except ImportError:
            logger.exception("Task id=%s failed unexpectedly", db_task_result.id)

    def _database_lost(self, db_task_result: DBTaskResult, error: BaseException) -> None:
        """The database went away while the task ran: once it is back, put the task
        back in the queue (or, after its last attempt, record it as failed)."""
        logger.warning(
            "The database went away while task %s ran: %s", db_task_result.id, _first_line(error)
        )
        if not self._wait_for_database(error):
            logger.warning(
                "Stopped while waiting: task %s stays running in the queue.", db_task_result.id
            )
            return
        attempts = len(db_task_result.worker_ids)
        if attempts >= WORKER_TASK_ATTEMPTS:
            logger.warning(
                "Task %s lost the database on %d attempts (the limit is %d): recorded as failed.",
                db_task_result.id,
                attempts,
                WORKER_TASK_ATTEMPTS,
            )
            self._record(db_task_result, error)
            return
        self._write(
            lambda: DBTaskResult.objects.filter(
                pk=db_task_result.pk, status=TaskResultStatus.RUNNING
            ).update(status=TaskResultStatus.READY)
        )
        logger.warning(
            "Task %s is back in the queue (it has been taken %d of at most %d times).",
            db_task_result.id,
            attempts,
            WORKER_TASK_ATTEMPTS,
        )

    # -- waiting for the database --------------------------------------------------

    def _write(self, action: Callable[[], Any]) -> bool:
        """Do ``action`` (a write), waiting for the database as long as it is away;
        ``False`` if the worker was stopped before it could be done."""
        while True:
            try:
                action()
                return True
            except DATABASE_ERRORS as error:
                if not self._wait_for_database(error):
                    return False

    def _wait_for_database(self, error: BaseException) -> bool:
        """Close the connections and try the database again, waiting :func:`retry_delay`
        between attempts, until it answers (``True``) or the worker is stopped
        (``False``)."""
        self.outages += 1
        began = time.monotonic()
        attempt = 0
        logger.warning(
            "The database could not be reached (%s); trying again in %g s.",
            _first_line(error),
            retry_delay(0),
        )
        while self.running:
            self._close_connections()
            self.pause(retry_delay(attempt))
            if not self.running:
                break
            try:
                self._check_database()
            except DATABASE_ERRORS as again:
                attempt += 1
                logger.warning(
                    "The database still cannot be reached (%s); trying again in %g s.",
                    _first_line(again),
                    retry_delay(attempt),
                )
                continue
            logger.warning(
                "The database answers again after %.1f s; taking work again.",
                time.monotonic() - began,
            )
            return True
        return False

    @staticmethod
    def _close_connections() -> None:
        for connection in connections.all(initialized_only=True):
            # Closing a connection the server dropped may itself fail; it is gone either way.
            with contextlib.suppress(*DATABASE_ERRORS):
                connection.close()

    @staticmethod
    def _check_database() -> None:
        connection = connections[DBTaskResult.objects.db]
        with connection.cursor() as cursor:
            cursor.execute("SELECT 1")
            cursor.fetchone()

    def _pause(self, seconds: float) -> None:
        """Sleep ``seconds`` in short steps, ending early once the worker is stopped."""
        deadline = time.monotonic() + seconds
        while self.running:
            left = deadline - time.monotonic()
            if left <= 0:
                return
            time.sleep(min(left, PAUSE_STEP_S))
