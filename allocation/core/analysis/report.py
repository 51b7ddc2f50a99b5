"""A plan's analysis as the analysis file (JSON, ``baton.analysis`` version 2) and as a
readable report.

Version 2 (model revision 2; Baton's format document lists the keys) adds the automation
interfaces, each handover's expected slips a year and frequency band, each task's
expected and typical person time and monitoring style, and the findings of revision 2;
the keys of version 1 keep their names.

Both carry the assumptions in force, the methods with their sources, and the cautions.
"""

from __future__ import annotations

from typing import Any

from ..assumptions import METHOD_NOTES, assumption_table
from ..cautions import CAUTIONS
from ..methods import methods_document
from ..model import Study
from ..registry import CATEGORIES, FIGURES, HANDOVER_SOURCES, RISK_BANDS, figure_text, finding_kind
from ..scales import level_text, shared_levels, single_level
from ..vocabulary import STAGES
from ..writing import monitoring_to_json, reliability_to_json
from .involvement import Involvement
from .plan import PERSON_FIGURES, PlanAnalysis
from .reliability import failure_chance

__all__ = ["METHODS", "METHOD_ANCHORS", "analysis_json", "levels_with_words", "text_report"]

ANALYSIS_FORMAT = "baton.analysis"
ANALYSIS_VERSION = 2

#: The method notes shown beside the figures, each by the anchor of its section in
#: Baton's methods document (``METHODS.md``).
METHOD_ANCHORS = {
    "Levels of automation": "levels-of-automation",
    "Degree of automation": "degree-of-automation",
    "Person time": "person-time",
    "Occurrences": "occurrences",
    "Responsibility and authority": "monitoring",
    "Capability": "finding-capability",
    "Chains and deadlines": "chain-timing",
    "Mode awareness": "awareness-index",
    "Handovers": "handovers",
    "Mode-map verification": "mode-check",
    "Coherence": "coherence",
}
#: Each method note's name and words: the summary (first paragraph) of its section.
METHODS = tuple(
    (name, methods_document().section(anchor).summary) for name, anchor in METHOD_ANCHORS.items()
)


def levels_with_words(study: Study, involved: Involvement) -> dict[str, Any] | None:
    """A shared assignment's levels with the level's words; ``None`` for others."""
    assignment = involved.assignment
    if assignment is None or not assignment.is_shared:
        return None
    if study.scale == "ek10":
        level = single_level(assignment)
        return {"level": level, "text": level_text("ek10", level)}
    levels = shared_levels(assignment)
    return {
        stage: {"level": levels[stage], "text": level_text("sv10", levels[stage])}
        for stage in STAGES
    }


def _task_json(result: PlanAnalysis, task_id: str) -> dict[str, Any]:
    figures = result.tasks[task_id]
    involved = figures.involved
    aware = figures.awareness
    return {
        "category": involved.category if involved.applies else "not_applicable",
        "principal": involved.principal,
        "person_s": figures.person_s,
        "expected_s": figures.person_s,
        "typical_s": figures.typical_s,
        "occurrences_per_day": figures.per_day,
        "occurrences_approx": task_id in result.occurrences.se_per_day,
        "occurrences_se": result.occurrences.se_per_day.get(task_id),
        "awareness": None if aware is None else aware.index,
        "degrees": involved.degrees,
        "doa": involved.doa,
        "automated_share": involved.automated_share,
        "human": involved.human,
        "automation": involved.automation,
        "accountable": involved.accountable,
        "levels": levels_with_words(result.study, involved),
        "initiator": figures.initiator,
        "active_s": involved.active_s,
        "supervision_s": involved.supervision_s,
        "monitoring_s": involved.monitoring_s,
        "monitoring": monitoring_to_json(involved.monitoring),
        "watch_s": involved.watch_s,
        "looks_per_day": involved.looks_per_day,
        "reliability": reliability_to_json(
            None if involved.assignment is None else involved.assignment.reliability
        ),
        "failures_per_day": figures.per_day * failure_chance(involved.assignment),
        "person_s_per_day": figures.person_s_per_day,
        "asleep_share": figures.asleep_share,
        "awareness_factors": None if aware is None else aware.factors,
        "awareness_contributions": None if aware is None else aware.contributions,
    }


def _chain_json(chain) -> dict[str, Any]:
    return {
        "trigger": chain.trigger.id,
        "kind": chain.trigger.kind,
        "name": chain.trigger.name,
        "per_day": chain.per_day,
        "tasks": [
            {
                "task": timing.task_id,
                "probability": timing.probability,
                "start_s": timing.start.as_list(),
                "finish_s": timing.finish.as_list(),
                "latency_s": timing.latency.as_list(),
                "window_s": timing.window_s,
                "misses_window": timing.misses_window,
            }
            for timing in chain.tasks
        ],
    }


def interfaces_json(result: PlanAnalysis) -> list[dict[str, Any]]:
    """Work passing between two automations, one row per pair of agents: how often a
    day, and along which tasks (methods document, ``#automation-interfaces``)."""
    rows: dict[tuple[str, str], dict[str, Any]] = {}
    for site in result.interfaces:
        key = (site.from_agent or "", site.to_agent or "")
        row = rows.setdefault(
            key, {"from_agent": key[0], "to_agent": key[1], "per_day": 0.0, "tasks": {}}
        )
        row["per_day"] += site.per_day
        # One entry per pair of tasks (a task's mode changes add up).
        pair = row["tasks"].setdefault(
            (site.from_task, site.to_task),
            {
                "source": site.source,
                "from_task": site.from_task,
                "to_task": site.to_task,
                "per_day": 0.0,
            },
        )
        pair["per_day"] += site.per_day
    for row in rows.values():
        row["tasks"] = list(row["tasks"].values())
    return sorted(rows.values(), key=lambda row: -row["per_day"])


