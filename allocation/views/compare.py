"""Compare plans (Methods: comparison): figures side by side, burden moved, handovers and
findings that appear or go, and the study objective with its weights and sensitivity.

The plans come from the query string (``?baseline=a&plan=a&plan=b``), so a comparison
is a link to share; the baseline is the ``baseline`` plan, else the first one named.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any
from urllib.parse import urlencode

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse, QueryDict
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST

from allocation import models as m
from allocation import services
from allocation.core import StudyInvalid
from allocation.core.analysis.compare import (
    OBJECTIVE_FIGURES,
    Comparison,
    PlanDelta,
    compare_plans,
    objective_values,
    weight_problems,
)
from allocation.core.assumptions import OBJECTIVE_WEIGHTS, check_assumptions
from allocation.core.limits import PAGE_ROWS
from allocation.core.registry import figure, figure_number, figure_text
from allocation.figures.compare import burden_moved_figure, objective_figure
from allocation.views.common import StudyPage, study_page
from allocation.views.paging import RowPage, page_of

#: Tasks shown per plan in the burden-moved table and chart.
TOP_TASKS = 30

#: What each weight stands for, beside its field in the weight form: the figure's label
#: and unit.
WEIGHT_LABELS = {
    key: f"{figure(key).label} {figure(key).unit}".strip() for key in OBJECTIVE_FIGURES
}


@dataclass
class WeightForm:
    """The weight form's values as typed, and a message per field that is wrong."""

    values: dict[str, str]
    errors: dict[str, str] = field(default_factory=dict)

    @property
    def fields(self) -> list[dict[str, str]]:
        return [
            {
                "key": key,
                "name": f"weight_{key}",
                "label": WEIGHT_LABELS[key],
                "value": self.values.get(key, ""),
                "error": self.errors.get(key, ""),
                "default": f"{OBJECTIVE_WEIGHTS[key]:g}",
            }
            for key in OBJECTIVE_FIGURES
        ]


def _number_text(value: float | int) -> str:
    """A number as typed back into a field: whole numbers without a decimal point."""
    number = float(value)
    return str(int(number)) if number.is_integer() else repr(number)


@dataclass
class ReferenceForm:
    """The reference-point form's values as typed (``good_<figure>``, ``poor_<figure>``;
    blank takes the default), a message per figure that is wrong, and each figure's
    poor value in force by default (shown as the blank field's placeholder)."""

    values: dict[str, str]
    errors: dict[str, str] = field(default_factory=dict)
    defaults: dict[str, str] = field(default_factory=dict)

    @classmethod
    def of(cls, reference: Any) -> ReferenceForm:
        values = {}
        for key, point in (reference if isinstance(reference, dict) else {}).items():
            for side in ("good", "poor"):
                if isinstance(point, dict) and side in point:
                    values[f"{side}_{key}"] = _number_text(point[side])
        return cls(values)

    @property
    def fields(self) -> list[dict[str, str]]:
        return [
            {
                "key": key,
                "label": WEIGHT_LABELS[key],
                "good_name": f"good_{key}",
                "good": self.values.get(f"good_{key}", ""),
                "poor_name": f"poor_{key}",
                "poor": self.values.get(f"poor_{key}", ""),
                "poor_default": self.defaults.get(key, ""),
                "error": self.errors.get(key, ""),
            }
            for key in OBJECTIVE_FIGURES
        ]


def _selection(page: StudyPage, query: QueryDict) -> tuple[list[str], list[str]]:
    """The plans to compare, the baseline first, and messages about the request."""
    known = page.study.plans_by_id if page.study else {}
    asked = [plan for plan in query.getlist("plan") if plan]
    baseline = query.get("baseline", "")
    notes = [
        f"There is no plan “{plan}” in this study; it was left out."
        for plan in dict.fromkeys([*asked, baseline])
        if plan and plan not in known
    ]
    chosen = list(dict.fromkeys(plan for plan in asked if plan in known))
    if not asked:
        chosen = list(known)
    if baseline in known:
        chosen = [baseline, *(plan for plan in chosen if plan != baseline)]
    return chosen, notes


def _query(plans: list[str], focus: str = "") -> str:
    """The query string naming a comparison: baseline, plans and the plan in focus."""
    if not plans:
        return ""
    pairs = [("baseline", plans[0]), *(("plan", plan) for plan in plans)]
    if focus:
        pairs.append(("focus", focus))
    return urlencode(pairs)


def _difference(key: str, difference: float | None, verdict: str) -> str | None:
    """The difference to the baseline as shown; none for the baseline itself."""
    if difference is None:
        return None
    return "±0" if verdict == "same" else figure_number(key, difference, signed=True)


