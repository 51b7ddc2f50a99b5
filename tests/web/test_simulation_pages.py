"""The simulation screens: a plan's simulated days (ask, progress, cancel, typical and
worst day, distributions) and the plans' distributions side by side.

The figures on the page are the stored run's summary, which ``manage.py simulate
--json`` prints for the same days and seed (tests/web/test_simulation_runs.py checks
that); here the page is checked against that summary and against hand-worked values of
the home-heating test study (tests/core/conftest.py).
"""

from __future__ import annotations

import json
import re

import pytest
from django.urls import reverse

from allocation import models as m
from allocation import selectors
from allocation.core.cautions import CAUTIONS

HTMX = {"HTTP_HX_REQUEST": "true"}
IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
DUMMY = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}


@pytest.fixture
def signed_in(client, study):
    client.force_login(study.memberships.get().user)
    return client


def page_url(study, plan="auto", **query) -> str:
    base = reverse("plan-simulation", args=[study.pk, plan])
    return base + ("?" + "&".join(f"{k}={v}" for k, v in query.items()) if query else "")


def figure(page: str, name: str) -> dict:
    return json.loads(page.split(f'id="{name}" type="application/json">')[1].split("</script>")[0])


def test_page_before_any_run_offers_the_form(signed_in, study):
    page = signed_in.get(page_url(study)).content.decode()
    assert "Not simulated yet with 365 days and seed 1" in page
    assert 'name="days"' in page and 'name="seed"' in page
    assert CAUTIONS[:60] in page
    assert "time-line analysis" in page  # the method note names its sources


def test_a_run_shows_its_days_and_distributions(signed_in, study, settings):
    settings.TASKS = IMMEDIATE
    response = signed_in.post(
        reverse("plan-simulation-run", args=[study.pk, "auto"]), {"days": "30", "seed": "4"}
    )
    assert response.status_code == 302 and response["Location"] == page_url(study, days=30, seed=4)
    run = selectors.simulation_run_for(study, "auto", 30, 4)
    assert run.status == m.SimulationStatus.DONE
    page = signed_in.get(page_url(study, days=30, seed=4)).content.decode()
    assert "A typical simulated day" in page and "Over all 30 simulated days" in page
    summary = run.result["summary"]
    mean = summary["people"]["resident"]["burden_s"]["mean"]
    assert f"{mean:,.1f}" in page  # the registry's precision for person time
    day = figure(page, "figure-sim-day")
    assert day["layout"]["xaxis"]["range"] == [0, 86400]
    occupancy = figure(page, "figure-sim-occupancy")
    # 96 fifteen-minute bins (the study's bin_s 900), drawn as steps with a closing point.
    assert len(occupancy["data"][0]["x"]) == 97
    worst = signed_in.get(page_url(study, days=30, seed=4, day="worst")).content.decode()
    assert f"(day {summary['worst_day'] + 1} of 30)" in worst
    # The window of T1 (1800 s from leaving): the chain's share missing it is listed.
    assert "Chains with deadlines" in page and "Leave home" in page


def test_bad_days_are_refused_with_the_reason_and_nothing_stored(signed_in, study, settings):
    settings.TASKS = IMMEDIATE
    response = signed_in.post(
        reverse("plan-simulation-run", args=[study.pk, "auto"]),
        {"days": "0", "seed": "1"},
        follow=True,
    )
    assert "The simulation was not started: The number of days must be 1 to" in (
        response.content.decode()
    )
    assert not m.SimulationRun.objects.exists()


def test_progress_polls_until_the_run_ends_and_can_cancel(signed_in, study, settings):
    settings.TASKS = DUMMY  # tasks are recorded, not run: the run stays queued
    signed_in.post(
        reverse("plan-simulation-run", args=[study.pk, "auto"]),
        {"days": "450", "seed": "2"},
        **HTMX,
    )
    status_url = reverse("plan-simulation-status", args=[study.pk, "auto"]) + "?days=450&seed=2"
    fragment = signed_in.get(status_url, **HTMX).content.decode()
    assert 'hx-trigger="every 1s"' in fragment and "<progress" in fragment
    assert re.search(r"0 of \d+ parts? of 450 days", fragment)
    response = signed_in.post(
        reverse("plan-simulation-cancel", args=[study.pk, "auto"]),
        {"days": "450", "seed": "2"},
        **HTMX,
    )
    assert response.status_code == 200 and "HX-Redirect" in response
    assert selectors.simulation_run_for(study, "auto", 450, 2).status == "cancelled"
    # Once the run has ended the poll asks the page to reload, and polls no more.
    ended = signed_in.get(status_url, **HTMX)
    assert ended.headers.get("HX-Refresh") == "true"
    page = signed_in.get(page_url(study, days=450, seed=2)).content.decode()
    assert "cancelled" in page and 'hx-trigger="every 1s"' not in page


def test_plans_side_by_side(signed_in, study, settings):
    settings.TASKS = IMMEDIATE
    for plan in ("manual", "auto"):
        signed_in.post(
            reverse("plan-simulation-run", args=[study.pk, plan]), {"days": "20", "seed": "3"}
        )
    url = reverse("study-simulation-compare", args=[study.pk])
    page = signed_in.get(url + "?days=20&seed=3&figure=interactions").content.decode()
    chart = figure(page, "figure-sim-compare")
    assert [trace["name"] for trace in chart["data"]] == [
        "Resident does it",
        "Thermostat does it, resident informed",
    ]
    # Each plan's P95 is marked: one dashed line per plan.
    assert len(chart["layout"]["shapes"]) == 2
    for plan in ("manual", "auto"):
        run = selectors.simulation_run_for(study, plan, 20, 3)
        assert len(run.result["simulation"]["figures"]["resident"]["interactions"]) == 20
    # An unknown figure falls back to person time; other days and seed: none simulated.
    assert "Person time" in signed_in.get(url + "?days=20&seed=3&figure=x").content.decode()
    other = signed_in.get(url + "?days=21&seed=3").content.decode()
    assert "No plan has been simulated with 21 days and seed 3" in other
