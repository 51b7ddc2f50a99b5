"""``manage.py compare STUDY [--plans P …] [--json]``: plans side by side and ranked.

STUDY is a stored study's id or number, or the path of a study file (``.json``), which
is compared without storing it. Prints every plan's headline figures, the objective's
per-figure scores and total (``objective_figures``: the values the objective weighs,
handovers counted only where a person is on a side), and its sensitivity: the weight
changes that reverse the two leading plans, and the share of sampled weights in which
each plan comes first.
"""

from __future__ import annotations

import json
from typing import Any

from django.core.management.base import BaseCommand, CommandError

from allocation.core.analysis import analyse_plan, prepare
from allocation.core.analysis.compare import (
    HEADLINE_FIGURES,
    OBJECTIVE_FIGURES,
    Comparison,
    NotComparable,
    compare_plans,
    objective_values,
)
from allocation.core.cautions import CAUTIONS

from ._study import valid_study_from_reference


class Command(BaseCommand):
    help = "Compare a study's plans: figures, objective scores and sensitivity."

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="a stored study's id or number, or a study file")
        parser.add_argument(
            "--plans", nargs="+", help="the plans to compare, the baseline first (default: all)"
        )
        parser.add_argument("--json", action="store_true", help="print JSON")

    def handle(self, *args, study: str, plans: list[str] | None, json: bool, **options) -> None:
        core_study = valid_study_from_reference(study)
        known = [plan.id for plan in core_study.plans]
        unknown = [plan for plan in plans or () if plan not in known]
        if unknown:
            raise CommandError(
                f"study {core_study.id!r} has no plan {', '.join(map(repr, unknown))} "
                f"(plans: {', '.join(known)})"
            )
        graph = prepare(core_study)
        analyses = {plan: analyse_plan(core_study, plan, graph=graph) for plan in known}
        chosen = plans or known
        try:
            comparison = compare_plans(
                [analyses[plan] for plan in chosen],
                study_headlines={plan: objective_values(a) for plan, a in analyses.items()},
            )
        except NotComparable as problem:
            raise CommandError(str(problem)) from None
        payload = comparison_json(comparison, core_study.id)
        if json:
            self.stdout.write(_dumps(payload), ending="")
        else:
            self.stdout.write(comparison_text(payload))


def comparison_json(comparison: Comparison, study_id: str) -> dict[str, Any]:
    """The comparison as plain data: figures, scores, ranking and sensitivity."""
    ranking, held = comparison.ranking, comparison.sensitivity
    return {
        "study": study_id,
        "baseline": comparison.baseline,
        "plans": [
            {
                "id": plan,
                "name": comparison.names[plan],
                "rank": ranking.rank(plan),
                "figures": {row.key: row.values[index] for row in comparison.figures},
                "objective_figures": comparison.weighed[plan],
                "scores": ranking.contributions[plan],
                "total": ranking.scores[plan],
            }
            for index, plan in enumerate(comparison.plans)
        ],
        "order": list(ranking.order),
        "weights": ranking.weights,
        "reference": {
            figure: {"good": good, "poor": poor, "separates": ranking.separating[figure]}
            for figure, (good, poor) in ranking.reference.items()
        },
        "sensitivity": {
            "leader": held.leader,
            "runner_up": held.runner_up,
            "gap": held.gap,
            "reversing_changes": {change.figure: change.change for change in held.changes},
            "first_shares": held.first_shares,
            "samples": held.samples,
        },
        "cautions": CAUTIONS,
    }


def comparison_text(payload: dict[str, Any]) -> str:
    plans = payload["plans"]
    width = max(len(plan["id"]) for plan in plans) + 2
    lines = [f"Plans of {payload['study']}, ranked by the study objective (lower first)", ""]
    lines.append("rank".ljust(6) + "plan".ljust(width) + "total".rjust(9))
    for plan_id in payload["order"]:
        plan = next(item for item in plans if item["id"] == plan_id)
        lines.append(f"{plan['rank']:<6}{plan_id:<{width}}{plan['total']:9.3f}")
    lines += [
        "",
        "Scores per figure:",
        "figure".ljust(30) + "".join(p["id"].rjust(width) for p in plans),
    ]
    for figure in OBJECTIVE_FIGURES:
        mark = "" if payload["reference"][figure]["separates"] else "  (does not separate)"
        lines.append(
            figure.ljust(30)
            + "".join(f"{plan['scores'][figure]:{width}.3f}" for plan in plans)
            + mark
        )
    lines += ["", "Figures:"]
    for figure in HEADLINE_FIGURES:
        lines.append(
            figure.ljust(30) + "".join(f"{plan['figures'][figure]:{width}.4g}" for plan in plans)
        )
    held = payload["sensitivity"]
    lines += ["", "Sensitivity:"]
    if held["runner_up"]:
        lines.append(
            f"  {held['leader']} leads {held['runner_up']} by {held['gap']:.3f}; the change of "
            "one weight alone that reverses them:"
        )
        for figure, change in held["reversing_changes"].items():
            lines.append(f"    {figure:<30}{'none' if change is None else f'{change:+.3g}'}")
    lines.append(f"  Ranks first in {held['samples']} weight draws around the set weights:")
    for plan, share in held["first_shares"].items():
        lines.append(f"    {plan:<{width}}{share:6.1%}")
    lines += ["", payload["cautions"], ""]
    return "\n".join(lines)


def _dumps(payload: object) -> str:
    return json.dumps(payload, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
