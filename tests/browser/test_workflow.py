"""The whole job in the browser: build a study from nothing, allocate, watch a figure
change, compare two plans, export. Playwright in Debian's Chromium."""

from __future__ import annotations

import json
import re

import pytest
from playwright.sync_api import expect

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def add(page, kind: str, button: str, values: dict[str, str], selects: dict[str, str] = ()):
    page.click(f"#section-{kind} >> text={button}")
    form = page.locator(f"#editor-{kind} form")
    expect(form).to_be_visible()
    for name, value in values.items():
        form.locator(f"[name={name}]").fill(value)
    for name, value in dict(selects).items():
        form.locator(f"[name={name}]").select_option(value)
    form.locator("button[type=submit]").click()
    expect(page.locator(f"#editor-{kind} form")).to_have_count(0)


def headline_person_time(page) -> str:
    """The plan's person time as the headline writes it (the registry's words)."""
    return page.locator("#plan-headline dd").first.inner_text()


def set_row(page, task: str, **choices: str) -> None:
    """Choose values in a plan-editor row, one change (and one save) at a time, waiting
    each time until htmx has swapped the saved row in and settled it."""
    page.wait_for_load_state("load")
    busy = re.compile(r"htmx-(request|swapping|settling|added)")
    for name, value in choices.items():
        row = page.locator(f"tr#row-{task}")
        with page.expect_response(lambda r: f"/tasks/{task}" in r.url):
            row.locator(f"select[name={name}]").select_option(value)
        expect(page.locator(f"tr#row-{task}")).not_to_have_class(busy)
        page.wait_for_timeout(50)


def test_build_allocate_change_compare_export(signed_in):
    page = signed_in
    # Build a study from nothing.
    page.fill(".new-study input[name=id]", "night-watch")
    page.fill(".new-study input[name=title]", "Night watch")
    page.click("text=Start the study")
    expect(page.locator("h1")).to_have_text("Night watch")
    add(
        page,
        "agents",
        "Add an agent",
        {"id": "carer", "name": "Carer", "asleep_from": "23:00", "asleep_to": "07:00"},
        {"kind": "human"},
    )
    add(
        page,
        "agents",
        "Add an agent",
        {"id": "monitor", "name": "Bed monitor"},
        {"kind": "automation"},
    )
    add(
        page,
        "events",
        "Add an event",
        {"id": "restless", "name": "Restless night", "per_day": "2"},
        {"way": "per_day", "when": "asleep"},
    )
    add(page, "tasks", "Add a task", {"id": "G1", "title": "Keep watch at night"})
    add(
        page,
        "tasks",
        "Add a task",
        {"id": "T1", "title": "Notice restlessness", "duration_typical": "5"},
        {"parent": "G1", "way": "event", "event": "restless", "severity": "3"},
    )
    add(
        page,
        "tasks",
        "Add a task",
        {
            "id": "T2",
            "title": "Settle the person",
            "duration_low": "60",
            "duration_typical": "300",
            "duration_high": "900",
        },
        {"parent": "G1", "severity": "3"},
    )
    add(
        page,
        "links",
        "Add a link",
        {"lag_low": "10", "lag_high": "60"},
        {"source": "T1", "target": "T2"},
    )
    expect(page.locator("#section-links")).to_contain_text("10–60 s")

    # Allocate every task in a first plan.
    page.click("text=Overview")
    page.fill(".new-plan input[name=id]", "carer-only")
    page.fill(".new-plan input[name=name]", "Carer does it")
    page.click("text=Start the plan")
    page.wait_for_url("**/plans/carer-only/edit")
    for task in ("T1", "T2"):
        set_row(page, task, human="carer", who="person")
    # Hand check: T2's duration [60, 300, 900] s counts at its triangular mean
    # (60 + 300 + 900) / 3 = 420 s, so 2 a night x (5 s + 420 s) = 850 s a day for the carer,
    # 14.17 min: three significant digits in the largest unit that reads well.
    assert headline_person_time(page) == "14.2 min a day"

    # A second plan: the monitor notices; the carer's time falls by 2 x 5 s.
    page.click("text=New plan or copy")
    page.fill(".plan-actions input[name=id]", "monitor-notices")
    page.fill(".plan-actions input[name=name]", "Monitor notices")
    page.click("text=Create the plan")
    page.wait_for_url("**/plans/monitor-notices/edit")
    expect(page.locator(".plan-picker a.active")).to_have_text("Monitor notices")
    set_row(page, "T1", automation="monitor", who="device")
    assert headline_person_time(page) == "14 min a day"  # 2 x 420 s = 840 s
    assert page.javascript_errors == []

    # Compare the two plans.
    page.click("nav.tabs >> text=Compare")
    expect(page.locator("body")).to_contain_text("Carer does it")
    expect(page.locator("body")).to_contain_text("Monitor notices")

    # Export the study file.
    page.click("nav.tabs >> text=Overview")
    with page.expect_download() as download:
        page.click("text=Download the study file")
    with open(download.value.path(), encoding="utf-8") as handle:
        document = json.load(handle)
    assert [plan["id"] for plan in document["plans"]] == ["carer-only", "monitor-notices"]
    assert document["plans"][1]["assignments"]["T1"] == {"automation": "monitor"}
