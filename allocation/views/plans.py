"""The plan editor: one row per leaf task, saved row by row with the figures beside it."""

from __future__ import annotations

from collections import Counter
from typing import Any
from urllib.parse import urlencode

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST
from django_htmx.http import HttpResponseClientRedirect, HttpResponseClientRefresh

from allocation import models as m
from allocation import services
from allocation.core import Problem, Study, StudyInvalid
from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.involvement import watch_text
from allocation.core.describe import task_outline
from allocation.core.limits import PAGE_ROW_CHOICES, PAGE_ROWS
from allocation.core.model import Task
from allocation.core.registry import ASSIGNMENT_STATUS_WORDS, figure_text
from allocation.core.scales import level_text
from allocation.core.vocabulary import ASSIGNMENT_STATUSES, CUES, INITIATORS, STAGES
from allocation.core.writing import assignment_to_json
from allocation.forms.plans import (
    DETECTION_CHOICES,
    MONITORING_CHOICES,
    WHO_CHOICES,
    AssignmentForm,
    BulkForm,
    PlanForm,
    level_choices,
)
from allocation.services.conflicts import EditConflict
from allocation.views.common import StudyPage, study_page
from allocation.views.conflicts import conflict_context, posted_version
from allocation.views.paging import page_number, page_of

#: The plan's figures beside the editor, and each person's (the registry names them).
HEADLINE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "handovers",
    "handovers_to_review",
    "max_risk",
    "findings",
)
PERSON_FIGURES = ("burden_s_per_day", "interruptions_per_day", "night_interruptions_per_day")


def _choices(study: Study) -> dict[str, Any]:
    """The option lists every row's selects share (rendered once per page)."""
    return {
        "who": WHO_CHOICES,
        "humans": [(a.id, a.name) for a in study.agents if a.is_human],
        "machines": [(a.id, a.name) for a in study.agents if not a.is_human],
        "agents": [(a.id, a.name) for a in study.agents],
        "levels": level_choices(study.scale),
        "feedback": CUES,
        "monitoring": MONITORING_CHOICES,
        "detection": DETECTION_CHOICES,
        "initiators": INITIATORS,
        "statuses": [(key, ASSIGNMENT_STATUS_WORDS[key].label) for key in ASSIGNMENT_STATUSES],
        "stages": STAGES,
        "per_stage_allowed": study.scale == "sv10",
        # Past this many agents a row's agent fields are typed (suggested from lists sent
        # once a page), so that a row's size does not grow with the study's agents.
        "typed": len(study.agents) > PAGE_ROW_CHOICES,
    }


def _versions(page: StudyPage, plan_id: str, task_ids: list[str]) -> dict[str, int]:
    """The version of each of these tasks' assignment rows (absent: not allocated, 0)."""
    return dict(
        m.Assignment.objects.filter(
            plan__study=page.row, plan__key=plan_id, task__key__in=task_ids
        ).values_list("task__key", "version")
    )


def _handover_counts(analysis: PlanAnalysis | None) -> Counter[str]:
    """How many handovers each task takes part in (counted once for the whole plan)."""
    counts: Counter[str] = Counter()
    for handover in () if analysis is None else analysis.handovers:
        counts[handover.site.from_task] += 1
        if handover.site.to_task != handover.site.from_task:
            counts[handover.site.to_task] += 1
    return counts


