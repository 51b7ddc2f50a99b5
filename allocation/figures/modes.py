"""A plan's mode map as plotly figure data: the modes on a ring, the transitions as
arrows between them.

Pure functions, no Django. Each transition's colour says who causes it and its line
says how it is cued (a bold line for an alert, dashes for a display change, dots for no
cue at all), so the changes a person can miss stand out. During a step-through the mode
the device is in is filled and the mode the person believes it is in is ringed.

Everything a study's author typed is HTML-escaped before it goes into hover text.
"""

from __future__ import annotations

import html
import math
from dataclasses import replace
from typing import Any

from allocation.core.model import ANY_MODE, ModeMap
from allocation.core.registry import CAUSE_WORDS as REGISTRY_CAUSES
from allocation.core.registry import CUE_WORDS
from allocation.figures.base import ACCENT, INK, INK_SOFT, PAPER

__all__ = ["CAUSE_COLOURS", "CAUSE_WORDS", "CUE_LINES", "mode_map_figure"]

#: Who causes a transition: the person in the people's teal, the device in the
#: automations' violet, the rest in muted colours of their own.
CAUSE_COLOURS = {
    "human": "#2f7d6d",
    "automation": "#5b4b9a",
    "event": "#b08a1e",
    "schedule": "#4a5a6e",
    "environment": "#8a5a3c",
}
#: How a transition is cued: plotly's line dash and width, and the registry's words for
#: the legend.
CUE_LINES = {
    cue: (dash, width, CUE_WORDS[cue].label.lower())
    for cue, dash, width in (
        ("alert_confirm", "solid", 3.5),
        ("alert", "solid", 2.2),
        ("display", "dash", 1.8),
        ("on_request", "dashdot", 1.8),
        ("none", "dot", 1.8),
    )
}
#: Who causes a transition, in the registry's words (as the diagram's hover text reads).
CAUSE_WORDS = {cause: term.label.lower() for cause, term in REGISTRY_CAUSES.items()}
RADIUS = 1.0
NODE_SIZE = 0.17  # how far from a mode's centre its arrows stop, in axis units


def _positions(modes: ModeMap) -> dict[str, tuple[float, float]]:
    """The modes on a ring in file order, the initial mode at the top."""
    ids = [mode.id for mode in modes.states]
    if modes.initial in ids:
        start = ids.index(modes.initial)
        ids = ids[start:] + ids[:start]
    count = len(ids)
    if count == 1:
        return {ids[0]: (0.0, 0.0)}
    return {
        mode_id: (
            RADIUS * math.sin(2 * math.pi * index / count),
            RADIUS * math.cos(2 * math.pi * index / count),
        )
        for index, mode_id in enumerate(ids)
    }


def _curve(start, end, bend: float, samples: int = 24) -> list[tuple[float, float]]:
    """A quadratic curve from ``start`` to ``end`` bent ``bend`` of its length to the
    left, trimmed where it enters the two modes' circles."""
    (x0, y0), (x2, y2) = start, end
    dx, dy = x2 - x0, y2 - y0
    x1 = (x0 + x2) / 2 - dy * bend
    y1 = (y0 + y2) / 2 + dx * bend
    points = []
    for step in range(samples + 1):
        t = step / samples
        x = (1 - t) ** 2 * x0 + 2 * (1 - t) * t * x1 + t**2 * x2
        y = (1 - t) ** 2 * y0 + 2 * (1 - t) * t * y1 + t**2 * y2
        if math.hypot(x - x0, y - y0) >= NODE_SIZE and math.hypot(x - x2, y - y2) >= NODE_SIZE:
            points.append((x, y))
    return points or [start, end]


