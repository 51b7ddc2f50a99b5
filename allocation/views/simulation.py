"""Day simulation screens: a plan's typical and worst simulated days, the run's
distributions, and the distributions of several plans side by side.

A run is asked for with N days and a seed; it runs in the background (one task per
chunk of days) while the page shows its progress and can cancel it (or restart it, when
its worker died). Its result is kept with its N and seed and shown again until the study
changes.
"""

from __future__ import annotations

from typing import Any

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.http import urlencode
from django.views.decorators.http import require_GET, require_POST
from django_htmx.http import HttpResponseClientRedirect, HttpResponseClientRefresh

from allocation import models as m
from allocation import selectors, services
from allocation.core.describe import seconds_text
from allocation.core.model import Plan
from allocation.core.registry import figure_number
from allocation.core.simulation import FIGURES
from allocation.core.vocabulary import CHANNELS
from allocation.figures.simulation import (
    FIGURE_WORDS,
    channel_chart,
    day_chart,
    histogram_chart,
    occupancy_chart,
)
from allocation.views.common import StudyPage, study_page

#: What a run is asked for unless the page says otherwise.
DEFAULT_DAYS = 365
DEFAULT_SEED = 1
#: The figures the summary table shows, in order (peaks and overloads per channel too).
SUMMARY_FIGURES = FIGURES


def _question(request: HttpRequest) -> tuple[str, str]:
    """The days and seed asked for (as typed; the service checks them)."""
    source = request.POST if request.method == "POST" else request.GET
    return (
        source.get("days", str(DEFAULT_DAYS)).strip() or str(DEFAULT_DAYS),
        source.get("seed", str(DEFAULT_SEED)).strip() or str(DEFAULT_SEED),
    )


def _checked(days: str, seed: str) -> tuple[int, int] | None:
    try:
        return services.simulation_check(days=days, seed=seed)
    except services.SimulationRefused:
        return None


def _page_url(pk: int, plan: str, days: int | str, seed: int | str, **extra: str) -> str:
    query = urlencode({"days": days, "seed": seed, **extra})
    return f"{reverse('plan-simulation', args=[pk, plan])}?{query}"


def _names(page: StudyPage) -> tuple[dict[str, str], dict[str, str]]:
    study = page.study
    return (
        {agent.id: agent.name for agent in study.agents},
        {task.id: task.title for task in study.tasks},
    )


def _statistics_rows(summary: dict[str, Any], names: dict[str, str]) -> list[dict[str, Any]]:
    """The summary as table rows: a row per person and figure."""
    rows = []
    for person, figures in summary["people"].items():
        for figure in SUMMARY_FIGURES:
            stats = figures.get(figure)
            if stats is None:
                continue
            label, unit = FIGURE_WORDS[figure]
            rows.append(
                {
                    "person": names.get(person, person),
                    "figure": label,
                    "unit": unit,
                    **_statistics(figure, stats),
                    "first": figure == SUMMARY_FIGURES[0],
                }
            )
    return rows


def _mode_rows(page: StudyPage, plan: Plan, summary: dict[str, Any]) -> list[dict[str, str]]:
    """The simulated share of the days in each mode beside the analysis's long-run share
    (a run stored before modes kept time has none)."""
    simulated = summary.get("time_in_mode") or {}
    if not simulated or plan.modes is None:
        return []
    analysis = page.analysis(plan.id) if page.result.ok else None
    expected = analysis.mode_share if analysis is not None else {}
    return [
        {
            "mode": mode.name,
            "simulated": figure_number("mode_share", simulated.get(mode.id, 0.0)),
            "expected": figure_number("mode_share", expected[mode.id])
            if mode.id in expected
            else "—",
        }
        for mode in plan.modes.states
    ]


def _statistics(figure: str, stats: dict[str, float]) -> dict[str, str]:
    """Mean, P50 and P95 of a simulated figure at the registry's precision."""
    return {key: figure_number(figure, stats[key]) for key in ("mean", "p50", "p95")}


