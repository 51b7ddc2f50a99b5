"""The assumptions page: every default the analyses use, the fixed parts of the method and
the risk policy; editors change the study's own values inline and see the figures move."""

from __future__ import annotations

import json
import math
import re
from typing import Any

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse, HttpResponseBadRequest
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST
from django_htmx.http import trigger_client_event

from allocation import models as m
from allocation import services
from allocation.core import Problem, StudyInvalid
from allocation.core.analysis.risk import DEFAULT_BAND_MATRIX, resolve_policy
from allocation.core.assumptions import METHOD_NOTES, assumption_table
from allocation.core.methods import assumption_uses
from allocation.core.reading import child_path
from allocation.core.registry import ASSUMPTION_STATUS_WORDS, figure_text
from allocation.figures import dashboards as dashboard_figures
from allocation.services.assumptions import (
    ASSUMPTION_KEYS,
    ASSUMPTIONS_PATH,
    POLICY_PATH,
    assumption_value_parse,
)
from allocation.services.conflicts import EditConflict
from allocation.views.common import StudyPage, study_page
from allocation.views.conflicts import conflict_context, posted_version

POLICY = "risk_policy"
#: The headline figures the box shows after an edit (the registry names and rounds them).
HEADLINE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "handovers_to_review",
    "max_risk",
    "mean_awareness",
    "findings",
)


def value_items(value: Any) -> list[tuple[str, str]] | None:
    """A table's entries for reading, ``[("5", "5"), …]``; ``None`` for other values."""
    if not isinstance(value, dict):
        return None
    return [(str(key), value_text(entry)) for key, entry in value.items()]


def value_text(value: Any) -> str:
    """A value as it is typed on the form: JSON with its keys quoted, words bare."""
    if isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False, separators=(", ", ": "))


# -- reading ------------------------------------------------------------------------------


@require_GET
@login_required
def study_assumptions(request: HttpRequest, pk: int) -> HttpResponse:
    """The page; ``?edit=KEY`` opens a row's form (htmx swaps just that row), ``?row=KEY``
    gives the row back as it is shown (Cancel)."""
    page = study_page(request, pk)
    edit = request.GET.get("edit", "") if page.can_edit else ""
    if request.htmx and not request.htmx.boosted:
        # A viewer asking for a form gets the row as shown: no edit controls for them.
        key = request.GET.get("edit") or request.GET.get("row", "")
        if key == POLICY:
            return render(
                request, "assumptions/page.html#policy", _policy(page, editing=bool(edit))
            )
        if key in ASSUMPTION_KEYS:
            context = {"row": _row(page, key, editing=bool(edit)), **_base(page)}
            return render(request, "assumptions/page.html#row", context)
    return _page(request, page, edit=edit)


def _base(page: StudyPage) -> dict[str, Any]:
    return {"study_row": page.row, "can_edit": page.can_edit}


def _page(
    request: HttpRequest,
    page: StudyPage,
    *,
    edit: str = "",
    text: str | None = None,
    problems: list[Problem] | None = None,
    policy_form: dict[str, str] | None = None,
    status: int = 200,
) -> HttpResponse:
    rows = [
        _row(page, key, editing=key == edit, text=text, problems=problems)
        for key in ASSUMPTION_KEYS
    ]
    context = page.context(
        "study-assumptions",
        rows=rows,
        method_notes=[
            {"key": key, "status": ASSUMPTION_STATUS_WORDS[mark].label, "text": words}
            for key, mark, words in METHOD_NOTES
        ],
        headlines=_headlines(page),
        **_policy(page, editing=edit == POLICY, form=policy_form, problems=problems),
    )
    return render(request, "assumptions/page.html", context, status=status)


