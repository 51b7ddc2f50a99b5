"""Simulated days as plotly figure data: one day's timelines, occupancy and channel
demand, and the distributions of the daily figures over a run.

Pure functions over the JSON the core's simulation gives (``DayTimeline.to_json()``,
``Simulation.to_json()``); no Django. Colours follow the style sheet: the person's own
work in the people's teal, supervision in the automations' violet (work the automation
does under their eye), monitoring in ochre, the sleep window shaded grey, limits in the
accent colour.
"""

from __future__ import annotations

import html
from typing import Any

import numpy as np

from allocation.core.simulation import FIGURE_WORDS
from allocation.core.vocabulary import CHANNELS, STAGE_NAMES, STAGES
from allocation.figures.base import ACCENT, INK_SOFT, escaped_names

__all__ = [
    "FIGURE_WORDS",
    "KIND_COLOURS",
    "channel_chart",
    "day_chart",
    "histogram_chart",
    "occupancy_chart",
]

SLEEP = "rgba(74, 90, 110, 0.12)"
KIND_COLOURS = {
    "acquisition": "#a7d3c7",
    "analysis": "#6fb3a2",
    "decision": "#2f7d6d",
    "action": "#17493f",
    "supervision": "#7a6bb7",
    "monitoring": "#b08a1e",
}
KIND_WORDS = {
    **{stage: STAGE_NAMES[stage] for stage in STAGES},
    "supervision": "supervision",
    "monitoring": "monitoring",
}
CHANNEL_COLOURS = {
    "visual": "#2f7d6d",
    "auditory": "#5b4b9a",
    "cognitive": "#b08a1e",
    "psychomotor": "#8a5a3c",
}
HOURS = {
    "tickvals": [h * 3600 for h in range(0, 25, 3)],
    "ticktext": [f"{h:02d}:00" for h in range(0, 25, 3)],
}


def _clock(seconds: float) -> str:
    seconds = int(round(seconds)) % 86400
    return f"{seconds // 3600:02d}:{seconds // 60 % 60:02d}:{seconds % 60:02d}"


def _time_axis(**extra: Any) -> dict[str, Any]:
    return {"range": [0, 86400], "title": {"text": "time of day"}, **HOURS, **extra}


def _limit_line(limit: float) -> dict[str, Any]:
    """A dashed line across the chart at a limit."""
    return {
        "type": "line",
        "xref": "paper",
        "x0": 0,
        "x1": 1,
        "y0": limit,
        "y1": limit,
        "line": {"color": ACCENT, "dash": "dash", "width": 1.5},
    }


def _sleep_shapes(asleep: list[list[float]], rows: str = "paper") -> list[dict[str, Any]]:
    return [
        {
            "type": "rect",
            "xref": "x",
            "yref": rows,
            "x0": start,
            "x1": end,
            "y0": 0,
            "y1": 1,
            "fillcolor": SLEEP,
            "line": {"width": 0},
            "layer": "below",
        }
        for start, end in asleep
    ]