def _figure_rows(rows, names: dict[str, str] | None = None) -> list[dict[str, Any]]:
    table = []
    for row in rows:
        cells = [
            {
                "value": figure_number(row.key, value),
                "difference": _difference(row.key, difference, verdict),
                "verdict": verdict,
            }
            for value, difference, verdict in zip(
                row.values, row.differences, row.verdicts, strict=True
            )
        ]
        table.append(
            {
                "label": row.label,
                "unit": row.unit,
                "anchor": figure(row.key).anchor,
                "agent": row.agent,
                "agent_name": (names or {}).get(row.agent or "", row.agent),
                "direction": "lower is better" if row.lower_is_better else "higher is better",
                "cells": cells,
            }
        )
    return table


def _handover_rows(handovers) -> list[dict[str, Any]]:
    return [
        {
            "handover": handover,
            "per_day": figure_number("handovers_per_day", handover.site.per_day),
        }
        for handover in handovers
    ]


def _delta_context(
    request: HttpRequest | None, delta: PlanDelta, comparison: Comparison
) -> dict[str, Any]:
    """The plan in focus against the baseline; the handovers and findings that appear or
    go are listed a page at a time, each list with its own page parameter."""
    shown = delta.shifts[:TOP_TASKS]
    lists = {
        name: page_of(request, rows, param=f"{name}_page", target=f"compare-{name}")
        if request is not None
        else None
        for name, rows in (
            ("handovers_added", delta.handovers_added),
            ("handovers_removed", delta.handovers_removed),
            ("findings_added", delta.findings_added),
            ("findings_removed", delta.findings_removed),
        )
    }
    return {
        "delta": delta,
        "name": comparison.names[delta.plan],
        "chart_id": "compare-burden-chart",
        "lists": lists,
        "handovers_added": _handover_rows(_rows(lists["handovers_added"], delta.handovers_added)),
        "handovers_removed": _handover_rows(
            _rows(lists["handovers_removed"], delta.handovers_removed)
        ),
        "findings_added": _rows(lists["findings_added"], delta.findings_added),
        "findings_removed": _rows(lists["findings_removed"], delta.findings_removed),
        "figure": burden_moved_figure(delta, top=TOP_TASKS),
        "shifts": [
            {
                "shift": shift,
                "before": figure_number("person_s_per_day", shift.total_before),
                "after": figure_number("person_s_per_day", shift.total_after),
                "change": figure_number("burden_change", shift.change, signed=True),
                "direction": "worse" if shift.change > 0 else "better" if shift.change else "same",
            }
            for shift in shown
        ],
        "unchanged": sum(1 for shift in delta.shifts if shift.change == 0),
        "hidden": max(0, len([s for s in delta.shifts if s.change != 0]) - len(shown)),
        "saved": figure_text("burden_change", delta.seconds_saved),
        "saved_tasks": sum(1 for shift in delta.shifts if shift.change < 0),
        "added": figure_text("burden_change", delta.seconds_added),
        "added_tasks": sum(1 for shift in delta.shifts if shift.change > 0),
        "net": figure_number("burden_change", delta.burden_change, signed=True),
        "net_text": figure_text("burden_change", delta.burden_change, signed=True),
    }


def _rows(shown: RowPage | None, rows) -> list:
    """A list's page, or (without a request to ask for one) its first page."""
    return list(rows[:PAGE_ROWS]) if shown is None else shown.rows


def _objective_context(comparison: Comparison) -> dict[str, Any]:
    ranking = comparison.ranking
    rows = [
        {
            "plan": plan,
            "name": comparison.names[plan],
            "rank": ranking.rank(plan),
            "score": figure_number("objective_score", ranking.scores[plan]),
            "contributions": [
                figure_number("objective_contribution", ranking.contributions[plan][key])
                for key in OBJECTIVE_FIGURES
            ],
        }
        for plan in ranking.order
    ]
    held = comparison.sensitivity
    sensitivity = [
        {
            "label": WEIGHT_LABELS[change.figure],
            "weight": f"{change.weight:g}",
            "change": None if change.change is None else f"{change.change:+.3g}",
            "reversing": None
            if change.reversing_weight is None
            else f"{change.reversing_weight:.3g}",
        }
        for change in held.changes
    ]
    shares = [
        {
            "plan": plan,
            "name": comparison.names[plan],
            "share": f"{share:.0%}",
        }
        for plan, share in held.first_shares.items()
    ]
    reference = [
        {
            "label": WEIGHT_LABELS[key],
            "good": figure_number(key, ranking.reference[key][0]),
            "poor": figure_number(key, ranking.reference[key][1]),
            "separating": ranking.separating[key],
        }
        for key in OBJECTIVE_FIGURES
    ]
    return {
        "ranking_rows": rows,
        "figure_labels": [WEIGHT_LABELS[key] for key in OBJECTIVE_FIGURES],
        "sensitivity": sensitivity,
        "sensitive": held.changed,
        "leader": held.leader,
        "runner_up": held.runner_up,
        "first_shares": shares,
        "samples": held.samples,
        "reference_rows": reference,
        "contribution_figure": objective_figure(ranking, WEIGHT_LABELS),
    }


