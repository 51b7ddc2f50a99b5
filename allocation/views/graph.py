"""The dependency graph: tasks in layers, coloured by category under a chosen plan, with a
task's details beside it."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any
from urllib.parse import urlencode

from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.urls import reverse
from django.views.decorators.http import require_GET

from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.report import levels_with_words
from allocation.core.describe import (
    duration_text,
    occurs_text,
    seconds_text,
    severity_text,
    task_outline,
)
from allocation.core.layout import goal_leaves, layered_layout, select_tasks
from allocation.core.model import Study
from allocation.core.needs import needs_text
from allocation.core.registry import (
    AWARENESS_FACTORS,
    HANDOVER_SOURCES,
    figure_number,
    figure_text,
)
from allocation.core.vocabulary import CHANNELS, SEVERITIES, STAGE_NAMES, STAGES, VACP_ANCHORS
from allocation.figures import graph as graph_figures
from allocation.views.common import StudyPage, study_page
from allocation.views.paging import page_of

#: Above this many leaf tasks the graph opens on one goal (tool assumption: a few hundred
#: nodes is about what a layered drawing shows legibly at once).
LARGE_STUDY = 200


@dataclass
class GraphQuery:
    """The graph's filters as asked for, after checking them against the study."""

    plan: str | None = None
    goal: str | None = None
    agent: str | None = None
    goal_defaulted: bool = False
    errors: dict[str, str] = field(default_factory=dict)

    def params(self, **changes: str | None) -> str:
        """The query string of this view, with ``changes`` applied (``""`` for "all")."""
        values = {"plan": self.plan, "goal": self.goal or "", "agent": self.agent or ""}
        values.update(changes)
        return urlencode({key: value for key, value in values.items() if value is not None})


def _default_goal(study: Study) -> str | None:
    """The first goal (file order) small enough to draw, for a study too large to draw
    whole; ``None`` for a study small enough."""
    if len(study.leaves) <= LARGE_STUDY:
        return None
    for goal in study.goals:
        if 0 < len(goal_leaves(study, goal.id)) <= LARGE_STUDY:
            return goal.id
    return None


def _graph_query(request: HttpRequest, study: Study) -> GraphQuery:
    query = GraphQuery()
    asked = request.GET
    plan = asked.get("plan", "")
    if plan and plan in study.plans_by_id:
        query.plan = plan
    elif study.plans:
        query.plan = study.plans[0].id
        if plan:
            query.errors["plan"] = (
                f"This study has no plan “{plan}”; showing plan “{query.plan}” instead."
            )
    if "goal" not in asked:
        query.goal = _default_goal(study)
        query.goal_defaulted = query.goal is not None
    elif asked["goal"]:
        if study.is_goal(asked["goal"]):
            query.goal = asked["goal"]
        else:
            query.errors["goal"] = (
                f"“{asked['goal']}” is not a goal of this study (a goal is a task with "
                "sub-tasks); showing every goal instead."
            )
    agent = asked.get("agent", "")
    if agent and agent in study.agents_by_id:
        query.agent = agent
    elif agent:
        query.errors["agent"] = f"This study has no agent “{agent}”; showing every agent instead."
    return query


def _fragment(request: HttpRequest) -> bool:
    """An htmx request for a region (boosted requests and history restores get pages)."""
    return (
        bool(request.htmx)
        and not request.htmx.boosted
        and not request.htmx.history_restore_request
    )


def _agent_name(study: Study, agent_id: str | None) -> str:
    if agent_id is None:
        return "nobody"
    agent = study.agents_by_id.get(agent_id)
    return agent.name if agent else agent_id


@require_GET
@login_required
def study_graph(request: HttpRequest, pk: int) -> HttpResponse:
    """The graph page; the filter form and "show all" swap its region by htmx."""
    page = study_page(request, pk)
    context = page.context("study-graph")
    if page.result.ok:
        context.update(_graph_region(request, page))
    template = "graph/graph.html#region" if _fragment(request) else "graph/graph.html"
    return render(request, template, context)


