"""``manage.py start``: set up the local database and serve Baton on 127.0.0.1:8000,
with a background worker beside the server for simulation runs."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

from django.conf import settings
from django.core.management import call_command
from django.core.management.base import BaseCommand
from django_tasks import task_backends
from django_tasks_db import DatabaseBackend

from allocation import audit, services
from allocation import models as m

#: How long the worker may take to finish the chunk it is simulating when stopped.
WORKER_STOP_S = 10


class Command(BaseCommand):
    help = (
        "Migrate, load the example studies into an empty database, make sure the local "
        "sign-in exists, print it, and serve on 127.0.0.1 with a background worker beside "
        "the server (for simulation runs)."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("--port", default="8000")
        parser.add_argument("--no-serve", action="store_true", help="set everything up, then stop")
        parser.add_argument(
            "--no-worker",
            action="store_true",
            help="serve without a background worker (simulation runs then wait in the queue)",
        )

    def handle(self, *args, port: str, no_serve: bool, no_worker: bool, **options) -> None:
        Path(settings.DATA_DIR).mkdir(parents=True, exist_ok=True)
        call_command("migrate", verbosity=0, interactive=False)
        user, password = services.local_user_ensure(data_dir=Path(settings.DATA_DIR))
        if not m.Study.objects.exists():
            with audit.acting(user, m.AuditSource.COMMAND):
                loaded = services.examples_load(owner=user)
            for key, _imported in loaded:
                self.stdout.write(f"Loaded the example study {key!r}.")
        address = f"http://127.0.0.1:{port}/"
        self.stdout.write(
            self.style.SUCCESS(f"\nBaton is ready at {address}\n")
            + f"Sign in as {user.get_username()!r} with the password {password!r}\n"
            + f"(kept in {Path(settings.DATA_DIR) / 'local-sign-in.txt'}).\n"
        )
        if no_serve:
            return
        worker = None if no_worker else self._worker_start()
        # Stopped by a signal rather than Ctrl-C, the server would end without unwinding
        # and leave the worker behind; as SystemExit it unwinds through `finally`.
        for name in ("SIGTERM", "SIGHUP"):
            if hasattr(signal, name):
                signal.signal(getattr(signal, name), _exit_on_signal)
        try:
            call_command("runserver", f"127.0.0.1:{port}", use_reloader=False)
        finally:
            if worker is not None:
                self._worker_stop(worker)

    def _worker_start(self) -> subprocess.Popen | None:
        """Baton's worker (``manage.py worker``, which waits out a database restart) in its
        own process."""
        if not isinstance(task_backends["default"], DatabaseBackend):
            self.stdout.write("The task backend is not the database one: no worker started.")
            return None
        env = {**os.environ}
        env.setdefault("DJANGO_SETTINGS_MODULE", "allocation.settings")
        # No autoreload (the server runs without one too), so stopping it stops it all.
        command = [sys.executable, "-m", "django", "worker", "--no-reload"]
        worker = subprocess.Popen(command, env=env, cwd=settings.BASE_DIR)
        self.stdout.write(f"Started a background worker (process {worker.pid}).")
        return worker

    def _worker_stop(self, worker: subprocess.Popen) -> None:
        if worker.poll() is not None:
            return
        # The worker finishes the chunk in hand on SIGTERM, and exits at once when idle.
        worker.terminate()
        try:
            worker.wait(timeout=WORKER_STOP_S)
        except subprocess.TimeoutExpired:
            worker.kill()
            worker.wait()
        self.stdout.write(f"Stopped the background worker (process {worker.pid}).")


def _exit_on_signal(signum: int, frame: object) -> None:
    raise SystemExit(128 + signum)
