"""Workload ratings of a plan: NASA-TLX ratings from review and usability sessions, each
task's ratings beside the figures Baton predicts for it, and the form to record more."""

from __future__ import annotations

from typing import Any

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST

from allocation import models as m
from allocation import services
from allocation.core.registry import figure, figure_number, figure_text
from allocation.core.tlx import PAIRS, SUBSCALE_NAMES, SUBSCALES, check_ratings
from allocation.core.vocabulary import CHANNELS
from allocation.figures.ratings import task_rows, tlx_scatter_chart
from allocation.forms.ratings import RatingForm
from allocation.selectors import ratings as rating_selectors
from allocation.views.common import StudyPage, study_page
from allocation.views.paging import page_of

REGION = "ratings"


def _can_rate(page: StudyPage) -> bool:
    return m.Role.rank(page.role) >= m.Role.rank(m.Role.REVIEWER)


def _page_url(pk: int, plan: str) -> str:
    return reverse("plan-ratings", args=[pk, plan])


def _score_figure(rating: m.WorkloadRating) -> str:
    """The registry's figure of a rating's score: weighted TLX with tallies, else raw."""
    return "tlx_weighted" if rating.weights else "tlx_raw"


def _rating_row(rating: m.WorkloadRating) -> dict[str, Any]:
    ratings, warnings = check_ratings(rating.ratings)
    raw = sum(ratings.values()) / len(SUBSCALES) if len(ratings) == len(SUBSCALES) else None
    key = _score_figure(rating)
    return {
        "rating": rating,
        "score": figure_number(key, rating.score),
        "cells": [
            {
                "value": rating.ratings.get(key),
                "tally": rating.weights.get(key) if rating.weights else None,
            }
            for key in SUBSCALES
        ],
        "kind": figure(key).label,
        "raw": raw,
        "off_marks": [SUBSCALE_NAMES[p.path.split(".")[1]] for p in warnings if not p.is_error],
        "by": rating.recorded_by.get_username() if rating.recorded_by else "—",
    }


def _simulation(page: StudyPage, plan_id: str, people: list[str]) -> dict[str, Any] | None:
    """Each person's simulated daily peak demand per VACP channel (mean and P95 over the
    run's days), from the newest finished run for the study as it is now."""
    run = rating_selectors.rating_simulation_run(page.row, plan_id)
    if run is None or not run.result:
        return None
    summary = run.result["summary"]
    rows = []
    for agent in page.study.humans:
        figures = summary["people"].get(agent.id)
        if figures is None or agent.id not in people:
            continue
        rows.append(
            {
                "name": agent.name,
                "peaks": [
                    {
                        key: figure_number(f"peak_{channel}", value)
                        for key, value in figures.get(
                            f"peak_{channel}", {"mean": None, "p95": None}
                        ).items()
                    }
                    for channel in CHANNELS
                ],
            }
        )
    return {
        "run": run,
        "rows": rows,
        "columns": [f"peak_{channel}" for channel in CHANNELS],
        "unit": figure(f"peak_{CHANNELS[0]}").unit,
    }


