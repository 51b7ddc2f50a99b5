"""The assumptions page: every assumption listed, edited inline, checked, and the
figures moving with it.

Expected changes are worked by hand on the home-heating test study (see the
docstring of ``tests/web/test_figures_dashboards.py``): in plan "auto" the resident monitors T2,
which occurs once a day, and supervises it at sv10 level 7 (4 s by default); with T2's
duration [3, 10, 20] s at its triangular mean (3 + 10 + 20) / 3 = 11 s, their time a day
is 11/3 + 4 + 10 = 53/3 s (17.7 s). The handovers of plan "auto" have risks 6 and 4.
"""

from __future__ import annotations

import pytest
from django.core.exceptions import PermissionDenied
from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core.analysis import analyse_plan
from allocation.core.assumptions import ASSUMPTIONS, METHOD_NOTES
from allocation.examples import example_documents

HTMX = {"HX-Request": "true"}


def page_url(study: m.Study) -> str:
    return reverse("study-assumptions", args=[study.pk])


def set_url(study: m.Study) -> str:
    return reverse("study-assumption-set", args=[study.pk])


def stored(study: m.Study) -> tuple:
    study.refresh_from_db()
    return study.assumptions, study.risk_policy


def resident_burden(study: m.Study, plan: str = "auto") -> float:
    result = selectors.study_load(study)
    return analyse_plan(result.study, plan).people["resident"].burden_s_per_day


def test_page_lists_every_assumption_method_note_and_the_policy(client, study, owner):
    client.force_login(owner)
    response = client.get(page_url(study))
    page = response.content.decode()
    assert response.status_code == 200 and "<html" in page
    for assumption in ASSUMPTIONS:
        assert f'id="assumption-{assumption.key}"' in page, assumption.key
    for key, _status, _text in METHOD_NOTES:
        assert f"<code>{key}</code>" in page
    for status in ("tool assumption", "common practice", "published, from memory"):
        assert status in page
    assert "McCracken &amp; Aldrich (1984)" in page  # a source column entry
    assert "example policy is in force; it is not a recommendation" in page
    assert 'data-figure="figure-policy"' in page and "json_script" not in page
    # The owner gets edit controls; the figures box shows each plan.
    assert page.count(">Edit</a>") == len(ASSUMPTIONS) and "Edit the policy" in page
    assert 'id="assumption-headlines"' in page and "17.7" in page


def test_row_fragments_for_htmx(client, study, owner):
    client.force_login(owner)
    form = client.get(page_url(study) + "?edit=monitoring_s", headers=HTMX).content.decode()
    assert form.startswith('<tr id="assumption-monitoring_s"')
    assert 'name="value" value="10"' in form and "<html" not in form
    assert f'hx-post="{set_url(study)}"' in form and f'action="{set_url(study)}"' in form
    row = client.get(page_url(study) + "?row=monitoring_s", headers=HTMX).content.decode()
    assert (
        row.startswith('<tr id="assumption-monitoring_s"')
        and "<form" not in row.split('class="actions"')[0]
    )
    policy = client.get(page_url(study) + "?edit=risk_policy", headers=HTMX).content.decode()
    assert policy.startswith('<section class="panel" id="risk-policy">')
    assert 'name="likelihood_bands" value="0.2, 0.4, 0.6, 0.8"' in policy


def test_edit_without_javascript_opens_the_form_in_the_full_page(client, study, owner):
    client.force_login(owner)
    page = client.get(page_url(study) + "?edit=supervision_s").content.decode()
    assert "<html" in page and '<textarea id="value-supervision_s" name="value"' in page


def test_raising_monitoring_raises_the_burden_by_occurrences_times_the_difference(
    client, study, owner
):
    client.force_login(owner)
    before = resident_burden(study)
    assert before == pytest.approx(53 / 3)
    response = client.post(set_url(study), {"key": "monitoring_s", "value": "20"}, headers=HTMX)
    assert response.status_code == 200
    assert stored(study)[0] == {"monitoring_s": 20}
    # T2 is monitored once a day: + 1 x (20 - 10) s.
    after = resident_burden(study)
    assert after - before == pytest.approx(1 * (20 - 10))
    # The same as re-running the analysis on the core study with the override.
    result = selectors.study_load(study)
    assert analyse_plan(result.study, "auto").people["resident"].monitoring_s_per_day == 20
    fragment = response.content.decode()
    assert fragment.startswith('<tr id="assumption-monitoring_s"')
    assert '<section id="assumption-headlines"' in fragment and 'hx-swap-oob="true"' in fragment
    assert "27.7" in fragment and "was 17.7" in fragment
    assert response["HX-Trigger"] == '{"assumptions-changed": {"key": "monitoring_s"}}'


