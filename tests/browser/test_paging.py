"""The plan editor's pages in a browser: the page links swap the rows in place (htmx, no
script evaluation under the page's policy), "select every row of this page" ticks the
page's rows, and "Apply to the selected rows" changes those rows and keeps the page.
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from allocation import selectors, services
from allocation.core.limits import PAGE_ROWS
from allocation.core.synthetic import synthetic_study

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def test_pages_swap_in_place_and_bulk_apply_keeps_the_page(signed_in, django_user_model):
    page = signed_in
    user = django_user_model.objects.get(username="walker")
    document = synthetic_study(tasks=300, links=600, events=5, plans=1, seed=3)
    study = services.study_import(data=document, owner=user)
    editor = f"{page.base}/studies/{study.pk}/plans/plan-0/edit?goal=all"
    page.goto(editor)
    first_rows = page.locator("tr.assignment").evaluate_all("rows => rows.map(r => r.id)")
    # The second page arrives by htmx: the rows change, the address follows, the page
    # itself (its headline panel) stays.
    page.locator('#plan-rows nav.pager a[rel="next"]').first.click()
    expect(page).to_have_url(re.compile(r"page=2"))
    expect(page.locator("#plan-rows nav.pager .current").first).to_have_text("2")
    second_rows = page.locator("tr.assignment").evaluate_all("rows => rows.map(r => r.id)")
    assert second_rows and not set(first_rows) & set(second_rows)
    assert len(second_rows) <= PAGE_ROWS
    # Select every row of this page, then apply a status to them.
    page.locator("input[data-pick-page]").check()
    ticked = page.locator('input[name="tasks"]:checked')
    expect(ticked).to_have_count(len(second_rows))
    page.select_option('#bulk-form select[name="status"]', "rejected")
    page.click("#bulk-form button[type=submit]")
    expect(page.locator("#messages")).to_contain_text("Changed")
    expect(page).to_have_url(re.compile(r"page=2"))
    assignments = selectors.study_document(study)["plans"][0]["assignments"]
    rejected = {task for task, item in assignments.items() if item.get("status") == "rejected"}
    assert rejected == {row.removeprefix("row-") for row in second_rows}
    assert page.javascript_errors == []
