"""A plan's dashboards: full page, htmx fragments, show-all, a study with errors.

Figures checked are worked by hand in ``tests/web/test_figures_dashboards.py`` (the home-heating
study of ``tests/core/conftest.py``): in plan "auto" the resident spends 53/3 s a day
(shown as 17.7 s), durations at their triangular means.
"""

from __future__ import annotations

import html
import json
import re
from pathlib import Path

import pytest
from django.conf import settings
from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core.limits import PAGE_ROWS
from allocation.examples import example_documents

PANELS = ("daily", "goals", "handovers", "awareness", "coherence", "findings", "modes")
FIGURES = ("figure-daily", "figure-goals", "figure-risk", "figure-awareness", "figure-modes")


def dashboard(study: m.Study, plan: str = "auto") -> str:
    return reverse("plan-dashboard", args=[study.pk, plan])


def chart_data(page: str, figure_id: str) -> dict:
    match = re.search(rf'<script id="{figure_id}" type="application/json">(.*?)</script>', page)
    assert match, figure_id
    return json.loads(match.group(1))


def test_full_page_has_every_panel_chart_and_method_note(client, study, owner):
    client.force_login(owner)
    response = client.get(dashboard(study))
    page = response.content.decode()
    assert response.status_code == 200 and "<html" in page
    for panel in PANELS:
        assert f'id="{panel}"' in page, panel
    for figure_id in FIGURES:
        assert f'data-figure="{figure_id}"' in page, figure_id
    # Sources named in the method notes, and the example policy said to be one.
    for source in ("Parasuraman", "Pritchett, Kim &amp; Feigh (2014)", "Newman 2006"):
        assert source in page, source
    assert "Endsley &amp; Kiris (1995)" in page and "Eriksson &amp; Stanton (2017)" in page
    assert "example risk policy, not a recommendation" in page
    # The resident's 53/3 s a day in plan "auto", by hand (test_figures_dashboards docstring).
    assert "17.7 s" in page
    daily = chart_data(page, "figure-daily")
    assert daily["data"][0]["y"][0] * 60 == pytest.approx(53 / 3)


def test_plan_picker_links_work_with_and_without_htmx(client, study, owner):
    client.force_login(owner)
    page = client.get(dashboard(study)).content.decode()
    for plan in ("manual", "auto"):
        url = dashboard(study, plan)
        assert f'href="{url}" hx-get="{url}" hx-target="#dashboard"' in page


def test_dashboard_fragment_for_htmx(client, study, owner):
    client.force_login(owner)
    response = client.get(dashboard(study, "manual"), headers={"HX-Request": "true"})
    fragment = response.content.decode()
    assert fragment.startswith('<div id="dashboard"')
    assert "<html" not in fragment and 'class="tabs"' not in fragment
    assert "Resident does it" in fragment and 'data-figure="figure-daily"' in fragment
    # The manual plan has no mode map, so no mode panel.
    assert 'id="modes"' not in fragment


def test_boosted_request_is_a_full_page(client, study, owner):
    client.force_login(owner)
    headers = {"HX-Request": "true", "HX-Boosted": "true"}
    assert "<html" in client.get(dashboard(study), headers=headers).content.decode()


def test_unknown_plan_is_404(client, study, owner):
    client.force_login(owner)
    assert client.get(dashboard(study, "nope")).status_code == 404


def test_risk_matrix_on_the_page_counts_the_handovers(client, study, owner):
    """Plan "auto": two handovers of T2 (severity 2) at mode changes without a rate: 0 a
    day, so 0 expected slips a year, improbable (the first column, least often first)."""
    client.force_login(owner)
    page = client.get(dashboard(study)).content.decode()
    text = chart_data(page, "figure-risk")["data"][0]["text"]
    assert text[1][0] == "2"
    assert sum(cell != "·" for row in text for cell in row) == 1


@pytest.fixture
def insulin(owner):
    document = next(d for d in example_documents() if d["study"]["id"] == "closed-loop-insulin")
    return services.study_import(data=document, owner=owner)


def handover_rows(html: str) -> int:
    table = html.split('id="dashboard-handovers"', 1)[1].split("</table>", 1)[0]
    return table.count("<tr>") - 1  # less the header row