def day_chart(day: dict[str, Any], names: dict[str, str], titles: dict[str, str]) -> dict:
    """Each person's day as a lane of bars, one bar per stretch of work, coloured by what
    it is (a stage of the task, supervision or monitoring); the sleep window shaded; the
    device's modes, if it has a mode map, as a band on top."""
    names = escaped_names(names)
    people = list(day["people"])
    data = []
    for kind, colour in KIND_COLOURS.items():
        xs, ys, widths, hovers = [], [], [], []
        for person in people:
            for segment in day["people"][person]["segments"]:
                if segment["kind"] != kind:
                    continue
                start = max(segment["start"], 0.0)
                end = min(segment["end"], 86400.0)
                if end <= start:
                    continue
                xs.append(start)
                widths.append(end - start)
                ys.append(names.get(person, person))
                hovers.append(
                    f"<b>{html.escape(segment['task'])}</b> "
                    f"{html.escape(titles.get(segment['task'], ''))}<br>"
                    f"{KIND_WORDS[kind]}, {_clock(start)}-{_clock(end)} "
                    f"({end - start:.0f} s); started by {segment['initiator']}"
                )
        data.append(
            {
                "type": "bar",
                "orientation": "h",
                "base": xs,
                "x": widths,
                "y": ys,
                "name": KIND_WORDS[kind],
                "marker": {"color": colour, "line": {"width": 0}},
                "hovertext": hovers,
                "hoverinfo": "text",
                "width": 0.6,
            }
        )
    shapes = []
    for person in people:
        label = names.get(person, person)
        for start, end in day["people"][person]["asleep"]:
            shapes.append(
                {
                    "type": "rect",
                    "xref": "x",
                    "yref": "y",
                    "x0": start,
                    "x1": end,
                    "y0": people.index(person) - 0.45,
                    "y1": people.index(person) + 0.45,
                    "fillcolor": SLEEP,
                    "line": {"width": 0},
                    "layer": "below",
                    "name": f"{label} asleep",
                }
            )
    modes = day.get("modes") or []
    annotations = []
    for index, (start, mode) in enumerate(modes):
        end = modes[index + 1][0] if index + 1 < len(modes) else 86400.0
        annotations.append(
            {
                "x": (start + end) / 2,
                "y": 1.02,
                "xref": "x",
                "yref": "paper",
                "text": html.escape(mode) if end - start > 2400 else "",
                "showarrow": False,
                "font": {"size": 10, "color": INK_SOFT},
            }
        )
        shapes.append(
            {
                "type": "rect",
                "xref": "x",
                "yref": "paper",
                "x0": start,
                "x1": end,
                "y0": 1.0,
                "y1": 1.04,
                "fillcolor": "#e3def4" if index % 2 else "#d7ece7",
                "line": {"width": 0.5, "color": "#ffffff"},
            }
        )
    return {
        "data": data,
        "layout": {
            "barmode": "overlay",
            "height": 140 + 70 * len(people),
            "margin": {"l": 20, "r": 20, "t": 40 if modes else 20, "b": 50},
            "xaxis": _time_axis(),
            "yaxis": {
                "categoryorder": "array",
                "categoryarray": [names.get(p, p) for p in people],
                "autorange": "reversed",
                "automargin": True,
            },
            "shapes": shapes,
            "annotations": annotations,
            "legend": {"orientation": "h", "y": -0.3},
            "hovermode": "closest",
        },
    }


def occupancy_chart(day: dict[str, Any], names: dict[str, str]) -> dict[str, Any]:
    """Each person's occupancy per bin (time required over time available) as steps, the
    limit as a line, the sleep window shaded."""
    names = escaped_names(names)
    bin_s = float(day["bin_s"])
    limit = float(day["limits"]["occupancy"])
    data = []
    shapes = []
    for person, figures in day["people"].items():
        values = figures["occupancy"]
        edges = [min(i * bin_s, 86400.0) for i in range(len(values) + 1)]
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "line": {"shape": "hv", "width": 2},
                "x": edges,
                "y": [*values, values[-1] if values else 0],
                "name": names.get(person, person),
                "hovertemplate": "%{y:.2f} of the bin from %{x}<extra>%{fullData.name}</extra>",
            }
        )
        shapes += _sleep_shapes(figures["asleep"])
    shapes.append(_limit_line(limit))
    return {
        "data": data,
        "layout": {
            "height": 300,
            "margin": {"l": 60, "r": 20, "t": 20, "b": 50},
            "xaxis": _time_axis(),
            "yaxis": {
                "title": {"text": f"occupancy ({bin_s / 60:g}-min bins)"},
                "rangemode": "tozero",
            },
            "shapes": shapes,
            "annotations": [
                {
                    "xref": "paper",
                    "x": 1,
                    "y": limit,
                    "text": f"limit {limit:g}",
                    "showarrow": False,
                    "yanchor": "bottom",
                    "xanchor": "right",
                    "font": {"color": ACCENT, "size": 11},
                }
            ],
            "legend": {"orientation": "h", "y": -0.3},
        },
    }


