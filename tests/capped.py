"""Run a piece of work in a child process under a time and memory cap.

The size and shape tests use it to show that the largest input accepted, or the input
refused, costs no more than its stated cap: the child gets an address-space limit
(``RLIMIT_AS``) and a wall-clock timeout, and reports its peak resident memory
(``ru_maxrss``). A child killed by either cap fails the test with the cap named.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

_WRAPPER = textwrap.dedent(
    """
    import json, resource, sys, time
    limit = int(sys.argv[1]) * 1024 * 1024
    resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    code = sys.stdin.read()
    started = time.perf_counter()
    namespace = {}
    exec(compile(code, "<capped>", "exec"), namespace)
    outcome = namespace.get("outcome")
    seconds = time.perf_counter() - started
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    report = {"seconds": seconds, "peak_mb": peak_mb, "outcome": outcome}
    print("\\n@@capped@@" + json.dumps(report))
    """
)


@dataclass(frozen=True)
class Capped:
    """What the child measured: wall-clock seconds of the work, peak resident MiB, and
    the JSON-able ``outcome`` the code left in its namespace."""

    seconds: float
    peak_mb: float
    outcome: object


def run_capped(code: str, *, seconds: float, megabytes: int, django: bool = False) -> Capped:
    """Run ``code`` in a fresh interpreter capped at ``megabytes`` of address space and
    ``seconds`` of wall-clock time; the code may set ``outcome`` to report a result.

    With ``django=True`` the child sets up Django first (test settings, SQLite in memory is
    not shared with the parent: use it for work that needs no stored rows).
    """
    prelude = ""
    if django:
        prelude = (
            "import os, django\n"
            "os.environ.setdefault('DJANGO_SETTINGS_MODULE', 'allocation.settings')\n"
            "django.setup()\n"
        )
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    try:
        done = subprocess.run(
            [sys.executable, "-c", _WRAPPER, str(megabytes)],
            input=prelude + textwrap.dedent(code),
            capture_output=True,
            text=True,
            timeout=seconds,
            cwd=ROOT,
            env=env,
        )
    except subprocess.TimeoutExpired as exc:
        raise AssertionError(f"the work took longer than its cap of {seconds} s") from exc
    marker = done.stdout.rfind("@@capped@@")
    if done.returncode != 0 or marker < 0:
        tail = (done.stderr or done.stdout)[-2000:]
        raise AssertionError(
            f"the work failed under its cap of {megabytes} MiB (exit {done.returncode}):\n{tail}"
        )
    report = json.loads(done.stdout[marker + len("@@capped@@") :])
    return Capped(report["seconds"], report["peak_mb"], report["outcome"])
