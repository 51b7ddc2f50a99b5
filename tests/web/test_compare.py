"""The compare screen (methods document, #comparison): full page, htmx fragments, and
the weight form.

Expected values are worked by hand from the methods document (#person-time) on the
home-heating test study, durations at their triangular means (min + typical + max) / 3
(see tests/core/analysis/test_compare.py for the arithmetic): manual 70/3 = 23.33 person
s/day, auto 53/3 = 17.67 (−5.67); task T1 −37/3 = −12.3, T2 +20/3 = +6.7. The objective
with the default weights (tool assumption ``objective_weights``) and reference points
(good 0, poor the worse plan's value): manual 1 (burden) + 1 (one interruption, the poor
value) + 1/5 (findings 1 of 5) + its mean awareness over auto's; auto 53/70 (burden) + 1
+ 2 (highest screening index) + 1 (awareness) + 1 (findings) = 5.757.
"""

from __future__ import annotations

import copy
import json
import re

import pytest
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core.assumptions import OBJECTIVE_FIGURES, OBJECTIVE_WEIGHTS
from allocation.core.cautions import CAUTIONS
from allocation.examples import example_paths

HX = {"HX-Request": "true"}


def compare_url(study: m.Study, query: str = "") -> str:
    url = reverse("study-compare", args=[study.pk])
    return f"{url}?{query}" if query else url


def weights_url(study: m.Study) -> str:
    return reverse("study-compare-weights", args=[study.pk])


def weight_form(**overrides: object) -> dict[str, object]:
    """The weight form as the page sends it: every default, some changed."""
    values = {**OBJECTIVE_WEIGHTS, **overrides}
    return {f"weight_{key}": str(values[key]) for key in OBJECTIVE_FIGURES}


def _awareness_share() -> float:
    """manual's mean awareness over auto's (the awareness figures themselves are worked
    in tests/core/analysis/test_awareness*)."""
    from allocation.core import read_study
    from allocation.core.analysis import analyse_plan, prepare
    from tests.core.conftest import HOME_HEATING

    core = read_study(copy.deepcopy(HOME_HEATING))
    graph = prepare(core)
    manual, auto = (
        analyse_plan(core, plan, graph=graph).headline()["mean_awareness"]
        for plan in ("manual", "auto")
    )
    return manual / auto


def _manual_score() -> str:
    """manual's score: 2.2 plus its awareness share."""
    return f"{2.2 + _awareness_share():.3f}"


RANKED = [("manual", _manual_score()), ("auto", "5.757")]


def ranking_rows(html: str) -> list[tuple[str, str]]:
    """(plan, score) in ranking order, read from the objective panel."""
    panel = html[html.index('id="compare-objective"') :]
    table = panel[: panel.index("</table>")]
    return re.findall(r"<td><code>([^<]+)</code>.*?<strong>([0-9.]+)</strong>", table, re.S)


# -- the page ---------------------------------------------------------------------------


def test_full_page_compares_all_plans_by_default(client, study, owner):
    client.force_login(owner)
    response = client.get(compare_url(study))
    assert response.status_code == 200
    page = response.content.decode()
    assert page.startswith("<!doctype html>")
    # Picker: every plan ticked, the first the baseline.
    assert 'name="plan" value="manual" checked' in page
    assert 'name="plan" value="auto" checked' in page
    assert '<option value="manual" selected>' in page
    # Headline (expected durations, hand-worked in tests/core/analysis/test_compare.py):
    # 70/3 = 23.3 against 53/3 = 17.7, better by 17/3 = 5.7 (lower is better).
    assert '<td class="num">23.3</td>' in page
    assert re.search(r"17\.7 <span class=\"cmp cmp-better\"[^>]*>−5\.7", page)
    assert "higher is better" in page and "lower is better" in page
    # Burden moved, largest first: T1 −37/3 = −12.3 before T2 +20/3 = +6.7.
    burden = page[page.index('id="compare-burden"') : page.index('id="compare-handovers"')]
    assert burden.index("<code>T1</code>") < burden.index("<code>T2</code>")
    assert "+6.7" in burden and "−12.3" in burden
    assert 'data-figure="compare-burden-chart"' in burden
    assert '<script id="compare-burden-chart" type="application/json">' in burden
    # The two mode handovers of auto appear. Findings: manual's capability finding goes;
    # auto's accountability finding and its mode map's four findings (see
    # tests/core/analysis/test_compare.py) appear.
    assert "2 appear, 0 go, 0 in both." in page
    assert "5 appear, 1 go, 0 in both." in page
    # Finding kinds in the registry's words.
    assert "Accountable without holding the task" in page and "Capability missing" in page
    # Objective: hand-worked in tests/core/analysis/test_compare.py.
    assert ranking_rows(page) == RANKED
    assert '<script id="compare-contributions" type="application/json">' in page
    # The owner may change the weights; the method and cautions are shown.
    assert "Save weights and rank again" in page
    assert "tool assumption" in page and "reference points" in page
    assert CAUTIONS[:60] in page


