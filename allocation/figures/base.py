"""What every chart shares: the palette, the layout and axes, and escaping of typed text.

Figures travel as data: each builder in this package returns a plain plotly figure dict
(``{"data": [...], "layout": {...}}``) that a template writes with ``json_script`` and
``static/baton/charts.js`` renders with ``Plotly.react``. No Django here.

Colours follow the style sheet: people in teal shades, automations in violet shades (one
fixed colour per agent in every chart), ink for text, a warm accent for what needs
attention.
"""

from __future__ import annotations

import html
from typing import Any

from allocation.core.model import Study

__all__ = [
    "ACCENT",
    "AUTOMATION_COLOURS",
    "FONT",
    "HUMAN_COLOURS",
    "INK",
    "INK_SOFT",
    "PAPER",
    "RULE",
    "agent_colours",
    "chart_axis",
    "chart_layout",
    "escaped_names",
    "escaped_text",
    "short_text",
    "task_label",
]

INK = "#1d2a3a"
INK_SOFT = "#4a5a6e"
RULE = "#dcd8cf"
PAPER = "#fbfaf6"
#: What needs attention (handover links, the simulated limit, the worst day).
ACCENT = "#c2571a"
#: People in teal shades, darkest first; automations in violet shades.
HUMAN_COLOURS = ("#2f7d6d", "#6fb3a2", "#17493f", "#a7d3c7", "#4f9a88")
AUTOMATION_COLOURS = ("#5b4b9a", "#9588c9", "#382b6b", "#c4bce6", "#7a6bb7")
FONT = {"family": "Source Sans 3, Segoe UI, system-ui, sans-serif", "size": 13, "color": INK}


def chart_layout(**extra: Any) -> dict[str, Any]:
    """The layout every chart shares: the page's font, no background, small margins."""
    layout = {
        "font": FONT,
        "paper_bgcolor": "rgba(0,0,0,0)",
        "plot_bgcolor": "rgba(0,0,0,0)",
        "margin": {"l": 60, "r": 20, "t": 40, "b": 50},
        "hoverlabel": {"font": {"family": FONT["family"]}},
        "legend": {"orientation": "h", "y": -0.18},
    }
    layout.update(extra)
    return layout


def chart_axis(title: str, **extra: Any) -> dict[str, Any]:
    """An axis with its title and the style sheet's rule colour for grid and zero lines."""
    return {
        "title": {"text": title},
        "gridcolor": RULE,
        "zerolinecolor": RULE,
        "automargin": True,
        **extra,
    }


def agent_colours(study: Study) -> dict[str, str]:
    """One colour per agent, the same in every chart: teal for people, violet for devices."""
    colours: dict[str, str] = {}
    humans = automations = 0
    for agent in study.agents:
        if agent.is_human:
            colours[agent.id] = HUMAN_COLOURS[humans % len(HUMAN_COLOURS)]
            humans += 1
        else:
            colours[agent.id] = AUTOMATION_COLOURS[automations % len(AUTOMATION_COLOURS)]
            automations += 1
    return colours


def escaped_text(value: object) -> str:
    """Typed text made safe for plotly, which reads labels, legend names and hover texts
    as HTML: what a study's author typed shows as typed, never as markup."""
    return html.escape(str(value), quote=False)


def escaped_names(names: dict[str, str]) -> dict[str, str]:
    """:func:`escaped_text` of every name in a mapping (people's names as axis labels)."""
    return {key: escaped_text(name) for key, name in names.items()}


def short_text(text: str, size: int = 42) -> str:
    """Author-typed text shortened to ``size`` characters, escaped for plotly."""
    return escaped_text(text if len(text) <= size else text[: size - 1].rstrip() + "…")


def task_label(study: Study, task_id: str) -> str:
    """A task's id and its shortened title, as chart axes name tasks."""
    return f"{task_id} {short_text(study.task(task_id).title)}"
