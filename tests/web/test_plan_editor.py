"""The plan editor: full page, row saves as htmx fragments with the figures out of band."""

from __future__ import annotations

from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core.analysis import analyse_plan
from allocation.core.registry import figure_text


def editor(pk: int, plan: str = "manual") -> str:
    return reverse("plan-editor", args=[pk, plan])


def row_url(pk: int, plan: str, task: str) -> str:
    return reverse("plan-row-save", args=[pk, plan, task])


def test_editor_lists_every_leaf_under_its_goal(client, study, owner):
    client.force_login(owner)
    page = client.get(editor(study.pk)).content.decode()
    assert page.index("Keep the home comfortable") < page.index('id="row-T1"')
    assert 'id="row-T2"' in page and 'id="plan-headline"' in page
    assert "Parasuraman, Sheridan &amp; Wickens 2000" in page


def test_rows_show_the_expected_person_time_with_the_typical_beside_it(client, study, owner):
    # Hand-worked: under "manual" the resident does T2 ([3, 10, 20] s) alone, once a day:
    # expected (3 + 10 + 20) / 3 = 11 s (the triangular mean), typical 10 s.
    client.force_login(owner)
    page = client.get(editor(study.pk)).content.decode()
    row = page.split('id="row-T2"')[1].split("</tr>")[0]
    assert "× 11 s" in row
    assert "(typical 10 s)" in row
    assert 'title="Person time per occurrence at typical durations"' in row


def test_row_save_answers_the_row_and_the_headline_out_of_band(client, study, owner):
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "shared", "human": "resident", "automation": "thermostat", "level": "7"},
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    assert fragment.lstrip().startswith('<tr id="row-T2"')
    assert '<aside id="plan-headline"' in fragment and 'hx-swap-oob="true"' in fragment
    assert "<html" not in fragment
    # The figures shown are the analysis of what was stored (hand check: shared at level 7).
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored == {"human": "resident", "automation": "thermostat", "levels": 7}
    result = analyse_plan(selectors.study_load(study).study, "manual")
    assert figure_text("burden_s_per_day", result.headline()["burden_s_per_day"]) in fragment


def test_row_with_a_missing_device_keeps_the_choices_and_saves_nothing(client, study, owner):
    client.force_login(owner)
    before = selectors.study_document(study)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "shared", "human": "resident", "level": "7"},
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    assert "Choose the device that does it." in fragment
    assert '<option value="shared" selected>' in fragment
    assert selectors.study_document(study) == before


def test_core_messages_show_in_the_row(client, study, owner):
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "shared", "human": "resident", "automation": "thermostat"},
        headers={"HX-Request": "true"},
    )
    assert "so it needs levels" in response.content.decode()


def test_row_save_without_htmx_redirects_back_to_the_row(client, study, owner):
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T1"),
        {"who": "not_applicable", "rationale": "not in this plan"},
    )
    assert response.status_code == 302 and response["Location"].endswith("#row-T1")
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T1"]
    assert stored == {"applies": False, "rationale": "not in this plan"}


def test_viewers_see_no_controls_and_cannot_save(client, study, member_of):
    client.force_login(member_of("viewer"))
    page = client.get(editor(study.pk)).content.decode()
    assert "hx-post" not in page and "Apply to the selected rows" not in page
    response = client.post(row_url(study.pk, "manual", "T1"), {"who": "unallocated"})
    assert response.status_code == 403


def test_bulk_applies_a_status(client, study, owner):
    client.force_login(owner)
    client.post(
        reverse("plan-bulk", args=[study.pk, "manual"]),
        {"tasks": ["T1", "T2"], "status": "agreed"},
    )
    assignments = selectors.study_document(study)["plans"][0]["assignments"]
    assert assignments["T1"]["status"] == assignments["T2"]["status"] == "agreed"


