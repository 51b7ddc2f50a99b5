"""The dependency graph as plotly figure data: a layout and a plan's analysis in, a dict out.

Pure functions, no Django: :func:`graph_figure` takes the positions from
:func:`allocation.core.layout.layered_layout` and colours every task by its category
under the chosen plan (the degrees of automation of its stages give person, device or
shared; Methods: levels-of-automation). ``static/baton/charts.js`` renders the figure; a
click on a task sends its id (the point's ``customdata``) to the details panel.

Everything a study's author typed (titles, names) is HTML-escaped before it goes into
hover text, which plotly renders as a small subset of HTML.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.handovers import Handover
from allocation.core.layout import Layout, PlacedEdge
from allocation.core.model import Study
from allocation.core.registry import CATEGORIES as CATEGORY_WORDS
from allocation.core.registry import FIGURES, RISK_BANDS, figure_number, figure_text
from allocation.figures.base import ACCENT, FONT, INK, INK_SOFT, escaped_text

__all__ = [
    "ACCENT",
    "CATEGORIES",
    "EDGE_STYLES",
    "Category",
    "category_counts",
    "graph_figure",
    "link_handovers",
    "task_categories",
]

LINK_GREY = "#7d8794"
FADED_LINK_GREY = "#c9ced6"
#: Above this many tasks the nodes lose their id labels and shrink, to stay readable.
LABEL_LIMIT = 150


@dataclass(frozen=True)
class Category:
    """How a task's category under a plan is drawn: a colour and a shape, so the two
    agree and the graph still reads in grey or for a reader who confuses the hues."""

    key: str
    label: str
    colour: str
    symbol: str
    outline: str
    description: str


#: Categories in legend order, named in the registry's words (a task the plan has not
#: assigned yet is the graph's own). Person, device and shared come from the degrees of
#: automation and use the style sheet's teal, violet and ochre.
CATEGORIES = (
    Category(
        "person",
        CATEGORY_WORDS["person"].label,
        "#2f7d6d",
        "circle",
        "#ffffff",
        "every stage at degree 0: the person does it",
    ),
    Category(
        "device",
        CATEGORY_WORDS["device"].label,
        "#5b4b9a",
        "square",
        "#ffffff",
        "every stage at degree 1: the automation does it",
    ),
    Category(
        "shared",
        CATEGORY_WORDS["shared"].label,
        "#b08a1e",
        "diamond",
        "#ffffff",
        "stages split between the person and the automation",
    ),
    Category(
        "not_applicable",
        CATEGORY_WORDS["not_applicable"].label,
        "#c8c2b6",
        "circle-x",
        "#6b6458",
        "the plan says the task is not done at all",
    ),
    Category(
        "unallocated",
        "Unallocated",
        "#ffffff",
        "circle",
        "#4a5a6e",
        "the plan has no assignment for the task yet",
    ),
)
CATEGORY_BY_KEY = {category.key: category for category in CATEGORIES}

#: Link styles in legend order: (key, label, colour, width, dash).
EDGE_STYLES = (
    ("precedes", "precedes: the next task starts when this one is done", LINK_GREY, 1.4, "solid"),
    ("informs", "informs: information flows, no timing", LINK_GREY, 1.4, "dash"),
    (
        "handover",
        "handover: the two tasks have different principal holders",
        ACCENT,
        3.5,
        "solid",
    ),
)


def task_categories(study: Study, analysis: PlanAnalysis | None) -> dict[str, str]:
    """Each leaf task's category key under the plan (``unallocated`` without a plan)."""
    if analysis is None:
        return {task.id: "unallocated" for task in study.leaves}
    categories = {}
    for task in study.leaves:
        assignment = analysis.plan.assignments.get(task.id)
        if assignment is None:
            categories[task.id] = "unallocated"
        elif not assignment.is_applicable:
            categories[task.id] = "not_applicable"
        else:
            categories[task.id] = analysis.tasks[task.id].involved.category
    return categories


def link_handovers(analysis: PlanAnalysis | None) -> dict[tuple[str, str, str], Handover]:
    """The plan's handovers along links, by (from task, to task, link kind)."""
    if analysis is None:
        return {}
    return {
        (h.site.from_task, h.site.to_task, h.site.trigger): h
        for h in analysis.handovers
        if h.site.source == "link"
    }


def category_counts(categories: dict[str, str], tasks: Iterable[str]) -> dict[str, int]:
    """How many of ``tasks`` fall in each category, every category listed."""
    counts = dict.fromkeys(CATEGORY_BY_KEY, 0)
    for task_id in tasks:
        counts[categories[task_id]] += 1
    return counts


def _agent_name(study: Study, agent_id: str | None) -> str:
    if agent_id is None:
        return "nobody"
    agent = study.agents_by_id.get(agent_id)
    return escaped_text(agent.name if agent else agent_id)