def _row(
    study: Study,
    plan_id: str,
    task_id: str,
    depth: int,
    analysis: PlanAnalysis | None,
    problems: list[Problem] = (),
    initial: dict[str, Any] | None = None,
    version: int = 0,
    handovers: Counter[str] | None = None,
) -> dict[str, Any]:
    """Everything one editor row shows: the assignment's values, its figures, errors, and
    the version of the assignment the row was rendered from (0: not allocated)."""
    plan = study.plans_by_id[plan_id]
    assignment = plan.assignments.get(task_id)
    item = None if assignment is None else assignment_to_json(assignment)
    values = initial if initial is not None else AssignmentForm.initial_for(item)
    row: dict[str, Any] = {
        "task": study.task(task_id),
        "depth": depth,
        "values": values,
        "problems": list(problems),
        "figures": None,
        "version": version,
    }
    level = str(values.get("level") or "")
    # A refused post is shown back as typed: only a level the scale has gets its words.
    if level.isdecimal() and 1 <= int(level) <= 10:
        row["level_words"] = level_text(study.scale, int(level))
    if analysis is not None:
        figures = analysis.tasks[task_id]
        involved = figures.involved
        row["figures"] = {
            "category": involved.category if involved.applies else "not_applicable",
            "holder": involved.principal,
            "person_s": figures.person_s,
            "typical_s": figures.typical_s,
            "per_day": figures.per_day,
            "person_s_per_day": sum(figures.person_s_per_day.values()),
            "awareness": None if figures.awareness is None else figures.awareness.index,
            "handovers": (handovers or _handover_counts(analysis))[task_id],
            "watch": watch_text(study, involved, figures.per_day),
        }
    return row


def _headline(study: Study, analysis: PlanAnalysis | None) -> dict[str, Any] | None:
    if analysis is None:
        return None
    figures = analysis.headline()
    return {
        "figures": [(key, figures[key]) for key in HEADLINE_FIGURES],
        "columns": PERSON_FIGURES,
        "people": [
            (
                study.agents_by_id[agent_id].name,
                [figure_text(key, getattr(person, key), unit=False) for key in PERSON_FIGURES],
            )
            for agent_id, person in analysis.people.items()
        ],
    }


def _analysis(page: StudyPage, plan_id: str) -> PlanAnalysis | None:
    return page.analysis(plan_id)