def _context(
    page: StudyPage, plan_id: str, request: HttpRequest, form: RatingForm | None = None
) -> dict[str, Any]:
    chosen = page.plan_or_404(plan_id)
    ratings = list(rating_selectors.plan_ratings(page.row, chosen.id))
    rows = [_rating_row(rating) for rating in ratings]
    context: dict[str, Any] = {
        "plan": chosen,
        "plan_links": [
            {
                "plan": item,
                "url": _page_url(page.row.pk, item.id),
                "active": item.id == chosen.id,
            }
            for item in page.study.plans
        ],
        "subscales": [SUBSCALE_NAMES[key] for key in SUBSCALES],
        "channels": CHANNELS,
        "can_rate": _can_rate(page),
        "rating_count": len(rows),
        "record_url": reverse("plan-rating-record", args=[page.row.pk, chosen.id]),
        "delete_url": reverse("plan-rating-delete", args=[page.row.pk, chosen.id]),
        "page_url": _page_url(page.row.pk, chosen.id),
    }
    path = _page_url(page.row.pk, chosen.id)
    titles = {task.id: task.title for task in page.study.tasks}
    groups: dict[str, list[dict[str, Any]]] = {}
    for row in rows:
        groups.setdefault(row["rating"].task_key, []).append(row)
    # The ratings, by task, a page of tasks at a time; the predictions beside them, the
    # rated and the unrated tasks, each a page at a time (every list its own parameter).
    groups_page = page_of(
        request, list(groups.items()), param="ratings_page", target="rating-list", path=path
    )
    context["groups_page"] = groups_page
    context["groups"] = [
        {"task": task, "title": titles.get(task, "(no longer in the study)"), "rows": items}
        for task, items in groups_page.rows
    ]
    analysis = page.analysis(chosen.id) if page.result.ok else None
    if analysis is not None:
        tasks = task_rows(
            analysis,
            [
                {"task": row["rating"].task_key, "score": row["rating"].score, "raw": row["raw"]}
                for row in rows
                if row["raw"] is not None
            ],
        )
        for task in tasks:
            task["time"] = (
                figure_text("person_s", task["person_s"], unit=False) if task["person_s"] else "—"
            )
            task["time_typical"] = (
                figure_text("typical_s", task["typical_s"], unit=False) if task["person_s"] else ""
            )
            task["time_per_day"] = (
                figure_text("person_s_per_day", task["person_s_per_day"], unit=False)
                if task["person_s_per_day"]
                else "—"
            )
        people = list(analysis.people)
        rated = page_of(
            request,
            [task for task in tasks if task["count"]],
            param="rated_page",
            target="ratings-rated",
            path=path,
        )
        unrated = page_of(
            request,
            [task for task in tasks if not task["count"]],
            param="unrated_page",
            target="ratings-unrated",
            path=path,
        )
        context.update(
            analysis=analysis,
            rated=rated.rows,
            rated_page=rated,
            unrated=unrated.rows,
            unrated_page=unrated,
            rated_tasks=sum(1 for task in tasks if task["count"]),
            chart=tlx_scatter_chart(tasks),
            simulation=_simulation(page, chosen.id, people),
        )
    if context["can_rate"] and page.study.leaves:
        if form is None:
            task = request.GET.get("task")
            known = task in {leaf.id for leaf in page.study.leaves}
            form = RatingForm(study=page.study, initial={"task": task} if known else {})
        context["form"] = form
        context["pairs"] = [
            (number, SUBSCALE_NAMES[a], SUBSCALE_NAMES[b])
            for number, (a, b) in enumerate(PAIRS, start=1)
        ]
    return context


def _respond(
    request: HttpRequest, page: StudyPage, context: dict[str, Any], status: int = 200
) -> HttpResponse:
    full = page.context("plan-ratings", **context)
    if request.htmx and not request.htmx.boosted:
        return render(request, "ratings/page.html#region", full, status=status)
    return render(request, "ratings/page.html", full, status=status)


@require_GET
@login_required
def plan_ratings(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The plan's workload ratings beside its predicted figures, and the form to add one."""
    page = study_page(request, pk)
    return _respond(request, page, _context(page, plan, request))


@require_POST
@login_required
def plan_rating_record(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Record one participant's ratings of a task (reviewers and above)."""
    page = study_page(request, pk, role=m.Role.REVIEWER)
    page.plan_or_404(plan)
    form = RatingForm(request.POST, study=page.study)
    if form.is_valid():
        try:
            rating = services.rating_record(
                study=page.row, user=request.user, plan_key=plan, **form.arguments()
            )
        except services.RatingRefused as refused:
            for field, texts in refused.errors.items():
                for text in texts:
                    form.add_error(field if field in form.fields else None, text)
        else:
            key = _score_figure(rating)
            messages.success(
                request,
                f"Recorded {rating.participant}'s ratings of {rating.task_key}: "
                f"{figure(key).label} {figure_number(key, rating.score)}.",
            )
            if not request.htmx:
                return redirect(_page_url(pk, plan) + f"#ratings-{rating.task_key}")
            form = None
    if form is not None:
        messages.error(request, "Nothing was recorded: see the messages beside the fields.")
    context = _context(page, plan, request, form)
    status = 200 if form is None or request.htmx else 400
    return _respond(request, page, context, status=status)


@require_POST
@login_required
def plan_rating_delete(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Delete one rating (editors and owners)."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    try:
        rating_id = int(request.POST.get("rating", ""))
        deleted = services.rating_delete(study=page.row, user=request.user, rating_id=rating_id)
    except (ValueError, m.WorkloadRating.DoesNotExist) as missing:
        raise Http404("No such rating.") from missing
    messages.success(request, f"Deleted {deleted['participant']}'s ratings of {deleted['task']}.")
    if not request.htmx:
        return redirect(_page_url(pk, plan))
    return _respond(request, page, _context(page, plan, request))
