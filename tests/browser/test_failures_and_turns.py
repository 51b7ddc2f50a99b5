"""A device that fails, people asked in turn, and modes that keep time, edited in the
browser (home-heating example, plan ``auto``): a refused save shows its message beside
the row and keeps what was typed; completing it saves; the transitions table says how a
change happens and how often."""

from __future__ import annotations

import json
import re

import pytest
from playwright.sync_api import expect

from allocation import selectors, services
from allocation.examples import EXAMPLES_DIR

from .test_mode_map import fill_form

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

BUSY = re.compile(r"htmx-(request|swapping|settling|added)")


def saved(page, task: str, change) -> None:
    """Make a change in a plan-editor row and wait for its save to be swapped in."""
    with page.expect_response(lambda response: f"/tasks/{task}" in response.url):
        change()
    expect(page.locator(f"tr#row-{task}")).not_to_have_class(BUSY)


def typed(page, task: str, name: str, value: str) -> None:
    """Type into a row's text field and leave it (the change saves the row)."""
    field = page.locator(f"tr#row-{task} [name={name}]")
    saved(page, task, lambda: (field.fill(value), field.blur()))


def test_failures_and_people_asked_in_turn_in_the_plan_editor(signed_in, django_user_model):
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    study = services.study_import(data=document, owner=owner)
    services.agent_save(
        study=study, key=None, item={"id": "neighbour", "name": "Neighbour", "kind": "human"}
    )
    page.goto(f"{page.base}/studies/{study.pk}/plans/auto/edit")

    # T7 (the thermostat notices a fault) fails 20 in 1,000: without saying how the
    # resident learns of it, the save is refused beside the row, the number kept.
    row = page.locator("tr#row-T7")
    row.locator("details.reliability summary").click()
    typed(page, "T7", "fails_per_1000", "20")
    row = page.locator("tr#row-T7")
    expect(row.locator(".row-problems")).to_contain_text("Say how the person learns of a failure")
    expect(row.locator("[name=fails_per_1000]")).to_have_value("20")
    saved(page, "T7", lambda: row.locator("[name=detected_by]").select_option("alert"))
    row = page.locator("tr#row-T7")
    expect(row.locator(".row-problems")).to_have_count(0)
    expect(row.locator("details.reliability summary")).to_contain_text("failures: 20 in 1,000")

    # T8 (call for a repair): the resident, then the neighbour after 600 s.
    row = page.locator("tr#row-T8")
    row.locator("details.escalation summary").click()
    typed(page, "T8", "escalate_after_s", "600")
    row = page.locator("tr#row-T8")
    expect(row.locator(".row-problems")).to_contain_text("Name who is asked next")
    typed(page, "T8", "escalate_to", "neighbour")
    row = page.locator("tr#row-T8")
    expect(row.locator(".row-problems")).to_have_count(0)
    expect(row.locator("details.escalation summary")).to_contain_text("then neighbour")

    plan = selectors.study_document(study)["plans"][1]
    assert plan["assignments"]["T7"]["reliability"] == {
        "fails_per_1000": 20,
        "detected_by": "alert",
    }
    assert plan["assignments"]["T8"]["human"] == ["resident", "neighbour"]
    assert plan["assignments"]["T8"]["escalate_after_s"] == 600
    assert page.javascript_errors == []


def test_transitions_on_an_event_at_fixed_times_and_from_every_mode(signed_in, django_user_model):
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    document = json.loads((EXAMPLES_DIR / "home-heating.json").read_text("utf-8"))
    study = services.study_import(data=document, owner=owner)
    page.goto(f"{page.base}/studies/{study.pk}/plans/auto/modes")
    expect(page.locator("#mode-diagram .main-svg").first).to_be_visible()
    # The example's hold ends at the programme's times: said so, once a day each at most.
    next_period = page.locator("#mode-transitions tr", has_text="next period")
    expect(next_period).to_contain_text("at 06:30, 08:15, 17:45, 22:30")

    # A fault (an event of the study) takes the device from any mode to frost.
    page.click("text=Add a transition")
    fill_form(
        page,
        {"trigger": "fault found"},
        {"source": "*", "target": "frost", "by": "event", "cue": "alert", "event": "fault"},
    )
    fault = page.locator("#mode-transitions tr", has_text="fault found")
    expect(fault).to_contain_text("any mode")
    expect(fault).to_contain_text("with each")

    # A rate and times together are refused beside the field, nothing saved.
    page.click("text=Add a transition")
    form = page.locator("#mode-form-panel form")
    form.locator("[name=trigger]").fill("night set-back")
    form.locator("[name=per_day]").fill("2")
    form.locator("[name=times]").fill("22:00")
    form.locator("[name=source]").select_option("schedule")
    form.locator("[name=target]").select_option("hold")
    form.locator("button[type=submit]").first.click()
    expect(page.locator("#mode-form-panel form")).to_contain_text("A change happens in one way")
    form = page.locator("#mode-form-panel form")
    form.locator("[name=per_day]").fill("")
    form.locator("button[type=submit]").first.click()
    expect(page.locator("#mode-form-panel form")).to_have_count(0)
    night = page.locator("#mode-transitions tr", has_text="night set-back")
    expect(night).to_contain_text("at 22:00")

    transitions = selectors.study_document(study)["plans"][1]["modes"]["transitions"]
    assert transitions[-2]["from"] == "*" and transitions[-2]["event"] == "fault"
    assert transitions[-1]["times"] == ["22:00"] and "per_day" not in transitions[-1]
    assert page.javascript_errors == []
