"""The tables of an export, one per sheet of the spreadsheet layout, as pandas DataFrames.

The ``allocation`` table has one row per leaf task in task-file order; its assignment
columns are the study file's own values (what an import reads back), its figure columns
the plan's analysis in its normal mode. Every figure column is a figure of the registry
(:data:`FIGURE_COLUMNS`): it is rounded to :data:`EXTRA_DIGITS` more decimals than the
screens show, and the ``methods`` sheet names it with its label, unit and the section of
Baton's methods document that defines it. Key columns keep the analysis file's keys (a
finding's kind, a handover's source and band); a ``*_words`` column beside each gives the
registry's words. An assumption's status is written in the registry's words.
"""

from __future__ import annotations

import json
from typing import Any

import pandas as pd

from allocation.core.assumptions import assumption_table
from allocation.core.cautions import CAUTIONS
from allocation.core.methods import methods_document
from allocation.core.model import Assignment
from allocation.core.monitoring import monitoring_cell
from allocation.core.needs import needs_text
from allocation.core.registry import (
    ASSUMPTION_STATUS_WORDS,
    FIGURES,
    HANDOVER_SOURCES,
    RISK_BANDS,
    Figure,
    finding_kind,
)
from allocation.core.reliability_cell import people_cell, reliability_cell
from allocation.core.scales import level_text
from allocation.core.spreadsheets.layout import (
    ALLOCATION_COLUMNS,
    LINK_COLUMNS,
    PASS_THROUGH_WORDS,
    SHEETS,
    TASK_COLUMNS,
)
from allocation.core.vocabulary import STAGES
from allocation.core.writing import monitoring_to_json, reliability_to_json

from .source import ExportSource

__all__ = [
    "ALLOCATION_COLUMNS",
    "EXTRA_DIGITS",
    "FIGURE_COLUMNS",
    "SHEETS",
    "allocation_rows",
    "allocation_table",
    "assumptions_table",
    "compact_json",
    "figure_columns",
    "findings_table",
    "handovers_table",
    "links_table",
    "methods_table",
    "sheet_tables",
    "tasks_table",
    "workload_table",
]

#: Decimals an export carries beyond the registry's (what the screens show), so that
#: figures summed or compared from a sheet agree with the screens' rounding.
EXTRA_DIGITS = 2

#: Each figure column of the sheets, ``(sheet, column)``, and the registry's figure it
#: holds, in the sheets' order.
FIGURE_COLUMNS: dict[tuple[str, str], str] = {
    **{("allocation", f"degree_{stage}"): "degrees" for stage in STAGES},
    ("allocation", "occurrences_per_day"): "occurrences_per_day",
    ("allocation", "person_s_per_day"): "person_s_per_day",
    ("allocation", "awareness"): "awareness",
    ("allocation", "handovers"): "handovers",
    ("allocation", "findings"): "findings",
    ("handovers", "per_day"): "handovers_per_day",
    ("handovers", "time_ratio"): "time_ratio",
    ("handovers", "likelihood"): "likelihood",
    ("handovers", "likelihood_band"): "likelihood_band",
    ("handovers", "risk"): "risk",
    ("handovers", "frequency_per_year"): "frequency_per_year",
    ("workload", "score"): "tlx_weighted",
    ("workload", "predicted_occurrences_per_day"): "occurrences_per_day",
    ("workload", "predicted_person_s_per_day"): "person_s_per_day",
    ("workload", "predicted_awareness"): "awareness",
}

HANDOVER_COLUMNS = (
    "source",
    "source_words",
    "from_task",
    "to_task",
    "from_agent",
    "to_agent",
    "stage",
    "modes",
    "trigger",
    "per_day",
    "time_ratio",
    "likelihood",
    "likelihood_band",
    "frequency_per_year",
    "frequency_band",
    "severity",
    "risk",
    "band",
    "band_words",
    "cue",
    "initiator",
)
FINDING_COLUMNS = (
    "kind",
    "kind_words",
    "severity",
    "tasks",
    "modes",
    "events",
    "agents",
    "message",
)
ASSUMPTION_COLUMNS = ("key", "value", "default", "status", "source")
#: One row per figure of the sheets: where its columns are, the registry's label and
#: unit, the anchor of its section of the methods document and that section's summary.
METHOD_COLUMNS = ("sheet", "columns", "name", "unit", "method", "source")
#: The NASA-TLX subscales in the order of Hart & Staveland (1988); other keys follow.
TLX_ORDER = ("mental", "physical", "temporal", "performance", "effort", "frustration")
WORKLOAD_HEAD = ("task", "session", "participant", "kind")
WORKLOAD_TAIL = (
    "score",
    "notes",
    "predicted_category",
    "predicted_occurrences_per_day",
    "predicted_person_s_per_day",
    "predicted_awareness",
)


def _rounded(key: str, value: float | None) -> float | None:
    """A figure at the registry's precision plus :data:`EXTRA_DIGITS`."""
    if value is None:
        return None
    return round(float(value), FIGURES[key].decimals + EXTRA_DIGITS)


