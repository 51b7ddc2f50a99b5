"""Baton's pages under its own content security policy (script-src 'self', no
unsafe-eval; allocation/web/security.py) in Chromium: no page asks the browser to
evaluate a string, and the plan editor's selection boxes select without saving.

The oracle is the browser itself: Chromium reports every refused script as a
``securitypolicyviolation`` event and an ``EvalError`` on the console (W3C Content
Security Policy Level 3, the "unsafe-eval" keyword)."""

from __future__ import annotations

import json
from urllib.parse import urlsplit

import pytest

from allocation import services
from allocation.examples import example_paths
from allocation.models import Assignment, Study

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

# Added before any page script runs (through the DevTools protocol, outside the policy).
LISTEN = """
window.__violations = [];
document.addEventListener("securitypolicyviolation", (event) => {
  window.__violations.push(event.violatedDirective + " " + event.blockedURI);
});
"""

# Links that download a file rather than open a page.
DOWNLOADS = (".csv", ".json", ".xlsx", ".zip", ".md", ".txt", "export", "download")


def _study(django_user_model):
    owner = django_user_model.objects.get(username="walker")
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    return services.study_import(data=json.loads(path.read_text()), owner=owner)


def _watch(page):
    page.add_init_script(LISTEN)
    console: list[str] = []
    page.on(
        "console",
        lambda message: (
            console.append(f"{message.type}: {message.text}") if message.type == "error" else None
        ),
    )
    return console


def _visit(page, url, console):
    response = page.goto(url)
    assert response.ok, url
    assert "script-src 'self'" in response.headers["content-security-policy"], url
    assert "unsafe-eval" not in response.headers["content-security-policy"], url
    page.wait_for_load_state("networkidle")
    assert page.evaluate("window.__violations") == [], url
    assert console == [], url
    assert page.javascript_errors == [], url
    # base.html's htmx-config meta tag: htmx evaluates no strings at all.
    assert page.evaluate("window.htmx.config.allowEval") is False, url


def _links(page, prefix):
    hrefs = page.eval_on_selector_all("a[href]", "links => links.map(a => a.href)")
    found = []
    for href in hrefs:
        parts = urlsplit(href)
        path = parts.path
        if not path.startswith(prefix) or path.lower().endswith(DOWNLOADS):
            continue
        if any(word in path for word in DOWNLOADS):
            continue
        found.append(path)
    return found


def test_every_page_of_a_study_runs_no_refused_script(signed_in, django_user_model):
    page = signed_in
    console = _watch(page)
    study = _study(django_user_model)
    prefix = f"/studies/{study.pk}/"
    start = [
        prefix,
        f"{prefix}plans/auto/edit",
        f"{prefix}plans/auto/modes",
        f"{prefix}plans/auto/dashboard",
        f"{prefix}plans/auto/review",
        f"{prefix}plans/auto/ratings",
        "/methods/",
    ]
    seen: set[str] = set()
    queue = list(start)
    # Two steps out from the study page and one plan's pages: the tabs of the study,
    # each plan-level page of the plan "auto" (the other plan's pages are skipped).
    while queue:
        path = queue.pop(0)
        if path in seen or "/plans/manual/" in path:
            continue
        seen.add(path)
        _visit(page, page.base + path, console)
        if path in start:
            queue.extend(p for p in _links(page, prefix) if p not in seen)
    assert len(seen) >= len(start)


def test_ticking_selects_without_saving_and_apply_changes_both(signed_in, django_user_model):
    page = signed_in
    console = _watch(page)
    study = _study(django_user_model)
    _visit(page, f"{page.base}/studies/{study.pk}/plans/auto/edit", console)
    rows = lambda: list(  # noqa: E731
        Assignment.objects.filter(plan__study=study, plan__key="auto").order_by("pk").values()
    )
    before_rows, before_version = rows(), Study.objects.get(pk=study.pk).version
    boxes = page.locator("input[name=tasks]")
    assert boxes.count() >= 2
    first, second = (boxes.nth(i).get_attribute("value") for i in (0, 1))
    boxes.nth(0).check()
    boxes.nth(1).check()
    page.wait_for_timeout(500)
    page.wait_for_load_state("networkidle")
    assert Study.objects.get(pk=study.pk).version == before_version
    assert rows() == before_rows

    # A status neither row has: the bulk form applies it to both.
    statuses = page.locator("#bulk-form select[name=status] option").evaluate_all(
        "options => options.map(o => o.value).filter(v => v)"
    )
    current = {r["status"] for r in before_rows}
    status = next(s for s in statuses if s not in current)
    page.select_option("#bulk-form select[name=status]", status)
    with page.expect_response(lambda r: "/bulk" in r.url) as answer:
        page.click("#bulk-form button[type=submit]")
    page.wait_for_load_state("networkidle")
    assert answer.value.ok
    said = page.locator("#messages").inner_text()
    now = {
        a.task.key: a.status
        for a in Assignment.objects.filter(plan__study=study, plan__key="auto").select_related(
            "task"
        )
    }
    assert now[first] == status and now[second] == status, said
    assert page.evaluate("window.__violations") == []
    assert console == []