def test_copy_a_plan_opens_the_copy(client, study, owner):
    client.force_login(owner)
    response = client.post(
        reverse("plan-new", args=[study.pk]),
        {"copy_of": "auto", "id": "auto-2", "name": "Second try"},
    )
    assert response["Location"] == editor(study.pk, "auto-2")
    assert m.Plan.objects.filter(study=study, key="auto-2").exists()


def test_start_an_empty_plan(client, study, owner):
    client.force_login(owner)
    client.post(reverse("plan-new", args=[study.pk]), {"id": "blank", "name": "Blank"})
    assert selectors.study_document(study)["plans"][2] == {
        "id": "blank",
        "name": "Blank",
        "assignments": {},
    }


def test_editor_shows_one_goal_when_asked(client, study, owner, heating_document):
    client.force_login(owner)
    page = client.get(editor(study.pk) + "?goal=G1").content.decode()
    assert 'id="row-T1"' in page and 'id="row-T2"' in page
    everything = client.get(editor(study.pk) + "?goal=all").content.decode()
    assert 'id="row-T1"' in everything


def test_a_large_study_opens_on_its_first_goal(client, owner):
    from allocation import services
    from allocation.core.synthetic import synthetic_study

    document = synthetic_study(tasks=300, links=600, events=5, plans=1, seed=3)
    study = services.study_import(data=document, owner=owner)
    client.force_login(owner)
    page = client.get(editor(study.pk, "plan-0")).content.decode()
    first_goal_leaves = [t["id"] for t in document["tasks"] if t.get("parent") == "G0"]
    other_leaf = next(t["id"] for t in document["tasks"] if t.get("parent") == "G1")
    assert all(f'id="row-{task}"' in page for task in first_goal_leaves)
    assert f'id="row-{other_leaf}"' not in page
    assert "opens on one goal" in page


def test_a_monitoring_style_is_saved_and_its_cost_shown_beside_the_row(client, study, owner):
    # The thermostat does T2, the resident answers for it and looks three times a day:
    # stored as the file writes it, and the row says how and what it costs (the
    # assumption monitoring_s, 10 s by default, for each look).
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {
            "who": "device",
            "automation": "thermostat",
            "accountable": "resident",
            "monitoring": "periodic",
            "monitoring_amount": "3",
        },
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored["monitoring"] == {"style": "periodic", "per_day": 3}
    assert "looks 3 a day (10 s each)" in fragment
    assert '<option value="periodic" selected>' in fragment


def test_a_bad_monitoring_amount_is_refused_beside_its_field(client, study, owner):
    client.force_login(owner)
    before = selectors.study_document(study)
    for style, amount, words in (
        ("periodic", "lots", "Give looks a day, like 2."),
        ("continuous", "1.5", "at most 1"),
        ("each", "2", "The style each takes no amount."),
    ):
        response = client.post(
            row_url(study.pk, "manual", "T2"),
            {
                "who": "device",
                "automation": "thermostat",
                "accountable": "resident",
                "monitoring": style,
                "monitoring_amount": amount,
            },
            headers={"HX-Request": "true"},
        )
        assert words in response.content.decode(), style
    assert selectors.study_document(study) == before


def test_a_task_not_done_may_let_its_chain_go_on(client, study, owner):
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "not_applicable", "pass_through": "on"},
        headers={"HX-Request": "true"},
    )
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored == {"applies": False, "pass_through": True}
    assert 'name="pass_through" form="f-T2" checked' in response.content.decode()


def test_a_task_moved_to_someone_drops_its_chain_goes_on_mark(client, study, owner):
    """The box shows on a row not done only; moving the row to a person still posts it."""
    client.force_login(owner)
    client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "not_applicable", "pass_through": "on"},
        headers={"HX-Request": "true"},
    )
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "person", "human": "resident", "pass_through": "on"},
        headers={"HX-Request": "true"},
    )
    assert 'class="row-problems"' not in response.content.decode()
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored == {"human": "resident"}