def _graph_region(request: HttpRequest, page: StudyPage) -> dict[str, Any]:
    study = page.study
    query = _graph_query(request, study)
    analysis = page.analysis(query.plan) if query.plan else None
    holders = (
        {task_id: figures.involved.principal for task_id, figures in analysis.tasks.items()}
        if analysis
        else {}
    )
    selection = select_tasks(study, goal=query.goal, agent=query.agent, holders=holders)
    layout = layered_layout(study, selection)
    figure = graph_figures.graph_figure(study, layout, analysis)
    categories = graph_figures.task_categories(study, analysis)
    counts = graph_figures.category_counts(categories, selection.focus)
    handovers = graph_figures.link_handovers(analysis)
    drawn_handovers = sum(
        (edge.source, edge.target, edge.kind) in handovers for edge in layout.edges
    )
    graph_url = reverse("study-graph", args=[page.row.pk])
    task_url = reverse("graph-task", args=[page.row.pk, "__key__"])
    preselected = request.GET.get("task", "")
    details = None
    if preselected:
        if preselected in study.tasks_by_id and not study.is_goal(preselected):
            details = task_details(page, analysis, preselected)
        else:
            query.errors["task"] = f"This study has no leaf task “{preselected}” to show."
    goal = study.tasks_by_id.get(query.goal) if query.goal else None
    task_page = page_of(request, list(selection.focus), param="tasks_page", target="graph-tasks")
    return {
        "query": query,
        "analysis": analysis,
        "plan": analysis.plan if analysis else None,
        "goal": goal,
        "goal_options": [
            {"id": task.id, "label": "\u00a0\u00a0" * depth + f"{task.id} · {task.title}"}
            for task, depth in task_outline(study)
            if study.is_goal(task.id)
        ],
        "leaf_count": len(study.leaves),
        "large_study": LARGE_STUDY,
        "show_all_url": f"{graph_url}?{query.params(goal='')}",
        "graph_url": graph_url,
        "click_url": f"{task_url}?{urlencode({'plan': query.plan or ''})}",
        "figure": figure,
        "selection": selection,
        "layout": layout,
        "drawn_handovers": drawn_handovers,
        "legend": [
            {"category": category, "count": counts[category.key]}
            for category in graph_figures.CATEGORIES
        ],
        "edge_styles": graph_figures.EDGE_STYLES,
        "task_rows": [
            {
                "id": task_id,
                "title": study.tasks_by_id[task_id].title,
                "category": graph_figures.CATEGORY_BY_KEY[categories[task_id]],
                "holder": _agent_name(study, holders.get(task_id)) if analysis else "—",
                "url": _task_url(page, task_id, query.plan),
            }
            for task_id in task_page.rows
        ],
        "task_page": task_page,
        "details": details,
    }


def _task_url(page: StudyPage, task_id: str, plan: str | None) -> str:
    url = reverse("graph-task", args=[page.row.pk, task_id])
    return f"{url}?{urlencode({'plan': plan})}" if plan else url


@require_GET
@login_required
def graph_task(request: HttpRequest, pk: int, task: str) -> HttpResponse:
    """A task's details under a plan: the graph's side panel, or a page of its own."""
    page = study_page(request, pk)
    study = page.study
    if not page.result.ok:
        raise Http404("The study has errors to fix before its tasks can be analysed.")
    if task not in study.tasks_by_id or study.is_goal(task):
        raise Http404("No such leaf task.")
    plan = request.GET.get("plan") or (study.plans[0].id if study.plans else None)
    if plan is not None and plan not in study.plans_by_id:
        raise Http404("No such plan.")
    analysis = page.analysis(plan) if plan else None
    context = page.context("study-graph", details=task_details(page, analysis, task))
    if _fragment(request):
        return render(request, "graph/task.html#task", context)
    return render(request, "graph/task.html", context)


def _vacp(value: float, channel: str) -> str:
    """The anchor words of a VACP value (McCracken & Aldrich 1984), or the nearest lower."""
    words = ""
    for anchor, descriptor in VACP_ANCHORS[channel]:
        if anchor <= value:
            words = descriptor if anchor == value else f"above “{descriptor}”"
    return words


