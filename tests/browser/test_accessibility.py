"""An accessibility scan (axe-core, via axe-playwright-python) of every page: no serious or
critical violations."""

from __future__ import annotations

import pytest
from axe_playwright_python.sync_playwright import Axe

from allocation import services
from allocation.core import read_study
from allocation.examples import example_paths

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


def pages(pk: int, plan: str) -> list[str]:
    base = f"/studies/{pk}"
    return [
        "/",
        "/methods/",
        f"{base}/",
        f"{base}/inventory",
        f"{base}/plans/{plan}/edit",
        f"{base}/graph",
        f"{base}/plans/{plan}/dashboard",
        f"{base}/plans/{plan}/modes",
        f"{base}/plans/{plan}/modes/findings/0?step=1",
        f"{base}/plans/{plan}/simulation?days=30&seed=1",
        f"{base}/simulation?days=30&seed=1",
        f"{base}/compare",
        f"{base}/assumptions",
        f"{base}/inventory/tasks/T2",
    ]


def test_every_page_has_no_serious_or_critical_violations(signed_in, django_user_model, settings):
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    import json

    study = services.study_import(data=json.loads(path.read_text()), owner=owner)
    plan = read_study(json.loads(path.read_text())).plans[-1].id
    # A simulated run, so that the simulation pages show their charts and tables.
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
    services.simulation_request(study=study, plan_key=plan, days=30, seed=1, user=owner)
    axe = Axe()
    report = {}
    for url in pages(study.pk, plan):
        page.goto(page.base + url)
        page.wait_for_load_state("networkidle")
        results = axe.run(page)
        bad = [
            v for v in results.response["violations"] if v.get("impact") in ("serious", "critical")
        ]
        if bad:
            report[url] = [
                (v["id"], v["impact"], v["help"], [n["target"] for n in v["nodes"]][:4])
                for v in bad
            ]
    assert report == {}, "\n".join(f"{url}: {found}" for url, found in report.items())
