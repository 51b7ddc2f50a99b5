"""Size-and-shape fuzzing: every file, however deep, broad, long or odd, costs a bounded
time and memory, and is either analysed or refused with the place of its problem.

Each family of ``tests/core/shapes.py`` draws files just under, at and over one limit of
``allocation/core/limits.py``. A batch of them runs in a child process capped in address
space and wall-clock time (``tests/capped.py``); each case must also finish within its own
time cap. The caps are the budget a team server gives one request (tool assumption): a
few seconds for a refusal, and for the largest accepted file the figure measured at the
limit (README, Operations) with room for a slower machine.

The draws are the same on every run; ``BATON_FUZZ_RANDOM=1`` draws new ones and
``BATON_FUZZ_SCALE=4`` runs four times as many.
"""

from __future__ import annotations

import os
import random

import pytest

from tests.capped import run_capped
from tests.core.test_fuzz_reading import PATH, TRIED

SCALE = max(1, int(os.environ.get("BATON_FUZZ_SCALE", "1")))
SEED = random.randrange(1 << 30) if os.environ.get("BATON_FUZZ_RANDOM") else 0

#: Per family: files per run, seconds allowed for one case, and the child's caps
#: (seconds for the whole batch, MiB of address space).
FAMILIES = {
    "depth": (12, 5, 120, 1024),
    "numbers": (20, 5, 120, 1024),
    "surrogates": (20, 5, 120, 1024),
    "bins": (10, 10, 120, 1024),
    "modes": (8, 30, 300, 1536),
    "chain": (6, 30, 240, 1536),
    "breadth": (5, 30, 240, 1536),
}


@pytest.mark.parametrize("family", list(FAMILIES))
def test_every_shape_is_analysed_or_refused_within_its_caps(family):
    count, case_seconds, batch_seconds, megabytes = FAMILIES[family]
    count *= SCALE
    report = run_capped(
        f"""
        from tests.core.shapes import cases, run_case
        outcome = [run_case(text) for text in cases({family!r}, {SEED}, {count})]
        """,
        seconds=batch_seconds * SCALE,
        megabytes=megabytes,
    )
    TRIED[f"shapes: {family}"] += count
    assert len(report.outcome) == count
    for case in report.outcome:
        where = f"{family} case of {case['bytes']:,} bytes"
        assert case["seconds"] < case_seconds, f"{where} took {case['seconds']:.1f} s"
        if case["outcome"] == "refused":
            assert PATH.match(case["path"]), f"{where}: {case['path']!r} is not a JSON path"
            assert case["message"].strip(), f"{where}: refused without a message"
    print(
        f"\n{family}: {count} files, peak {report.peak_mb:.0f} MiB, "
        f"slowest {max(case['seconds'] for case in report.outcome):.2f} s"
    )