def test_baseline_comes_first_and_differences_turn(client, study, owner):
    client.force_login(owner)
    page = client.get(compare_url(study, "baseline=auto&plan=manual&plan=auto")).content.decode()
    headline = page[page.index('id="compare-headline"') : page.index('id="compare-against"')]
    assert headline.index("<code>auto</code>") < headline.index("<code>manual</code>")
    assert re.search(r"23\.3 <span class=\"cmp cmp-worse\"[^>]*>\+5\.7", headline)
    # The ranking does not depend on which plan is the baseline.
    assert ranking_rows(page) == RANKED


def test_plan_picker_by_htmx_gets_the_comparison_only(client, study, owner):
    client.force_login(owner)
    response = client.get(compare_url(study, "plan=auto&plan=manual"), headers=HX)
    fragment = response.content.decode().strip()
    assert response.status_code == 200
    assert fragment.startswith('<div id="comparison">')
    assert "<html" not in fragment and 'id="compare-picker"' not in fragment
    assert 'id="compare-objective"' in fragment


def test_unknown_plans_are_named_and_escaped(client, study, owner):
    client.force_login(owner)
    page = client.get(compare_url(study, "plan=<b>x</b>&plan=manual")).content.decode()
    assert "There is no plan “&lt;b&gt;x&lt;/b&gt;” in this study" in page
    assert "<b>x</b>" not in page
    assert "Pick at least two plans to compare." in page
    assert 'id="compare-objective"' not in page


def test_study_with_one_plan_says_so(client, study, owner):
    study.plans.filter(key="auto").delete()
    client.force_login(owner)
    page = client.get(compare_url(study)).content.decode()
    assert "This study has one plan" in page
    assert 'id="compare-headline"' not in page


def test_study_with_errors_shows_its_problems_not_a_comparison(client, study, owner):
    m.Study.objects.filter(pk=study.pk).update(assumptions={"objective_weights": {"findings": -1}})
    client.force_login(owner)
    response = client.get(compare_url(study))
    page = response.content.decode()
    assert response.status_code == 200
    assert "$.study.assumptions.objective_weights" in page
    assert "The study has errors" in page
    assert 'id="compare-headline"' not in page and 'id="compare-objective"' not in page


def three_plan_study(owner, heating_document) -> m.Study:
    document = copy.deepcopy(heating_document)
    extra = copy.deepcopy(document["plans"][1])
    extra.update(id="auto-alert", name="Thermostat, with an alert")
    extra["assignments"]["T2"]["feedback"] = "alert"
    document["plans"].append(extra)
    return services.study_import(data=document, owner=owner)


def test_focus_picks_the_plan_shown_against_the_baseline(client, owner, heating_document):
    study = three_plan_study(owner, heating_document)
    client.force_login(owner)
    page = client.get(compare_url(study)).content.decode()
    against = page[page.index('id="compare-against"') : page.index('id="compare-burden"')]
    assert 'class="active" aria-current="true"><code>auto</code>' in against
    focus = "baseline=manual&plan=manual&plan=auto&plan=auto-alert&focus=auto-alert"
    assert f'href="{compare_url(study, focus).replace("&", "&amp;")}"' in against
    page = client.get(compare_url(study, focus)).content.decode()
    against = page[page.index('id="compare-against"') : page.index('id="compare-burden"')]
    assert 'class="active" aria-current="true"><code>auto-alert</code>' in against
    assert "Thermostat, with an alert" in against
    # All three plans are still ranked.
    assert {plan for plan, _score in ranking_rows(page)} == {"manual", "auto", "auto-alert"}


