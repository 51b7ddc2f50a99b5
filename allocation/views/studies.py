"""The study list, a study's page, and study files in and out."""

from __future__ import annotations

import json

from django.conf import settings
from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.text import slugify
from django.views.decorators.http import require_GET, require_POST
from django_htmx.http import HttpResponseClientRedirect

from allocation import audit, selectors, services
from allocation import models as m
from allocation.core import Problem, StudyInvalid
from allocation.core.describe import (
    duration_text,
    occurs_text,
    seconds_text,
    severity_text,
    task_outline,
)
from allocation.core.limits import PAGE_PROBLEMS
from allocation.core.objective_file import with_objective
from allocation.core.reading import parse_json_text
from allocation.views.common import study_page
from allocation.views.paging import page_of
from allocation.web.uploads import upload_refusal


@require_GET
@login_required
def study_list(request: HttpRequest) -> HttpResponse:
    studies = selectors.studies_for_user(user=request.user)
    return render(request, "studies/list.html", {"studies": studies, "problems": []})


@require_POST
@login_required
def study_upload(request: HttpRequest) -> HttpResponse:
    # The size is judged from the declared length before request.FILES is read.
    too_large = upload_refusal(request, settings.BATON_MAX_UPLOAD_BYTES, "the study file")
    upload = None if too_large else request.FILES.get("file")
    problems = [Problem("upload", too_large)] if too_large else _upload_problems(upload)
    if not problems:
        data, problems = parse_json_text(upload.read())
    if not problems:
        try:
            with audit.acting(request.user, m.AuditSource.IMPORT):
                study = services.study_import(data=data, owner=request.user)
        except StudyInvalid as error:
            problems = error.problems
    if problems:
        context = {
            "problems": problems,
            "filename": getattr(upload, "name", ""),
            # A file may have thousands of problems: the first are listed.
            "problems_shown": PAGE_PROBLEMS,
            "problems_slice": f":{PAGE_PROBLEMS}",
        }
        template = "studies/list.html#upload" if request.htmx else "studies/list.html"
        if not request.htmx:
            context["studies"] = selectors.studies_for_user(user=request.user)
        # 413 (Content Too Large) when refused by its declared length, unread.
        status = 413 if too_large else 400
        return render(request, template, context, status=status if not request.htmx else 200)
    url = reverse("study-detail", args=[study.pk])
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


def _upload_problems(upload) -> list[Problem]:
    if upload is None:
        return [Problem("upload", "choose a study file (.json) to upload")]
    if upload.size > settings.BATON_MAX_UPLOAD_BYTES:
        limit = settings.BATON_MAX_UPLOAD_BYTES // (1024 * 1024)
        return [Problem("upload", f"the file is larger than {limit} MiB")]
    return []


@require_GET
@login_required
def study_detail(request: HttpRequest, pk: int) -> HttpResponse:
    page = study_page(request, pk)
    study = page.study
    # One page of each list (``agents_page``, ``tasks_page``, ``links_page``,
    # ``events_page``), whatever the study's size.
    tasks = page_of(request, task_outline(study), param="tasks_page", target="tasks")
    outline = [
        {
            "task": task,
            "depth": depth,
            "is_goal": study.is_goal(task.id),
            "occurs": occurs_text(study, task),
            "duration": duration_text(task.duration_s),
            "window": "—" if task.window_s is None else seconds_text(task.window_s),
            "severity": severity_text(task.severity),
        }
        for task, depth in tasks.rows
    ]
    analyses = page.analyses()
    plans = [
        {
            "plan": plan,
            "allocated": len(plan.assignments),
            "headline": analyses[plan.id].headline() if plan.id in analyses else None,
        }
        for plan in study.plans
    ]
    context = page.context(
        "study-detail",
        outline=outline,
        tasks_page=tasks,
        agents_page=page_of(request, study.agents, param="agents_page", target="agents"),
        links_page=page_of(request, study.links, param="links_page", target="links"),
        events_page=page_of(request, study.events, param="events_page", target="events"),
        plans=plans,
        leaf_count=len(study.leaves),
    )
    return render(request, "studies/detail.html", context)


def _json_attachment(payload: object, filename: str) -> HttpResponse:
    text = json.dumps(payload, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    response = HttpResponse(text, content_type="application/json; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    return response


@require_GET
@login_required
def study_download(request: HttpRequest, pk: int) -> HttpResponse:
    study_row = selectors.study_for_user(user=request.user, pk=pk)
    if request.GET.get("snapshot"):
        from allocation.views.exports import snapshot_study_download

        return snapshot_study_download(request, study_row)
    filename = f"{slugify(study_row.key) or 'study'}.baton.json"
    return _json_attachment(with_objective(selectors.study_document(study_row)), filename)


@require_GET
@login_required
def plan_analysis_download(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The analysis file of one plan, as ``manage.py analyse --json`` writes it."""
    study_row = selectors.study_for_user(user=request.user, pk=pk)
    analysis = selectors.plan_analysis(study_row, plan)
    if analysis is None:
        raise Http404("No such plan, or the study has errors to fix first.")
    filename = f"{slugify(study_row.key) or 'study'}.{slugify(plan) or 'plan'}.analysis.json"
    return _json_attachment(analysis.to_json(), filename)