def _compare_context(
    page: StudyPage,
    query: QueryDict,
    form: WeightForm | None = None,
    request: HttpRequest | None = None,
    reference_form: ReferenceForm | None = None,
) -> dict[str, Any]:
    chosen, notes = _selection(page, query)
    focus = query.get("focus", "")
    focus = focus if focus in chosen[1:] else (chosen[1] if len(chosen) > 1 else "")
    compare_url = reverse("study-compare", args=[page.row.pk])
    context: dict[str, Any] = {
        "chosen": chosen,
        "notes": notes,
        "query": _query(chosen, focus),
        "focus": focus,
        "focus_links": [
            {
                "plan": plan,
                "url": f"{compare_url}?{_query(chosen, plan)}",
                "active": plan == focus,
            }
            for plan in chosen[1:]
        ],
        "comparison": None,
        "form": form,
        "reference_form": reference_form,
        "ok": page.result.ok,
        "weights_url": reverse("study-compare-weights", args=[page.row.pk]),
        "reference_url": reverse("study-compare-reference", args=[page.row.pk]),
        "compare_url": compare_url,
    }
    if page.study is None or not page.result.ok:
        return context
    if len(page.study.plans) < 2:
        context["notes"].append(
            "This study has one plan; add another in the plan editor to compare them."
        )
        return context
    if len(chosen) < 2:
        context["notes"].append("Pick at least two plans to compare.")
        return context
    analyses = page.analyses()
    comparison = compare_plans(
        [analyses[plan] for plan in chosen],
        study_headlines={plan: objective_values(a) for plan, a in analyses.items()},
    )
    if form is None:
        form = WeightForm({key: f"{value:g}" for key, value in comparison.ranking.weights.items()})
    if reference_form is None:
        reference_form = ReferenceForm.of(
            (page.study.assumptions or {}).get("objective_reference")
        )
    reference_form.defaults = {
        key: figure_number(key, poor)
        for key, (_good, poor) in comparison.ranking.reference.items()
    }
    context.update(
        comparison=comparison,
        baseline=comparison.baseline,
        plan_headers=[{"id": plan, "name": comparison.names[plan]} for plan in chosen],
        headline_rows=_figure_rows(comparison.figures),
        person_rows=_figure_rows(
            comparison.people, {agent.id: agent.name for agent in page.study.humans}
        ),
        top_tasks=TOP_TASKS,
        item=_delta_context(request, comparison.delta(focus), comparison),
        form=form,
        reference_form=reference_form,
        **_objective_context(comparison),
    )
    return context


@require_GET
@login_required
def study_compare(request: HttpRequest, pk: int) -> HttpResponse:
    """The comparison page; to htmx (the plan picker) only the comparison below it."""
    page = study_page(request, pk)
    context = page.context("study-compare", **_compare_context(page, request.GET, request=request))
    # A boosted request or a history restore wants the whole page, like a plain visit.
    if request.htmx and not (request.htmx.boosted or request.htmx.history_restore_request):
        return render(request, "compare/compare.html#region", context)
    return render(request, "compare/compare.html", context)


def _parse_weights(data: QueryDict) -> WeightForm:
    """Read the typed weights; each must be a number (the core checks the rest)."""
    form = WeightForm({key: data.get(f"weight_{key}", "").strip() for key in OBJECTIVE_FIGURES})
    for key, text in form.values.items():
        if not text:
            form.errors[key] = "enter a weight (0 leaves the figure out)"
            continue
        try:
            float(text)
        except ValueError:
            form.errors[key] = f"“{text}” is not a number; write it like 1 or 0.5"
    return form


def _weights_of(form: WeightForm) -> dict[str, float | int]:
    weights = {}
    for key, text in form.values.items():
        number = float(text)
        weights[key] = int(number) if math.isfinite(number) and number.is_integer() else number
    return weights


def _store(form: WeightForm, service, **kwargs: Any) -> None:
    """Write through the assumptions service; its refusal becomes the form's message."""
    try:
        service(key="objective_weights", **kwargs)
    except StudyInvalid as error:
        form.errors["objective_weights"] = "; ".join(
            f"{problem.path} {problem.message}" for problem in error.errors
        )


