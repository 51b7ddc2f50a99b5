"""``python -m loadtest``: many people at once on gunicorn, and no acknowledged edit lost.

Migrates the database, makes ``--users`` sign-ins, each an editor of a fresh copy of an
example study (the first two share one copy, so that the same study is edited
concurrently), starts gunicorn (``--workers 2 --threads 4``) on 127.0.0.1 and a free
port with this command's settings and ``DATABASE_URL``, and lets one thread per user
(:class:`loadtest.users.SimulatedUser`) sign in through the login form and read
pages, save plan-editor rows as htmx does, download analyses and export CSV for
``--seconds`` with at most ``--requests`` requests each. Afterwards it checks, row by row
in the database, that the last acknowledged value of every edited (study, plan, task) is
stored, prints the throughput and the median and 95th-percentile latencies per kind of
request, stops gunicorn and removes its users and studies (``--keep`` keeps them; they
are always kept when an edit was lost). Exits non-zero on any error or lost edit.
"""

from __future__ import annotations

import http.client
import os
import secrets
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.hashers import make_password
from django.core.management import call_command
from django.core.management.base import BaseCommand, CommandError
from django.db import connections, transaction
from django.urls import reverse

from allocation import audit, services
from allocation import models as m
from allocation.examples import example_documents
from loadtest.users import (
    Edit,
    Key,
    LostEdit,
    Sample,
    SimulatedUser,
    Start,
    Summary,
    UserPlan,
    lost_edits,
    summarise,
)

#: The example every pair of users sharing a study edits: the smallest, so that the two
#: often pick the same task.
SHARED_EXAMPLE = "home-heating"
#: Seconds gunicorn may take to answer its first request, and to stop.
START_TIMEOUT_S = 60
STOP_TIMEOUT_S = 30


def stored_values(row: m.Assignment) -> dict[str, Any]:
    """An assignment row in the form :func:`loadtest.users.expected_values` gives."""
    if not row.applies:
        who = "not_applicable"
    elif row.human_id is not None and row.automation_id is not None:
        who = "shared"
    else:
        who = "person" if row.human_id is not None else "device"
    return {
        "who": who,
        "human": row.human.key if row.human_id is not None else None,
        "automation": row.automation.key if row.automation_id is not None else None,
        "level": row.levels,
        "status": row.status,
        "rationale": row.rationale,
    }


def stored_for(keys: set[Key]) -> dict[Key, dict[str, Any] | None]:
    """The stored values of each (study, plan, task), ``None`` where no row exists."""
    found: dict[Key, dict[str, Any] | None] = dict.fromkeys(keys)
    rows = m.Assignment.objects.filter(plan__study_id__in={key[0] for key in keys}).select_related(
        "plan", "task", "human", "automation"
    )
    for row in rows:
        key = (row.plan.study_id, row.plan.key, row.task.key)
        if key in found:
            found[key] = stored_values(row)
    return found


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


