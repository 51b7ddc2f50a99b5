"""Core results as plotly figure data: plain dicts the templates write with json_script.

Pure functions over :class:`~allocation.core.analysis.PlanAnalysis` and the study; no
Django. ``static/baton/charts.js`` renders every figure with ``Plotly.react``.

Colours follow the style sheet: people in teal shades, automations in violet shades
(one fixed colour per agent in every chart), the mode-awareness factors and the risk
policy bands in their own small palettes.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.risk import frequency_level, matrix_band
from allocation.core.describe import seconds_text
from allocation.core.model import Study
from allocation.core.registry import AWARENESS_FACTORS, FIGURES, figure_text
from allocation.core.vocabulary import FREQUENCY_BANDS, SEVERITIES
from allocation.figures.base import (
    AUTOMATION_COLOURS,
    INK,
    agent_colours,
    chart_axis,
    chart_layout,
    escaped_text,
    short_text,
    task_label,
)

__all__ = [
    "AWARENESS_COLOURS",
    "BAND_COLOURS",
    "DAILY_FIGURES",
    "awareness_chart",
    "awareness_rows",
    "daily_figures_chart",
    "goal_person_time",
    "goal_time_chart",
    "frequency_band_labels",
    "mode_share_chart",
    "risk_matrix_chart",
    "risk_matrix_counts",
]

#: Risk policy bands: pale fills that keep the cell counts readable.
BAND_COLOURS = {"acceptable": "#d3e7de", "review": "#f1dc9f", "unacceptable": "#e9a384"}
BAND_CODES = {"acceptable": 0, "review": 1, "unacceptable": 2}
#: The mode-awareness factors (Methods: awareness-factors), each its own colour in every
#: chart; their words are the registry's.
AWARENESS_COLOURS = {
    "automation": "#5b4b9a",
    "feedback": "#c2571a",
    "initiation": "#b08a1e",
    "mode_change": "#1d2a3a",
    "rarity": "#6fb3a2",
}
# -- (a) daily figures per person ------------------------------------------------------

#: A person's daily figures (Methods: daily-figures), by their registry key, which is also
#: their attribute of a person's figures.
DAILY_FIGURES = (
    "burden_s_per_day",
    "monitoring_s_per_day",
    "interactions_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
)


def daily_figures_chart(analysis: PlanAnalysis) -> dict[str, Any]:
    """Each person's daily figures as grouped bars, one colour per person.

    Two panels because the units differ: minutes a day (time, monitoring) on the left,
    times a day (interactions, interruptions, interruptions at night) on the right.
    """
    study = analysis.study
    colours = agent_colours(study)
    data = []
    for agent_id, person in analysis.people.items():
        name = escaped_text(study.agent(agent_id).name)
        for axis, timed in (("", True), ("2", False)):
            figures = [key for key in DAILY_FIGURES if FIGURES[key].seconds is timed]
            values = [getattr(person, key) for key in figures]
            data.append(
                {
                    "type": "bar",
                    "name": name,
                    "legendgroup": agent_id,
                    "showlegend": timed,
                    "x": [FIGURES[key].label for key in figures],
                    "y": [value / 60 if timed else value for value in values],
                    "customdata": [
                        figure_text(key, value) for key, value in zip(figures, values, strict=True)
                    ],
                    "hovertemplate": "%{x}<br>" + name + ": %{customdata}<extra></extra>",
                    "marker": {"color": colours[agent_id]},
                    "xaxis": "x" + axis,
                    "yaxis": "y" + axis,
                }
            )
    layout = chart_layout(
        barmode="group",
        height=340,
        xaxis={"domain": [0, 0.4], "automargin": True},
        yaxis=chart_axis("minutes a day", rangemode="tozero"),
        xaxis2={"domain": [0.52, 1], "automargin": True},
        yaxis2=chart_axis("times a day", anchor="x2", rangemode="tozero"),
        legend={"orientation": "h", "y": -0.25},
    )
    return {"data": data, "layout": layout}


# -- (b) person time by goal -----------------------------------------------------------


def _leaves_under(study: Study, task_id: str) -> list[str]:
    children = study.children.get(task_id) or []
    if not children:
        return [task_id]
    leaves: list[str] = []
    for child in children:
        leaves += _leaves_under(study, child)
    return leaves


def goal_person_time(analysis: PlanAnalysis) -> list[dict[str, Any]]:
    """Person time a day under each top-level goal and each of its sub-goals.

    Each row: ``task`` (the goal's id, or ``None`` for leaf tasks outside any goal),
    ``title``, ``depth`` (0 or 1), ``leaves`` and ``seconds`` (person -> seconds a day,
    the sum of ``person_s_per_day`` over the goal's leaf tasks at any depth).
    """
    study = analysis.study

    def row(task_id: str | None, title: str, depth: int, leaves: Iterable[str]):
        leaves = list(leaves)
        seconds = dict.fromkeys(analysis.people, 0.0)
        for leaf in leaves:
            figures = analysis.tasks.get(leaf)
            if figures is None:
                continue
            for person, value in figures.person_s_per_day.items():
                seconds[person] = seconds.get(person, 0.0) + value
        return {
            "task": task_id,
            "title": title,
            "depth": depth,
            "leaves": leaves,
            "seconds": seconds,
        }

    rows = []
    loose = []
    for task in study.tasks:
        if task.parent is not None and task.parent in study.tasks_by_id:
            continue
        if not study.is_goal(task.id):
            loose.append(task.id)
            continue
        rows.append(row(task.id, task.title, 0, _leaves_under(study, task.id)))
        for child in study.children[task.id]:
            if study.is_goal(child):
                title = study.task(child).title
                rows.append(row(child, title, 1, _leaves_under(study, child)))
    if loose:
        rows.append(row(None, "Tasks outside any goal", 0, loose))
    return rows


def goal_time_chart(analysis: PlanAnalysis) -> dict[str, Any]:
    """Minutes a day per goal and sub-goal, horizontal bars stacked by person."""
    study = analysis.study
    colours = agent_colours(study)
    rows = goal_person_time(analysis)
    labels = [
        ("    ↳ " if row["depth"] else "")
        + (f"{row['task']} " if row["task"] else "")
        + short_text(row["title"], 38)
        for row in rows
    ]
    data = []
    for agent_id in analysis.people:
        name = escaped_text(study.agent(agent_id).name)
        seconds = [row["seconds"].get(agent_id, 0.0) for row in rows]
        data.append(
            {
                "type": "bar",
                "orientation": "h",
                "name": name,
                "y": labels,
                "x": [value / 60 for value in seconds],
                "customdata": [figure_text("person_s_per_day", value) for value in seconds],
                "hovertemplate": "%{y}<br>" + name + ": %{customdata}<extra></extra>",
                "marker": {"color": colours[agent_id]},
            }
        )
    layout = chart_layout(
        barmode="stack",
        height=max(220, 90 + 26 * len(rows)),
        xaxis=chart_axis("minutes a day", rangemode="tozero"),
        yaxis={"autorange": "reversed", "automargin": True, "type": "category"},
        margin={"l": 20, "r": 20, "t": 20, "b": 50},
    )
    return {"data": data, "layout": layout}


# -- (c) risk matrix --------------------------------------------------------------------


#: A band in a narrow chart's cell.
BAND_SHORT = {"acceptable": "acc.", "review": "review", "unacceptable": "unacc."}


def risk_matrix_counts(analysis: PlanAnalysis) -> list[list[int]]:
    """Handovers per cell: ``counts[severity - 1][frequency level - 1]`` (level 1 is
    improbable, 5 frequent)."""
    counts = [[0] * 5 for _ in range(5)]
    for handover in analysis.handovers:
        severity = min(max(int(handover.severity), 1), 5)
        level = frequency_level(handover.frequency_band)
        counts[severity - 1][level - 1] += 1
    return counts


def frequency_band_labels(policy: dict[str, Any]) -> list[str]:
    """The five frequency bands in words, least often first, from the policy's cuts."""
    cuts = [float(cut) for cut in policy["frequency_bands"]]
    names = list(reversed(FREQUENCY_BANDS))
    labels = [f"{names[0]}: below {cuts[-1]:g} a year"]
    for k in range(1, 4):
        labels.append(f"{names[k]}: {cuts[-k]:g} to {cuts[-k - 1]:g} a year")
    labels.append(f"{names[4]}: {cuts[0]:g} a year or more")
    return labels


def risk_matrix_chart(
    policy: dict[str, Any], counts: list[list[int]] | None = None, *, compact: bool = False
) -> dict[str, Any]:
    """A screening index in the form of a risk chart: severity (1-5) by frequency band
    (expected slips a year, least often first), each cell coloured by the policy's band
    matrix and labelled with its count of handovers.

    Without ``counts`` the chart shows the bands only (the policy on its own).
    ``compact`` labels the frequency bands by their names alone (their ranges stay in the
    hover text), for a narrow chart.
    """
    ranges = frequency_band_labels(policy)
    names = list(reversed(FREQUENCY_BANDS))
    x_labels = names if compact else [label.replace(": ", "<br>", 1) for label in ranges]
    y_labels = [f"{severity} {SEVERITIES[severity][0]}" for severity in range(1, 6)]
    codes, text, hover = [], [], []
    for severity in range(1, 6):
        code_row, text_row, hover_row = [], [], []
        for level in range(1, 6):
            frequency = names[level - 1]
            name = matrix_band(frequency, severity, policy)
            code_row.append(BAND_CODES[name])
            where = f"{ranges[level - 1]}<br>"
            if counts is None:
                text_row.append(BAND_SHORT[name] if compact else name)
                hover_row.append(f"{where}band: {name}")
            else:
                count = counts[severity - 1][level - 1]
                text_row.append(str(count) if count else "·")
                hover_row.append(
                    f"{where}band: {name}<br>{count} handover{'' if count == 1 else 's'}"
                )
        codes.append(code_row)
        text.append(text_row)
        hover.append(hover_row)
    scale = []
    for code, name in enumerate(BAND_COLOURS):
        scale += [[code / 3, BAND_COLOURS[name]], [(code + 1) / 3, BAND_COLOURS[name]]]
    data = [
        {
            "type": "heatmap",
            "x": x_labels,
            "y": y_labels,
            "z": codes,
            "zmin": -0.5,
            "zmax": 2.5,
            "colorscale": scale,
            "showscale": False,
            "text": text,
            "texttemplate": "%{text}",
            "textfont": {"size": 15, "color": INK},
            "customdata": hover,
            "hovertemplate": "severity %{y}<br>%{customdata}<extra></extra>",
            "xgap": 3,
            "ygap": 3,
        }
    ]
    layout = chart_layout(
        height=330,
        xaxis=chart_axis(
            "frequency band (expected slips a year)", type="category", showgrid=False, tickangle=0
        ),
        yaxis=chart_axis("severity", type="category", showgrid=False),
        margin={"l": 20, "r": 20, "t": 20, "b": 50},
    )
    return {"data": data, "layout": layout}


# -- (d) mode awareness -------------------------------------------------------------------


def awareness_rows(analysis: PlanAnalysis, top: int | None = 30) -> list[dict[str, Any]]:
    """Tasks with a mode-awareness index, highest first (ties by task order), at most
    ``top`` of them; each with ``task``, ``index``, ``factors`` and ``contributions``."""
    order = {task.id: i for i, task in enumerate(analysis.study.tasks)}
    rows = [
        {
            "task": task_id,
            "index": figures.awareness.index,
            "factors": figures.awareness.factors,
            "contributions": figures.awareness.contributions,
        }
        for task_id, figures in analysis.tasks.items()
        if figures.awareness is not None
    ]
    rows.sort(key=lambda row: (-row["index"], order.get(row["task"], 0)))
    return rows if top is None else rows[:top]


def awareness_chart(analysis: PlanAnalysis, top: int = 30) -> dict[str, Any]:
    """The ``top`` highest mode-awareness indices, stacked by factor contribution."""
    study = analysis.study
    rows = awareness_rows(analysis, top)
    labels = [task_label(study, row["task"]) for row in rows]
    weights = analysis.assumptions["awareness_weights"]
    data = []
    for factor in AWARENESS_FACTORS:
        weight = float(weights[factor])
        data.append(
            {
                "type": "bar",
                "orientation": "h",
                "name": AWARENESS_FACTORS[factor].label,
                "y": labels,
                "x": [row["contributions"][factor] for row in rows],
                "customdata": [
                    f"factor {row['factors'][factor]:.2f} × weight {weight:g}" for row in rows
                ],
                "hovertemplate": "%{y}<br>"
                + AWARENESS_FACTORS[factor].label
                + ": %{x:.3f} (%{customdata})<extra></extra>",
                "marker": {"color": AWARENESS_COLOURS[factor]},
            }
        )
    layout = chart_layout(
        barmode="stack",
        height=max(220, 110 + 24 * len(rows)),
        xaxis=chart_axis("mode-awareness index (0 to 1)", range=[0, 1]),
        yaxis={"autorange": "reversed", "automargin": True, "type": "category"},
        margin={"l": 20, "r": 20, "t": 20, "b": 50},
        legend={
            "orientation": "h",
            "y": -0.12 if len(rows) > 8 else -0.3,
            "traceorder": "normal",
        },
    )
    return {"data": data, "layout": layout}


# -- (g) mode share -----------------------------------------------------------------------


def mode_share_chart(analysis: PlanAnalysis) -> dict[str, Any]:
    """Share of the day spent in each mode of the plan's mode map, as horizontal bars."""
    modes = analysis.plan.modes
    states = list(modes.states) if modes else []
    initial = modes.initial if modes else None
    shares = [analysis.mode_share.get(mode.id, 0.0) for mode in states]
    data = [
        {
            "type": "bar",
            "orientation": "h",
            "y": [f"{mode.id} {short_text(mode.name, 36)}" for mode in states],
            "x": [share * 100 for share in shares],
            "customdata": [seconds_text(share * 86400) + " a day" for share in shares],
            "hovertemplate": "%{y}: %{x:.3g}% of the day (%{customdata})<extra></extra>",
            "marker": {
                "color": [
                    AUTOMATION_COLOURS[0] if mode.id == initial else AUTOMATION_COLOURS[1]
                    for mode in states
                ]
            },
            "showlegend": False,
        }
    ]
    layout = chart_layout(
        height=max(180, 80 + 30 * len(states)),
        xaxis=chart_axis("% of the day", range=[0, 100]),
        yaxis={"autorange": "reversed", "automargin": True, "type": "category"},
        margin={"l": 20, "r": 20, "t": 10, "b": 50},
    )
    return {"data": data, "layout": layout}