# -- the weights ------------------------------------------------------------------------


@pytest.fixture
def example_heating(owner) -> m.Study:
    """The example home-heating study: auto has fewer interruptions than manual."""
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    return services.study_import(data=json.loads(path.read_text()), owner=owner)


def test_weight_post_by_htmx_stores_and_ranks_again(client, example_heating, owner):
    """Only interruptions weighed (manual 2.01 a day, auto 1.02): manual, the poor value,
    scores the whole weight 1 and auto about half, so auto now ranks first; with the
    defaults manual ranks first."""
    client.force_login(owner)
    page = client.get(compare_url(example_heating)).content.decode()
    assert [plan for plan, _ in ranking_rows(page)] == ["manual", "auto"]
    weights = dict.fromkeys(OBJECTIVE_FIGURES, 0) | {"interruptions_per_day": 1}
    data = {**weight_form(**weights), "baseline": "manual", "plan": ["manual", "auto"]}
    response = client.post(weights_url(example_heating), data, headers=HX)
    fragment = response.content.decode().strip()
    assert response.status_code == 200
    assert fragment.startswith('<section class="panel" id="compare-objective">')
    rows = ranking_rows(fragment)
    assert [plan for plan, _ in rows] == ["auto", "manual"] and rows[1][1] == "1.000"
    assert "Weights saved" in fragment
    example_heating.refresh_from_db()
    assert example_heating.assumptions["objective_weights"] == weights
    # The full page now ranks with the stored weights too.
    page = client.get(compare_url(example_heating)).content.decode()
    assert [plan for plan, _ in ranking_rows(page)] == ["auto", "manual"]


def test_weight_post_without_htmx_redirects_back(client, study, owner):
    client.force_login(owner)
    data = {**weight_form(findings=3), "baseline": "auto", "plan": ["manual", "auto"]}
    response = client.post(weights_url(study), data)
    assert response.status_code == 302
    expected = compare_url(study, "baseline=auto&plan=auto&plan=manual")
    assert response["Location"] == expected + "#compare-objective"
    study.refresh_from_db()
    assert study.assumptions["objective_weights"]["findings"] == 3
    # The plan in focus comes back too.
    response = client.post(weights_url(study), {**data, "focus": "manual"})
    assert response["Location"] == expected + "&focus=manual#compare-objective"


def test_reset_goes_back_to_the_defaults(client, study, owner):
    m.Study.objects.filter(pk=study.pk).update(
        assumptions={"objective_weights": {"findings": 3}, "monitoring_s": 12}
    )
    client.force_login(owner)
    response = client.post(weights_url(study), {"reset": "1"}, headers=HX)
    assert response.status_code == 200
    study.refresh_from_db()
    assert study.assumptions == {"monitoring_s": 12}


@pytest.mark.parametrize(
    "field, typed, message",
    [
        ("burden_s_per_day", "abc", "“abc” is not a number"),
        ("max_risk", "", "enter a weight"),
        ("cut_ratio", "-1", "at least 0"),
        ("findings", "1000", "at most 100"),
        ("findings", "nan", "must be a number"),
    ],
)
def test_bad_weight_is_named_beside_its_field_and_nothing_stored(
    client, study, owner, field, typed, message
):
    client.force_login(owner)
    data = {**weight_form(), f"weight_{field}": typed, "plan": ["manual", "auto"]}
    response = client.post(weights_url(study), data, headers=HX)
    fragment = response.content.decode()
    assert response.status_code == 200
    match = re.search(
        rf'name="weight_{field}" value="([^"]*)"\s*aria-invalid="true" '
        rf'aria-describedby="err_weight_{field}">.*?<span class="error" '
        rf'id="err_weight_{field}">([^<]*)</span>',
        fragment,
        re.S,
    )
    assert match, fragment
    assert match.group(1) == typed.replace("<", "&lt;")
    assert message in match.group(2)
    study.refresh_from_db()
    assert study.assumptions == {}


def test_every_weight_zero_is_refused(client, study, owner):
    client.force_login(owner)
    data = {**weight_form(**dict.fromkeys(OBJECTIVE_FIGURES, 0)), "plan": ["manual", "auto"]}
    response = client.post(weights_url(study), data)
    assert response.status_code == 400
    assert "must keep at least one weight above 0" in response.content.decode()
    study.refresh_from_db()
    assert study.assumptions == {}