def test_a_table_may_be_typed_with_bare_keys_and_merges_with_the_default(client, study, owner):
    """supervision_s {7: 9}: level 7 costs 9 s instead of 4, so + 5 s a day in "auto"."""
    client.force_login(owner)
    before = resident_burden(study)
    client.post(set_url(study), {"key": "supervision_s", "value": "{7: 9}"}, headers=HTMX)
    assert stored(study)[0] == {"supervision_s": {"7": 9}}
    assert resident_burden(study) - before == pytest.approx(5.0)


def test_without_htmx_a_save_redirects_with_a_message(client, study, owner):
    client.force_login(owner)
    response = client.post(set_url(study), {"key": "practice_per_day", "value": "2.5"})
    assert response.status_code == 302
    assert response["Location"] == page_url(study) + "#assumption-practice_per_day"
    page = client.get(response["Location"]).content.decode()
    assert "Saved the study&#x27;s practice_per_day." in page
    assert stored(study)[0] == {"practice_per_day": 2.5}


@pytest.mark.parametrize(
    ("key", "text", "message"),
    [
        ("monitoring_s", "-3", "must be at least 0"),
        ("monitoring_s", "ten", "must be a finite number"),
        ("supervision_s", "{5: }", "is not valid JSON"),
        ("supervision_s", '{"11": 3}', "keys are the levels"),
        ("awareness_weights", '{"rarity": 0.5}', "weights must add up to 1"),
        ("every_days_when", "never", "must be one of awake, any"),
        ("monitoring_s", "", "is empty"),
    ],
)
def test_a_bad_value_shows_its_message_and_stores_nothing(
    client, study, owner, key, text, message
):
    client.force_login(owner)
    before = stored(study)
    response = client.post(set_url(study), {"key": key, "value": text}, headers=HTMX)
    fragment = response.content.decode()
    assert fragment.startswith(f'<tr id="assumption-{key}"') and "<form" in fragment
    assert f"$.study.assumptions.{key}" in fragment and message in fragment
    assert "Nothing was saved." in fragment and "HX-Trigger" not in response
    assert stored(study) == before


def test_a_bad_value_without_htmx_is_the_full_page_with_the_form(client, study, owner):
    client.force_login(owner)
    response = client.post(set_url(study), {"key": "channel_limit", "value": "0"})
    page = response.content.decode()
    assert response.status_code == 400 and "<html" in page
    assert "$.study.assumptions.channel_limit" in page and "must be more than 0" in page
    assert 'value="0"' in page and stored(study)[0] == {}


def test_unknown_key_is_refused(client, study, owner):
    client.force_login(owner)
    response = client.post(set_url(study), {"key": "nonsense", "value": "1"})
    assert response.status_code == 400 and stored(study)[0] == {}


def test_errors_the_study_already_has_do_not_block_an_edit(client, study, owner):
    m.Task.objects.filter(study=study, key="T2").update(duration_s=[30, 5, 2])
    client.force_login(owner)
    client.post(set_url(study), {"key": "monitoring_s", "value": "15"}, headers=HTMX)
    assert stored(study)[0] == {"monitoring_s": 15}
    page = client.get(page_url(study)).content.decode()
    assert "cannot be analysed" in page and "$.tasks[2].duration_s" in page


def test_reset_goes_back_to_the_default(client, study, owner):
    client.force_login(owner)
    client.post(set_url(study), {"key": "monitoring_s", "value": "20"})
    response = client.post(
        reverse("study-assumption-reset", args=[study.pk]), {"key": "monitoring_s"}, headers=HTMX
    )
    assert stored(study)[0] == {}
    assert resident_burden(study) == pytest.approx(53 / 3)
    assert "was 27.7" in response.content.decode()
    assert "assumptions-changed" in response["HX-Trigger"]


