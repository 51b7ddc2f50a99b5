"""Workload ratings beside Baton's predictions: one row per task, and the scatter of the
rated NASA-TLX score against the predicted person time per occurrence.

Pure functions over a :class:`~allocation.core.analysis.PlanAnalysis` and plain rating
records (``{"task": ..., "score": ..., "raw": ...}``); no Django. The chart is plotly
figure data that ``static/baton/charts.js`` renders.
"""

from __future__ import annotations

import statistics
from collections.abc import Iterable, Mapping
from typing import Any

from allocation.core.analysis import PlanAnalysis
from allocation.core.registry import FIGURES, figure_text
from allocation.core.vocabulary import CHANNELS
from allocation.figures.base import HUMAN_COLOURS, INK_SOFT, chart_axis, chart_layout, short_text

__all__ = ["task_rows", "tlx_scatter_chart"]


def task_rows(
    analysis: PlanAnalysis, ratings: Iterable[Mapping[str, Any]]
) -> list[dict[str, Any]]:
    """Every leaf task of the plan, in study order, with its ratings summed up and the
    figures Baton predicts for it.

    Each row: ``task`` (id), ``title``, ``count``, ``mean``/``low``/``high`` of the
    recorded scores and ``mean_raw`` (``None`` when unrated), ``person_s`` (person
    seconds per occurrence, all people, in the plan's initial mode), ``person_s_per_day``
    (all people, every mode), ``per_day`` (occurrences), ``interactions_per_day``
    (occurrences in the initial mode in which a person spends time), ``awareness``
    (index or ``None``), ``people`` (who spends the time), ``demands`` (VACP per channel,
    ``None`` when the task gives none) and ``category``.
    """
    study = analysis.study
    by_task: dict[str, list[Mapping[str, Any]]] = {}
    for rating in ratings:
        by_task.setdefault(rating["task"], []).append(rating)
    rows = []
    for task in study.tasks:
        figures = analysis.tasks.get(task.id)
        if figures is None:
            continue
        scores = [float(rating["score"]) for rating in by_task.get(task.id, ())]
        raws = [float(rating["raw"]) for rating in by_task.get(task.id, ())]
        involved = figures.involved
        holders = dict.fromkeys(h for h in (involved.human, involved.monitor) if h)
        people = [study.agent(human).name for human in holders]
        rows.append(
            {
                "task": task.id,
                "title": task.title,
                "count": len(scores),
                "mean": statistics.fmean(scores) if scores else None,
                "low": min(scores, default=None),
                "high": max(scores, default=None),
                "mean_raw": statistics.fmean(raws) if raws else None,
                "person_s": figures.person_s,
                "typical_s": figures.typical_s,
                "person_s_per_day": sum(figures.person_s_per_day.values()),
                "per_day": figures.per_day,
                "interactions_per_day": figures.per_day if figures.person_s > 0 else 0.0,
                "awareness": figures.awareness.index if figures.awareness else None,
                "people": people,
                "demands": (
                    {channel: float(task.demands.get(channel, 0)) for channel in CHANNELS}
                    if task.demands
                    else None
                ),
                # A task the plan does not do has no category of its own.
                "category": involved.category if involved.applies else "not_applicable",
            }
        )
    return rows


def tlx_scatter_chart(rows: list[dict[str, Any]]) -> dict[str, Any]:
    """Mean rated TLX score (error bars: lowest to highest rating) against predicted person
    seconds per occurrence, one point per rated task."""
    rated = [row for row in rows if row["count"]]
    data = [
        {
            "type": "scatter",
            "mode": "markers+text",
            "name": "rated tasks",
            "x": [row["person_s"] for row in rated],
            "y": [row["mean"] for row in rated],
            "text": [row["task"] for row in rated],
            "textposition": "top center",
            "customdata": [
                [
                    short_text(row["title"]),
                    row["count"],
                    row["low"],
                    row["high"],
                    figure_text("person_s", row["person_s"]),
                ]
                for row in rated
            ],
            "hovertemplate": "%{text} %{customdata[0]}<br>"
            + f"{FIGURES['person_s'].label}, predicted: "
            + "%{customdata[4]}<br>mean TLX %{y:.1f} (%{customdata[1]} rating(s), "
            "%{customdata[2]:.1f} to %{customdata[3]:.1f})<extra></extra>",
            "error_y": {
                "type": "data",
                "symmetric": False,
                "array": [row["high"] - row["mean"] for row in rated],
                "arrayminus": [row["mean"] - row["low"] for row in rated],
                "color": INK_SOFT,
                "thickness": 1,
                "width": 4,
            },
            "marker": {"color": HUMAN_COLOURS[0], "size": 10},
            "cliponaxis": False,
        }
    ]
    layout = chart_layout(
        height=360,
        showlegend=False,
        xaxis=chart_axis(
            f"{FIGURES['person_s'].label}, predicted ({FIGURES['person_s'].unit})",
            rangemode="tozero",
        ),
        yaxis=chart_axis("rated NASA-TLX score (0 to 100)", range=[0, 105]),
        margin={"l": 60, "r": 30, "t": 30, "b": 50},
    )
    return {"data": data, "layout": layout}
