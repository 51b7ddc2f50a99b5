"""Two people, two browser sessions, one plan-editor row (optimistic versioning).

Both open the editor at the same version of the assignment of T2; the first changes its
rationale, then the second changes it too. The second save must not overwrite the first
(the lost update of Berenson et al. 1995, P4): the second person sees the conflict with
both values, the database keeps the first person's value until "Use mine".
"""

from __future__ import annotations

import re

import pytest
from playwright.sync_api import expect

from allocation import models as m
from allocation import services
from tests.core.conftest import HOME_HEATING

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

PASSWORD = "a long test password 7"


def signed_in_context(browser, live_server, username: str):
    """A separate browser context (its own cookies: its own session), signed in."""
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.javascript_errors = errors
    page.goto(f"{live_server.url}/accounts/login/")
    page.fill("input[name=username]", username)
    page.fill("input[name=password]", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(f"{live_server.url}/")
    return context, page


@pytest.fixture
def two_editors(browser, live_server, django_user_model):
    """A study with two editors, each signed in in a browser context of their own."""
    first = django_user_model.objects.create_user("ann", password=PASSWORD)
    second = django_user_model.objects.create_user("ben", password=PASSWORD)
    study = services.study_import(data=HOME_HEATING, owner=first)
    m.Membership.objects.create(study=study, user=second, role=m.Role.EDITOR)
    contexts = [signed_in_context(browser, live_server, name) for name in ("ann", "ben")]
    yield study, [page for _context, page in contexts]
    for context, _page in contexts:
        context.close()


def rationale(study: m.Study) -> str:
    return m.Assignment.objects.get(plan__study=study, plan__key="auto", task__key="T2").rationale


def type_rationale(page, text: str) -> None:
    field = page.locator("tr#row-T2 input[name=rationale]")
    with page.expect_response(lambda r: "/tasks/T2" in r.url and r.request.method == "POST"):
        field.fill(text)
        field.dispatch_event("change")
    expect(page.locator("tr#row-T2")).not_to_have_class(re.compile("htmx-"))


def test_second_save_shows_the_conflict_and_keeps_the_first_value(two_editors, live_server):
    study, (ann, ben) = two_editors
    url = f"{live_server.url}/studies/{study.pk}/plans/auto/edit"
    ann.goto(url)
    ben.goto(url)

    type_rationale(ann, "Ann's reason")
    assert rationale(study) == "Ann's reason"

    type_rationale(ben, "Ben's reason")
    row = ben.locator("tr#row-T2")
    conflict = row.locator(".edit-conflict")
    expect(conflict).to_be_visible()
    expect(conflict).to_contain_text("changed by ann since you opened it")
    expect(conflict.locator("tr.differs")).to_contain_text("Ann's reason")
    expect(conflict.locator("tr.differs")).to_contain_text("Ben's reason")
    assert rationale(study) == "Ann's reason"  # nothing of Ben's was written

    # "Use mine": Ben's values against Ann's version.
    with ben.expect_response(lambda r: "/tasks/T2" in r.url and r.request.method == "POST"):
        conflict.get_by_role("button", name="Use mine").click()
    expect(ben.locator("tr#row-T2 .edit-conflict")).to_have_count(0)
    assert rationale(study) == "Ben's reason"

    # Ann's row is now stale in turn; "Keep theirs" brings Ben's value into her row.
    type_rationale(ann, "Ann again")
    ann_conflict = ann.locator("tr#row-T2 .edit-conflict")
    expect(ann_conflict).to_contain_text("changed by ben")
    with ann.expect_response(lambda r: "/tasks/T2" in r.url and r.request.method == "GET"):
        ann_conflict.get_by_role("link", name="Keep theirs").click()
    expect(ann.locator("tr#row-T2 input[name=rationale]")).to_have_value("Ben's reason")
    expect(ann.locator("tr#row-T2 .edit-conflict")).to_have_count(0)
    assert rationale(study) == "Ben's reason"
    assert not ann.javascript_errors and not ben.javascript_errors
