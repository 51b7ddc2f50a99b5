"""``manage.py bench``: speed of the analyses, as ratios measured in one run.

Generates seeded studies of 1,000 tasks / 3,000 links / 20 events / 4 plans and of
10,000 tasks, and measures the floor (load and check the study file, build the task
graph) and the analysis of one plan. Each figure is the median of a few repeats with the
garbage collector paused, as ``timeit`` does; the same figures with it running (on the
objects each run makes) are printed beside them.
"""

from __future__ import annotations

import gc
import statistics
import time
from collections.abc import Callable

from django.core.management.base import BaseCommand

from allocation.core import load_study
from allocation.core.analysis import analyse_plan, prepare
from allocation.core.graph import task_graph
from allocation.core.synthetic import synthetic_study

#: Targets of the analysis engine (issue: analysis within 3x the floor; ten times the
#: tasks within twelve times the time).
ANALYSIS_OVER_FLOOR = 3.0
SCALING_LIMIT = 12.0


def _median_seconds(work: Callable[[], object], repeats: int, collect: bool) -> float:
    """Median time of ``work``; with ``collect``, the collector runs but the objects that
    already exist (the inputs, earlier studies) are frozen out of its passes, so that only
    the work's own objects are collected, as in a server process that has settled."""
    times = []
    for _ in range(repeats):
        gc.collect()
        gc.freeze()
        if not collect:
            gc.disable()
        try:
            start = time.perf_counter()
            work()
            times.append(time.perf_counter() - start)
        finally:
            gc.enable()
            gc.unfreeze()
    return statistics.median(times)


class Command(BaseCommand):
    help = "Measure the analysis engine against its targets; prints ratios from one run."

    def add_arguments(self, parser) -> None:
        parser.add_argument("--repeats", type=int, default=3)
        parser.add_argument("--seed", type=int, default=1)
        parser.add_argument(
            "--large", type=int, default=10000, help="tasks in the large study (default 10000)"
        )

    def handle(self, *args, repeats: int, seed: int, large: int, **options) -> None:
        rows = {}
        for size in (1000, large):
            document = synthetic_study(tasks=size, links=3 * size, events=20, plans=4, seed=seed)
            study = load_study(document).study
            graph = prepare(study)
            plan = study.plans[1].id  # a plan with a mode map

            def floor(document=document):
                loaded = load_study(document).study
                prepare(loaded)
                task_graph(loaded)

            def analysis(study=study, graph=graph, plan=plan):
                analyse_plan(study, plan, graph=graph)

            rows[size] = {
                collect: (
                    _median_seconds(floor, repeats, collect),
                    _median_seconds(analysis, repeats, collect),
                )
                for collect in (False, True)
            }
            self.stdout.write(
                f"{size:>6} tasks, {len(study.links)} links, {len(study.events)} events, "
                f"{len(study.plans)} plans (seed {seed})"
            )
            for collect, label in ((False, "gc paused"), (True, "gc running")):
                floor_s, analysis_s = rows[size][collect]
                self.stdout.write(
                    f"    {label:10}  floor {floor_s * 1000:8.1f} ms   analysis of {plan} "
                    f"{analysis_s * 1000:8.1f} ms   analysis / floor {analysis_s / floor_s:5.2f}"
                )
        self.stdout.write("")
        for collect, label in ((False, "gc paused"), (True, "gc running")):
            small_floor, small_analysis = rows[1000][collect]
            large_floor, large_analysis = rows[large][collect]
            over = small_analysis / small_floor
            scale = large_analysis / small_analysis
            whole = (large_floor + large_analysis) / (small_floor + small_analysis)
            self.stdout.write(
                f"{label:10}  analysis / floor at 1,000 tasks {over:5.2f} (target <= "
                f"{ANALYSIS_OVER_FLOOR:g}: {'met' if over <= ANALYSIS_OVER_FLOOR else 'MISSED'})"
                f";  {large:,} / 1,000 tasks: analysis {scale:5.2f}x, floor and analysis "
                f"{whole:5.2f}x (target <= {SCALING_LIMIT:g}: "
                f"{'met' if scale <= SCALING_LIMIT else 'MISSED'})"
            )