class Command(BaseCommand):
    help = (
        "Serve the app under gunicorn on 127.0.0.1 and drive simulated users against it "
        "(pages, row edits, analyses, exports); print throughput and latencies, check "
        "every acknowledged edit in the database, and exit non-zero on any error or loss."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("--users", type=int, default=16, help="simulated users (16)")
        parser.add_argument("--seconds", type=float, default=30, help="time limit (30)")
        parser.add_argument(
            "--requests", type=int, default=100, help="at most this many requests per user"
        )
        parser.add_argument("--workers", type=int, default=2, help="gunicorn workers (2)")
        parser.add_argument("--threads", type=int, default=4, help="threads per worker (4)")
        parser.add_argument("--seed", type=int, default=1, help="seed of the users' choices")
        parser.add_argument(
            "--keep", action="store_true", help="keep the load-test users and studies"
        )

    def handle(
        self,
        *args,
        users: int,
        seconds: float,
        requests: int,
        workers: int,
        threads: int,
        seed: int,
        keep: bool,
        **options,
    ) -> None:
        if users < 1 or seconds <= 0 or requests < 3:
            raise CommandError("Give at least 1 user, a positive time and 3 requests each.")
        call_command("migrate", verbosity=0, interactive=False)
        tag = secrets.token_hex(3)
        plans = self._prepare(users, tag)
        studies = sorted({plan.study_pk for plan in plans})
        vendor = connections["default"].vendor
        self.stdout.write(
            f"Load test {tag}: {users} users on {len(studies)} studies ({vendor}), "
            f"{seconds:g} s, at most {requests} requests each; gunicorn with {workers} "
            f"workers x {threads} threads."
        )
        # The server's processes open their own connections; this one is not needed.
        connections.close_all()
        handle, log_name = tempfile.mkstemp(prefix="baton-loadtest-", suffix=".log")
        os.close(handle)
        port = _free_port()
        server = self._serve(port, workers, threads, log_name)
        try:
            self._wait_ready(server, port, log_name)
            start = Start(len(plans), seconds)
            runners = [
                SimulatedUser(
                    plan,
                    host="127.0.0.1",
                    port=port,
                    start=start,
                    max_requests=requests,
                    seed=seed * 1000 + index,
                    tag=tag,
                )
                for index, plan in enumerate(plans)
            ]
            for runner in runners:
                runner.start()
            for runner in runners:
                runner.join()
            elapsed = time.monotonic() - start.started
        finally:
            self._stop(server)
        samples = [sample for runner in runners for sample in runner.samples]
        edits = [edit for runner in runners for edit in runner.edits]
        # Signing in happens before the clock starts: its figures are shown on their own.
        work = [sample for sample in samples if sample.kind != "sign-in"]
        sign_ins = summarise([sample for sample in samples if sample.kind == "sign-in"], 1.0)
        summary = summarise(work, elapsed)
        lost = lost_edits(edits, stored_for({edit.key for edit in edits}))
        self._report(summary, sign_ins, edits, lost, samples)
        errors = [sample.error for sample in samples if sample.error]
        if keep or lost:
            self.stdout.write(f"Kept the users loadtest-{tag}-* and their studies.")
        else:
            self._remove(tag, studies)
        if errors or lost:
            tail = Path(log_name).read_text(errors="replace")[-3000:]
            if tail.strip():
                self.stderr.write(f"The end of gunicorn's log ({log_name}):\n{tail}")
            raise CommandError(f"{len(errors)} error(s) and {len(lost)} lost edit(s).")
        Path(log_name).unlink(missing_ok=True)

    def _prepare(self, users: int, tag: str) -> list[UserPlan]:
        """Make the users (one password, hashed once) and their study copies."""
        password = secrets.token_urlsafe(16)
        hashed = make_password(password)
        documents = {document["study"]["id"]: document for document in example_documents()}
        order = [SHARED_EXAMPLE, *sorted(set(documents) - {SHARED_EXAMPLE})]
        model = get_user_model()
        accounts = model.objects.bulk_create(
            [
                model(username=f"loadtest-{tag}-{index:02d}", password=hashed)
                for index in range(users)
            ]
        )
        studies: list[m.Study] = []
        with transaction.atomic():
            for index, account in enumerate(accounts):
                if index == 1:
                    # The second user edits the first one's study beside it.
                    m.Membership.objects.create(study=studies[0], user=account, role=m.Role.EDITOR)
                    studies.append(studies[0])
                    continue
                document = dict(documents[order[len(set(studies)) % len(order)]])
                document["study"] = {
                    **document["study"],
                    "title": f"Load test {tag}: {document['study']['title']}"[:200],
                }
                with audit.acting(account, m.AuditSource.COMMAND):
                    studies.append(services.study_import(data=document, owner=account))
        paths = {
            "overview": lambda pk, plan: reverse("study-detail", args=[pk]),
            "editor": lambda pk, plan: reverse("plan-editor", args=[pk, plan]),
            "dashboard": lambda pk, plan: reverse("plan-dashboard", args=[pk, plan]),
            "graph": lambda pk, plan: reverse("study-graph", args=[pk]),
            "modes": lambda pk, plan: reverse("plan-modes", args=[pk, plan]),
            "analysis": lambda pk, plan: reverse("plan-analysis-download", args=[pk, plan]),
            "export": lambda pk, plan: reverse("plan-export", args=[pk, plan, "csv"]),
        }
        plans = []
        for index, (account, study) in enumerate(zip(accounts, studies, strict=True)):
            plan_ids = list(study.plans.order_by("position", "pk").values_list("key", flat=True))
            bound = {kind: _bind(path, study.pk) for kind, path in paths.items()}
            bound["edit"] = _bind_edit(study.pk)
            plans.append(
                UserPlan(
                    name=f"user{index:02d}",
                    username=account.get_username(),
                    password=password,
                    study_pk=study.pk,
                    plans=plan_ids,
                    login=reverse("login"),
                    paths=bound,
                )
            )
        return plans

    def _serve(self, port: int, workers: int, threads: int, log: str) -> subprocess.Popen:
        env = {
            **os.environ,
            "DJANGO_SETTINGS_MODULE": os.environ.get(
                "DJANGO_SETTINGS_MODULE", "allocation.settings"
            ),
        }
        command = [
            sys.executable,
            "-m",
            "gunicorn",
            "allocation.wsgi:application",
            f"--bind=127.0.0.1:{port}",
            f"--workers={workers}",
            f"--threads={threads}",
            "--timeout=120",
            "--graceful-timeout=20",
            f"--error-logfile={log}",
        ]
        return subprocess.Popen(
            command,
            cwd=settings.BASE_DIR,
            env=env,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            start_new_session=True,
        )

    def _wait_ready(self, server: subprocess.Popen, port: int, log: str) -> None:
        """Wait until the login page answers (every worker imports the app first)."""
        deadline = time.monotonic() + START_TIMEOUT_S
        while time.monotonic() < deadline:
            if server.poll() is not None:
                raise CommandError(f"gunicorn stopped at start; see {log}.")
            try:
                connection = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
                connection.request("GET", reverse("login"))
                status = connection.getresponse().status
                connection.close()
                if status == 200:
                    return
            except OSError:
                pass
            time.sleep(0.2)
        raise CommandError(f"gunicorn did not answer within {START_TIMEOUT_S} s; see {log}.")

    def _stop(self, server: subprocess.Popen) -> None:
        """SIGTERM: gunicorn finishes the requests in hand, then its workers exit."""
        if server.poll() is None:
            server.terminate()
            try:
                server.wait(timeout=STOP_TIMEOUT_S)
            except subprocess.TimeoutExpired:
                server.kill()
                server.wait()

    def _report(
        self,
        summary: Summary,
        sign_ins: Summary,
        edits: list[Edit],
        lost: list[LostEdit],
        samples: list[Sample],
    ) -> None:
        out = self.stdout.write
        out(f"\n{'kind':<10} {'requests':>8} {'errors':>6} {'median ms':>10} {'P95 ms':>8}")
        for figures in [*sign_ins.kinds, *summary.kinds, summary.overall]:
            out(
                f"{figures.kind:<10} {figures.requests:>8} {figures.errors:>6} "
                f"{figures.median_s * 1000:>10.0f} {figures.p95_s * 1000:>8.0f}"
            )
        overall = summary.overall
        out(
            "(sign-in: before the clock starts, not in the figures for all requests)\n"
            f"\n{overall.requests} requests in {summary.elapsed_s:.1f} s: "
            f"{summary.throughput:.1f} requests/s; median {overall.median_s * 1000:.0f} ms, "
            f"P95 {overall.p95_s * 1000:.0f} ms."
        )
        acknowledged = [edit for edit in edits if edit.answered]
        keys = {edit.key for edit in acknowledged}
        out(
            f"Edits acknowledged: {len(acknowledged)} on {len(keys)} rows, all checked in the "
            f"database; lost: {len(lost)}; conflicts (refused as stale): {overall.conflicts}; "
            f"errors: {sum(1 for sample in samples if sample.error)} (sign-in included)."
        )
        for item in lost[:20]:
            self.stderr.write(
                f"LOST study {item.key[0]} plan {item.key[1]} task {item.key[2]}: stored "
                f"{item.stored}, expected one of {item.candidates}"
            )
        errors: dict[str, int] = {}
        for sample in samples:
            if sample.error:
                errors[sample.error] = errors.get(sample.error, 0) + 1
        for message, count in sorted(errors.items(), key=lambda item: -item[1])[:20]:
            self.stderr.write(f"ERROR x{count}: {message}")

    def _remove(self, tag: str, studies: list[int]) -> None:
        with transaction.atomic():
            m.Study.objects.filter(pk__in=studies).delete()
            get_user_model().objects.filter(username__startswith=f"loadtest-{tag}-").delete()
        self.stdout.write(f"Removed the users loadtest-{tag}-* and their {len(studies)} studies.")


def _bind(path, pk: int):
    return lambda plan: path(pk, plan)


def _bind_edit(pk: int):
    return lambda plan, task: reverse("plan-row-save", args=[pk, plan, task])
