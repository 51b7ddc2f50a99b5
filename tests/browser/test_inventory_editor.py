"""The inventory's inline editor in a browser: "Cancel" and "Keep it" close the form
opened in place and store nothing.

A link that differs from the page's address only in its fragment does not load anything
(HTML Living Standard, "navigate to a fragment"), so a plain link back to the inventory
left the form open; and a later form's answer, aimed by the server at the section, then
found its old form gone ("Invalid re-target" in htmx).
"""

from __future__ import annotations

import json

import pytest
from playwright.sync_api import expect

from allocation import services
from allocation.examples import example_paths
from allocation.models import AuditEntry

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.mark.parametrize(("action", "leave"), [("edit", "Cancel"), ("delete", "Keep it")])
def test_leaving_an_inline_form_closes_it(signed_in, django_user_model, action, leave):
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    study = services.study_import(data=json.loads(path.read_text()), owner=owner)
    audit = AuditEntry.objects.count()
    page.goto(f"{page.base}/studies/{study.pk}/inventory")
    editor = page.locator("#editor-agents")
    page.locator(f"#section-agents a:text-is('{action}')").first.click()
    expect(editor.locator("form")).to_have_count(1)
    editor.locator(f"a:text-is('{leave}')").click()
    expect(editor.locator("form")).to_have_count(0)
    assert AuditEntry.objects.count() == audit
    # The page is still the inventory, and its next form works in place.
    assert page.url.split("#")[0].endswith("/inventory")
    page.locator("#section-agents a:text-is('edit')").first.click()
    expect(editor.locator("form")).to_have_count(1)
    assert page.javascript_errors == []