def test_a_device_s_failures_are_saved_and_counted(client, study, owner):
    # The thermostat does T2 (once a day) and fails 100 times in 1,000: 0.1 failures a
    # day, each taken over by the resident (the accountable person, the default
    # fallback) with an alert. Stored as the file writes it; the row shows the fields
    # open with the values, and the analysis counts the failures.
    client.force_login(owner)
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {
            "who": "device",
            "automation": "thermostat",
            "accountable": "resident",
            "fails_per_1000": "100",
            "detected_by": "alert",
            "false_alerts_per_day": "0.5",
        },
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    assert 'class="row-problems"' not in fragment
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored["reliability"] == {
        "fails_per_1000": 100,
        "detected_by": "alert",
        "false_alerts_per_day": 0.5,
    }
    assert "failures: 100 in 1,000" in fragment
    assert '<option value="alert" selected>told by an alert</option>' in fragment
    result = analyse_plan(selectors.study_load(study).study, "manual")
    assert result.people["resident"].failures_per_day == 0.1


def test_a_bad_reliability_is_refused_beside_its_field(client, study, owner):
    client.force_login(owner)
    before = selectors.study_document(study)
    for fields, words in (
        ({"fails_per_1000": "often"}, "Give failures in 1,000 occurrences, like 5."),
        ({"fails_per_1000": "1200", "detected_by": "alert"}, "from 0 to 1000"),
        ({"fails_per_1000": "5"}, "Say how the person learns of a failure"),
        ({"detected_by": "alert"}, "Give the failures in 1,000 occurrences (0 for none) first."),
        ({"fails_per_1000": "0", "false_alerts_per_day": "-1"}, "from 0 to 1440"),
    ):
        response = client.post(
            row_url(study.pk, "manual", "T2"),
            {"who": "device", "automation": "thermostat", "accountable": "resident", **fields},
            headers={"HX-Request": "true"},
        )
        assert words in response.content.decode(), fields
    assert selectors.study_document(study) == before


def test_a_task_moved_to_a_person_drops_the_device_s_failures(client, study, owner):
    client.force_login(owner)
    fields = {"fails_per_1000": "5", "detected_by": "display"}
    client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "device", "automation": "thermostat", "accountable": "resident", **fields},
        headers={"HX-Request": "true"},
    )
    client.post(
        row_url(study.pk, "manual", "T2"),
        {"who": "person", "human": "resident", **fields},
        headers={"HX-Request": "true"},
    )
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored == {"human": "resident"}


def test_people_asked_in_turn_are_saved_and_refused_beside_their_field(client, study, owner):
    # The resident is asked first, the neighbour after 300 s (an agent added here).
    services.agent_save(
        study=study, key=None, item={"id": "neighbour", "name": "Neighbour", "kind": "human"}
    )
    client.force_login(owner)
    before = selectors.study_document(study)
    for fields, words in (
        ({"escalate_to": "neighbour"}, "Give the seconds each has to answer, like 300."),
        ({"escalate_to": "nobody", "escalate_after_s": "60"}, "nobody: not a person"),
        ({"escalate_to": "resident", "escalate_after_s": "60"}, "Name each person once"),
        ({"escalate_after_s": "60"}, "Name who is asked next"),
        ({"escalate_to": "neighbour", "escalate_after_s": "0"}, "more than 0"),
    ):
        response = client.post(
            row_url(study.pk, "manual", "T2"),
            {"who": "person", "human": "resident", **fields},
            headers={"HX-Request": "true"},
        )
        assert words in response.content.decode(), fields
    assert selectors.study_document(study) == before
    response = client.post(
        row_url(study.pk, "manual", "T2"),
        {
            "who": "person",
            "human": "resident",
            "escalate_to": "neighbour",
            "escalate_after_s": "300",
        },
        headers={"HX-Request": "true"},
    )
    assert "asked in turn: then neighbour" in response.content.decode()
    stored = selectors.study_document(study)["plans"][0]["assignments"]["T2"]
    assert stored == {"human": ["resident", "neighbour"], "escalate_after_s": 300}
