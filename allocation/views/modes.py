"""A plan's mode map: the diagram, the findings of its verification, the editor of its
modes, holder overrides and transitions, and the step-through of each finding's events
("how did we get into this mode?")."""

from __future__ import annotations

import re
from typing import Any

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST
from django_htmx.http import reswap, retarget

from allocation import models as m
from allocation import selectors, services
from allocation.core import Problem, StudyInvalid
from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.findings import Finding
from allocation.core.analysis.modecheck import MODE_FINDING_KINDS, Moment, walkthrough
from allocation.core.describe import severity_text
from allocation.core.model import ANY_MODE, Assignment, Plan, Study
from allocation.core.registry import finding_kind
from allocation.core.writing import assignment_to_json
from allocation.figures.modes import CAUSE_WORDS, CUE_LINES, mode_map_figure
from allocation.forms.base import ItemForm
from allocation.forms.modes import ModeForm, TransitionForm
from allocation.forms.plans import AssignmentForm
from allocation.services.conflicts import EditConflict
from allocation.views.common import StudyPage, study_page
from allocation.views.conflicts import conflict_context, posted_version

CUE_WORDS = {cue: words for cue, (_dash, _width, words) in CUE_LINES.items()}


def _plan_page(request: HttpRequest, pk: int, plan: str, role: str = m.Role.VIEWER):
    page = study_page(request, pk, role=role)
    return page, page.plan_or_404(plan)


def mode_findings(analysis: PlanAnalysis | None) -> list[Finding]:
    """The plan's mode-map findings, numbered by their place in this list."""
    if analysis is None:
        return []
    # A failure nobody is told of is played in its mode too (it has a witness there).
    return [
        f
        for f in analysis.findings
        if f.kind in MODE_FINDING_KINDS or (f.kind == "silent_failure" and f.witness)
    ]


def _plan_index(study: Study, plan: Plan) -> int:
    return [p.id for p in study.plans].index(plan.id)


def _map_problems(page: StudyPage, plan: Plan) -> list[Problem]:
    """The study's problems that lie in this plan's mode map."""
    prefix = f"$.plans[{_plan_index(page.study, plan)}].modes"
    return [p for p in page.result.problems if p.path.startswith(prefix)]


def _assignment_text(study: Study, assignment: Assignment | None) -> str:
    """Who does a task under an assignment, in a few words."""
    if assignment is None:
        return "not allocated"
    if assignment.applies is False:
        return "not done in this mode"
    names = [
        study.agents_by_id[agent].name
        for agent in (assignment.human, assignment.automation)
        if agent in study.agents_by_id
    ]
    if len(names) == 2:
        levels = assignment.levels
        level = (
            f", level {levels}"
            if isinstance(levels, int)
            else (", levels by stage" if levels else "")
        )
        return f"shared: {' and '.join(names)}{level}"
    return names[0] if names else "nobody"