def _node_hover(study: Study, task_id: str, category: str, analysis: PlanAnalysis | None) -> str:
    task = study.tasks_by_id[task_id]
    goal = study.tasks_by_id.get(task.parent) if task.parent else None
    lines = [f"<b>{escaped_text(task_id)}</b> {escaped_text(task.title)}"]
    if goal is not None:
        lines.append(f"goal: {escaped_text(goal.id)} {escaped_text(goal.title)}")
    lines.append(f"category: {CATEGORY_BY_KEY[category].label.lower()}")
    if analysis is not None:
        figures = analysis.tasks[task_id]
        lines.append(f"held by: {_agent_name(study, figures.involved.principal)}")
        occurs = FIGURES["occurrences_per_day"]
        lines.append(f"{occurs.label.lower()}: {figure_text(occurs, figures.per_day)}")
    lines.append("<i>click for details</i>")
    return "<br>".join(lines)


def _handover_hover(study: Study, handover: Handover) -> str:
    site = handover.site
    return "<br>".join(
        (
            f"<b>Handover</b> {escaped_text(site.from_task)} → "
            f"{escaped_text(site.to_task)} ({site.trigger})",
            f"{_agent_name(study, site.from_agent)} → {_agent_name(study, site.to_agent)}",
            f"{FIGURES['risk'].label.lower()} {handover.risk} "
            f"({RISK_BANDS[handover.band].label.lower()}): severity {handover.severity} × "
            f"{handover.frequency_band} ({handover.frequency_per_year:.3g} slips a year)",
            f"{FIGURES['likelihood'].label.lower()} "
            f"{figure_number('likelihood', handover.likelihood)} · "
            f"{figure_text('handovers_per_day', site.per_day)}",
        )
    )


def _route(edge: PlacedEdge) -> list[tuple[float, float]]:
    """The edge's points, with a point 75 % along the last segment for its arrowhead;
    a link within one layer bows out to the right so it does not run through tasks."""
    points = list(edge.points)
    if edge.same_layer:
        (x0, y0), (x1, y1) = points
        bow = 0.25 + 0.08 * abs(y1 - y0)
        points = [(x0, y0), (x0 + bow, (y0 + y1) / 2), (x1, y1)]
    (xa, ya), (xb, yb) = points[-2], points[-1]
    points.insert(-1, (xa + 0.75 * (xb - xa), ya + 0.75 * (yb - ya)))
    return points


def _middle(edge: PlacedEdge, route: list[tuple[float, float]]) -> tuple[float, float]:
    """Where a handover's marker sits: halfway along the link's route."""
    if edge.same_layer:
        return route[1]
    points = edge.points
    half = len(points) // 2
    if len(points) % 2:
        return points[half]
    (xa, ya), (xb, yb) = points[half - 1], points[half]
    return ((xa + xb) / 2, (ya + yb) / 2)


def _edge_trace(
    name: str, colour: str, width: float, dash: str, routes: list, arrow: float
) -> dict:
    xs: list[float | None] = []
    ys: list[float | None] = []
    sizes: list[float] = []
    for points in routes:
        for index, (x, y) in enumerate(points):
            xs.append(x)
            ys.append(y)
            # Only the point just before the target carries a visible arrowhead.
            sizes.append(arrow if index == len(points) - 2 else 0)
        xs.append(None)
        ys.append(None)
        sizes.append(0)
    return {
        "type": "scatter",
        "mode": "lines+markers",
        "name": name,
        "x": xs,
        "y": ys,
        "line": {"color": colour, "width": width, "dash": dash},
        "marker": {
            "symbol": "arrow",
            "angleref": "previous",
            "size": sizes,
            "color": colour,
        },
        "hoverinfo": "skip",
        "showlegend": False,
    }


