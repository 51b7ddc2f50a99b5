"""The simulation's memory bound (``SIMULATION_MAX_BYTES``, allocation/core/limits.py):
the estimate made before any day is drawn, checked against the resident memory the
operating system reports for real runs (Linux's peak resident memory, ``VmHWM``, in a
child process run by tests/capped.py), and the refusal of a run over the limit before
it costs anything.
"""

from __future__ import annotations

import pytest

from allocation.core.limits import SIMULATION_MAX_BYTES
from allocation.core.simulation import (
    SimulationTooLarge,
    day_timeline,
    simulate,
    simulate_chunk,
    simulation_memory_estimate,
)
from tests.capped import run_capped

#: A study of ``people`` people, each doing one task ``rate`` times a day (a chain of
#: ``chain`` tasks), binned by ``bin_s``; shared by the child processes.
BUILDER = """
from allocation.core import read_study

def build(people, rate, bin_s, chain=1):
    agents = [{"id": f"h{i}", "name": f"H{i}", "kind": "human"} for i in range(people)]
    tasks, links, assign = [{"id": "G", "title": "Goal"}], [], {}
    for i in range(people):
        for k in range(chain):
            task = {"id": f"t{i}_{k}", "title": f"T{i} {k}", "parent": "G",
                    "duration_s": [10, 20, 30], "demands": {"visual": 3}}
            if k == 0:
                task["occurs"] = {"per_day": rate, "when": "any"}
            else:
                links.append({"from": f"t{i}_{k - 1}", "to": f"t{i}_{k}", "kind": "precedes"})
            tasks.append(task)
            assign[task["id"]] = {"human": f"h{i}"}
    return read_study({
        "format": "baton.study", "version": 2,
        "study": {"id": "s", "title": "S", "scale": "sv10", "bin_s": bin_s},
        "agents": agents, "events": [], "tasks": tasks, "links": links,
        "plans": [{"id": "p", "name": "P", "assignments": assign}],
    })
"""

namespace: dict = {}
exec(BUILDER, namespace)
build = namespace["build"]


def test_a_run_over_the_limit_is_refused_before_drawing_within_a_small_cap():
    """A million happenings a day for 200 days would draw 2e8 occurrences (tens of GB):
    refused in a child capped at 600 MiB and 30 s, the message naming the limit."""
    done = run_capped(
        BUILDER
        + """
from allocation.core.simulation import SimulationTooLarge, simulate
try:
    simulate(build(1, 1_000_000, 900), "p", days=200, seed=1)
    outcome = "ran"
except SimulationTooLarge as refused:
    outcome = str(refused)
""",
        seconds=30,
        megabytes=600,
    )
    assert "SIMULATION_MAX_BYTES" in done.outcome and "1.0 GiB" in done.outcome
    assert "201,000,000 task occurrences" in done.outcome  # 1e6 a day, 200 + 1 lead day


@pytest.mark.parametrize(
    ("people", "rate", "bin_s", "days", "chain"),
    [
        (1, 3_000, 900, 200, 1),  # occurrences dominate
        (1, 500, 60, 1_000, 3),  # a chain, minute bins, five parts
        (40, 1, 60, 2_400, 1),  # daily figures dominate
    ],
)
def test_the_estimate_bounds_the_resident_memory_a_run_adds(people, rate, bin_s, days, chain):
    """The growth of resident memory over a whole run as a worker does it (each part
    simulated and kept as JSON text, as the database keeps it; then the parts read back,
    combined and written as the result) stays under the estimate, and the estimate is
    not wildly above it (within 4x, or 32 MiB for small runs)."""
    estimate = simulation_memory_estimate(build(people, rate, bin_s, chain), "p", days=days)
    done = run_capped(
        BUILDER
        + f"""
import json
from allocation.core.simulation import (
    SimulationChunk, chunk_count, combine, sim_plan, simulate_chunk)

def peak():
    # The peak resident memory of this process's own address space (VmHWM, bytes): it
    # starts afresh at exec, unlike ru_maxrss, which keeps the forking parent's.
    with open("/proc/self/status") as status:
        line = next(line for line in status if line.startswith("VmHWM:"))
    return int(line.split()[1]) * 1024

study = build({people}, {rate}, {bin_s}, {chain})
plan = sim_plan(study, "p")
before = peak()
rows = [
    json.dumps(simulate_chunk(study, "p", seed=1, chunk=k, days={days}, plan=plan).to_json())
    for k in range(chunk_count({days}))
]
parts = [SimulationChunk.from_json(json.loads(row)) for row in rows]
result = json.dumps(combine(study, "p", seed=1, days={days}, chunks=parts).to_json())
outcome = peak() - before
""",
        seconds=60,
        megabytes=2048,
    )
    assert done.outcome <= estimate.bytes <= 4 * max(done.outcome, 32 * 1024**2)


def test_every_core_entry_point_refuses_a_run_over_the_limit():
    study = build(1, 100_000, 900)
    estimate = simulation_memory_estimate(study, "p", days=200)
    assert estimate.bytes > SIMULATION_MAX_BYTES
    for call in (
        lambda: simulate(study, "p", days=200, seed=1),
        lambda: simulate_chunk(study, "p", seed=1, chunk=0, days=200),
        lambda: day_timeline(study, "p", seed=1, day=0, days=200),
    ):
        with pytest.raises(SimulationTooLarge, match="SIMULATION_MAX_BYTES"):
            call()


def test_finer_bins_and_more_days_cost_more_and_a_small_run_is_accepted():
    """Hand-worked: a day has 1,440 one-minute bins and 96 quarter-hour bins; a 200-day
    part holds 200 times as many."""
    fine = simulation_memory_estimate(build(2, 1, 60), "p", days=400)
    coarse = simulation_memory_estimate(build(2, 1, 900), "p", days=400)
    assert (fine.bins, coarse.bins) == (200 * 1_440, 200 * 96)
    assert fine.bytes > coarse.bytes
    assert fine.figures == 400 * 2 * 17  # days x people x the 17 daily figures
    assert simulate(build(1, 2, 900), "p", days=10, seed=1).days == 10