def _row(
    page: StudyPage,
    key: str,
    *,
    editing: bool = False,
    text: str | None = None,
    problems: list[Problem] | None = None,
    conflict: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """One assumption as the table shows it, or as its form when ``editing`` (with the
    study's version it was opened at, or after a ``conflict`` the newer one)."""
    table = {item["key"]: item for item in assumption_table(page.row.assumptions, page.row.scale)}
    item = table[key]
    override = (page.row.assumptions or {}).get(key)
    is_table = isinstance(item["default"], dict)
    if text is None:
        text = value_text(override if item["overridden"] else item["default"])
    return {
        **item,
        "status_words": ASSUMPTION_STATUS_WORDS[item["status"]].label,
        "used_in": assumption_uses().get(key, ()),
        "default_text": value_text(item["default"]),
        "default_items": value_items(item["default"]),
        "override_text": value_text(override) if item["overridden"] else "",
        "override_items": value_items(override) if item["overridden"] else None,
        "merged": is_table and item["overridden"] and item["value"] != override,
        "value_text": value_text(item["value"]),
        "editing": editing and page.can_edit,
        "text": text,
        "is_table": is_table,
        "multiline": is_table or isinstance(item["default"], list),
        "problems": problems if editing else [],
        "path": child_path(ASSUMPTIONS_PATH, key),
        "version": conflict["version"] if conflict else page.row.version,
        "conflict": conflict if editing else None,
    }


def _policy(
    page: StudyPage,
    *,
    editing: bool = False,
    form: dict[str, str] | None = None,
    problems: list[Problem] | None = None,
) -> dict[str, Any]:
    """The risk policy in force, with its form's values and problems by field."""
    stored = page.row.risk_policy or {}
    policy = resolve_policy(stored)
    if form is None:
        bands = stored.get("likelihood_bands", policy["likelihood_bands"])
        form = {
            "likelihood_bands": ", ".join(
                f"{cut:g}" if _is_number(cut) else str(cut) for cut in bands
            )
            if isinstance(bands, list)
            else value_text(bands),
            "frequency_bands": _cuts_text(
                stored.get("frequency_bands", policy["frequency_bands"])
            ),
            "critical_severity": str(stored.get("critical_severity", policy["critical_severity"])),
            "note": str(stored.get("note", "")),
        }
    by_field: dict[str, list[Problem]] = {name: [] for name in (*form, "other")}
    for problem in (problems or []) if editing else []:
        field = next(
            (
                name
                for name in form
                if problem.path == child_path(POLICY_PATH, name)
                or problem.path.startswith(child_path(POLICY_PATH, name) + "[")
            ),
            "other",
        )
        by_field[field].append(problem)
    try:
        figure = dashboard_figures.risk_matrix_chart(policy, compact=True)
    except (TypeError, ValueError, KeyError, IndexError):
        figure = None  # a stored policy the checks reject: its problems show above
    return {
        "study_row": page.row,
        "can_edit": page.can_edit,
        "policy": policy,
        "policy_stored": bool(stored),
        "example_matrix": DEFAULT_BAND_MATRIX,
        "policy_note": stored.get("note") if stored else None,
        "policy_editing": editing and page.can_edit,
        "policy_form": form,
        "policy_problems": by_field,
        "policy_figure": figure,
    }


def _is_number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _headlines(page: StudyPage, before: dict[str, dict] | None = None) -> dict[str, Any]:
    """Each plan's headline figures now, beside those before an edit when given."""
    analyses = page.analyses()
    plans = []
    for plan in page.study.plans if page.study else ():
        if plan.id not in analyses:
            continue
        now = analyses[plan.id].headline()
        earlier = (before or {}).get(plan.id)
        plans.append(
            {
                "plan": plan,
                "url": _dashboard_url(page, plan.id),
                "figures": [
                    _figure(key, now[key], None if earlier is None else earlier[key])
                    for key in HEADLINE_FIGURES
                ],
            }
        )
    moved = any(figure["changed"] for item in plans for figure in item["figures"])
    return {"plans": plans, "ok": page.result.ok, "after_edit": before is not None, "moved": moved}


def _figure(key: str, now: float, before: float | None) -> dict[str, Any]:
    """A headline figure as the registry writes it, marked when it moved as shown."""
    now_text = figure_text(key, now, unit=False)
    before_text = None if before is None else figure_text(key, before, unit=False)
    return {
        "key": key,
        "now": now_text,
        "before": before_text,
        "changed": before_text is not None and before_text != now_text,
    }


def _dashboard_url(page: StudyPage, plan_id: str) -> str:
    return reverse("plan-dashboard", args=[page.row.pk, plan_id])


def _headline_values(page: StudyPage) -> dict[str, dict]:
    return {plan_id: analysis.headline() for plan_id, analysis in page.analyses().items()}


# -- writing ------------------------------------------------------------------------------


def _saved(
    request: HttpRequest, pk: int, *, before: dict[str, dict], part: str, message: str
) -> HttpResponse:
    """After a change: the row (or policy) as shown, the headline box out of band, and the
    ``assumptions-changed`` event; without htmx, back to the page with a message."""
    anchor = "risk-policy" if part == POLICY else f"assumption-{part}"
    messages.success(request, message)
    if not request.htmx:
        return redirect(reverse("study-assumptions", args=[pk]) + f"#{anchor}")
    page = study_page(request, pk, role=m.Role.EDITOR)
    context = {**_base(page), "headlines": _headlines(page, before)}
    if part == POLICY:
        context.update(_policy(page))
        template = "assumptions/_policy_saved.html"
    else:
        context["row"] = _row(page, part)
        template = "assumptions/_row_saved.html"
    response = render(request, template, context)
    return trigger_client_event(response, "assumptions-changed", {"key": part})


def _refused(
    request: HttpRequest,
    page: StudyPage,
    *,
    part: str,
    problems: list[Problem],
    text: str | None = None,
    policy_form: dict[str, str] | None = None,
    conflict: dict[str, Any] | None = None,
) -> HttpResponse:
    """The form again with the problems (or the conflict) beside it; nothing was stored."""
    if problems:
        where = (
            "The risk policy has problems, listed beside its fields."
            if part == POLICY
            else f"The value of {part} has problems, listed beside it."
        )
        messages.error(request, f"Nothing was saved. {where}")
    if conflict is not None:
        context = {
            "row": _row(page, part, editing=True, text=text, conflict=conflict),
            **_base(page),
        }
        page_context = page.context("study-assumptions", **context)
        if request.htmx:
            return render(request, "assumptions/page.html#row", page_context)
        return render(request, "assumptions/conflict_page.html", page_context, status=409)
    if request.htmx:
        if part == POLICY:
            context = _policy(page, editing=True, form=policy_form, problems=problems)
            return render(request, "assumptions/page.html#policy", context)
        context = {
            "row": _row(page, part, editing=True, text=text, problems=problems),
            **_base(page),
        }
        return render(request, "assumptions/page.html#row", context)
    return _page(
        request,
        page,
        edit=part,
        text=text,
        problems=problems,
        policy_form=policy_form,
        status=400,
    )


@require_POST
@login_required
def assumption_set(request: HttpRequest, pk: int) -> HttpResponse:
    """Set one assumption from the form's ``key`` and ``value`` (JSON-ish text)."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    key = request.POST.get("key", "")
    if key not in ASSUMPTION_KEYS:
        return HttpResponseBadRequest("No such assumption.")
    text = request.POST.get("value", "")
    value, problems = assumption_value_parse(text, child_path(ASSUMPTIONS_PATH, key))
    before = _headline_values(page)
    if not problems:
        try:
            services.study_assumption_set(
                study=page.row,
                key=key,
                value=value,
                user=request.user,
                expected_version=posted_version(request.POST),
            )
        except EditConflict as error:
            conflict = conflict_context(error, {key: value})
            return _refused(request, page, part=key, problems=[], text=text, conflict=conflict)
        except StudyInvalid as error:
            problems = error.errors
    if problems:
        return _refused(request, page, part=key, problems=problems, text=text)
    return _saved(request, pk, before=before, part=key, message=f"Saved the study's {key}.")


@require_POST
@login_required
def assumption_reset(request: HttpRequest, pk: int) -> HttpResponse:
    """Drop the study's value of the form's ``key``: the default applies again."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    key = request.POST.get("key", "")
    if key not in ASSUMPTION_KEYS:
        return HttpResponseBadRequest("No such assumption.")
    before = _headline_values(page)
    try:
        services.study_assumption_reset(
            study=page.row,
            key=key,
            user=request.user,
            expected_version=posted_version(request.POST),
        )
    except StudyInvalid as error:
        return _refused(request, page, part=key, problems=error.errors)
    return _saved(request, pk, before=before, part=key, message=f"{key} is back to its default.")


_SEPARATORS = re.compile(r"[\s,;]+")


def _number_or_text(text: str) -> Any:
    """A number where the text is one, else the text (the study reader then says why)."""
    try:
        return int(text)
    except ValueError:
        pass
    try:
        number = float(text)
    except ValueError:
        return text
    return number if math.isfinite(number) else text


#: The risk policy's keys the form sets.
_POLICY_FORM = ("likelihood_bands", "frequency_bands", "critical_severity", "note")


def _cuts_text(cuts: Any) -> str:
    """Cut points as the form shows them: ``10, 1, 0.1, 0.01``."""
    if isinstance(cuts, list):
        return ", ".join(f"{cut:g}" if _is_number(cut) else str(cut) for cut in cuts)
    return value_text(cuts)


def _policy_from_form(data) -> tuple[dict[str, str], dict[str, Any], list[Problem]]:
    """The form's text, the policy it gives, and any problem reading the text."""
    form = {
        name: data.get(name, "").strip()
        for name in ("likelihood_bands", "frequency_bands", "critical_severity", "note")
    }
    policy: dict[str, Any] = {}
    problems: list[Problem] = []
    for key in ("likelihood_bands", "frequency_bands"):
        bands = form[key]
        if bands.startswith("["):
            path = child_path(POLICY_PATH, key)
            value, found = assumption_value_parse(bands, path)
            problems += found
            if not found:
                policy[key] = value
        elif bands:
            policy[key] = [_number_or_text(part) for part in _SEPARATORS.split(bands) if part]
    for name in ("critical_severity",):
        if form[name]:
            policy[name] = _number_or_text(form[name])
    if form["note"]:
        policy["note"] = form["note"]
    return form, policy, problems


@require_POST
@login_required
def risk_policy_set(request: HttpRequest, pk: int) -> HttpResponse:
    """Set the study's risk policy: likelihood and frequency band cut points, the
    critical severity and a note (a band matrix from the study file is kept)."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    form, policy, problems = _policy_from_form(request.POST)
    # What the form does not show (a band matrix set in the study file) is kept.
    stored = page.row.risk_policy or {}
    policy = {key: value for key, value in stored.items() if key not in _POLICY_FORM} | policy
    before = _headline_values(page)
    if not problems:
        try:
            services.study_risk_policy_set(
                study=page.row,
                policy=policy,
                user=request.user,
                expected_version=posted_version(request.POST),
            )
        except StudyInvalid as error:
            problems = error.errors
    if problems:
        return _refused(request, page, part=POLICY, problems=problems, policy_form=form)
    return _saved(
        request, pk, before=before, part=POLICY, message="Saved the study's risk policy."
    )


@require_POST
@login_required
def risk_policy_reset(request: HttpRequest, pk: int) -> HttpResponse:
    """Drop the study's risk policy: Baton's example policy applies again."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    before = _headline_values(page)
    services.study_risk_policy_reset(study=page.row, user=request.user)
    return _saved(
        request,
        pk,
        before=before,
        part=POLICY,
        message="The study has no risk policy of its own now: the example policy applies.",
    )