def _region_context(page: StudyPage, plan: Plan) -> dict[str, Any]:
    """Everything the mode-map region shows."""
    study = page.study
    modes = plan.modes
    analysis = page.analysis(plan.id)
    findings = mode_findings(analysis)
    pk = page.row.pk
    mode_rows = []
    transition_rows = []
    uncued = _uncued_transitions(modes, findings)
    if modes is not None:
        for mode in modes.states:
            overrides = mode.overrides or {}
            consequences = services.mode_delete_consequences(
                study=page.row, plan_key=plan.id, key=mode.id
            )
            mode_rows.append(
                {
                    "mode": mode,
                    "initial": mode.id == modes.initial,
                    "overrides": [
                        {
                            "task": study.tasks_by_id[task_id],
                            "text": _assignment_text(study, assignment),
                            "plan_text": _assignment_text(study, plan.assignments.get(task_id)),
                            "url": reverse("mode-override", args=[pk, plan.id, mode.id, task_id]),
                        }
                        for task_id, assignment in overrides.items()
                        if task_id in study.tasks_by_id
                    ],
                    "confirm": _confirm_text(mode.name, consequences),
                }
            )
        timed = analysis.mode_time if analysis is not None else None
        fires = timed.row_fires(modes) if timed is not None else None
        for index, t in enumerate(modes.transitions):
            transition_rows.append(
                {
                    "index": index,
                    "transition": t,
                    "when": _when_text(study, t),
                    "fires": None if fires is None else fires[index],
                    "source": modes.by_id[t.source].name
                    if t.source in modes.by_id
                    else ("any mode" if t.source == ANY_MODE else t.source),
                    "target": modes.by_id[t.target].name if t.target in modes.by_id else t.target,
                    "by": CAUSE_WORDS.get(t.by, t.by),
                    "cue": CUE_WORDS.get(t.cue, t.cue),
                    "flagged": (t.source, t.target, t.trigger) in uncued
                    or (
                        t.source == ANY_MODE
                        and any(item[1:] == (t.target, t.trigger) for item in uncued)
                    ),
                }
            )
    figure = None
    if modes is not None and modes.states:
        figure = mode_map_figure(modes, finding_transitions=uncued)
    return {
        "plan": plan,
        "modes": modes,
        "plan_links": [
            {
                "plan": item,
                "url": reverse("plan-modes", args=[pk, item.id]),
                "active": item.id == plan.id,
                "has_modes": item.modes is not None,
            }
            for item in study.plans
        ],
        "mode_rows": mode_rows,
        "transition_rows": transition_rows,
        "figure": figure,
        "initial_name": (
            modes.by_id[modes.initial].name if modes and modes.initial in modes.by_id else ""
        ),
        "analysed": analysis is not None,
        "findings": [
            {
                "number": number,
                "finding": finding,
                "title": finding_kind(finding.kind).label,
                "severity": severity_text(finding.severity),
                "mode_names": [
                    modes.by_id[mode_id].name if mode_id in modes.by_id else mode_id
                    for mode_id in finding.modes
                ],
                "needs_missed_display": any(
                    step.missed and step.cue != "none" for step in finding.witness
                ),
                "url": reverse("mode-finding", args=[pk, plan.id, number]),
            }
            for number, finding in enumerate(findings)
        ],
        "finding_counts": [
            (finding_kind(kind).label, count)
            for kind in MODE_FINDING_KINDS
            if (count := sum(1 for f in findings if f.kind == kind))
        ],
        "kinds": [finding_kind(kind) for kind in MODE_FINDING_KINDS],
        "map_problems": _map_problems(page, plan),
        "leaves": study.leaves,
    }


def _uncued_transitions(modes, findings: list[Finding]) -> frozenset[tuple[str, str, str]]:
    """The transitions (from, to, trigger) that a change-without-cue finding is about."""
    if modes is None:
        return frozenset()
    return frozenset(
        (f.modes[0], f.modes[1], f.events[-1])
        for f in findings
        if f.kind in ("uncued_change", "unforeseen_transition") and f.events
    )


def _when_text(study: Study, transition) -> str:
    """How a transition happens, in words."""
    if transition.per_day:
        return f"at {transition.per_day:g} a day"
    if transition.event is not None:
        event = study.events_by_id.get(transition.event)
        return f"with each {event.name if event else transition.event}"
    if transition.times:
        return "at " + ", ".join(transition.times)
    return "when made"


def _confirm_text(name: str, consequences) -> str:
    text = f"Delete the mode {name}?"
    if consequences:
        text += " This also removes: " + "; ".join(c.text for c in consequences) + "."
    return text


