"""The report's charts: the plan dashboard's own figures, drawn as SVG.

Each chart is the figure the dashboard hands plotly.js, from the same builder
(:mod:`allocation.figures.dashboards`), so the report shows the screens' traces, names and palette:
people in teal, devices in violet, the risk policy's bands, the awareness factors' colours.
:mod:`.svg` draws it as SVG text, which the HTML report holds inline and the PDF,
laid out from the same HTML, prints as vector graphics. Long bar charts (a goal or a task
per row) are cut into parts of at most :data:`ROWS_PER_CHART` rows so each fits a page.
"""

from __future__ import annotations

import copy
import math
from dataclasses import dataclass
from typing import Any

from django.utils.safestring import SafeString, mark_safe

from allocation.figures import dashboards as dashboard_figures
from allocation.figures.svg import axis_ranges, figure_svg

from .source import ExportSource

__all__ = ["CHART_WIDTH", "FONT_FAMILY", "ROWS_PER_CHART", "Chart", "report_charts"]

#: The drawings' width in plotly's pixels: at the width of an A4 landscape page the
#: dashboards' 13-pixel text prints at about 9 points.
CHART_WIDTH = 1100
#: The report's face; DejaVu Sans prints every character a study may hold.
FONT_FAMILY = "DejaVu Sans, Verdana, sans-serif"
#: A horizontal bar chart longer than this is cut into parts (a page each at most).
ROWS_PER_CHART = 20
#: The dashboard's mode-awareness chart shows this many tasks, the highest first.
AWARENESS_SHOWN = 30


@dataclass(frozen=True)
class Chart:
    """One chart: its key, title, a sentence saying what it shows, the figure it draws
    (the dashboard's plotly dict) and the drawing (SVG text)."""

    key: str
    title: str
    caption: str
    figure: dict[str, Any]
    svg: str

    @property
    def markup(self) -> SafeString:
        # The drawing escapes every text it holds (svg.label_text, then XML escaping).
        return mark_safe(self.svg)


def _row_parts(figure: dict[str, Any]) -> list[tuple[dict[str, Any], int, int, int]]:
    """A horizontal bar figure cut into parts of at most :data:`ROWS_PER_CHART` rows,
    as ``(figure, first row, last row, rows)``. Each part keeps the whole chart's value
    ranges (so bars compare across parts), and its height shrinks with its rows."""
    traces = figure["data"]
    rows = max((len(trace.get("y") or []) for trace in traces), default=0)
    if rows <= ROWS_PER_CHART:
        return [(figure, 1, rows, rows)]
    count = math.ceil(rows / ROWS_PER_CHART)
    size = math.ceil(rows / count)
    height = float(figure["layout"].get("height", 450))
    # The builders' heights are a fixed part plus a height per row; keep that per row.
    per_row = (height - 110) / rows
    ranges = axis_ranges(figure)
    parts = []
    for start in range(0, rows, size):
        stop = min(rows, start + size)
        part = copy.deepcopy(figure)
        for trace in part["data"]:
            for key in ("x", "y", "customdata", "text"):
                if isinstance(trace.get(key), list):
                    trace[key] = trace[key][start:stop]
            marker = trace.get("marker") or {}
            if isinstance(marker.get("color"), list):
                marker["color"] = marker["color"][start:stop]
        layout = part["layout"]
        layout["height"] = max(220, round(110 + per_row * (stop - start)))
        for name, (low, high) in ranges.items():
            key = name[0] + "axis" + name[1:]
            layout[key] = {**(layout.get(key) or {}), "range": [low, high]}
        parts.append((part, start + 1, stop, rows))
    return parts


def _chart(key: str, title: str, caption: str, figure: dict[str, Any]) -> Chart:
    svg = figure_svg(figure, width=CHART_WIDTH, font_family=FONT_FAMILY, title=title)
    return Chart(key, title, caption, figure, svg)


def _parted(key: str, title: str, caption: str, figure: dict[str, Any]) -> list[Chart]:
    parts = _row_parts(figure)
    result = []
    for number, (part, first, last, rows) in enumerate(parts, start=1):
        named = title if len(parts) == 1 else f"{title} (rows {first}-{last} of {rows})"
        result.append(_chart(f"{key}-{number}", named, caption, part))
    return result


def report_charts(source: ExportSource) -> list[Chart]:
    """The charts of the printable report, in the dashboard's order."""
    analysis = source.analysis
    result: list[Chart] = []
    if analysis.people:
        result.append(
            _chart(
                "daily",
                "Each person's day",
                "Each person's time and the monitoring within it (minutes a day, left), and "
                "interactions, interruptions and interruptions at night (times a day, right); "
                "one colour per person in every chart.",
                dashboard_figures.daily_figures_chart(analysis),
            )
        )
        result += _parted(
            "goals",
            "Person time by goal",
            "Minutes a day under each goal and sub-goal, stacked by person: the person time "
            "of the leaf tasks beneath it.",
            dashboard_figures.goal_time_chart(analysis),
        )
    counts = dashboard_figures.risk_matrix_counts(analysis)
    result.append(
        _chart(
            "risk",
            "Screening index of the handovers, in the form of a risk chart",
            "Not a risk estimate. Each cell counts the plan's handovers with that severity and "
            "frequency band (expected slips a year = occurrences a day × 365 × the likelihood "
            "index); its colour is the band the study's policy matrix gives them.",
            dashboard_figures.risk_matrix_chart(analysis.policy, counts),
        )
    )
    aware = len(dashboard_figures.awareness_rows(analysis, None))
    if aware:
        which = (
            f"The {AWARENESS_SHOWN} highest of {aware} tasks'"
            if aware > AWARENESS_SHOWN
            else f"All {aware} tasks'"
            if aware > 1
            else "The one task's"
        )
        result += _parted(
            "awareness",
            "Mode awareness, by task",
            f"{which} mode-awareness index (0 to 1), each bar split into the weighted "
            "contributions of its five factors.",
            dashboard_figures.awareness_chart(analysis, AWARENESS_SHOWN),
        )
    if analysis.plan.modes:
        result.append(
            _chart(
                "modes",
                "Share of the day in each mode",
                "The share of the day in each mode of the plan's mode map (the initial mode "
                "darker), from the map read as a continuous-time Markov chain.",
                dashboard_figures.mode_share_chart(analysis),
            )
        )
    return result