def task_details(page: StudyPage, analysis: PlanAnalysis | None, task_id: str) -> dict[str, Any]:
    """What the details panel shows of one leaf task, under the plan if there is one."""
    study = page.study
    task = study.task(task_id)
    plan_id = analysis.plan.id if analysis else None
    goal = study.tasks_by_id.get(task.parent) if task.parent else None
    demands = [
        {
            "channel": channel,
            "value": (task.demands or {}).get(channel, 0),
            "words": _vacp(float((task.demands or {}).get(channel, 0)), channel),
        }
        for channel in CHANNELS
    ]
    neighbours = []
    for link in study.links:
        if task_id in (link.source, link.target):
            other = link.target if link.source == task_id else link.source
            neighbours.append(
                {
                    "direction": "to" if link.source == task_id else "from",
                    "kind": link.kind,
                    "task": study.tasks_by_id[other],
                    "url": _task_url(page, other, plan_id),
                }
            )
    details: dict[str, Any] = {
        "task": task,
        "goal": goal,
        "occurs": occurs_text(study, task),
        "duration": duration_text(task.duration_s),
        "window": "—" if task.window_s is None else seconds_text(task.window_s),
        "severity": severity_text(task.severity),
        "severity_words": SEVERITIES[task.severity][1] if task.severity else "",
        "demands": demands if task.demands else [],
        "split": [
            {"stage": STAGE_NAMES[stage], "share": task.stage_split[stage]} for stage in STAGES
        ],
        "needs": needs_text(task.needs),
        "neighbours": neighbours,
        "plan": analysis.plan if analysis else None,
        "graph_url": reverse("study-graph", args=[page.row.pk])
        + (f"?{urlencode({'plan': plan_id, 'task': task_id})}" if plan_id else ""),
    }
    if analysis is not None:
        details.update(_under_plan(study, analysis, task_id))
    return details


def _under_plan(study: Study, analysis: PlanAnalysis, task_id: str) -> dict[str, Any]:
    figures = analysis.tasks[task_id]
    involved = figures.involved
    category = graph_figures.task_categories(study, analysis)[task_id]
    levels = levels_with_words(study, involved)
    if levels is None:
        level_rows = []
    elif study.scale == "ek10":
        level_rows = [{"stage": "All stages", **levels}]
    else:
        level_rows = [{"stage": STAGE_NAMES[stage], **levels[stage]} for stage in STAGES]
    aware = figures.awareness
    handovers = [
        {
            "source": HANDOVER_SOURCES[h.site.source].label,
            "from_task": h.site.from_task,
            "to_task": h.site.to_task,
            "from_agent": _agent_name(study, h.site.from_agent),
            "to_agent": _agent_name(study, h.site.to_agent),
            "detail": h.site.stage or h.site.trigger or "",
            "per_day": h.site.per_day,
            "likelihood": h.likelihood,
            "risk": h.risk,
            "band": h.band,
        }
        for h in analysis.handovers
        if task_id in (h.site.from_task, h.site.to_task)
    ]
    return {
        "category": graph_figures.CATEGORY_BY_KEY[category],
        "assignment": involved.assignment,
        "holder": _agent_name(study, involved.principal) if involved.principal else None,
        "human": _agent_name(study, involved.human) if involved.human else None,
        "automation": _agent_name(study, involved.automation) if involved.automation else None,
        "accountable": _agent_name(study, involved.accountable) if involved.accountable else None,
        "monitor": _agent_name(study, involved.monitor) if involved.monitor else None,
        "initiator": figures.initiator,
        "degrees": [
            {"stage": STAGE_NAMES[stage], "degree": involved.degrees[stage]} for stage in STAGES
        ],
        "levels": level_rows,
        "per_day": figures.per_day,
        "person_s": figure_text("person_s", figures.person_s),
        "typical_s": figure_text("typical_s", figures.typical_s),
        "person_s_per_day": [
            {
                "name": _agent_name(study, agent_id),
                "seconds": figure_text("person_s_per_day", seconds),
            }
            for agent_id, seconds in figures.person_s_per_day.items()
        ],
        "awareness": aware,
        "awareness_rows": []
        if aware is None
        else [
            {
                "name": AWARENESS_FACTORS[name].label,
                "factor": figure_number(AWARENESS_FACTORS[name], value),
                "contribution": figure_number("awareness", aware.contributions.get(name, 0.0)),
            }
            for name, value in aware.factors.items()
        ],
        "handovers": handovers,
    }
