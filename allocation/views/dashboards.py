"""A plan's dashboards: daily figures, time by goal, handovers, awareness, coherence,
findings and the share of the day in each mode."""

from __future__ import annotations

from collections import Counter
from typing import Any

from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.urls import NoReverseMatch, reverse
from django.views.decorators.http import require_GET

from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.handsteps import handover_steps
from allocation.core.analysis.modecheck import MODE_FINDING_KINDS
from allocation.core.analysis.report import interfaces_json
from allocation.core.describe import seconds_text, severity_text
from allocation.core.registry import (
    AWARENESS_FACTORS,
    HANDOVER_SOURCES,
    LIKELIHOOD_FACTORS,
    PERSON_FIGURES,
    figure_text,
    finding_kind,
)
from allocation.figures import dashboards as dashboard_figures
from allocation.views.common import StudyPage, study_page
from allocation.views.paging import page_of

#: Handovers shown before "show all".
HANDOVERS_SHOWN = 50
#: Tasks in the mode-awareness chart.
AWARENESS_SHOWN = 30
#: The plan's headline figures, in the order the head of the page shows them.
HEADLINE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "failures_per_day",
    "escalations_per_day",
    "handovers",
    "handovers_to_review",
    "findings",
)
#: The coherence figures and where the analysis keeps them.
COHERENCE_FIGURES = ("cut_ratio", "modularity")


@require_GET
@login_required
def plan_dashboard(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The dashboards of one plan; the plan picker and "show all" swap parts of it."""
    page = study_page(request, pk)
    chosen = page.plan_or_404(plan)
    show_all = request.GET.get("handovers") == "all"
    context = page.context(
        "plan-dashboard",
        plan=chosen,
        plan_links=[
            {
                "plan": item,
                "url": reverse("plan-dashboard", args=[page.row.pk, item.id]),
                "active": item.id == chosen.id,
            }
            for item in page.study.plans
        ],
        show_all=show_all,
    )
    analysis = page.analysis(chosen.id) if page.result.ok else None
    if analysis is not None:
        context.update(_dashboard(request, page, analysis, show_all))
    if request.htmx and not request.htmx.boosted:
        if request.htmx.target == "dashboard-handovers" and "handovers" in context:
            return render(request, "dashboards/plan.html#handovers", context)
        return render(request, "dashboards/plan.html#region", context)
    return render(request, "dashboards/plan.html", context)


def _task_links(page: StudyPage, task_ids, plan_id: str) -> list[dict[str, str]]:
    """Each task with where to see it: a leaf's row in the plan editor, a goal (or any
    task when the editor is not routed) in the study page's task list."""
    study_url = reverse("study-detail", args=[page.row.pk]) + "#tasks"
    try:
        editor_url = reverse("plan-editor", args=[page.row.pk, plan_id])
    except NoReverseMatch:
        editor_url = None
    known = page.study.tasks_by_id
    links = []
    for task_id in task_ids:
        leaf = task_id in known and not page.study.is_goal(task_id)
        url = f"{editor_url}#row-{task_id}" if editor_url and leaf else study_url
        title = known[task_id].title if task_id in known else ""
        links.append({"id": task_id, "title": title, "url": url})
    return links


def _agent_name(page: StudyPage, agent_id: str | None) -> str:
    if agent_id is None:
        return "nobody"
    agent = page.study.agents_by_id.get(agent_id)
    return agent.name if agent else agent_id


