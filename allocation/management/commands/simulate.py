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
from allocation.core.methods import methods_document
from allocation.core.registry import FIGURES as REGISTRY
from allocation.core.registry import SIMULATED, figure_number
from allocation.core.simulation import (
    CHUNK_DAYS,
    FIGURE_WORDS,
    FIGURES,
    SimulationTooLarge,
    simulate,
)

from ._study import valid_study_from_reference

#: The sections of Baton's methods document the report's method note sums up.
METHOD_SECTIONS = ("simulation", "occupancy", "channel-demand", "simulation-statistics")


def method_text() -> str:
    """The method note: the summaries of :data:`METHOD_SECTIONS`, each with its anchor."""
    document = methods_document()
    notes = [f"[#{anchor}] {document.section(anchor).summary}" for anchor in METHOD_SECTIONS]
    notes.append(
        "Demands of supervision and monitoring and the overload limits are tool assumptions "
        "(see the Assumptions page)."
    )
    return "Method (Baton's methods document): " + " ".join(notes)


def _words(name: str) -> str:
    """A figure's label and unit, as the registry gives them (``Person time, s a day``)."""
    label, unit = FIGURE_WORDS.get(name, (name, ""))
    return f"{label}, {unit}" if unit else label


def _number(name: str, value: float) -> str:
    """A figure at the registry's precision; a figure it does not know to three digits."""
    if SIMULATED.get(name, name) in REGISTRY:
        return figure_number(name, value)
    return f"{value:.3g}"


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
        core_study = valid_study_from_reference(study)
        if plan not in core_study.plans_by_id:
            known = ", ".join(item.id for item in core_study.plans) or "none"
            raise CommandError(f"study {core_study.id!r} has no plan {plan!r} (plans: {known})")
        try:
            simulation = simulate(
                core_study, plan, days=days_n, seed=seed_n, progress=self._progress(days_n)
            )
        except SimulationTooLarge as error:
            raise CommandError(str(error)) from None
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
            stats = figures[name]
            rows.append([_words(name), *(_number(name, stats[k]) for k in ("mean", "p50", "p95"))])
        lines += _table(rows, numeric_from=1) + [""]
    chains = summary["chains"]
    if chains:
        lines.append("Chains with a window: the share of their windows missed")
        rows = [["chain", "happenings", REGISTRY["missed_share"].heading]]
        for chain in chains:
            rows.append(
                [chain["name"] or chain["trigger"], f"{chain['happenings']:,}"]
                + [figure_number("missed_share", chain["missed_share"])]
            )
            for item in chain["tasks"]:
                rows.append(
                    [f"  task {item['task']}", f"{item['occurrences']:,}"]
                    + [figure_number("missed_share", item["missed_share"])]
                )
        lines += _table(rows, numeric_from=1) + [""]
    else:
        lines += ["No chain has a task with a window.", ""]
    lines += [textwrap.fill(method_text(), 88), "", textwrap.fill("Cautions: " + CAUTIONS, 88)]
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
