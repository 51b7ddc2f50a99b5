"""The workshop flow in the browser: open the workshop on a plan's open items, comment,
decide, move on with the keyboard and come back. Playwright in Debian's Chromium."""

from __future__ import annotations

import copy
import re

import pytest
from django.contrib.auth import get_user_model
from playwright.sync_api import expect

from allocation import models as m
from allocation import services
from tests.core.conftest import HOME_HEATING

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_workshop_comment_decide_and_move_on(signed_in):
    page = signed_in
    walker = get_user_model().objects.get(username="walker")
    study = services.study_import(data=copy.deepcopy(HOME_HEATING), owner=walker)

    page.goto(f"{page.base}/studies/{study.pk}/")
    page.click("nav.tabs >> text=Review")
    expect(page.locator("#review-region h2").first).to_contain_text("Review of Resident does it")
    page.click(".plan-picker >> text=Thermostat does it, resident informed")
    expect(page.locator("#review-region h2").first).to_contain_text("Review of Thermostat")
    page.click("text=Open the workshop view")
    item = page.locator("#workshop-item")
    # The automatic plan's six open items (worked by hand in tests/web/test_reviews.py).
    expect(item.locator(".progress")).to_contain_text("Item 1 of 6")
    expect(item.locator("h1")).to_have_text("T2 Lower the set point")

    item.locator(".comment-form textarea").fill("Does the display say <hold>?")
    item.locator(".comment-form button").click()
    expect(item.locator(".thread")).to_contain_text("Does the display say <hold>?")

    item.locator(".decision-form textarea[name=decision]").fill("Keep level 7 for T2")
    item.locator(".decision-form textarea[name=rationale]").fill("The display informs them.")
    item.locator(".decision-form button.agree").click()
    expect(item.locator("ol.decisions")).to_contain_text("Keep level 7 for T2")
    expect(item.locator(".progress")).to_contain_text("1 decided")

    # Next with the keyboard (the link does the same without JavaScript).
    page.locator("body").press("ArrowRight")
    expect(page).to_have_url(re.compile(r"/workshop\?item=2$"))
    expect(item.locator(".progress")).to_contain_text("Item 2 of 6")
    expect(item.locator("h1")).to_contain_text("Accountable without holding the task")
    page.click("text=← Previous")
    expect(item.locator(".progress")).to_contain_text("Item 1 of 6")
    expect(item.locator(".thread")).to_contain_text("Does the display say <hold>?")

    decision = m.Decision.objects.get()
    assert (decision.status, decision.target_kind, decision.target_key) == (
        "agreed",
        "assignment",
        "T2",
    )
    assert m.Comment.objects.get().author_name == "walker"
    assert page.javascript_errors == []