def _dashboard(
    request: HttpRequest, page: StudyPage, analysis: PlanAnalysis, show_all: bool
) -> dict[str, Any]:
    """What the panels show: the goals, handovers (all of them a page at a time) and
    findings a page at a time (``goals_page``, ``handovers_page``, ``findings_page``)."""
    study = analysis.study
    plan_id = analysis.plan.id
    people = []
    for agent_id, person in analysis.people.items():
        top = sorted(
            (
                (figures.person_s_per_day.get(agent_id, 0.0), task_id)
                for task_id, figures in analysis.tasks.items()
                if figures.person_s_per_day.get(agent_id, 0.0) > 0
            ),
            reverse=True,
        )[:3]
        figures = person.to_json()
        people.append(
            {
                "name": study.agent(agent_id).name,
                "cells": [figure_text(key, figures[key], unit=False) for key in PERSON_FIGURES],
                "top_tasks": [
                    {**link, "time": figure_text("person_s_per_day", seconds, unit=False)}
                    for link, (seconds, _task) in zip(
                        _task_links(page, [task for _s, task in top], plan_id), top, strict=True
                    )
                ],
            }
        )
    goals_page = page_of(
        request, dashboard_figures.goal_person_time(analysis), param="goals_page", target="goals"
    )
    goals = [
        {
            **row,
            "link": _task_links(page, [row["task"]], plan_id)[0] if row["task"] else None,
            "times": [
                figure_text("person_s_per_day", row["seconds"].get(agent_id, 0.0), unit=False)
                for agent_id in analysis.people
            ],
            "total": figure_text("person_s_per_day", sum(row["seconds"].values()), unit=False),
        }
        for row in goals_page.rows
    ]
    if show_all:
        handovers_page = page_of(
            request, analysis.handovers, param="handovers_page", target="dashboard-handovers"
        )
        shown_handovers = handovers_page.rows
    else:
        handovers_page = None
        shown_handovers = analysis.handovers[:HANDOVERS_SHOWN]
    numbers = {id(handover): n for n, handover in enumerate(analysis.handovers)}
    handovers = [
        {
            **_handover_row(page, handover, plan_id),
            "steps_url": reverse(
                "handover-steps", args=[page.row.pk, plan_id, numbers[id(handover)]]
            )
            if handover.site.source in ("failure", "escalation")
            else None,
        }
        for handover in shown_handovers
    ]
    awareness = [
        {
            **row,
            "link": _task_links(page, [row["task"]], plan_id)[0],
            "parts": [
                {
                    "words": AWARENESS_FACTORS[factor].label,
                    "factor": row["factors"][factor],
                    "contribution": row["contributions"][factor],
                }
                for factor in AWARENESS_FACTORS
            ],
        }
        for row in dashboard_figures.awareness_rows(analysis, AWARENESS_SHOWN)
    ]
    mode_numbers = {
        id(finding): number
        for number, finding in enumerate(
            f for f in analysis.findings if f.kind in MODE_FINDING_KINDS
        )
    }
    findings_page = page_of(request, analysis.findings, param="findings_page", target="findings")
    findings = [
        {
            "finding": finding,
            "kind": finding_kind(finding.kind).label,
            "anchor": finding_kind(finding.kind).anchor,
            "severity": severity_text(finding.severity),
            "tasks": _task_links(page, finding.tasks, plan_id),
            "step_url": (
                reverse("mode-finding", args=[page.row.pk, plan_id, mode_numbers[id(finding)]])
                if finding.witness and id(finding) in mode_numbers
                else None
            ),
        }
        for finding in findings_page.rows
    ]
    modes = []
    if analysis.plan.modes:
        modes = [
            {
                "mode": mode,
                "share": analysis.mode_share.get(mode.id, 0.0),
                "time": seconds_text(analysis.mode_share.get(mode.id, 0.0) * 86400),
                "initial": mode.id == analysis.plan.modes.initial,
            }
            for mode in analysis.plan.modes.states
        ]
    kinds = Counter(finding_kind(finding.kind).label for finding in analysis.findings)
    counts = dashboard_figures.risk_matrix_counts(analysis)
    headline = analysis.headline()
    coherence = {
        "cut_ratio": analysis.coherence.cut_ratio,
        "modularity": analysis.coherence.modularity,
    }
    return {
        "analysis": analysis,
        "headline": headline,
        "headline_figures": [(key, headline[key]) for key in HEADLINE_FIGURES],
        "person_figures": PERSON_FIGURES,
        "people": people,
        "people_names": [study.agent(agent_id).name for agent_id in analysis.people],
        "goals": goals,
        "goals_page": goals_page,
        "handovers": handovers,
        "handovers_page": handovers_page,
        "handover_count": len(analysis.handovers),
        "interfaces": [
            {
                **row,
                "from_agent": _agent_name(page, row["from_agent"]),
                "to_agent": _agent_name(page, row["to_agent"]),
            }
            for row in interfaces_json(analysis)
        ],
        "handovers_shown": HANDOVERS_SHOWN,
        "awareness": awareness,
        "awareness_count": len(dashboard_figures.awareness_rows(analysis, None)),
        "awareness_shown": AWARENESS_SHOWN,
        "findings": findings,
        "findings_page": findings_page,
        "finding_kinds": sorted(kinds.items(), key=lambda kv: (-kv[1], kv[0])),
        "modes": modes,
        "policy": analysis.policy,
        "band_labels": dashboard_figures.frequency_band_labels(analysis.policy),
        "coherence": analysis.coherence,
        "coherence_figures": [(key, coherence[key]) for key in COHERENCE_FIGURES],
        "figures": {
            "daily": dashboard_figures.daily_figures_chart(analysis),
            "goals": dashboard_figures.goal_time_chart(analysis),
            "risk": dashboard_figures.risk_matrix_chart(analysis.policy, counts),
            "awareness": dashboard_figures.awareness_chart(analysis, AWARENESS_SHOWN),
            "modes": dashboard_figures.mode_share_chart(analysis) if modes else None,
        },
        "band_colours": dashboard_figures.BAND_COLOURS,
    }