def policy_url(study: m.Study) -> str:
    return reverse("study-risk-policy-set", args=[study.pk])


def test_setting_the_policy_rebands_the_handovers(client, owner):
    """Frequency cuts ten times higher (100, 10, 1, 0.1 a year) move every handover of
    "auto" one band down. The holiday mode is entered 0.02 x 0.882 = 0.0176 times a day
    and left as often in the long run (0.15 x 0.118; shares 0.15 / 0.17 and 0.02 / 0.17).
    Of the six needing review under the example, the three mode changes to the resident
    at 2.2 to 2.4 slips a year and the two changes back at 1.3 to 1.4 (severity 2) go
    from probable to occasional and stay in review; the link T7 -> T8 at 1.0 a year
    (severity 3) goes from occasional to remote: acceptable (methods document,
    #handover-risk, example matrix). 6 -> 5."""
    document = next(d for d in example_documents() if d["study"]["id"] == "home-heating")
    study = services.study_import(data=document, owner=owner)
    client.force_login(owner)
    result = selectors.study_load(study)
    assert analyse_plan(result.study, "auto").headline()["handovers_to_review"] == 6
    data = {"likelihood_bands": "0.2, 0.4, 0.6, 0.8", "frequency_bands": "100, 10, 1, 0.1"}
    response = client.post(policy_url(study), {**data, "note": "Ours, 2025"}, headers=HTMX)
    fragment = response.content.decode()
    assert stored(study)[1] == {
        "likelihood_bands": [0.2, 0.4, 0.6, 0.8],
        "frequency_bands": [100, 10, 1, 0.1],
        "note": "Ours, 2025",
    }
    assert fragment.startswith('<section class="panel" id="risk-policy">')
    assert "study's own risk policy is in force" in fragment and "Ours, 2025" in fragment
    result = selectors.study_load(study)
    assert analyse_plan(result.study, "auto").headline()["handovers_to_review"] == 5
    assert "was 6" in fragment and "assumptions-changed" in response["HX-Trigger"]


def test_a_band_matrix_from_the_study_file_is_kept_when_the_form_saves(client, study, owner):
    matrix = {"frequent": ["review"] * 5}
    study.risk_policy = {"band_matrix": matrix, "review": 8}
    study.save()
    client.force_login(owner)
    client.post(policy_url(study), {"critical_severity": "3"}, headers=HTMX)
    assert stored(study)[1] == {"band_matrix": matrix, "review": 8, "critical_severity": 3}


@pytest.mark.parametrize(
    ("data", "path", "message"),
    [
        (
            {"frequency_bands": "1, 10, 0.1, 0.01"},
            "$.study.risk_policy.frequency_bands",
            "must fall strictly",
        ),
        (
            {"critical_severity": "6"},
            "$.study.risk_policy.critical_severity",
            "must be from 1 to 5",
        ),
        ({"likelihood_bands": "0.5, 0.4, 0.6, 0.8"}, "likelihood_bands", "must rise strictly"),
        ({"likelihood_bands": "0.2, 0.4, 0.6"}, "likelihood_bands", "must list 4 cut points"),
        ({"likelihood_bands": "0.2, x, 0.6, 0.8"}, "likelihood_bands[1]", "must be a number"),
        ({"frequency_bands": "10, 1"}, "frequency_bands", "must list 4 cut points"),
    ],
)
def test_a_bad_policy_shows_the_readers_message_and_stores_nothing(
    client, study, owner, data, path, message
):
    client.force_login(owner)
    response = client.post(policy_url(study), data, headers=HTMX)
    fragment = response.content.decode()
    assert path in fragment and message in fragment and "Nothing was saved." in fragment
    assert stored(study)[1] == {}


def test_the_critical_severity_is_set_with_the_policy_and_shown(client, study, owner):
    client.force_login(owner)
    page = client.get(page_url(study)).content.decode()
    assert "<dt>Critical severity</dt><dd>from severity 4:" in page  # the default
    response = client.post(policy_url(study), {"critical_severity": "3"}, headers=HTMX)
    assert stored(study)[1] == {"critical_severity": 3}
    assert "<dt>Critical severity</dt><dd>from severity 3:" in response.content.decode()


