"""``python -m loadtest.db_restart --stop CMD --start CMD``: PostgreSQL stops and starts
again under a running Baton; the worker lives on, the run finishes, requests succeed.

With ``DATABASE_URL`` pointing at a PostgreSQL database this command stops and starts
(``--stop`` and ``--start``, shell words, e.g. ``pg_ctl … stop``), it

1. migrates, makes a sign-in owning a synthetic study (``--tasks`` tasks, so that each
   chunk of a run takes a noticeable moment), starts gunicorn (2 workers x 4 threads)
   and one ``manage.py worker``, signs in over HTTP and reads the study page from as
   many threads as gunicorn has, so that every thread holds a database connection;
2. asks for a simulation run of ``--days`` days over HTTP, and once the worker has
   stored some of its chunks (not all), stops PostgreSQL;
3. while it is down: the worker process is alive, and a page answers 503 (the database
   really cannot be reached); after ``--down`` seconds it starts PostgreSQL again;
4. at once: every one of as many concurrent requests as gunicorn has threads, and as
   many again one after another, answers 200 (the connections the restart broke are
   replaced, not reported as a 503);
5. the run finishes: *done*, every chunk counted once, its summary the same as the
   simulation core's one-process run of the same study, plan, days and seed (which the
   core promises for chunks drawn from the seed and the chunk number alone); every task
   of the run succeeded, none is left queued, running or failed; the worker is still
   alive and its log says it found the database again.

It prints the outage, the worker's resumption and the whole time, and exits non-zero
on any failed check, showing the end of the worker's and gunicorn's logs.
"""

from __future__ import annotations

import argparse
import contextlib
import http.client
import json
import os
import re
import secrets
import shlex
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from urllib.parse import urlencode

import django

#: gunicorn's processes and threads: the requests made at once, to reach every thread.
WORKERS, THREADS = 2, 4
#: Seconds allowed for each wait: the worker storing chunks, the run finishing.
WAIT_S = 90
_CSRF_INPUT = re.compile(r'name="csrfmiddlewaretoken" value="([^"]+)"')


class Failed(Exception):
    """A check of the restart failed."""


class Browser:
    """A cookie jar over plain HTTP to 127.0.0.1 (a new connection per request)."""

    def __init__(self, port: int) -> None:
        self.port = port
        self.cookies: dict[str, str] = {}

    def send(
        self, method: str, path: str, form: dict[str, str] | None = None
    ) -> tuple[int, str, dict[str, str]]:
        connection = http.client.HTTPConnection("127.0.0.1", self.port, timeout=30)
        headers = {"Cookie": "; ".join(f"{k}={v}" for k, v in self.cookies.items())}
        body = None
        if form is not None:
            body = urlencode(form)
            headers["Content-Type"] = "application/x-www-form-urlencoded"
            headers["Referer"] = f"http://127.0.0.1:{self.port}{path}"
            headers["X-CSRFToken"] = self.cookies.get("csrftoken", "")
        try:
            connection.request(method, path, body=body, headers=headers)
            response = connection.getresponse()
            text = response.read().decode(errors="replace")
            for name, value in response.getheaders():
                if name.lower() == "set-cookie":
                    key, _, rest = value.partition("=")
                    self.cookies[key.strip()] = rest.split(";", 1)[0]
            return response.status, text, {k.lower(): v for k, v in response.getheaders()}
        finally:
            connection.close()

    def sign_in(self, login: str, username: str, password: str) -> None:
        status, text, _ = self.send("GET", login)
        token = _CSRF_INPUT.search(text)
        if status != 200 or token is None:
            raise Failed(f"the sign-in page answered {status}")
        form = {"csrfmiddlewaretoken": token.group(1), "username": username, "password": password}
        status, _, _ = self.send("POST", login, form)
        if status != 302 or "sessionid" not in self.cookies:
            raise Failed(f"signing in answered {status}")

    def statuses(self, path: str, at_once: int) -> list[int]:
        """The status of ``at_once`` GETs of ``path`` sent together."""
        with ThreadPoolExecutor(at_once) as pool:
            return list(pool.map(lambda _: self.send("GET", path)[0], range(at_once)))