@require_GET
@login_required
def plan_editor(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The plan's rows, a page at a time (``?page=``); a large study opens on one goal at
    a time (``?goal=``)."""
    page = study_page(request, pk)
    page.plan_or_404(plan)
    study = page.study
    goal = _goal_shown(study, request.GET.get("goal", ""))
    shown = page_of(request, _outline(study, goal), target="plan-rows")
    analysis = _analysis(page, plan)
    leaves = [task.id for task, _ in shown.rows if not study.is_goal(task.id)]
    versions = _versions(page, plan, leaves)
    handovers = _handover_counts(analysis)
    rows = [
        {"goal": goal_task, "depth": depth, "continued": True}
        for goal_task, depth in _goals_above(study, shown.rows, goal)
    ]
    for task, depth in shown.rows:
        if study.is_goal(task.id):
            rows.append({"goal": task, "depth": depth})
        else:
            rows.append(
                _row(
                    study,
                    plan,
                    task.id,
                    depth,
                    analysis,
                    version=versions.get(task.id, 0),
                    handovers=handovers,
                )
            )
    context = page.context(
        "plan-editor",
        plan=study.plans_by_id[plan],
        rows=rows,
        rows_page=shown,
        choices=_choices(study),
        headline=_headline(study, analysis),
        plan_form=PlanForm(),
        goal=goal,
        top_goals=[task for task in study.goals if task.parent is None],
        large=len(study.leaves) > LARGE_STUDY,
        leaf_count=len(study.leaves),
    )
    return render(request, "plans/editor.html", context)


def _outline(study: Study, goal: str) -> list[tuple[Task, int]]:
    """The editor's rows in outline order (goals and leaves), under ``goal`` if given."""
    return [
        (task, depth)
        for task, depth in task_outline(study)
        if not goal or _under(study, task.id, goal)
    ]


def _goals_above(study: Study, rows: list[tuple[Task, int]], goal: str) -> list[tuple[Task, int]]:
    """The goals a page's first row lies under, outermost first, when the page starts
    inside them (so that every page says whose tasks it shows)."""
    if not rows:
        return []
    above = []
    parent = rows[0][0].parent
    while parent is not None:
        above.append(study.tasks_by_id[parent])
        if parent == goal:
            break
        parent = study.tasks_by_id[parent].parent
    depth = rows[0][1]
    return [(task, depth - index - 1) for index, task in enumerate(above)][::-1]


def _place(study: Study, task_id: str) -> str:
    """The editor's query string that shows ``task_id``'s row: its goal (in a large study)
    and the page it falls on."""
    goal = _goal_shown(study, "")
    if goal and not _under(study, task_id, goal):
        goal = task_id
        while study.tasks_by_id[goal].parent is not None:
            goal = study.tasks_by_id[goal].parent
    ids = [task.id for task, _ in _outline(study, goal)]
    number = ids.index(task_id) // PAGE_ROWS + 1 if task_id in ids else 1
    query = {key: value for key, value in (("goal", goal), ("page", number)) if value}
    if query.get("page") == 1:
        del query["page"]
    return urlencode(query)


#: Above this many leaf tasks the editor shows one top-level goal at a time.
LARGE_STUDY = 200


def _goal_shown(study: Study, asked: str) -> str:
    """The goal whose rows to show: the one asked for, else (in a large study) the first
    top-level goal; ``""`` for every row."""
    if asked == "all":
        return ""
    if asked in study.tasks_by_id and study.is_goal(asked):
        return asked
    if len(study.leaves) > LARGE_STUDY:
        return next((task.id for task in study.goals if task.parent is None), "")
    return ""


def _under(study: Study, task_id: str, goal: str) -> bool:
    """Whether a task is the goal itself or lies anywhere under it."""
    current: str | None = task_id
    while current is not None:
        if current == goal:
            return True
        current = study.tasks_by_id[current].parent
    return False


@require_http_methods(["GET", "POST"])
@login_required
def plan_row_save(request: HttpRequest, pk: int, plan: str, task: str) -> HttpResponse:
    """Save one row; answer with the row and, out of band, the plan's headline figures.

    GET answers with the row as stored (htmx; "Keep theirs" after a conflict), or the
    whole editor. A save from a row rendered at an older version of the assignment is
    refused: the row comes back with the submitted values, the stored version, and
    theirs beside yours."""
    if request.method == "GET":
        return _row_as_stored(request, pk, plan, task)
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    study = page.study
    if task not in {leaf.id for leaf in study.leaves}:
        return HttpResponse("No such leaf task.", status=404)
    existing = study.plans_by_id[plan].assignments.get(task)
    form = AssignmentForm(
        request.POST,
        study=study,
        existing=None if existing is None else assignment_to_json(existing),
    )
    problems: list[Problem] = []
    conflict = None
    version = posted_version(request.POST)
    if form.is_valid():
        item = form.item()
        try:
            services.assignment_set(
                study=page.row, plan_key=plan, task_key=task, item=item, expected_version=version
            )
        except EditConflict as error:
            conflict = conflict_context(error, item)
            version = error.version
        except StudyInvalid as error:
            problems = error.errors
    else:
        problems = [Problem(f"{field}", " ".join(errors)) for field, errors in form.errors.items()]
    if conflict is not None:
        messages.error(
            request,
            f"{task} was not saved: {conflict['message']}; the row shows their values now.",
        )
    elif problems:
        messages.error(
            request,
            f"{task} was not saved: " + "; ".join(str(problem) for problem in problems),
        )
    if not request.htmx:
        query = _place(study, task)
        url = reverse("plan-editor", args=[pk, plan]) + (f"?{query}" if query else "")
        return redirect(url + f"#row-{task}")
    page = study_page(request, pk)
    analysis = _analysis(page, plan)
    depth = {t.id: d for t, d in task_outline(page.study)}[task]
    # The row shows what was chosen, even the choices the saved assignment does not use
    # yet (a device picked before "shared"), so that nothing picked is lost.
    initial = dict(request.POST.items())
    initial["per_stage"] = "per_stage" in request.POST
    if conflict is None:
        version = _versions(page, plan, [task]).get(task, 0)
    context = page.context(
        "plan-editor",
        plan=page.study.plans_by_id[plan],
        row=_row(page.study, plan, task, depth, analysis, problems, initial, version),
        choices=_choices(page.study),
        headline=_headline(page.study, analysis),
        oob=True,
        conflict=conflict,
    )
    return render(request, "plans/_row_saved.html", context)


def _row_as_stored(request: HttpRequest, pk: int, plan: str, task: str) -> HttpResponse:
    """One editor row as stored (htmx), or the editor page around it."""
    if not request.htmx:
        return plan_editor(request, pk, plan)
    page = study_page(request, pk)
    page.plan_or_404(plan)
    if task not in {leaf.id for leaf in page.study.leaves}:
        return HttpResponse("No such leaf task.", status=404)
    analysis = _analysis(page, plan)
    depth = {t.id: d for t, d in task_outline(page.study)}[task]
    context = page.context(
        "plan-editor",
        plan=page.study.plans_by_id[plan],
        row=_row(
            page.study,
            plan,
            task,
            depth,
            analysis,
            version=_versions(page, plan, [task]).get(task, 0),
        ),
        choices=_choices(page.study),
        headline=_headline(page.study, analysis),
        oob=True,
    )
    return render(request, "plans/_row_saved.html", context)


@require_POST
@login_required
def plan_bulk(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Apply a level or a status to the selected rows."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    form = BulkForm(request.POST, study=page.study)
    if form.is_valid():
        try:
            tasks = form.cleaned_data["tasks"]
            changed = services.assignments_bulk_set(
                study=page.row,
                plan_key=plan,
                task_keys=tasks,
                changes=form.changes(),
                expected_versions={
                    task: version
                    for task in tasks
                    if (version := posted_version(request.POST, f"version-{task}")) is not None
                },
            )
            messages.success(
                request,
                f"Changed {len(changed)} task(s): {', '.join(changed)}."
                if changed
                else "No selected task could take that change (levels go to shared tasks only).",
            )
        except EditConflict as error:
            fields = conflict_context(error, None)["fields"]
            theirs = ", ".join(f"{field.name} {field.theirs}" for field in fields)
            yours = ", ".join(f"{name} {value}" for name, value in form.changes().items())
            messages.error(
                request,
                f"Nothing was changed: {error.message}. Theirs: {theirs or 'not allocated'}; "
                f"yours: {yours}. The page now shows their values: select the tasks again "
                "to apply yours.",
            )
        except StudyInvalid as error:
            messages.error(
                request,
                "Nothing was changed: " + "; ".join(str(problem) for problem in error.errors),
            )
    else:
        messages.error(request, "Nothing was changed: select tasks, and a level or a status.")
    if request.htmx:
        # The page the request came from (its goal and page) is shown again.
        return HttpResponseClientRefresh()
    return redirect(_editor_url(page.study, pk, plan, request.POST))


def _editor_url(study: Study, pk: int, plan: str, posted: Any) -> str:
    """The editor at the goal and page a form was posted from (both checked: only a goal
    of the study and a page number go into the address)."""
    query = {}
    goal = str(posted.get("goal", ""))
    if goal == "all" or (goal in study.tasks_by_id and study.is_goal(goal)):
        query["goal"] = goal
    number = page_number(posted.get("page"), 10**9)
    if number > 1:
        query["page"] = number
    url = reverse("plan-editor", args=[pk, plan])
    return url + (f"?{urlencode(query)}" if query else "")


@require_POST
@login_required
def plan_new(request: HttpRequest, pk: int) -> HttpResponse:
    """Start a plan: empty, or (with ``copy_of``) a copy of another plan."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    form = PlanForm(request.POST)
    source = request.POST.get("copy_of", "")
    if form.is_valid():
        item = form.item()
        try:
            if source:
                page.plan_or_404(source)
                services.plan_copy(
                    study=page.row, key=source, new_key=item["id"], new_name=item["name"]
                )
            else:
                services.plan_save(study=page.row, key=None, item=item)
        except StudyInvalid as error:
            messages.error(
                request,
                "The plan was not created: " + "; ".join(str(problem) for problem in error.errors),
            )
        else:
            url = reverse("plan-editor", args=[pk, item["id"]])
            return HttpResponseClientRedirect(url) if request.htmx else redirect(url)
    else:
        messages.error(request, "The plan was not created: give it an id and a name.")
    # Back to the plan copied from only when it exists: copy_of is as posted (it may be
    # anything, even text no URL can hold).
    known = source in page.study.plans_by_id
    back = (
        reverse("plan-editor", args=[pk, source]) if known else reverse("study-detail", args=[pk])
    )
    return HttpResponseClientRedirect(back) if request.htmx else redirect(back)
