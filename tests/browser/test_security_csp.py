"""The content security policy (allocation/security.py) in a real browser: every chart
page draws its plotly charts and Chromium reports no violation."""

from __future__ import annotations

import json

import pytest

from allocation import services
from allocation.examples import example_paths

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

# Added before any page script runs (through the DevTools protocol, outside the policy).
LISTEN = """
window.__violations = [];
document.addEventListener("securitypolicyviolation", (event) => {
  window.__violations.push(event.violatedDirective + " " + event.blockedURI);
});
"""


def test_chart_pages_work_under_the_policy(signed_in, django_user_model, settings):
    page = signed_in
    page.add_init_script(LISTEN)
    owner = django_user_model.objects.get(username="walker")
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    study = services.study_import(data=json.loads(path.read_text()), owner=owner)
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
    services.simulation_request(study=study, plan_key="auto", days=5, seed=1, user=owner)
    base = f"{page.base}/studies/{study.pk}"
    for url in (
        f"{base}/plans/auto/dashboard",
        f"{base}/graph",
        f"{base}/plans/auto/modes",
        f"{base}/plans/auto/simulation?days=5&seed=1",
        f"{base}/compare",
    ):
        response = page.goto(url)
        assert "script-src 'self'" in response.headers["content-security-policy"]
        page.wait_for_load_state("networkidle")
        charts = page.locator("div.chart[data-figure]")
        assert charts.count() > 0, url
        page.locator("div.chart[data-figure] .main-svg").first.wait_for(timeout=15000)
        assert page.evaluate("window.__violations") == [], url
    # htmx swaps under the policy are driven by the other browser tests (workflow,
    # mode map, workshop), which run with the same middleware.
    assert page.javascript_errors == []