def channel_chart(day: dict[str, Any], person: str) -> dict[str, Any]:
    """One person's VACP demand over the day, the four channels stacked, the channel
    limit as a line (overload is any one channel above it)."""
    figures = day["people"][person]
    limit = float(day["limits"]["channel"])
    data = []
    for channel in CHANNELS:
        points = figures["channels"].get(channel) or [[0.0, 0.0]]
        xs = [t for t, _level in points] + [86400.0]
        ys = [level for _t, level in points] + [points[-1][1]]
        data.append(
            {
                "type": "scatter",
                "mode": "lines",
                "line": {"shape": "hv", "width": 0.5, "color": CHANNEL_COLOURS[channel]},
                "stackgroup": "channels",
                "x": xs,
                "y": ys,
                "name": channel,
                "hovertemplate": "%{y:.1f} from %{x}<extra>%{fullData.name}</extra>",
            }
        )
    shapes = _sleep_shapes(figures["asleep"])
    shapes.append(_limit_line(limit))
    return {
        "data": data,
        "layout": {
            "height": 300,
            "margin": {"l": 60, "r": 20, "t": 20, "b": 50},
            "xaxis": _time_axis(),
            "yaxis": {"title": {"text": "VACP demand, stacked"}, "rangemode": "tozero"},
            "shapes": shapes,
            "legend": {"orientation": "h", "y": -0.3},
        },
    }


def histogram_chart(series: list[tuple[str, list[float]]], figure: str) -> dict[str, Any]:
    """Histograms of one daily figure, one per plan side by side on shared bins, each
    plan's P95 marked by a dashed line."""
    label, unit = FIGURE_WORDS.get(figure, (figure, ""))
    values = [np.asarray(v, float) for _name, v in series]
    every = np.concatenate(values) if values else np.zeros(0)
    low, high = (float(every.min()), float(every.max())) if every.size else (0.0, 1.0)
    if high <= low:
        high = low + 1.0
    size = (high - low) / 30
    data, shapes, annotations = [], [], []
    palette = ["#2f7d6d", "#5b4b9a", "#b08a1e", "#8a5a3c", "#17493f", "#9588c9"]
    for index, ((name, _v), array) in enumerate(zip(series, values, strict=True)):
        colour = palette[index % len(palette)]
        data.append(
            {
                "type": "histogram",
                "x": array.tolist(),
                "name": html.escape(name, quote=False),  # a plan's name, read as HTML
                "opacity": 0.75,
                "marker": {"color": colour},
                "xbins": {"start": low, "end": high + size, "size": size},
                "hovertemplate": "%{y} days in %{x}<extra>%{fullData.name}</extra>",
            }
        )
        if array.size:
            p95 = float(np.percentile(array, 95))
            shapes.append(
                {
                    "type": "line",
                    "xref": "x",
                    "yref": "paper",
                    "x0": p95,
                    "x1": p95,
                    "y0": 0,
                    "y1": 1,
                    "line": {"color": colour, "dash": "dash", "width": 2},
                }
            )
            annotations.append(
                {
                    "x": p95,
                    "y": 1 - 0.07 * index,
                    "xref": "x",
                    "yref": "paper",
                    "text": f"P95 {p95:,.4g}",
                    "showarrow": False,
                    "xanchor": "left",
                    "font": {"color": colour, "size": 11},
                }
            )
    return {
        "data": data,
        "layout": {
            "barmode": "group",
            "height": 340,
            "margin": {"l": 60, "r": 20, "t": 20, "b": 50},
            "xaxis": {"title": {"text": f"{label} ({unit})"}},
            "yaxis": {"title": {"text": "days"}},
            "shapes": shapes,
            "annotations": annotations,
            "legend": {"orientation": "h", "y": -0.25},
        },
    }