def _result_context(
    page: StudyPage, plan: Plan, run: m.SimulationRun, which: str
) -> dict[str, Any]:
    names, titles = _names(page)
    result = run.result
    summary = result["summary"]
    day = result["worst" if which == "worst" else "typical"]
    people = list(day["people"])
    chosen_person = people[0] if people else None
    busiest = {
        person: sum(s["end"] - s["start"] for s in day["people"][person]["segments"])
        for person in people
    }
    if busiest:
        chosen_person = max(busiest, key=busiest.get)
    chains = [
        {
            **chain,
            "tasks": [
                {**task, "title": titles.get(task["task"], task["task"])}
                for task in chain["tasks"]
            ],
        }
        for chain in summary["chains"]
    ]
    return {
        "summary": summary,
        "which": which,
        "day": day,
        "day_number": day["day"],
        "rows": _statistics_rows(summary, names),
        "chains": chains,
        "modes": _mode_rows(page, plan, summary),
        "charts": {
            "day": day_chart(day, names, titles),
            "occupancy": occupancy_chart(day, names),
            "channels": channel_chart(day, chosen_person) if chosen_person else None,
        },
        "channel_person": names.get(chosen_person, chosen_person),
        "day_people": [
            {
                "name": names.get(person, person),
                "time": seconds_text(busiest[person]),
                "stretches": len(day["people"][person]["segments"]),
                "peak": figure_number(
                    "peak_occupancy", max(day["people"][person]["occupancy"] or [0.0])
                ),
            }
            for person in people
        ],
        "limits": summary.get("limits", {}),
    }


def _region_context(page: StudyPage, plan: Plan, request: HttpRequest) -> dict[str, Any]:
    days, seed = _question(request)
    checked = _checked(days, seed)
    run = None
    if checked is not None and page.study is not None:
        # Reading a run's status is when a run whose worker died is seen to have stalled.
        services.simulation_fail_stalled(study=page.row)
        run = selectors.simulation_run_for(page.row, plan.id, *checked)
    which = "worst" if request.GET.get("day") == "worst" else "typical"
    context: dict[str, Any] = {
        "plan": plan,
        "days": days,
        "seed": seed,
        "run": run,
        "plan_links": [
            {
                "plan": item,
                "url": _page_url(page.row.pk, item.id, days, seed),
                "active": item.id == plan.id,
            }
            for item in page.study.plans
        ],
        "status_url": f"{reverse('plan-simulation-status', args=[page.row.pk, plan.id])}?"
        + urlencode({"days": days, "seed": seed}),
        "typical_url": _page_url(page.row.pk, plan.id, days, seed, day="typical"),
        "worst_url": _page_url(page.row.pk, plan.id, days, seed, day="worst"),
        "compare_url": f"{reverse('study-simulation-compare', args=[page.row.pk])}?"
        + urlencode({"days": days, "seed": seed}),
        "channels": CHANNELS,
        "can_restart": run is not None
        and run.restartable
        and services.simulation_may_restart(run=run, user=request.user),
    }
    if run is not None and run.status == m.SimulationStatus.DONE and run.result:
        context.update(_result_context(page, plan, run, which))
    return context