@require_GET
@login_required
def plan_modes(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The mode map of one plan: diagram, findings, modes and transitions."""
    page, chosen = _plan_page(request, pk, plan)
    context = page.context("plan-modes", **_region_context(page, chosen))
    if request.htmx and request.htmx.target == "modes-region":
        return render(request, "modes/page.html#region", context)
    return render(request, "modes/page.html", context)


def _region_response(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """After a change: the whole region anew (htmx), or back to the page."""
    if not request.htmx:
        return redirect("plan-modes", pk, plan)
    page, chosen = _plan_page(request, pk, plan)
    context = page.context("plan-modes", **_region_context(page, chosen))
    response = render(request, "modes/page.html#region", context)
    return reswap(retarget(response, "#modes-region"), "outerHTML")


#: Where a core message about a mode or a transition lands: the file key after the item.
_ITEM_KEY = re.compile(r"\.(?:states|transitions)\[\d+\]\.(\w+)|\.overrides\.[^.]+\.(\w+)")


def _problems_by_key(problems: list[Problem]) -> tuple[dict[str, list[str]], list[Problem]]:
    by_key: dict[str, list[str]] = {}
    general = []
    for problem in problems:
        match = _ITEM_KEY.search(problem.path)
        key = match and (match[1] or match[2])
        if key:
            by_key.setdefault(key, []).append(problem.message)
        else:
            general.append(problem)
    return by_key, general


def _form_response(
    request: HttpRequest,
    page: StudyPage,
    plan: Plan,
    form: ItemForm,
    *,
    what: str,
    key: str,
    action: str,
    problems: list[Problem] = (),
    hidden: dict[str, str] | None = None,
    conflict: dict[str, Any] | None = None,
) -> HttpResponse:
    by_key, general = _problems_by_key(list(problems))
    context = page.context(
        "plan-modes",
        plan=plan,
        kind={"singular": what, "name": "modes"},
        key=key,
        form=form,
        groups=form.field_groups(),
        core_errors=by_key,
        general=general,
        action=action,
        cancel_url=reverse("plan-modes", args=[page.row.pk, plan.id]),
        hidden=sorted((hidden or {}).items()),
        conflict=conflict,
    )
    template = "inventory/form_page.html#form" if request.htmx else "modes/form_page.html"
    status = 400 if problems and not request.htmx else 200
    if conflict is not None and not request.htmx:
        status = 409
    return render(request, template, context, status=status)


def _problems_of(form: ItemForm | AssignmentForm, error: StudyInvalid | None) -> list[Problem]:
    if error is not None:
        return list(error.errors)
    return [Problem(f"$.form.{name}", " ".join(errors)) for name, errors in form.errors.items()]


def _item_edit(
    request: HttpRequest,
    page: StudyPage,
    plan: Plan,
    *,
    what: str,
    key: str,
    make_form,
    initial: dict[str, Any],
    save,
    hidden: dict[str, str],
    version: int,
) -> HttpResponse:
    """The form of a mode or a transition (GET), and saving it with ``save(item,
    expected_version)``; ``version`` is the stored row's (0 for a new one), which the
    form carries back."""
    action = request.path
    if request.method == "GET":
        form = make_form(initial=initial)
        return _form_response(
            request,
            page,
            plan,
            form,
            what=what,
            key=key,
            action=action,
            hidden={**hidden, "version": str(version)},
        )
    form = make_form(data=request.POST)
    error = None
    conflict = None
    expected = posted_version(request.POST)
    if form.is_valid():
        item = form.item()
        try:
            save(item, expected)
        except EditConflict as caught:
            conflict, expected = conflict_context(caught, item), caught.version
        except StudyInvalid as caught:
            error = caught
        else:
            messages.success(request, f"Saved the {what}.")
            return _region_response(request, page.row.pk, plan.id)
    return _form_response(
        request,
        page,
        plan,
        form,
        what=what,
        key=key,
        action=action,
        problems=[] if conflict else _problems_of(form, error),
        hidden=hidden if expected is None else {**hidden, "version": str(expected)},
        conflict=conflict,
    )


@require_http_methods(["GET", "POST"])
@login_required
def mode_edit(request: HttpRequest, pk: int, plan: str, mode: str) -> HttpResponse:
    """The form for a new mode (``new``) or an existing one (GET), and saving it."""
    page, chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    modes = chosen.modes
    if mode != "new" and (modes is None or mode not in modes.by_id):
        raise Http404("No such mode.")
    return _item_edit(
        request,
        page,
        chosen,
        what="mode",
        key=mode,
        make_form=lambda data=None, initial=None: ModeForm(data, initial=initial),
        initial={} if mode == "new" else ModeForm.initial_for(_mode_item(page, chosen, mode)),
        save=lambda item, version: services.mode_save(
            study=page.row,
            plan_key=plan,
            key=None if mode == "new" else mode,
            item=item,
            expected_version=version,
        ),
        hidden={},
        version=0
        if mode == "new"
        else m.ModeState.objects.get(plan__study=page.row, plan__key=plan, key=mode).version,
    )


def _mode_item(page: StudyPage, plan: Plan, mode: str) -> dict[str, Any]:
    document = selectors.study_document(page.row)
    item = document["plans"][_plan_index(page.study, plan)]["modes"]
    return next(state for state in item["states"] if state["id"] == mode)


def _outcome(request: HttpRequest, done: str, refused: str, action) -> None:
    """Run a change; say what happened as a message."""
    try:
        action()
    except StudyInvalid as error:
        messages.error(request, f"{refused}: " + "; ".join(p.message for p in error.errors))
    else:
        messages.success(request, done)


@require_POST
@login_required
def mode_delete(request: HttpRequest, pk: int, plan: str, mode: str) -> HttpResponse:
    page, _chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    _outcome(
        request,
        f"Deleted the mode {mode}.",
        f"The mode {mode} was not deleted",
        lambda: services.mode_delete(study=page.row, plan_key=plan, key=mode),
    )
    return _region_response(request, pk, plan)


@require_POST
@login_required
def mode_initial(request: HttpRequest, pk: int, plan: str, mode: str) -> HttpResponse:
    page, _chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    _outcome(
        request,
        f"The device now starts in {mode}.",
        "The initial mode was not changed",
        lambda: services.mode_initial_set(study=page.row, plan_key=plan, key=mode),
    )
    return _region_response(request, pk, plan)


@require_POST
@login_required
def mode_map_delete(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    page, _chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    _outcome(
        request,
        "Removed the mode map.",
        "The mode map was not removed",
        lambda: services.mode_map_delete(study=page.row, plan_key=plan),
    )
    return _region_response(request, pk, plan)


def _override_target(page: StudyPage, plan: Plan, mode: str, task: str):
    """The mode and the leaf task of an override; 404 when either is not there."""
    if plan.modes is None or mode not in plan.modes.by_id:
        raise Http404("No such mode.")
    if task not in {leaf.id for leaf in page.study.leaves}:
        raise Http404("No such leaf task.")
    return (plan.modes.by_id[mode].overrides or {}).get(task)


@require_http_methods(["GET", "POST"])
@login_required
def mode_override(request: HttpRequest, pk: int, plan: str, mode: str, task: str) -> HttpResponse:
    """Who holds one task while in one mode: the form (GET), saving or removing it."""
    page, chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    current = _override_target(page, chosen, mode, task)
    existing = None if current is None else assignment_to_json(current)
    if request.method == "GET":
        return _override_response(request, page, chosen, mode, task)
    if "remove" in request.POST:
        _outcome(
            request,
            f"{task} now follows the plan in this mode.",
            "The override was not removed",
            lambda: services.mode_override_set(
                study=page.row, plan_key=plan, mode_key=mode, task_key=task, item=None
            ),
        )
        return _region_response(request, pk, plan)
    form = AssignmentForm(request.POST, study=page.study, existing=existing)
    error = None
    conflict = None
    version = posted_version(request.POST)
    if form.is_valid():
        item = form.item()
        if item is None:
            form.add_error("who", "Choose who does it in this mode, or remove the override.")
        else:
            try:
                services.mode_override_set(
                    study=page.row,
                    plan_key=plan,
                    mode_key=mode,
                    task_key=task,
                    item=item,
                    expected_version=version,
                )
            except EditConflict as caught:
                conflict, version = conflict_context(caught, item), caught.version
            except StudyInvalid as caught:
                error = caught
            else:
                messages.success(request, f"Saved who does {task} in this mode.")
                return _region_response(request, pk, plan)
    return _override_response(
        request,
        page,
        chosen,
        mode,
        task,
        form=form,
        problems=[] if conflict else _problems_of(form, error),
        conflict=conflict,
        version=version,
    )


@require_GET
@login_required
def mode_override_pick(request: HttpRequest, pk: int, plan: str, mode: str) -> HttpResponse:
    """The override form of the task picked from the list (``?task=``)."""
    page, chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    task = request.GET.get("task", "")
    if not task:
        if chosen.modes is None or mode not in chosen.modes.by_id:
            raise Http404("No such mode.")
        context = page.context(
            "plan-modes", plan=chosen, mode=chosen.modes.by_id[mode], leaves=page.study.leaves
        )
        return render(request, "modes/override_pick_page.html", context)
    _override_target(page, chosen, mode, task)
    if request.htmx:
        return _override_response(request, page, chosen, mode, task)
    return redirect("mode-override", pk, plan, mode, task)


def _override_response(
    request: HttpRequest,
    page: StudyPage,
    plan: Plan,
    mode: str,
    task: str,
    form: AssignmentForm | None = None,
    problems: list[Problem] = (),
    conflict: dict[str, Any] | None = None,
    version: int | None = None,
) -> HttpResponse:
    study = page.study
    current = _override_target(page, plan, mode, task)
    if version is None:
        stored = m.ModeOverride.objects.filter(
            state__plan__study=page.row, state__plan__key=plan.id, state__key=mode, task__key=task
        )
        version = stored.values_list("version", flat=True).first() or 0
    if form is None:
        # A new override starts from the plan's own assignment of the task.
        start = current if current is not None else plan.assignments.get(task)
        item = None if start is None else assignment_to_json(start)
        form = AssignmentForm(initial=AssignmentForm.initial_for(item), study=study)
    by_key, general = _problems_by_key(list(problems))
    context = page.context(
        "plan-modes",
        plan=plan,
        mode=plan.modes.by_id[mode],
        task=study.task(task),
        form=form,
        is_override=current is not None,
        plan_text=_assignment_text(study, plan.assignments.get(task)),
        core_errors=by_key,
        general=[p for p in general if not p.path.startswith("$.form")],
        action=reverse("mode-override", args=[page.row.pk, plan.id, mode, task]),
        cancel_url=reverse("plan-modes", args=[page.row.pk, plan.id]),
        conflict=conflict,
        version=version,
    )
    template = "modes/override_page.html#form" if request.htmx else "modes/override_page.html"
    status = 400 if problems and not request.htmx else 200
    if conflict is not None and not request.htmx:
        status = 409
    return render(request, template, context, status=status)


def _transition_target(plan: Plan, transition: str) -> int | None:
    """The transition's index (``None`` for a new one); 404 when it is not there."""
    if transition == "new":
        if plan.modes is None:
            raise Http404("The plan has no mode map yet: add a mode first.")
        return None
    if not transition.isdigit() or plan.modes is None:
        raise Http404("No such transition.")
    index = int(transition)
    if index >= len(plan.modes.transitions):
        raise Http404("No such transition.")
    return index


def _transition_form(study: Study, plan: Plan, data=None, initial=None) -> TransitionForm:
    choices = [(mode.id, f"{mode.name} ({mode.id})") for mode in plan.modes.states]
    events = [(event.id, f"{event.name} ({event.id})") for event in study.events]
    return TransitionForm(data, initial=initial, modes=choices, events=events)


def _expected(request: HttpRequest) -> dict[str, str] | None:
    """The transition as the editor showed it (guards against concurrent changes)."""
    names = {"from": "expected_from", "to": "expected_to", "trigger": "expected_trigger"}
    if not all(field in request.POST for field in names.values()):
        return None
    return {key: request.POST[field] for key, field in names.items()}


@require_http_methods(["GET", "POST"])
@login_required
def transition_edit(request: HttpRequest, pk: int, plan: str, transition: str) -> HttpResponse:
    """The form for a new transition (``new``) or an existing one (GET), and saving it."""
    page, chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    index = _transition_target(chosen, transition)
    item = None if index is None else _transition_item(page, chosen, index)
    if request.method == "POST":
        expected = _expected(request) or {}
    else:
        expected = {} if item is None else {key: item[key] for key in ("from", "to", "trigger")}
    return _item_edit(
        request,
        page,
        chosen,
        what="transition",
        key=transition,
        make_form=lambda data=None, initial=None: _transition_form(
            page.study, chosen, data, initial
        ),
        initial={} if item is None else TransitionForm.initial_for(item),
        save=lambda new, version: services.transition_save(
            study=page.row,
            plan_key=plan,
            index=index,
            item=new,
            expected=_expected(request),
            expected_version=version,
        ),
        hidden={f"expected_{key}": value for key, value in expected.items()},
        version=0 if index is None else _transition_version(page, plan, index),
    )


def _transition_version(page: StudyPage, plan: str, index: int) -> int:
    versions = m.ModeTransition.objects.filter(plan__study=page.row, plan__key=plan)
    return list(versions.values_list("version", flat=True))[index]


def _transition_item(page: StudyPage, plan: Plan, index: int) -> dict[str, Any]:
    document = selectors.study_document(page.row)
    return document["plans"][_plan_index(page.study, plan)]["modes"]["transitions"][index]


@require_POST
@login_required
def transition_delete(request: HttpRequest, pk: int, plan: str, transition: str) -> HttpResponse:
    page, chosen = _plan_page(request, pk, plan, role=m.Role.EDITOR)
    index = _transition_target(chosen, transition)
    if index is None:
        raise Http404("No such transition.")
    _outcome(
        request,
        "Deleted the transition.",
        "The transition was not deleted",
        lambda: services.transition_delete(
            study=page.row, plan_key=plan, index=index, expected=_expected(request)
        ),
    )
    return _region_response(request, pk, plan)


# -- the step-through ------------------------------------------------------------------


def _holder_name(study: Study, agent_id: str | None) -> str:
    if agent_id is None:
        return "nobody (not done)"
    agent = study.agents_by_id.get(agent_id)
    return agent.name if agent else agent_id


def _moment_context(study: Study, plan: Plan, moment: Moment) -> dict[str, Any]:
    modes = plan.modes
    step = moment.step
    event = None
    if step is not None:
        if step.refused:
            how = "the device does not accept it: nothing changes"
        elif step.by == "human":
            how = "the person's own action"
        elif step.missed:
            how = (
                "not noticed: there is no cue"
                if step.cue == "none"
                else f"not noticed: {CUE_WORDS.get(step.cue, step.cue)}, which may be missed"
            )
        else:
            how = f"noticed ({CUE_WORDS.get(step.cue, step.cue)})"
        event = {
            "trigger": step.event,
            "by": CAUSE_WORDS.get(step.by, step.by),
            "how": how,
            "missed": step.missed,
            "refused": step.refused,
        }
    believed = [modes.by_id[mode_id] for mode_id in moment.believed_set or (moment.believed,)]
    return {
        "event": event,
        "actual": modes.by_id[moment.actual],
        "believed": modes.by_id[moment.believed],
        # Look-alike modes are believed together: "Automatic or Exercise".
        "believed_modes": believed,
        "believed_name": " or ".join(mode.name for mode in believed),
        "agree": [mode.id for mode in believed] == [moment.actual] and not moment.confused,
        "confused": moment.confused,
        "holders": [
            {
                "task": study.tasks_by_id[task_id],
                "actual": _holder_name(study, actual),
                "believed": " or ".join(_holder_name(study, holder) for holder in holders),
                "differs": holders != (actual,),
            }
            for task_id, actual, holders in moment.holders
        ],
    }


@require_GET
@login_required
def mode_finding(request: HttpRequest, pk: int, plan: str, finding: int) -> HttpResponse:
    """One finding with its events played step by step (``?step=``)."""
    page, chosen = _plan_page(request, pk, plan)
    analysis = page.analysis(plan)
    findings = mode_findings(analysis)
    if not 0 <= finding < len(findings):
        raise Http404("No such finding (the study may have changed since).")
    found = findings[finding]
    moments = walkthrough(page.study, chosen, analysis.assumptions, found)
    try:
        step = int(request.GET.get("step", "0"))
    except ValueError:
        step = 0
    step = max(0, min(step, len(moments) - 1)) if moments else 0
    url = reverse("mode-finding", args=[pk, plan, finding])
    current = _moment_context(page.study, chosen, moments[step]) if moments else None
    figure = None
    if moments:
        figure = mode_map_figure(
            chosen.modes,
            actual=moments[step].actual,
            believed=moments[step].believed_set or (moments[step].believed,),
        )
    context = page.context(
        "plan-modes",
        plan=chosen,
        finding=found,
        number=finding,
        title=finding_kind(found.kind).label,
        explanation=finding_kind(found.kind).explanation,
        anchor=finding_kind(found.kind).anchor,
        severity=severity_text(found.severity),
        steps=[
            {
                "number": index,
                "label": "Start" if moment.step is None else moment.step.event,
                "url": f"{url}?step={index}",
                "current": index == step,
                "confused": moment.confused,
                "missed": moment.step is not None and moment.step.missed,
            }
            for index, moment in enumerate(moments)
        ],
        step=step,
        last=len(moments) - 1,
        current=current,
        figure=figure,
        previous_url=f"{url}?step={step - 1}" if step > 0 else None,
        next_url=f"{url}?step={step + 1}" if moments and step < len(moments) - 1 else None,
        back_url=reverse("plan-modes", args=[pk, plan]),
    )
    if request.htmx and request.htmx.target == "walkthrough":
        return render(request, "modes/finding.html#walkthrough", context)
    return render(request, "modes/finding.html", context)