def _run(words: str) -> float:
    """Run a shell-words command; return how long it took."""
    began = time.monotonic()
    done = subprocess.run(shlex.split(words), capture_output=True, text=True, timeout=120)
    if done.returncode != 0:
        raise Failed(f"{words!r} failed: {done.stderr.strip() or done.stdout.strip()}")
    return time.monotonic() - began


def _wait(condition, seconds: float, what: str):
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        value = condition()
        if value:
            return value
        time.sleep(0.1)
    raise Failed(f"timed out after {seconds:g} s waiting for {what}")


def _tail(path: Path, what: str) -> str:
    text = path.read_text(errors="replace") if path.exists() else ""
    return f"--- the end of {what} ({path}):\n{text[-3000:]}"


def main(argv: list[str]) -> int:
    parser = argparse.ArgumentParser(prog="python -m loadtest.db_restart", description=__doc__)
    parser.add_argument("--stop", required=True, help="the command that stops PostgreSQL")
    parser.add_argument("--start", required=True, help="the command that starts it again")
    parser.add_argument(
        "--down", type=float, default=6.0, help="seconds it stays down, at least (6)"
    )
    parser.add_argument("--tasks", type=int, default=200, help="tasks of the study (200)")
    parser.add_argument("--days", type=int, default=4000, help="days of the run (4000)")
    options = parser.parse_args(argv)

    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "allocation.settings")
    django.setup()
    from django.contrib.auth import get_user_model
    from django.core.management import call_command
    from django.db import connection, connections
    from django.urls import reverse
    from django_tasks_db.models import DBTaskResult

    from allocation import audit, services
    from allocation import models as m
    from allocation.core import load_study
    from allocation.core.simulation import simulate
    from allocation.core.synthetic import synthetic_study
    from loadtest.command import Command as LoadTest
    from loadtest.command import _free_port

    if connection.vendor != "postgresql":
        print("DATABASE_URL must point at the PostgreSQL database to restart.", file=sys.stderr)
        return 2
    began = time.monotonic()
    call_command("migrate", verbosity=0, interactive=False)
    tag = secrets.token_hex(3)
    password = secrets.token_urlsafe(16)
    user = get_user_model().objects.create_user(f"restart-{tag}", password=password)
    document = synthetic_study(tasks=options.tasks, links=3 * options.tasks, plans=2, seed=3)
    with audit.acting(user, m.AuditSource.COMMAND):
        study = services.study_import(data=document, owner=user)
    plan = study.plans.order_by("position", "pk").values_list("key", flat=True).first()
    seed = 7
    connections.close_all()
    # What the run must come to: the core's one-process run, through JSON as stored.
    reference = simulate(load_study(document).study, plan, days=options.days, seed=seed)
    expected = json.loads(json.dumps(reference.summary()))

    logs = Path(tempfile.mkdtemp(prefix="baton-db-restart-"))
    worker_log, server_log = logs / "worker.log", logs / "gunicorn.log"
    port = _free_port()
    server_runner = LoadTest()
    server = server_runner._serve(port, WORKERS, THREADS, str(server_log))
    with worker_log.open("w") as out:
        worker = subprocess.Popen(
            [sys.executable, "manage.py", "worker", "--no-reload", "--no-startup-delay"],
            cwd=Path(__file__).resolve().parents[1],
            stdout=out,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )
    report: dict[str, float | int | str] = {}
    database_down = False
    try:
        server_runner._wait_ready(server, port, str(server_log))
        browser = Browser(port)
        browser.sign_in(reverse("login"), user.get_username(), password)
        page = reverse("study-detail", args=[study.pk])
        before = browser.statuses(page, WORKERS * THREADS)
        if set(before) != {200}:
            raise Failed(f"before the restart the study page answered {before}")

        # The run, asked for as a person would.
        status, _, _ = browser.send(
            "POST",
            reverse("plan-simulation-run", args=[study.pk, plan]),
            {
                "csrfmiddlewaretoken": browser.cookies.get("csrftoken", ""),
                "days": str(options.days),
                "seed": str(seed),
            },
        )
        if status != 302:
            raise Failed(f"asking for the run answered {status}")
        run = m.SimulationRun.objects.get(study=study, plan_key=plan, days=options.days)

        def some_stored():
            run.refresh_from_db()
            connections.close_all()
            return run.chunks_done >= 2 or run.finished

        _wait(some_stored, WAIT_S, "the worker to store its first chunks")
        if run.finished or run.chunks_done == run.chunks_total:
            raise Failed("the run ended before the database was stopped: ask for more --days")
        report["chunks before"] = f"{run.chunks_done} of {run.chunks_total}"

        # -- the outage ------------------------------------------------------------
        down_at = time.monotonic()
        database_down = True
        report["stop s"] = round(_run(options.stop), 2)
        time.sleep(1.0)
        if worker.poll() is not None:
            raise Failed(f"the worker exited ({worker.returncode}) when the database stopped")
        status, _, headers = browser.send("GET", page)
        if status != 503 or headers.get("retry-after") is None:
            raise Failed(f"with the database down a page answered {status}, not 503")
        time.sleep(max(0.0, options.down - (time.monotonic() - down_at)))
        if worker.poll() is not None:
            raise Failed(f"the worker exited ({worker.returncode}) while the database was down")
        report["start s"] = round(_run(options.start), 2)
        database_down = False
        up_at = time.monotonic()
        report["outage s"] = round(up_at - down_at, 1)

        # -- requests at once, then one by one -------------------------------------
        after = browser.statuses(page, WORKERS * THREADS)
        after += [browser.send("GET", page)[0] for _ in range(WORKERS * THREADS)]
        if set(after) != {200}:
            raise Failed(f"after the restart the study page answered {after}")
        report["requests after"] = len(after)

        # -- the run ---------------------------------------------------------------
        counted = run.chunks_done

        def moved():
            run.refresh_from_db()
            connections.close_all()
            return run.chunks_done > counted or run.finished

        _wait(moved, WAIT_S, "the worker to take work again")
        report["worker resumed s"] = round(time.monotonic() - up_at, 1)

        def finished():
            run.refresh_from_db()
            connections.close_all()
            return run.finished

        _wait(finished, WAIT_S, "the run to finish")
        if run.status != m.SimulationStatus.DONE:
            raise Failed(f"the run ended {run.status}: {run.error}")
        if run.chunks_done != run.chunks_total:
            raise Failed(f"the run counted {run.chunks_done} of {run.chunks_total} chunks")
        if run.result["summary"] != expected:
            raise Failed("the run's summary differs from the one-process simulation")
        tasks = DBTaskResult.objects.filter(args_kwargs__kwargs__run_id=run.pk)
        states = sorted(tasks.values_list("status", flat=True))
        if states != ["SUCCESSFUL"] * run.chunks_total:
            raise Failed(f"the run's tasks ended {states}")
        taken = sum(len(ids) for ids in tasks.values_list("worker_ids", flat=True))
        report["tasks taken"] = f"{taken} for {run.chunks_total} chunks"
        connections.close_all()
        if worker.poll() is not None:
            raise Failed(f"the worker exited ({worker.returncode}) after the restart")
        said = worker_log.read_text(errors="replace")
        if "The database answers again" not in said:
            raise Failed("the worker's log does not say it found the database again")
        report["total s"] = round(time.monotonic() - began, 1)
    except Failed as failure:
        print(f"FAILED: {failure}", file=sys.stderr)
        print(_tail(worker_log, "the worker's log"), file=sys.stderr)
        print(_tail(server_log, "gunicorn's log"), file=sys.stderr)
        return 1
    finally:
        if database_down:
            # A check failed during the outage: the database is started again for what
            # follows (best effort; the failure is already reported).
            with contextlib.suppress(Failed, OSError, subprocess.SubprocessError):
                _run(options.start)
        if worker.poll() is None:
            worker.terminate()
            try:
                worker.wait(timeout=20)
            except subprocess.TimeoutExpired:
                worker.kill()
                worker.wait()
        server_runner._stop(server)
    lines = [f"  {key}: {value}" for key, value in report.items()]
    print(
        "Database restart: the worker lived on and finished the run, every request after "
        "the restart succeeded.\n" + "\n".join(lines)
    )
    for line in worker_log.read_text(errors="replace").splitlines():
        if "database" in line.lower() or "back in the queue" in line:
            print(f"  worker: {line}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