def figure_columns(sheet: str) -> list[tuple[list[str], Figure]]:
    """The figure columns of a sheet, grouped by the figure they hold, in column order."""
    groups: dict[str, list[str]] = {}
    for (where, column), key in FIGURE_COLUMNS.items():
        if where == sheet:
            groups.setdefault(key, []).append(column)
    return [(columns, FIGURES[key]) for key, columns in groups.items()]


def compact_json(value: Any) -> str:
    """A value as compact JSON text (``[2,5,30]``); empty for ``None``."""
    if value is None:
        return ""
    return json.dumps(value, separators=(",", ":"), ensure_ascii=False, sort_keys=False)


def _levels(scale: str, levels: int | dict[str, int] | None) -> tuple[str, str]:
    """The levels cell and the level-words cell of an assignment."""
    if levels is None:
        return "", ""
    if isinstance(levels, dict):
        cells = [f"{stage} {int(levels[stage])}" for stage in STAGES if stage in levels]
        words = [level_text(scale, int(levels[stage])) for stage in STAGES if stage in levels]
        return "; ".join(cells), "; ".join(words)
    return str(int(levels)), level_text(scale, int(levels))


def _category(figures) -> str:
    assignment = figures.involved.assignment
    if assignment is not None and not assignment.is_applicable:
        return "not_applicable"
    return figures.involved.category


def allocation_rows(source: ExportSource) -> list[dict[str, Any]]:
    """One dict per leaf task, keys :data:`ALLOCATION_COLUMNS`, in task-file order."""
    result = source.analysis
    study = result.study
    handovers: dict[str, int] = {}
    for handover in result.handovers:
        for task_id in {handover.site.from_task, handover.site.to_task}:
            handovers[task_id] = handovers.get(task_id, 0) + 1
    findings: dict[str, int] = {}
    for finding in result.findings:
        for task_id in set(finding.tasks):
            findings[task_id] = findings.get(task_id, 0) + 1
    rows = []
    for task in study.leaves:
        figures = result.tasks[task.id]
        assignment = result.plan.assignments.get(task.id)
        degrees = figures.involved.degrees
        levels, words = _levels(study.scale, assignment.levels if assignment else None)
        aware = figures.awareness
        row = {
            "task": task.id,
            "goal": task.parent or "",
            "title": task.title,
            "category": _category(figures),
            "human": people_cell(
                list(assignment.people_asked)
                if assignment is not None and assignment.escalation
                else assignment and assignment.human
            ),
            "automation": (assignment and assignment.automation) or "",
            "levels": levels,
            "level_words": words,
            **{f"degree_{stage}": _rounded("degrees", degrees[stage]) for stage in STAGES},
            "accountable": (assignment and assignment.accountable) or "",
            "feedback": (assignment and assignment.feedback) or "",
            "initiator": (assignment and assignment.initiator) or "",
            "monitoring": monitoring_cell(
                None if assignment is None else monitoring_to_json(assignment.monitoring)
            ),
            "reliability": reliability_cell(
                None if assignment is None else reliability_to_json(assignment.reliability)
            ),
            "escalate_after_s": None if assignment is None else assignment.escalate_after_s,
            "rationale": (assignment and assignment.rationale) or "",
            "status": (assignment and assignment.status) or "",
            "applies": _applies_words(assignment),
            "occurrences_per_day": _rounded("occurrences_per_day", figures.per_day),
            "person_s_per_day": _rounded(
                "person_s_per_day", sum(figures.person_s_per_day.values())
            ),
            "awareness": None if aware is None else _rounded("awareness", aware.index),
            "handovers": handovers.get(task.id, 0),
            "findings": findings.get(task.id, 0),
        }
        rows.append(row)
    return rows


def _frame(rows: list[dict[str, Any]], columns: tuple[str, ...]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=list(columns))


def allocation_table(source: ExportSource) -> pd.DataFrame:
    """The allocation table: the ``allocation`` sheet and the CSV export."""
    frame = _frame(allocation_rows(source), ALLOCATION_COLUMNS)
    # Number columns stay numbers even when no task has one (empty cells).
    for column in ("awareness", "escalate_after_s"):
        frame[column] = frame[column].astype("float64")
    return frame


def tasks_table(source: ExportSource) -> pd.DataFrame:
    """Goals and tasks as the study file gives them, JSON-valued keys as compact JSON."""
    rows = []
    for task in source.document.get("tasks", []):
        rows.append(
            {
                "id": task["id"],
                "parent": task.get("parent", ""),
                "title": task.get("title", ""),
                "occurs": compact_json(task.get("occurs")),
                "duration_s": compact_json(task.get("duration_s")),
                "window_s": task.get("window_s"),
                "severity": task.get("severity"),
                "demands": compact_json(task.get("demands")),
                "split": compact_json(task.get("split")),
                "needs": needs_text(task.get("needs")),
                "notes": task.get("notes", ""),
            }
        )
    return _frame(rows, TASK_COLUMNS)


def links_table(source: ExportSource) -> pd.DataFrame:
    rows = [
        {
            "from": link["from"],
            "to": link["to"],
            "kind": link["kind"],
            "lag_s": compact_json(link.get("lag_s")),
            "probability": link.get("probability"),
            "notes": link.get("notes", ""),
        }
        for link in source.document.get("links", [])
    ]
    return _frame(rows, LINK_COLUMNS)