@require_POST
@login_required
def study_compare_weights(request: HttpRequest, pk: int) -> HttpResponse:
    """Save the objective weights (editors and owners); the objective panel re-renders.

    Bad weights come back with a message beside their field and nothing stored; without
    htmx a good save redirects to the comparison it came from.
    """
    page = study_page(request, pk, m.Role.EDITOR)
    chosen, _notes = _selection(page, request.POST)
    query = _query(chosen, request.POST.get("focus", ""))
    if not page.result.ok:
        form = WeightForm({}, {"objective_weights": "the study has errors to fix first"})
    elif "reset" in request.POST:
        form = WeightForm({})
        _store(form, services.study_assumption_reset, study=page.row, user=request.user)
    else:
        form = _parse_weights(request.POST)
        if not form.errors:
            form.errors.update(weight_problems(_weights_of(form)))
        if not form.errors:
            _store(
                form,
                services.study_assumption_set,
                study=page.row,
                value=_weights_of(form),
                user=request.user,
            )
    if form.errors:
        context = page.context("study-compare", **_compare_context(page, QueryDict(query), form))
        if request.htmx:
            return render(request, "compare/compare.html#objective", context)
        return render(request, "compare/compare.html", context, status=400)
    messages.success(request, "Weights saved; the plans are ranked again.")
    if not request.htmx:
        url = reverse("study-compare", args=[pk])
        return redirect(f"{url}?{query}#compare-objective" if query else url)
    page = study_page(request, pk, m.Role.EDITOR)
    context = page.context("study-compare", **_compare_context(page, QueryDict(query)))
    return render(request, "compare/compare.html#objective", context)


def _parse_reference(data: QueryDict) -> tuple[ReferenceForm, dict[str, dict[str, float | int]]]:
    """Read the typed reference points (blank: the default) into the assumption's table;
    each must be a number, and the assumption's own check judges each figure."""
    form = ReferenceForm(
        {
            f"{side}_{key}": data.get(f"{side}_{key}", "").strip()
            for key in OBJECTIVE_FIGURES
            for side in ("good", "poor")
        }
    )
    reference: dict[str, dict[str, float | int]] = {}
    for key in OBJECTIVE_FIGURES:
        for side in ("good", "poor"):
            text = form.values[f"{side}_{key}"]
            if not text:
                continue
            try:
                number = float(text)
            except ValueError:
                form.errors[key] = f"{side}: “{text}” is not a number; write it like 0 or 3600"
                continue
            if not math.isfinite(number):
                form.errors[key] = f"{side}: must be a finite number"
                continue
            reference.setdefault(key, {})[side] = int(number) if number.is_integer() else number
    for key, point in reference.items():
        if key not in form.errors:
            for _name, message in check_assumptions({"objective_reference": {key: point}}):
                form.errors[key] = message
    return form, reference


@require_POST
@login_required
def study_compare_reference(request: HttpRequest, pk: int) -> HttpResponse:
    """Save the objective's reference points (editors and owners), the assumption
    ``objective_reference``; the objective panel re-renders. A blank field takes the
    default (good 0, poor the worst plan's); all blank drops the assumption.

    Bad values come back with a message beside their figure and nothing stored; without
    htmx a good save redirects to the comparison it came from.
    """
    page = study_page(request, pk, m.Role.EDITOR)
    chosen, _notes = _selection(page, request.POST)
    query = _query(chosen, request.POST.get("focus", ""))
    if not page.result.ok:
        form = ReferenceForm({}, {"objective_reference": "the study has errors to fix first"})
    else:
        if "reset" in request.POST:
            form, reference = ReferenceForm({}), {}
        else:
            form, reference = _parse_reference(request.POST)
        if not form.errors:
            try:
                if reference:
                    services.study_assumption_set(
                        study=page.row,
                        key="objective_reference",
                        value=reference,
                        user=request.user,
                    )
                else:
                    services.study_assumption_reset(
                        study=page.row, key="objective_reference", user=request.user
                    )
            except StudyInvalid as error:
                form.errors["objective_reference"] = "; ".join(
                    f"{problem.path} {problem.message}" for problem in error.errors
                )
    if form.errors:
        context = page.context(
            "study-compare", **_compare_context(page, QueryDict(query), reference_form=form)
        )
        if request.htmx:
            return render(request, "compare/compare.html#objective", context)
        return render(request, "compare/compare.html", context, status=400)
    messages.success(request, "Reference points saved; the plans are scored again.")
    if not request.htmx:
        url = reverse("study-compare", args=[pk])
        return redirect(f"{url}?{query}#compare-objective" if query else url)
    page = study_page(request, pk, m.Role.EDITOR)
    context = page.context("study-compare", **_compare_context(page, QueryDict(query)))
    return render(request, "compare/compare.html#objective", context)
