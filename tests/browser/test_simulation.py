"""The simulated days in the browser: run a plan of the insulin example, look at its
typical and worst day, then its distribution beside another plan's."""

from __future__ import annotations

import json

import pytest
from playwright.sync_api import expect

from allocation import services
from allocation.examples import EXAMPLES_DIR

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}


def test_simulate_look_at_days_and_compare(signed_in, django_user_model, settings):
    settings.TASKS = IMMEDIATE  # the chunks run as they are queued, in the server
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    document = json.loads((EXAMPLES_DIR / "closed-loop-insulin.json").read_text("utf-8"))
    study = services.study_import(data=document, owner=owner)
    page.goto(f"{page.base}/studies/{study.pk}/")
    page.click("nav.tabs >> text=Simulation")
    page.click(".plan-picker >> text=Hybrid closed loop, every mode change told")
    for plan in ("hybrid-loop-cued", "hybrid-loop"):
        page.goto(f"{page.base}/studies/{study.pk}/plans/{plan}/simulation")
        page.fill("input[name=days]", "60")
        page.fill("input[name=seed]", "5")
        page.click("button:has-text('Simulate')")
        expect(page.locator("#simulation-day")).to_be_visible()
    expect(page.locator("#simulation-day h2")).to_contain_text("A typical simulated day")
    expect(page.locator("#simulation-day .main-svg").first).to_be_visible()
    page.click("text=Worst day")
    expect(page.locator("#simulation-day h2")).to_contain_text("The worst simulated day")
    expect(page.locator("#simulation-distributions")).to_contain_text("Night interruptions")
    page.click("text=Compare the plans' distributions")
    expect(page.locator("#simulation-compare .main-svg").first).to_be_visible()
    rows = page.locator("#simulation-compare table tbody tr")
    expect(rows).to_have_count(2)
    assert page.javascript_errors == []