def _handover_row(page: StudyPage, handover, plan_id: str) -> dict[str, Any]:
    site = handover.site
    source = HANDOVER_SOURCES[site.source].label
    if site.source == "shared" and site.stage:
        source += f" (to {site.stage})"
    if site.source == "mode" and site.modes:
        source += f" ({' → '.join(site.modes)})"
    return {
        "handover": handover,
        "source": source,
        "trigger": site.trigger,
        "from_task": _task_links(page, [site.from_task], plan_id)[0],
        "to_task": _task_links(page, [site.to_task], plan_id)[0],
        "same_task": site.from_task == site.to_task,
        "from_agent": _agent_name(page, site.from_agent),
        "to_agent": _agent_name(page, site.to_agent),
        "contributions": [
            {"words": LIKELIHOOD_FACTORS[name].label, "value": value}
            for name, value in sorted(handover.contributions.items(), key=lambda kv: -kv[1])
            if value >= 0.005  # what rounds to 0.00 tells the reader nothing
        ],
        "per_day": site.per_day,
        "severity": severity_text(handover.severity),
    }


@require_GET
@login_required
def handover_steps_page(request: HttpRequest, pk: int, plan: str, number: int) -> HttpResponse:
    """A failure or an escalation handover played step by step."""
    page = study_page(request, pk)
    chosen = page.plan_or_404(plan)
    analysis = page.analysis(chosen.id) if page.result.ok else None
    if analysis is None or not 0 <= number < len(analysis.handovers):
        raise Http404("No such handover (the study may have changed since).")
    handover = analysis.handovers[number]
    steps = handover_steps(analysis, handover)
    context = page.context(
        "plan-dashboard",
        plan=chosen,
        handover=_handover_row(page, handover, chosen.id),
        steps=[
            {
                "event": step.event,
                "how": step.how,
                "holder": _agent_name(page, step.holder),
                "believed": _agent_name(page, step.believed),
                "confused": step.confused,
                "missed": step.missed,
            }
            for step in steps
        ],
        back_url=reverse("plan-dashboard", args=[pk, chosen.id]) + "#handovers",
    )
    return render(request, "dashboards/handover_steps.html", context)