def analysis_json(result: PlanAnalysis) -> dict[str, Any]:
    """The analysis file (``baton.analysis`` version 2), with more keys beside its own."""
    study = result.study
    return {
        "format": ANALYSIS_FORMAT,
        "version": ANALYSIS_VERSION,
        "study": study.id,
        "plan": result.plan.id,
        "people": {agent_id: person.to_json() for agent_id, person in result.people.items()},
        "tasks": {task.id: _task_json(result, task.id) for task in study.leaves},
        "handovers": [handover.to_json() for handover in result.handovers],
        "interfaces": interfaces_json(result),
        "coherence": {
            "cut_ratio": result.coherence.cut_ratio,
            "modularity": result.coherence.modularity,
            "groups": result.coherence.groups,
            "link_weight_per_day": result.coherence.link_weight,
        },
        "findings": [finding.to_json() for finding in result.findings],
        "headline": result.headline(),
        "mode_share": result.mode_share,
        "time_in_mode": result.mode_share,
        "chains": [_chain_json(chain) for chain in result.chains],
        "risk_policy": result.policy,
        "assumptions": assumption_table(study.assumptions, study.scale),
        "method_notes": [{"key": k, "status": s, "text": t} for k, s, t in METHOD_NOTES],
        "methods": [
            {"name": name, "source": source, "anchor": METHOD_ANCHORS[name]}
            for name, source in METHODS
        ],
        "cautions": CAUTIONS,
    }


def _table(rows: list[list[str]]) -> list[str]:
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    return [
        "  ".join(cell.ljust(width) for cell, width in zip(row, widths, strict=True)).rstrip()
        for row in rows
    ]


def text_report(result: PlanAnalysis, *, top: int = 10) -> str:
    """A readable report of one plan's analysis, for the command line, every figure named
    and rounded by the registry."""
    study, plan = result.study, result.plan
    lines = [f"{study.title} — plan {plan.id}: {plan.name}", ""]
    lines.append("People (per day)")
    people = PERSON_FIGURES  # every daily figure, calls passed on to them included
    rows = [["Person", *(FIGURES[key].heading for key in people)]]
    for agent_id, person in result.people.items():
        daily = person.to_json()
        rows.append(
            [
                study.agents_by_id[agent_id].name,
                *(figure_text(key, daily[key], unit=False) for key in people),
            ]
        )
    lines += _table(rows) + [""]
    counts: dict[str, int] = {}
    for figures in result.tasks.values():
        key = figures.involved.category if figures.involved.applies else "not_applicable"
        counts[key] = counts.get(key, 0) + 1
    lines.append(
        "Tasks by category: "
        + ", ".join(f"{CATEGORIES[key].label.lower()} {counts[key]}" for key in sorted(counts))
    )
    lines.append(
        "Coherence: "
        + ", ".join(
            f"{FIGURES[key].label.lower()} {figure_text(key, value)}"
            for key, value in (
                ("cut_ratio", result.coherence.cut_ratio),
                ("modularity", result.coherence.modularity),
            )
        )
    )
    if result.mode_share:
        shares = ", ".join(
            f"{mode} {figure_text('mode_share', share)}"
            for mode, share in result.mode_share.items()
        )
        lines.append(f"{FIGURES['mode_share'].label}: {shares}")
    lines += [
        "",
        f"Handovers: {len(result.handovers)} (top {min(top, len(result.handovers))} by risk)",
    ]
    rows = [
        [
            "Source",
            "From",
            "To",
            "Agents",
            FIGURES["handovers_per_day"].heading,
            FIGURES["time_ratio"].heading,
            FIGURES["likelihood"].heading,
            FIGURES["risk"].heading,
            "Band",
        ]
    ]
    for handover in result.handovers[:top]:
        site = handover.site
        rows.append(
            [
                HANDOVER_SOURCES[site.source].label,
                site.from_task,
                site.to_task,
                f"{site.from_agent} -> {site.to_agent}",
                figure_text("handovers_per_day", site.per_day, unit=False),
                figure_text("time_ratio", handover.time_ratio),
                figure_text("likelihood", handover.likelihood),
                figure_text("risk", handover.risk),
                RISK_BANDS[handover.band].label,
            ]
        )
    lines += _table(rows) + [""]
    lines.append(f"{FIGURES['findings'].label}: {len(result.findings)}")
    for finding in result.findings[:top]:
        kind = finding_kind(finding.kind).label
        lines.append(f"  [{kind}, severity {finding.severity}] {finding.message}")
    if result.policy.get("is_example"):
        lines += ["", f"Risk policy: {result.policy['note']}"]
    lines += [
        "",
        "Methods: Baton's methods document (the Methods page), sections #daily-figures, "
        "#handovers, #coherence and #findings.",
        "",
    ]
    lines += ["Cautions: " + CAUTIONS]
    return "\n".join(lines) + "\n"