def handovers_table(source: ExportSource) -> pd.DataFrame:
    """Every handover, riskiest first (the analysis's order)."""
    rows = []
    for handover in source.analysis.handovers:
        site = handover.site
        rows.append(
            {
                "source": site.source,
                "source_words": HANDOVER_SOURCES[site.source].label,
                "from_task": site.from_task,
                "to_task": site.to_task,
                "from_agent": site.from_agent or "",
                "to_agent": site.to_agent or "",
                "stage": site.stage or "",
                "modes": " -> ".join(site.modes),
                "trigger": site.trigger or "",
                "per_day": _rounded("handovers_per_day", site.per_day),
                "time_ratio": _rounded("time_ratio", handover.time_ratio),
                "likelihood": _rounded("likelihood", handover.likelihood),
                "likelihood_band": handover.likelihood_band,
                "frequency_per_year": _rounded("frequency_per_year", handover.frequency_per_year),
                "frequency_band": handover.frequency_band,
                "severity": handover.severity,
                "risk": handover.risk,
                "band": handover.band,
                "band_words": RISK_BANDS[handover.band].label,
                "cue": site.cue or "",
                "initiator": site.initiator,
            }
        )
    return _frame(rows, HANDOVER_COLUMNS)


def findings_table(source: ExportSource) -> pd.DataFrame:
    rows = [
        {
            "kind": finding.kind,
            "kind_words": finding_kind(finding.kind).label,
            "severity": finding.severity,
            "tasks": ",".join(finding.tasks),
            "modes": ",".join(finding.modes),
            "events": ",".join(finding.events),
            "agents": ",".join(finding.agents),
            "message": finding.message,
        }
        for finding in source.analysis.findings
    ]
    return _frame(rows, FINDING_COLUMNS)


def _subscales(source: ExportSource) -> list[str]:
    keys = {key for rating in source.ratings for key in rating.ratings}
    known = [key for key in TLX_ORDER if key in keys]
    return known + sorted(keys - set(known))


def workload_table(source: ExportSource) -> pd.DataFrame:
    """Recorded NASA-TLX ratings with Baton's predicted figures for the task beside them."""
    subscales = _subscales(source)
    predicted = {row["task"]: row for row in allocation_rows(source)}
    rows = []
    for rating in source.ratings:
        figures = predicted.get(rating.task, {})
        rows.append(
            {
                "task": rating.task,
                "session": rating.session,
                "participant": rating.participant,
                "kind": "weighted" if rating.weighted else "raw",
                **{key: rating.ratings.get(key) for key in subscales},
                "score": _rounded("tlx_weighted" if rating.weighted else "tlx_raw", rating.score),
                "notes": rating.notes,
                "predicted_category": figures.get("category", ""),
                "predicted_occurrences_per_day": figures.get("occurrences_per_day"),
                "predicted_person_s_per_day": figures.get("person_s_per_day"),
                "predicted_awareness": figures.get("awareness"),
            }
        )
    return _frame(rows, (*WORKLOAD_HEAD, *subscales, *WORKLOAD_TAIL))


def assumptions_table(source: ExportSource) -> pd.DataFrame:
    """Every assumption in force with its default, status (in the registry's words) and
    source."""
    study = source.study
    rows = [
        {
            "key": row["key"],
            "value": compact_json(row["value"]),
            "default": compact_json(row["default"]),
            "status": ASSUMPTION_STATUS_WORDS[row["status"]].label,
            "source": row["source"],
        }
        for row in assumption_table(study.assumptions, study.scale)
    ]
    return _frame(rows, ASSUMPTION_COLUMNS)


def methods_table() -> pd.DataFrame:
    """Every figure column of the workbook with its label, unit and methods section."""
    document = methods_document()
    rows = [
        {
            "sheet": sheet,
            "columns": ", ".join(columns),
            "name": spec.label,
            "unit": spec.unit,
            "method": spec.anchor,
            "source": document.section(spec.anchor).summary,
        }
        for sheet in SHEETS
        for columns, spec in figure_columns(sheet)
    ]
    return _frame(rows, METHOD_COLUMNS)


def sheet_tables(source: ExportSource) -> dict[str, pd.DataFrame]:
    """Every sheet of the workbook as a DataFrame, in the layout's order."""
    return {
        "about": pd.DataFrame(source.about(), columns=["key", "value"]),
        "allocation": allocation_table(source),
        "tasks": tasks_table(source),
        "links": links_table(source),
        "handovers": handovers_table(source),
        "findings": findings_table(source),
        "workload": workload_table(source),
        "assumptions": assumptions_table(source),
        "methods": methods_table(),
        "cautions": pd.DataFrame([[CAUTIONS]]),
    }


def _applies_words(assignment: Assignment | None) -> str:
    """The applies cell: yes, no, or no with the chain going on (as the import reads)."""
    if assignment is None or assignment.is_applicable:
        return "yes"
    return PASS_THROUGH_WORDS if assignment.pass_through else "no"