def test_typed_text_is_escaped(client, study, owner):
    client.force_login(owner)
    data = {**weight_form(), "weight_findings": "<script>x</script>", "plan": ["manual", "auto"]}
    page = client.post(weights_url(study), data).content.decode()
    assert "<script>x</script>" not in page
    assert "&lt;script&gt;x&lt;/script&gt;" in page


@pytest.mark.parametrize("role", ["viewer", "reviewer"])
def test_viewers_and_reviewers_see_the_ranking_but_may_not_change_it(
    client, study, member_of, role
):
    client.force_login(member_of(role))
    page = client.get(compare_url(study)).content.decode()
    assert ranking_rows(page) == RANKED
    assert "Save weights and rank again" not in page
    assert "Weights in force" in page
    data = {**weight_form(findings=5), "plan": ["manual", "auto"]}
    assert client.post(weights_url(study), data).status_code == 403
    assert client.post(weights_url(study), data, headers=HX).status_code == 403
    study.refresh_from_db()
    assert study.assumptions == {}


def test_editor_may_change_the_weights(client, study, member_of):
    client.force_login(member_of("editor"))
    data = {**weight_form(findings=2.5), "plan": ["manual", "auto"]}
    assert client.post(weights_url(study), data, headers=HX).status_code == 200
    study.refresh_from_db()
    assert study.assumptions["objective_weights"]["findings"] == 2.5


def test_sensitivity_table_gives_the_weight_changes_that_reverse_the_leaders(client, study, owner):
    """Weights burden 1 and findings 0.5 (all else 0), good 0 and poor the worse plan:
    manual = 1 x 1 + 0.5 x 1/5 = 1.1; auto = 53/70 + 0.5 x 1 = 1.257. Gap 11/70. Burden
    tells them apart by 1 - 53/70 = 17/70: +11/17 = +0.647 reverses them; findings by
    1/5 - 1 = -4/5: -11/56 = -0.196 (weight 0.304, still at least 0)."""
    weights = {**dict.fromkeys(OBJECTIVE_FIGURES, 0), "burden_s_per_day": 1, "findings": 0.5}
    m.Study.objects.filter(pk=study.pk).update(assumptions={"objective_weights": weights})
    client.force_login(owner)
    page = client.get(compare_url(study)).content.decode()
    assert ranking_rows(page) == [("manual", "1.100"), ("auto", "1.257")]
    table = page[page.index("Sensitivity to the weights") :]

    def row(label: str) -> str:
        cells = table[table.index(label) :]
        return cells[: cells.index("</tr>")]

    assert "+0.647" in row("Person time s a day</th>") and "1.65" in row(
        "Person time s a day</th>"
    )
    assert "-0.196" in row("Findings") and "0.304" in row("Findings")
    assert "none" in row("Interruptions")
    assert "Ranks first" in page


def test_history_restore_gets_the_whole_page(client, study, owner):
    """htmx asks for the whole page when it restores history it has no copy of."""
    client.force_login(owner)
    headers = {**HX, "HX-History-Restore-Request": "true"}
    page = client.get(compare_url(study), headers=headers).content.decode()
    assert page.startswith("<!doctype html>") and 'id="compare-picker"' in page


# -- the reference points ---------------------------------------------------------------


def reference_url(study: m.Study) -> str:
    return reverse("study-compare-reference", args=[study.pk])


def reference_form(**points: str) -> dict[str, object]:
    """The reference form as the page sends it: every field blank but those given."""
    values = {f"{side}_{key}": "" for key in OBJECTIVE_FIGURES for side in ("good", "poor")}
    return {**values, **points, "baseline": "manual", "plan": ["manual", "auto"]}