@require_GET
@login_required
def plan_simulation(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """A plan's simulated days: the form, the run's progress or its results."""
    page = study_page(request, pk)
    chosen = page.plan_or_404(plan)
    context = page.context("plan-simulation", **_region_context(page, chosen, request))
    if request.htmx and request.htmx.target == "simulation-region":
        return render(request, "simulation/page.html#region", context)
    return render(request, "simulation/page.html", context)


@require_POST
@login_required
def plan_simulation_run(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Ask for a run (or find the stored one for the same question)."""
    page = study_page(request, pk)
    page.plan_or_404(plan)
    days, seed = _question(request)
    try:
        run = services.simulation_request(
            study=page.row, plan_key=plan, days=days, seed=seed, user=request.user
        )
    except services.SimulationRefused as refused:
        messages.error(request, f"The simulation was not started: {refused}")
        url = _page_url(pk, plan, days, seed)
    else:
        url = _page_url(pk, plan, run.days, run.seed)
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


@require_GET
@login_required
def plan_simulation_status(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The run's progress (polled while it runs); once it has ended, the page reloads."""
    page = study_page(request, pk)
    chosen = page.plan_or_404(plan)
    context = page.context("plan-simulation", **_region_context(page, chosen, request))
    run = context["run"]
    if request.htmx and run is not None and run.finished:
        return HttpResponseClientRefresh()
    return render(request, "simulation/page.html#status", context)


@require_POST
@login_required
def plan_simulation_cancel(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Stop the run of these days and seed (who asked for it, or an editor)."""
    _page, days, seed, run = _live_run(request, pk, plan, "cancel")
    if run is not None:
        services.simulation_cancel(run=run, user=request.user)
        messages.success(request, "The run was cancelled.")
    url = _page_url(pk, plan, days, seed)
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


@require_POST
@login_required
def plan_simulation_restart(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Restart the run of these days and seed (its worker stopped): the member who asked
    for it, or an editor; the parts already simulated are kept."""
    _page, days, seed, run = _live_run(request, pk, plan, "restart")
    if run is not None:
        try:
            new = services.simulation_restart(run=run, user=request.user)
        except services.SimulationRefused as refused:
            messages.error(request, f"The run was not restarted: {refused}")
        else:
            messages.success(
                request,
                f"The run was restarted; {new.chunks_done} of {new.chunks_total} "
                f"part{'s' if new.chunks_total != 1 else ''} already simulated were kept.",
            )
    url = _page_url(pk, plan, days, seed)
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


def _live_run(request: HttpRequest, pk: int, plan: str, verb: str):
    """The page, the days and seed asked about, and their run if it is still going (or,
    to restart, stalled); ``None``, with a message saying why, when there is none to
    ``verb``."""
    page = study_page(request, pk)
    page.plan_or_404(plan)
    days, seed = _question(request)
    checked = _checked(days, seed)
    run = selectors.simulation_run_for(page.row, plan, *checked) if checked else None
    if run is None:
        messages.error(request, f"There is no such run to {verb}.")
    elif run.finished and not (verb == "restart" and run.stalled):
        messages.info(request, f"The run had already ended ({run.get_status_display().lower()}).")
        run = None
    return page, days, seed, run


# -- several plans ---------------------------------------------------------------------


@require_GET
@login_required
def study_simulation_compare(request: HttpRequest, pk: int) -> HttpResponse:
    """The distributions of one daily figure of one person, for every plan simulated
    with the same days and seed, side by side."""
    page = study_page(request, pk)
    days, seed = _question(request)
    checked = _checked(days, seed)
    study = page.study
    names, _titles = _names(page)
    humans = [agent.id for agent in study.humans] if study else []
    person = request.GET.get("person") if request.GET.get("person") in humans else None
    person = person or (humans[0] if humans else None)
    figure = request.GET.get("figure") if request.GET.get("figure") in FIGURES else "burden_s"
    plans = []
    series = []
    if checked and study:
        services.simulation_fail_stalled(study=page.row)
    for plan in study.plans if study else ():
        run = selectors.simulation_run_for(page.row, plan.id, *checked) if checked else None
        done = run is not None and run.status == m.SimulationStatus.DONE and run.result
        row = {"plan": plan, "run": run, "url": _page_url(pk, plan.id, days, seed)}
        if done and person is not None:
            values = run.result["simulation"]["figures"][person][figure]
            stats = run.result["summary"]["people"][person][figure]
            row["stats"] = _statistics(figure, stats)
            series.append((plan.name, values))
        plans.append(row)
    label, unit = FIGURE_WORDS[figure]
    context = page.context(
        "plan-simulation",
        days=days,
        seed=seed,
        plans=plans,
        person=person,
        people=[(human, names.get(human, human)) for human in humans],
        figure=figure,
        figure_label=label,
        unit=unit,
        figures=[(key, FIGURE_WORDS[key][0]) for key in FIGURES],
        chart=histogram_chart(series, figure) if series else None,
        missing=[row for row in plans if "stats" not in row],
    )
    return render(request, "simulation/compare.html", context)