def graph_figure(study: Study, layout: Layout, analysis: PlanAnalysis | None) -> dict[str, Any]:
    """The dependency graph of one view as a plotly figure.

    Parameters
    ----------
    study : Study
    layout : Layout
        Positions from :func:`~allocation.core.layout.layered_layout`.
    analysis : PlanAnalysis or None
        The chosen plan's analysis; without one every task is drawn unallocated.

    Returns
    -------
    dict
        ``{"data": [...], "layout": {...}}``. Edge traces come first (named
        ``"precedes"``, ``"informs"``, ``"handover precedes"``, ``"handover informs"``,
        and ``"… (outside the filter)"``), then one trace of handover markers
        (``customdata``: the receiving task), then one node trace per category, the
        faded ones after (``customdata``: the task ids; ``meta``: the category key).
    """
    categories = task_categories(study, analysis)
    handovers = link_handovers(analysis)
    nodes = layout.nodes

    edge_groups: dict[tuple[str, bool, bool], list] = {}
    handover_points: list[tuple[float, float, str, str]] = []
    for edge in layout.edges:
        handover = handovers.get((edge.source, edge.target, edge.kind))
        faded = nodes[edge.source].faded or nodes[edge.target].faded
        route = _route(edge)
        edge_groups.setdefault((edge.kind, handover is not None, faded), []).append(route)
        if handover is not None:
            middle = _middle(edge, route)
            handover_points.append((*middle, edge.target, _handover_hover(study, handover)))

    labelled = len(nodes) <= LABEL_LIMIT
    data: list[dict[str, Any]] = []
    for kind, dash in (("precedes", "solid"), ("informs", "dash")):
        for is_handover in (False, True):
            for faded in (False, True):
                routes = edge_groups.get((kind, is_handover, faded))
                if not routes:
                    continue
                if is_handover:
                    name, colour, width = f"handover {kind}", ACCENT, 3.5
                else:
                    name, colour, width = kind, FADED_LINK_GREY if faded else LINK_GREY, 1.4
                if faded:
                    name += " (outside the filter)"
                arrow = (10 if labelled else 7) + width
                data.append(_edge_trace(name, colour, width, dash, routes, arrow))
    if handover_points:
        data.append(
            {
                "type": "scatter",
                "mode": "markers",
                "name": "handover",
                "x": [point[0] for point in handover_points],
                "y": [point[1] for point in handover_points],
                "customdata": [point[2] for point in handover_points],
                "hovertext": [point[3] for point in handover_points],
                "hovertemplate": "%{hovertext}<extra></extra>",
                "marker": {
                    "symbol": "diamond-wide",
                    "size": 9,
                    "color": ACCENT,
                    "line": {"color": "#ffffff", "width": 1},
                },
                "showlegend": False,
            }
        )

    size = 16 if labelled else 9
    for faded in (False, True):
        for category in CATEGORIES:
            members = [
                node
                for node in nodes.values()
                if node.faded == faded and categories[node.id] == category.key
            ]
            if not members:
                continue
            trace = {
                "type": "scatter",
                "mode": "markers+text" if labelled else "markers",
                "name": category.label + (" (outside the filter)" if faded else ""),
                "meta": category.key,
                "x": [node.x for node in members],
                "y": [node.y for node in members],
                "customdata": [node.id for node in members],
                "hovertext": [
                    _node_hover(study, node.id, category.key, analysis) for node in members
                ],
                "hovertemplate": "%{hovertext}<extra></extra>",
                "marker": {
                    "symbol": category.symbol,
                    "size": size,
                    "color": category.colour,
                    "line": {"color": category.outline, "width": 1.5},
                },
                "opacity": 0.35 if faded else 1.0,
                "showlegend": False,
            }
            if labelled:
                trace["text"] = [escaped_text(node.id) for node in members]
                trace["textposition"] = "top center"
                trace["textfont"] = {"size": 11, "color": INK_SOFT if faded else INK}
            data.append(trace)

    annotations = [
        {
            "x": -0.45,
            "y": group.y - 1,
            "xanchor": "left",
            "yanchor": "middle",
            "showarrow": False,
            "text": "No links · "
            + (
                f"{escaped_text(group.goal)} {escaped_text(study.tasks_by_id[group.goal].title)}"
                if group.goal
                else "top level"
            ),
            "font": {"size": 11, "color": INK_SOFT},
        }
        for group in layout.unlinked
    ]
    rows = max(layout.height, 1.0)
    height = int(min(3200, max(300, 90 + rows * (34 if labelled else 16))))
    columns = max(layout.columns, 1)
    return {
        "data": data,
        "layout": {
            "font": FONT,
            "paper_bgcolor": "rgba(0,0,0,0)",
            "plot_bgcolor": "#ffffff",
            "height": height,
            "margin": {"l": 16, "r": 16, "t": 16, "b": 56},
            "showlegend": False,
            "hovermode": "closest",
            "hoverlabel": {"font": {"family": FONT["family"]}, "align": "left"},
            "dragmode": "pan",
            "xaxis": {
                "title": {"text": "step in the order of work (layers of precedes links)"},
                "tickvals": list(range(layout.layers)),
                "ticktext": [str(step + 1) for step in range(layout.layers)],
                "range": [-0.6, columns - 0.4],
                "showgrid": True,
                "gridcolor": "#f0ede6",
                "zeroline": False,
                "fixedrange": False,
            },
            "yaxis": {
                "visible": False,
                # Reversed: the first row at the top.
                "range": [rows - 0.4, -0.9],
                "zeroline": False,
            },
            "annotations": annotations,
        },
    }
