"""Figures of the Compare screen: person time moved between plans, and the objective's
weighted contributions per plan (plotly figure data)."""

from __future__ import annotations

from typing import Any

from allocation.core.analysis.compare import OBJECTIVE_FIGURES, PlanDelta, Ranking
from allocation.core.registry import FIGURES, figure_text
from allocation.figures.base import short_text

__all__ = ["FIGURE_COLOURS", "burden_moved_figure", "objective_figure"]

#: Compare: saved and added person time, and one colour per objective figure.
SAVED, ADDED = "#2f7d6d", "#c2571a"
FIGURE_COLOURS = (
    "#1d2a3a",
    "#c2571a",
    "#5b4b9a",
    "#2f7d6d",
    "#a4282b",
    "#b08a1e",
    "#7a8aa0",
    "#8a6a00",
)


def _shift_label(shift) -> str:
    return f"{shift.task_id} {short_text(shift.title, 48)}"


def burden_moved_figure(delta: PlanDelta, top: int = 30) -> dict[str, Any]:
    """Person seconds per day saved (−) or added (+) per task, largest first: plotly data."""
    shifts = [shift for shift in delta.shifts[:top] if shift.change != 0]
    changes = [shift.change for shift in shifts]
    moved = FIGURES["burden_change"]
    return {
        "data": [
            {
                "type": "bar",
                "orientation": "h",
                "y": [_shift_label(shift) for shift in shifts],
                "x": changes,
                "customdata": [figure_text(moved, change, signed=True) for change in changes],
                "marker": {"color": [ADDED if change > 0 else SAVED for change in changes]},
                "hovertemplate": "%{y}<br>%{customdata}<extra></extra>",
            }
        ],
        "layout": {
            "height": 120 + 22 * len(shifts),
            "margin": {"l": 300, "r": 20, "t": 10, "b": 50},
            "xaxis": {
                "title": {
                    "text": f"{moved.label}, {moved.unit}, {delta.plan} against "
                    f"{delta.baseline} (− saved, + added)"
                },
                "zeroline": True,
                "zerolinecolor": "#1d2a3a",
            },
            "yaxis": {"autorange": "reversed", "automargin": True},
            "plot_bgcolor": "#ffffff",
            "paper_bgcolor": "#ffffff",
            "font": {"family": "Source Sans 3, Segoe UI, system-ui, sans-serif"},
        },
    }


def objective_figure(ranking: Ranking, labels: dict[str, str]) -> dict[str, Any]:
    """Each plan's score as stacked weighted contributions, best plan on top."""
    plans = list(ranking.order)
    return {
        "data": [
            {
                "type": "bar",
                "orientation": "h",
                "name": labels[figure],
                "y": plans,
                "x": [ranking.contributions[plan][figure] for plan in plans],
                "marker": {"color": FIGURE_COLOURS[index % len(FIGURE_COLOURS)]},
                "hovertemplate": f"%{{y}}: {labels[figure]} %{{x:.3f}}<extra></extra>",
            }
            for index, figure in enumerate(OBJECTIVE_FIGURES)
        ],
        "layout": {
            "barmode": "stack",
            "height": max(230, 90 + 42 * len(plans)),
            "margin": {"l": 20, "r": 20, "t": 10, "b": 50},
            "xaxis": {
                "title": {
                    "text": f"{FIGURES['objective_score'].label}: weighted contributions "
                    "(lower is better)"
                }
            },
            "yaxis": {"autorange": "reversed", "type": "category", "automargin": True},
            "legend": {"orientation": "v", "x": 1.02, "y": 1, "traceorder": "normal"},
            "plot_bgcolor": "#ffffff",
            "paper_bgcolor": "#ffffff",
            "font": {"family": "Source Sans 3, Segoe UI, system-ui, sans-serif"},
        },
    }