def test_handovers_show_the_top_fifty_then_all(client, insulin, owner):
    client.force_login(owner)
    url = dashboard(insulin, "hybrid-loop")
    page = client.get(url).content.decode()
    total = int(re.search(r"Show all (\d+)", page).group(1))
    assert total > 50 and handover_rows(page) == 50
    assert f'href="{url}?handovers=all#handovers"' in page
    # "Show all" lists every handover, a page of PAGE_ROWS at a time: the pages, followed
    # by their "Next" links, hold each handover once.
    everything = client.get(url + "?handovers=all").content.decode()
    assert "<html" in everything
    seen, shown = [], everything
    while True:
        rows = handover_rows(shown)
        assert 0 < rows <= PAGE_ROWS
        seen.append(rows)
        following = re.search(r'<a href="([^"]+)#dashboard-handovers"[^>]* rel="next"', shown)
        if following is None:
            break
        shown = client.get(html.unescape(following.group(1))).content.decode()
    assert sum(seen) == total and len(seen) == -(-total // PAGE_ROWS)
    # With htmx, only the table is sent back.
    fragment = client.get(
        url + "?handovers=all",
        headers={"HX-Request": "true", "HX-Target": "dashboard-handovers"},
    ).content.decode()
    assert fragment.startswith('<div id="dashboard-handovers"')
    assert handover_rows(fragment) == min(total, PAGE_ROWS) and 'id="awareness"' not in fragment


def test_study_with_errors_shows_its_problems_and_no_charts(client, study, owner):
    m.Task.objects.filter(study=study, key="T2").update(duration_s=[30, 5, 2])
    client.force_login(owner)
    response = client.get(dashboard(study))
    page = response.content.decode()
    assert response.status_code == 200
    assert "$.tasks[2].duration_s" in page and "cannot be analysed yet" in page
    assert "data-figure" not in page and 'id="handovers"' not in page


def test_study_own_policy_is_named_not_called_an_example(client, study, owner):
    study.risk_policy = {"frequency_bands": [20, 2, 0.2, 0.02]}
    study.save()
    client.force_login(owner)
    page = client.get(dashboard(study)).content.decode()
    assert "study's own risk policy" in page and "example risk policy" not in page
    # The study's cuts, in words.
    assert "improbable: below 0.02 a year" in page and "frequent: 20 a year or more" in page


def test_user_text_is_escaped_in_tables_and_chart_data(client, owner, heating_document):
    heating_document["agents"][0]["name"] = "<script>alert(1)</script>"
    heating_document["plans"][1]["name"] = "<b>bold</b> plan"
    study = services.study_import(data=heating_document, owner=owner)
    client.force_login(owner)
    page = client.get(dashboard(study)).content.decode()
    assert "<script>alert(1)</script>" not in page and "<b>bold</b>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    # Chart data holds the text HTML-escaped (plotly reads it as HTML), then json_script's
    # escaping of & and < on top: the raw form never reaches plotly.
    assert "\\u0026lt;script\\u0026gt;alert(1)" in page
    assert "\\u003Cscript\\u003Ealert(1)" not in page


def test_templates_use_json_script_and_never_safe():
    """Every chart's data is written with json_script (STYLE.md); no template of these
    screens marks anything safe."""
    root = Path(settings.BASE_DIR) / "templates"
    names = [
        *root.glob("dashboards/*.html"),
        *root.glob("htmx/dashboard_*.html"),
        *root.glob("assumptions/*.html"),
        *root.glob("htmx/assumption_*.html"),
    ]
    assert len(names) >= 5
    for path in names:
        text = path.read_text()
        assert "|safe" not in text and "autoescape off" not in text, path.name
        for figure_id in re.findall(r'data-figure="([^"]+)"', text):
            assert f'json_script:"{figure_id}"' in text, (path.name, figure_id)


def test_tasks_link_to_their_plan_editor_row_and_goals_to_the_study_page(client, study, owner):
    """Plan "auto" has one finding (the resident is accountable for T2, which the
    thermostat holds): T2 links to its row in the plan editor; goal G1 to the task list."""
    client.force_login(owner)
    page = client.get(dashboard(study)).content.decode()
    findings = page.split('id="findings"', 1)[1].split("</section>", 1)[0]
    assert "Accountable without holding the task" in findings
    assert f'href="{reverse("plan-editor", args=[study.pk, "auto"])}#row-T2"' in findings
    goals = page.split('id="goals"', 1)[1].split("</section>", 1)[0]
    assert f'href="{reverse("study-detail", args=[study.pk])}#tasks"><code>G1</code>' in goals


def test_a_failure_and_an_escalation_are_played_step_by_step(client, owner):
    """Hand-built: the thermostat fails at T2 and nothing tells the resident (who still
    believes the thermostat holds it: the step is flagged); T8 asks the resident, then the
    neighbour after 600 s (the resident's awake latency [20, 60, 300] s never takes that
    long, the asleep one [300, 900, 3600] s mostly does)."""
    from allocation.core.analysis import analyse_plan as analyse

    document = next(d for d in example_documents() if d["study"]["id"] == "home-heating")
    document["agents"].append({"id": "neighbour", "name": "Neighbour", "kind": "human"})
    assignments = document["plans"][1]["assignments"]
    assignments["T7"]["reliability"] = {"fails_per_1000": 20, "detected_by": "none"}
    assignments["T8"] = {"human": ["resident", "neighbour"], "escalate_after_s": 600}
    study = services.study_import(data=document, owner=owner)
    client.force_login(owner)
    result = analyse(selectors.study_load(study).study, "auto")
    numbers = {h.site.source: n for n, h in enumerate(result.handovers)}
    dashboard = client.get(reverse("plan-dashboard", args=[study.pk, "auto"]) + "?handovers=all")
    failure_url = reverse("handover-steps", args=[study.pk, "auto", numbers["failure"]])
    assert failure_url in dashboard.content.decode()
    page = client.get(failure_url).content.decode()
    assert "Thermostat fails at T7" in page and "nothing tells Resident" in page
    assert page.count('class="flagged"') == 1
    page = client.get(
        reverse("handover-steps", args=[study.pk, "auto", numbers["escalation"]])
    ).content.decode()
    assert "no answer from Resident within 10 min" in page
    assert "Neighbour answers and takes the task" in page
    link = next(n for n, h in enumerate(result.handovers) if h.site.source == "link")
    page = client.get(reverse("handover-steps", args=[study.pk, "auto", link])).content.decode()
    assert "Only a failure of the automation or a call passed on" in page
    outside = reverse("handover-steps", args=[study.pk, "auto", len(result.handovers)])
    assert client.get(outside).status_code == 404
