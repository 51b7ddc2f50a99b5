"""A plan's analysis as the analysis file (JSON, DESIGN §6) and as a readable report.

Both carry the assumptions in force, the methods with their sources, and the cautions.
"""

from __future__ import annotations

from typing import Any

from ..assumptions import METHOD_NOTES, assumption_table
from ..cautions import CAUTIONS
from ..describe import seconds_text
from ..model import Study
from ..scales import level_text, shared_levels, single_level
from ..vocabulary import STAGES
from .involvement import Involvement
from .plan import PlanAnalysis

__all__ = ["METHODS", "analysis_json", "levels_with_words", "text_report"]

ANALYSIS_FORMAT = "baton.analysis"
ANALYSIS_VERSION = 1

#: The methods behind the figures, with their sources (DESIGN §3, REFERENCES.md).
METHODS = (
    (
        "Levels of automation",
        "Four stages and ten levels: Parasuraman, Sheridan & Wickens "
        "(2000), Table I after Sheridan & Verplank (1978); Endsley & Kaber (1999) role matrix.",
    ),
    (
        "Degree of automation",
        "Stage degrees d = (L - 1) / 9 (sv10) or H 0, H/C 0.5, C 1 "
        "(ek10); overall degree weighted toward later stages after Onnasch et al. (2014).",
    ),
    (
        "Person time",
        "Stage shares of the duration left to the person plus supervision by "
        "level (DESIGN §3.1; supervision seconds are a tool assumption).",
    ),
    (
        "Occurrences",
        "Schedules, Poisson rates and event probabilities propagated along "
        "precedes chains (tool assumptions listed below).",
    ),
    (
        "Responsibility and authority",
        "Monitoring added where the accountable person does "
        "not hold the task: Pritchett, Kim & Feigh (2014).",
    ),
    (
        "Capability",
        "Each agent is allocated only what it can do: requirement 1 of Feigh & Pritchett (2014).",
    ),
    (
        "Chains and deadlines",
        "Earliest, typical and latest completion from durations, lags "
        "and response latencies by time of day.",
    ),
    (
        "Mode awareness",
        "Weighted factors after Endsley & Kiris (1995), Onnasch et al. (2014) "
        "and Sarter & Woods (1995); weights are tool assumptions.",
    ),
    (
        "Handovers",
        "Weighted noisy-OR of time budget, load, cue, initiation and awareness; "
        "takeover times after Eriksson & Stanton (2017); risk = severity x likelihood band "
        "under the study's risk policy (ISO 14971 leaves acceptability to the manufacturer).",
    ),
    (
        "Mode-map verification",
        "The device's modes composed with the person's model of them (their own actions "
        "and the changes they notice; a change shown only on the display may be missed) and "
        "searched breadth-first: Degani & Heymann (2002), Sarter & Woods (1995); finding "
        "kinds after Leveson et al. (1997). Each finding's witness is a shortest sequence of "
        "events from the initial mode.",
    ),
    (
        "Coherence",
        "Share of link weight crossing agents, and weighted modularity (Newman "
        "2006) of the partition by principal holder (incoherency: Pritchett et al. 2014).",
    ),
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
        "occurrences_per_day": figures.per_day,
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


def analysis_json(result: PlanAnalysis) -> dict[str, Any]:
    """The analysis file of DESIGN §6 (its keys exactly), with more keys beside them."""
    study = result.study
    return {
        "format": ANALYSIS_FORMAT,
        "version": ANALYSIS_VERSION,
        "study": study.id,
        "plan": result.plan.id,
        "people": {agent_id: person.to_json() for agent_id, person in result.people.items()},
        "tasks": {task.id: _task_json(result, task.id) for task in study.leaves},
        "handovers": [handover.to_json() for handover in result.handovers],
        "coherence": {
            "cut_ratio": result.coherence.cut_ratio,
            "modularity": result.coherence.modularity,
            "groups": result.coherence.groups,
            "link_weight_per_day": result.coherence.link_weight,
        },
        "findings": [finding.to_json() for finding in result.findings],
        "headline": result.headline(),
        "mode_share": result.mode_share,
        "chains": [_chain_json(chain) for chain in result.chains],
        "risk_policy": result.policy,
        "assumptions": assumption_table(study.assumptions, study.scale),
        "method_notes": [{"key": k, "status": s, "text": t} for k, s, t in METHOD_NOTES],
        "methods": [{"name": name, "source": source} for name, source in METHODS],
        "cautions": CAUTIONS,
    }


def _table(rows: list[list[str]]) -> list[str]:
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    return [
        "  ".join(cell.ljust(width) for cell, width in zip(row, widths, strict=True)).rstrip()
        for row in rows
    ]


def text_report(result: PlanAnalysis, *, top: int = 10) -> str:
    """A readable report of one plan's analysis, for the command line."""
    study, plan = result.study, result.plan
    lines = [f"{study.title} — plan {plan.id}: {plan.name}", ""]
    lines.append("People (per day)")
    rows = [["person", "burden", "interactions", "interruptions", "at night", "monitoring"]]
    for agent_id, person in result.people.items():
        rows.append(
            [
                study.agents_by_id[agent_id].name,
                seconds_text(person.burden_s_per_day),
                f"{person.interactions_per_day:.1f}",
                f"{person.interruptions_per_day:.1f}",
                f"{person.night_interruptions_per_day:.2f}",
                seconds_text(person.monitoring_s_per_day),
            ]
        )
    lines += _table(rows) + [""]
    counts: dict[str, int] = {}
    for figures in result.tasks.values():
        key = figures.involved.category if figures.involved.applies else "not applicable"
        counts[key] = counts.get(key, 0) + 1
    lines.append("Tasks by category: " + ", ".join(f"{k} {v}" for k, v in sorted(counts.items())))
    lines.append(
        f"Coherence: cut ratio {result.coherence.cut_ratio:.3f}, modularity "
        f"{result.coherence.modularity:.3f}"
    )
    if result.mode_share:
        shares = ", ".join(f"{mode} {share:.1%}" for mode, share in result.mode_share.items())
        lines.append(f"Share of the day in each mode: {shares}")
    lines += [
        "",
        f"Handovers: {len(result.handovers)} (top {min(top, len(result.handovers))} by risk)",
    ]
    rows = [
        ["source", "from", "to", "agents", "per day", "time ratio", "likelihood", "risk", "band"]
    ]
    for handover in result.handovers[:top]:
        site = handover.site
        ratio = "—" if handover.time_ratio is None else f"{handover.time_ratio:.2f}"
        rows.append(
            [
                site.source,
                site.from_task,
                site.to_task,
                f"{site.from_agent} -> {site.to_agent}",
                f"{site.per_day:.2f}",
                ratio,
                f"{handover.likelihood:.2f}",
                str(handover.risk),
                handover.band,
            ]
        )
    lines += _table(rows) + [""]
    lines.append(f"Findings: {len(result.findings)}")
    for finding in result.findings[:top]:
        lines.append(f"  [{finding.kind}, severity {finding.severity}] {finding.message}")
    if result.policy.get("is_example"):
        lines += ["", f"Risk policy: {result.policy['note']}"]
    lines += ["", "Cautions: " + CAUTIONS]
    return "\n".join(lines) + "\n"