def test_policy_reset_brings_back_the_example(client, study, owner):
    client.force_login(owner)
    client.post(policy_url(study), {"frequency_bands": "100, 10, 1, 0.1"})
    assert stored(study)[1] == {"frequency_bands": [100, 10, 1, 0.1]}
    response = client.post(reverse("study-risk-policy-reset", args=[study.pk]))
    assert response.status_code == 302 and stored(study)[1] == {}
    page = client.get(response["Location"]).content.decode()
    assert "example policy is in force" in page


POST_URLS = (
    ("study-assumption-set", {"key": "monitoring_s", "value": "20"}),
    ("study-assumption-reset", {"key": "monitoring_s"}),
    ("study-risk-policy-set", {"frequency_bands": "100, 10, 1, 0.1"}),
    ("study-risk-policy-reset", {}),
)


@pytest.mark.parametrize("role", [m.Role.VIEWER, m.Role.REVIEWER])
def test_viewers_and_reviewers_see_no_edit_controls_and_get_403(client, study, member_of, role):
    study.assumptions = {"monitoring_s": 12}
    study.risk_policy = {"review": 8}
    study.save()
    client.force_login(member_of(role))
    page = client.get(page_url(study)).content.decode()
    assert ">Edit</a>" not in page and "Reset to default" not in page
    assert "Edit the policy" not in page and f'action="{page_url(study)}/' not in page
    editing = client.get(page_url(study) + "?edit=monitoring_s", headers=HTMX).content.decode()
    assert editing.startswith('<tr id="assumption-monitoring_s"') and "<form" not in editing
    for name, data in POST_URLS:
        response = client.post(reverse(name, args=[study.pk]), data, headers=HTMX)
        assert response.status_code == 403, name
    assert stored(study) == ({"monitoring_s": 12}, {"review": 8})


def test_editors_may_edit(client, study, member_of):
    client.force_login(member_of(m.Role.EDITOR))
    assert ">Edit</a>" in client.get(page_url(study)).content.decode()
    client.post(set_url(study), {"key": "monitoring_s", "value": "11"})
    assert stored(study)[0] == {"monitoring_s": 11}


def test_the_service_checks_the_role_itself(study, member_of):
    viewer = member_of(m.Role.VIEWER)
    with pytest.raises(PermissionDenied):
        services.study_assumption_set(study=study, key="monitoring_s", value=20, user=viewer)
    with pytest.raises(PermissionDenied):
        services.study_risk_policy_reset(study=study, user=viewer)
    assert stored(study) == ({}, {})


def test_a_save_changes_only_the_study_row(study, owner):
    """One value written; agents, tasks and plans untouched (their rows compared)."""
    tasks = list(m.Task.objects.filter(study=study).values())
    plans = list(m.Assignment.objects.filter(plan__study=study).values())
    services.study_assumption_set(study=study, key="monitoring_s", value=20, user=owner)
    assert list(m.Task.objects.filter(study=study).values()) == tasks
    assert list(m.Assignment.objects.filter(plan__study=study).values()) == plans


def test_a_bad_policy_without_htmx_is_the_full_page_with_the_form(client, study, owner):
    client.force_login(owner)
    response = client.post(policy_url(study), {"frequency_bands": "1, 10, 100, 1000"})
    page = response.content.decode()
    assert response.status_code == 400 and "<html" in page
    assert 'name="frequency_bands" value="1, 10, 100, 1000"' in page
    assert "must fall strictly" in page
    assert stored(study)[1] == {}


def test_saving_a_value_that_moves_nothing_says_so(client, study, owner):
    """channel_limit feeds the VACP timeline, not the headline figures."""
    client.force_login(owner)
    response = client.post(set_url(study), {"key": "channel_limit", "value": "6"}, headers=HTMX)
    fragment = response.content.decode()
    assert "No headline figure moved." in fragment and "was " not in fragment


def test_each_assumption_links_to_where_it_is_used(client, study, owner):
    client.force_login(owner)
    page = client.get(page_url(study)).content.decode()
    row = page[page.index('id="assumption-cue_weakness"') :]
    row = row[: row.index("</tr>")]
    assert "Used in" in row
    assert '#awareness-factors">Awareness factors</a>' in row
    assert '#handover-likelihood">Likelihood index</a>' in row