def _loop(centre) -> list[tuple[float, float]]:
    """A small loop outside a mode, for a transition back into itself."""
    x, y = centre
    norm = math.hypot(x, y) or 1.0
    ox, oy = (x / norm, y / norm) if (x, y) != (0.0, 0.0) else (0.0, 1.0)
    cx, cy = x + ox * 0.24, y + oy * 0.24
    start = math.atan2(-oy, -ox) + 0.9
    return [
        (cx + 0.11 * math.cos(start + a * 0.22), cy + 0.11 * math.sin(start + a * 0.22))
        for a in range(0, 24)
    ]


def mode_map_figure(
    modes: ModeMap,
    *,
    actual: str | None = None,
    believed: str | tuple[str, ...] | None = None,
    finding_transitions: frozenset[tuple[str, str, str]] = frozenset(),
) -> dict[str, Any]:
    """The mode map as a figure.

    Parameters
    ----------
    modes : ModeMap
        The plan's modes and transitions (transitions naming an unknown mode are left
        out; the editor shows them with their error).
    actual, believed : str, optional
        During a step-through: the mode the device is in (filled) and the mode the
        person believes it is in, or the look-alike modes they believe together (each
        ringed in the accent colour).
    finding_transitions : frozenset of (from, to, trigger)
        Transitions some finding is about; their labels are drawn in the accent colour.

    Returns
    -------
    dict
        ``{"data": [...], "layout": {...}}`` for ``Plotly.react``.
    """
    at = _positions(modes)
    names = {mode.id: mode.name for mode in modes.states}
    data: list[dict[str, Any]] = []
    seen_pairs: dict[tuple[str, str], int] = {}
    labels_x, labels_y, labels, label_hover, label_colours = [], [], [], [], []
    # A transition from every mode ("*") is drawn from each mode it leaves, numbered as
    # its row of the transitions table.
    own = {(x.source, x.trigger) for x in modes.transitions if x.source != ANY_MODE}
    numbered = []
    for number, t in enumerate(modes.transitions, start=1):
        if t.source == ANY_MODE:
            numbered += [
                (number, replace(t, source=mode.id))
                for mode in modes.states
                if (mode.id, t.trigger) not in own
            ]
        else:
            numbered.append((number, t))
    for number, t in numbered:
        if t.source not in at or t.target not in at:
            continue
        if t.source == t.target:
            points = _loop(at[t.source])
        else:
            order = seen_pairs.get((t.source, t.target), 0)
            seen_pairs[(t.source, t.target)] = order + 1
            points = _curve(at[t.source], at[t.target], 0.12 + 0.14 * order)
        dash, width, cue_words = CUE_LINES.get(t.cue, ("solid", 1.5, t.cue))
        colour = CAUSE_COLOURS.get(t.by, INK_SOFT)
        hover = (
            f"<b>{number}. {html.escape(t.trigger)}</b><br>{html.escape(names[t.source])} → "
            f"{html.escape(names[t.target])}<br>caused by {CAUSE_WORDS.get(t.by, t.by)}; "
            f"cue: {cue_words}"
            + (f"<br>{t.per_day:g} a day while in the first mode" if t.per_day else "")
            + (f"<br>with each {html.escape(t.event)}" if t.event else "")
            + (f"<br>at {html.escape(', '.join(t.times))}" if t.times else "")
        )
        data.append(
            {
                "type": "scatter",
                "mode": "lines+markers",
                "x": [p[0] for p in points],
                "y": [p[1] for p in points],
                "line": {"color": colour, "dash": dash, "width": width},
                "marker": {
                    "symbol": "arrow",
                    "angleref": "previous",
                    "size": [0] * (len(points) - 1) + [13],
                    "color": colour,
                },
                "hoverinfo": "text",
                "text": hover,
                "showlegend": False,
            }
        )
        middle = points[len(points) // 2]
        labels_x.append(middle[0])
        labels_y.append(middle[1])
        labels.append(str(number))
        label_hover.append(hover)
        flagged = (t.source, t.target, t.trigger) in finding_transitions
        label_colours.append(ACCENT if flagged else INK_SOFT)
    data.append(
        {
            "type": "scatter",
            "mode": "text",
            "x": labels_x,
            "y": labels_y,
            "text": labels,
            "hovertext": label_hover,
            "hoverinfo": "text",
            "textfont": {"size": 12, "color": label_colours},
            "showlegend": False,
        }
    )
    data.append(_nodes(modes, at, actual, believed))
    data += _legend()
    span = RADIUS + 0.45
    return {
        "data": data,
        "layout": {
            "height": 600,
            "margin": {"l": 10, "r": 10, "t": 10, "b": 10},
            "paper_bgcolor": PAPER,
            "plot_bgcolor": PAPER,
            "xaxis": {"visible": False, "range": [-span - 0.5, span + 0.5]},
            "yaxis": {"visible": False, "range": [-span, span], "scaleanchor": "x"},
            "legend": {"orientation": "v", "x": 1.0, "xanchor": "right", "y": 0.0},
            "hovermode": "closest",
        },
    }


def _nodes(
    modes: ModeMap, at, actual: str | None, believed: str | tuple[str, ...] | None
) -> dict[str, Any]:
    """The modes: a circle each with its name, the initial one with a double rim."""
    ids = [mode.id for mode in modes.states]
    believed_ids = (believed,) if isinstance(believed, str) else tuple(believed or ())
    fills, rims, widths, text_colours, texts, hovers = [], [], [], [], [], []
    for mode in modes.states:
        is_actual = mode.id == actual
        fills.append(INK if is_actual else PAPER)
        text_colours.append(INK)
        rims.append(ACCENT if mode.id in believed_ids else INK)
        widths.append(6 if mode.id in believed_ids else (4 if mode.id == modes.initial else 1.5))
        words = [f"<b>{html.escape(mode.name)}</b>"]
        if mode.id == modes.initial:
            words.append("(starts here)")
        if is_actual:
            words.append("● device is here")
        if mode.id in believed_ids:
            words.append(
                "◯ person believes here" if len(believed_ids) == 1 else "◯ person may believe here"
            )
        texts.append("<br>".join(words))
        hovers.append(
            f"<b>{html.escape(mode.name)}</b> ({html.escape(mode.id)})<br>shows: "
            f"{html.escape(mode.indication or '(nothing given)')}<br>"
            f"{len(mode.overrides or {})} task(s) held differently here"
        )
    return {
        "type": "scatter",
        "mode": "markers+text",
        "x": [at[mode_id][0] for mode_id in ids],
        "y": [at[mode_id][1] for mode_id in ids],
        "customdata": ids,
        "text": texts,
        # Names above the upper modes and below the lower ones, away from the arrows.
        "textposition": [
            "top center" if at[mode_id][1] > 0.01 else "bottom center" for mode_id in ids
        ],
        "textfont": {"size": 12, "color": text_colours},
        "hovertext": hovers,
        "hoverinfo": "text",
        "marker": {
            "size": 34,
            "color": fills,
            "line": {"color": rims, "width": widths},
        },
        "showlegend": False,
    }


def _legend() -> list[dict[str, Any]]:
    """Legend entries only: the colours of who causes and the lines of the cues."""
    entries = []
    for cause, colour in CAUSE_COLOURS.items():
        entries.append(
            {
                "type": "scatter",
                "mode": "lines",
                "x": [None],
                "y": [None],
                "line": {"color": colour, "width": 3},
                "name": f"by {CAUSE_WORDS[cause]}",
                "legendgroup": "cause",
                "legendgrouptitle": {"text": "Caused by"},
            }
        )
    for dash, width, words in CUE_LINES.values():
        entries.append(
            {
                "type": "scatter",
                "mode": "lines",
                "x": [None],
                "y": [None],
                "line": {"color": INK_SOFT, "dash": dash, "width": width},
                "name": words,
                "legendgroup": "cue",
                "legendgrouptitle": {"text": "Cue"},
            }
        )
    return entries
