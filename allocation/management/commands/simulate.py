"""``manage.py simulate STUDY --plan PLAN --days N --seed S [--json]``: simulated days.

Runs the day simulation in this process (no worker needed) and prints, per person, the
mean, median and 95th percentile of each daily figure, and per chain the share of its
happenings that missed a window. ``--json`` prints exactly the summary a stored
simulation run keeps (``SimulationRun.result["summary"]``), so the command and the
screens give the same figures for the same seed and number of days. STUDY is a stored
study's id or number, or the path of a study file (simulated without storing it).
"""

from __future__ import annotations

import json
import textwrap
import time
from typing import Any

from django.core.management.base import BaseCommand, CommandError

from allocation import services
from allocation.core.cautions import CAUTIONS
from allocation.core.simulation import CHUNK_DAYS, FIGURES, simulate
from allocation.core.simulation import FIGURE_WORDS as SCREEN_WORDS
from allocation.core.vocabulary import CHANNELS

from ._study import problem_lines, study_result_from_reference

#: How each figure is shown: its words and unit (as on the screen) and a format.
FORMATS = {
    "burden_s": "{:.0f}",
    "monitoring_s": "{:.0f}",
    "interactions": "{:.2f}",
    "interruptions": "{:.2f}",
    "night_interruptions": "{:.2f}",
    "peak_occupancy": "{:.2f}",
    "overload_min": "{:.1f}",
    **{f"peak_{c}": "{:.1f}" for c in CHANNELS},
    **{f"overload_s_{c}": "{:.0f}" for c in CHANNELS},
}
FIGURE_WORDS: dict[str, tuple[str, str]] = {
    name: (f"{label}, {unit}", FORMATS[name]) for name, (label, unit) in SCREEN_WORDS.items()
}

METHOD = (
    "Method: Monte Carlo over simulated days (DESIGN §3.10): event times, Poisson rates, "
    "triangular durations and response latencies, sampled lags and mode changes; "
    "occupancy per bin (time-line analysis, NATO AC/243 (Panel 8) TR/7, 1992) and VACP "
    "channel sums (McCracken & Aldrich 1984). P50 and P95 interpolate between order "
    "statistics (Hyndman & Fan 1996, definition 7). Demands of supervision and "
    "monitoring and the overload limits are tool assumptions (see the Assumptions page)."
)

#: Runs longer than this report their progress on stderr.
PROGRESS_AFTER_DAYS = 4 * CHUNK_DAYS
PROGRESS_EVERY_S = 2.0


class Command(BaseCommand):
    help = (
        "Simulate N days of a plan from a seed: each person's daily figures (mean, P50, "
        "P95) and each chain's missed windows, readable or as JSON (--json)."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="a stored study's id or number, or a study file")
        parser.add_argument("--plan", required=True, help="the plan's id")
        parser.add_argument(
            "--days",
            required=True,
            help=f"how many days to simulate (1 to {services.SIMULATION_MAX_DAYS:,})",
        )
        parser.add_argument(
            "--seed", required=True, help="the random seed (0 or more); same seed, same days"
        )
        parser.add_argument("--json", action="store_true", help="print the summary as JSON")

    def handle(
        self, *args, study: str, plan: str, days: str, seed: str, json: bool, **options
    ) -> None:
        try:
            days_n, seed_n = services.simulation_check(days=days, seed=seed)
        except services.SimulationRefused as error:
            raise CommandError(str(error)) from None
        result = study_result_from_reference(study)
        if not result.ok:
            raise CommandError(
                f"the study has {len(result.errors)} error(s); fix them first:\n"
                + problem_lines(result.errors)
            )
        core_study = result.study
        if plan not in core_study.plans_by_id:
            known = ", ".join(item.id for item in core_study.plans) or "none"
            raise CommandError(f"study {core_study.id!r} has no plan {plan!r} (plans: {known})")
        simulation = simulate(
            core_study, plan, days=days_n, seed=seed_n, progress=self._progress(days_n)
        )
        summary = simulation.summary()
        if json:
            self.stdout.write(_dumps(summary), ending="")
        else:
            self.stdout.write(summary_text(core_study, summary), ending="")

    def _progress(self, days: int):
        """A progress callback that writes to stderr now and then, for long runs only."""
        if days < PROGRESS_AFTER_DAYS:
            return None
        last = time.monotonic()

        def report(done: int, total: int) -> None:
            nonlocal last
            now = time.monotonic()
            if now - last >= PROGRESS_EVERY_S or done == total:
                last = now
                self.stderr.write(f"simulated {done:,} of {total:,} days")

        return report


def summary_text(study: Any, summary: dict[str, Any]) -> str:
    """A simulation summary as readable text: a table per person, one for the chains."""
    plan = study.plans_by_id[summary["plan"]]
    lines = [
        f"{study.title} — plan {plan.id}: {plan.name}",
        f"{summary['days']:,} simulated days, seed {summary['seed']} "
        # Days counted from 1, as on the screen.
        f"(typical day {summary['typical_day'] + 1}, worst day {summary['worst_day'] + 1})",
        "",
    ]
    for human_id, figures in summary["people"].items():
        agent = study.agents_by_id.get(human_id)
        lines.append(f"{agent.name if agent else human_id} (per day)")
        rows = [["figure", "mean", "P50", "P95"]]
        for name in [*FIGURES, *sorted(set(figures) - set(FIGURES))]:
            if name not in figures:
                continue
            words, form = FIGURE_WORDS.get(name, (name, "{:.3g}"))
            rows.append([words, *(form.format(figures[name][k]) for k in ("mean", "p50", "p95"))])
        lines += _table(rows, numeric_from=1) + [""]
    chains = summary["chains"]
    if chains:
        lines.append("Chains with a window: share of happenings missing one")
        rows = [["chain", "happenings", "missed"]]
        for chain in chains:
            rows.append(
                [chain["name"] or chain["trigger"], f"{chain['happenings']:,}"]
                + [f"{chain['missed_share']:.1%}"]
            )
            for item in chain["tasks"]:
                rows.append(
                    [f"  task {item['task']}", f"{item['occurrences']:,}"]
                    + [f"{item['missed_share']:.1%}"]
                )
        lines += _table(rows, numeric_from=1) + [""]
    else:
        lines += ["No chain has a task with a window.", ""]
    lines += [textwrap.fill(METHOD, 88), "", textwrap.fill("Cautions: " + CAUTIONS, 88)]
    return "\n".join(lines) + "\n"


def _table(rows: list[list[str]], *, numeric_from: int) -> list[str]:
    """Columns padded to width; numbers right-aligned from column ``numeric_from``."""
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    return [
        "  ".join(
            cell.rjust(width) if i >= numeric_from else cell.ljust(width)
            for i, (cell, width) in enumerate(zip(row, widths, strict=True))
        ).rstrip()
        for row in rows
    ]


def _dumps(payload: object) -> str:
    return json.dumps(payload, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