def test_reference_points_post_stores_and_scores_again(client, study, owner):
    """Burden good 10, poor 30: manual (70/3) at 2/3, auto (53/3) at 23/60. Findings
    poor 5 given (the worse plan's, as by default): manual 1/5, auto 1. So manual =
    2/3 + 1 + 1/5 + its awareness share (2.2 + that share before, burden then 1) and
    auto = 23/60 + 1 + 2 + 1 + 1."""
    client.force_login(owner)
    page = client.get(compare_url(study)).content.decode()
    assert 'name="good_burden_s_per_day" value="" placeholder="0"' in page
    data = reference_form(
        good_burden_s_per_day="10", poor_burden_s_per_day="30", poor_findings="5"
    )
    response = client.post(reference_url(study), data, headers=HX)
    fragment = response.content.decode().strip()
    assert response.status_code == 200
    assert fragment.startswith('<section class="panel" id="compare-objective">')
    assert "Reference points saved" in fragment
    manual = 2 / 3 + 1 + 1 / 5 + _awareness_share()
    auto = 23 / 60 + 5
    assert ranking_rows(fragment) == [("manual", f"{manual:.3f}"), ("auto", f"{auto:.3f}")]
    assert 'name="good_burden_s_per_day" value="10"' in fragment
    study.refresh_from_db()
    assert study.assumptions["objective_reference"] == {
        "burden_s_per_day": {"good": 10, "poor": 30},
        "findings": {"poor": 5},
    }
    # Back to the defaults: the assumption is dropped.
    response = client.post(reference_url(study), {**data, "reset": "1"}, headers=HX)
    assert response.status_code == 200
    study.refresh_from_db()
    assert "objective_reference" not in (study.assumptions or {})
    assert ranking_rows(response.content.decode()) == RANKED


def test_reference_post_without_htmx_redirects_back(client, study, owner):
    client.force_login(owner)
    response = client.post(reference_url(study), reference_form(poor_max_risk="25"))
    assert response.status_code == 302
    assert response["Location"].endswith("#compare-objective")
    study.refresh_from_db()
    assert study.assumptions["objective_reference"] == {"max_risk": {"poor": 25}}


@pytest.mark.parametrize(
    "points, key, message",
    [
        ({"good_findings": "many"}, "findings", "good: “many” is not a number"),
        ({"poor_findings": "inf"}, "findings", "poor: must be a finite number"),
        (
            {"good_cut_ratio": "0.5", "poor_cut_ratio": "0.2"},
            "cut_ratio",
            "cut_ratio.poor (0.2) must not be below good (0.5)",
        ),
    ],
)
def test_bad_reference_point_is_named_beside_its_figure_and_nothing_stored(
    client, study, owner, points, key, message
):
    client.force_login(owner)
    response = client.post(reference_url(study), reference_form(**points), headers=HX)
    fragment = response.content.decode()
    assert response.status_code == 200
    match = re.search(rf'<span class="error" id="err_reference_{key}">([^<]*)</span>', fragment)
    assert match, fragment
    assert message in match.group(1)
    assert f'aria-describedby="err_reference_{key}"' in fragment
    study.refresh_from_db()
    assert "objective_reference" not in (study.assumptions or {})


@pytest.mark.parametrize("role", ["viewer", "reviewer"])
def test_viewers_and_reviewers_may_not_change_reference_points(client, study, member_of, role):
    client.force_login(member_of(role))
    page = client.get(compare_url(study)).content.decode()
    assert "Save reference points" not in page
    assert client.post(reference_url(study), reference_form(poor_findings="9")).status_code == 403
    study.refresh_from_db()
    assert "objective_reference" not in (study.assumptions or {})


def test_the_weights_set_here_are_the_study_file_s_objective(client, owner):
    """Saved on this page, the weights are exported under study.objective, and a file
    with an objective imports them back as they were."""
    from allocation import selectors, services
    from allocation.core.objective_file import with_objective
    from allocation.examples import example_documents

    document = next(d for d in example_documents() if d["study"]["id"] == "home-heating")
    study = services.study_import(data=document, owner=owner)
    services.study_assumption_set(
        study=study,
        key="objective_weights",
        value={"burden_s_per_day": 3.0},
        user=owner,
    )
    client.force_login(owner)
    downloaded = client.get(reverse("study-download", args=[study.pk])).json()
    assert downloaded["study"]["objective"] == {"weights": {"burden_s_per_day": 3.0}}
    assert "objective_weights" not in downloaded["study"].get("assumptions", {})
    downloaded["study"]["id"] = "heating-again"
    again = services.study_import(data=downloaded, owner=owner)
    stored = with_objective(selectors.study_document(again))["study"]
    assert stored["objective"] == {"weights": {"burden_s_per_day": 3.0}}
