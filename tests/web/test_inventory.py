"""The inventory screen: forms as fragments, core messages beside their fields."""

from __future__ import annotations

from django.urls import reverse

from allocation import selectors


def item_url(pk: int, kind: str, key: str) -> str:
    return reverse("inventory-item", args=[pk, kind, key])


def test_inventory_page_lists_the_four_kinds(client, study, owner):
    client.force_login(owner)
    page = client.get(reverse("study-inventory", args=[study.pk])).content.decode()
    for section in ("section-agents", "section-events", "section-tasks", "section-links"):
        assert f'id="{section}"' in page
    assert "McCracken &amp; Aldrich (1984)" in page


def test_task_form_offers_vacp_anchors_and_severity_names(client, study, owner):
    client.force_login(owner)
    fragment = client.get(
        item_url(study.pk, "tasks", "T2"), headers={"HX-Request": "true"}
    ).content.decode()
    assert "4.6 — manipulative" in fragment and "5 catastrophic — death" in fragment
    assert 'value="10"' in fragment  # the typical duration, filled in


def test_saving_a_task_by_htmx_answers_the_section(client, study, owner):
    client.force_login(owner)
    response = client.post(
        item_url(study.pk, "tasks", "new"),
        {
            "id": "T3",
            "title": "Check the radiators",
            "parent": "G1",
            "way": "every_days",
            "every_days": "30",
            "duration_typical": "120",
            "severity": "1",
            "demand_visual": "4",
        },
        headers={"HX-Request": "true"},
    )
    assert response["HX-Retarget"] == "#section-tasks"
    assert "Check the radiators" in response.content.decode()
    tasks = selectors.study_document(study)["tasks"]
    assert tasks[-1] == {
        "id": "T3",
        "parent": "G1",
        "title": "Check the radiators",
        "occurs": {"every_days": 30},
        "duration_s": 120,
        "severity": 1,
        "demands": {"visual": 4},
    }


def test_core_messages_land_beside_their_field(client, study, owner):
    client.force_login(owner)
    before = selectors.study_document(study)
    response = client.post(
        item_url(study.pk, "tasks", "T2"),
        {
            "id": "T2",
            "title": "Lower the set point",
            "parent": "G1",
            "duration_low": "30",
            "duration_typical": "10",
            "duration_high": "20",
        },
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    assert "<code>duration_s</code> must be in order min &lt;= typical &lt;= max" in fragment
    assert selectors.study_document(study) == before


def test_delete_asks_first_and_names_what_goes(client, study, owner):
    client.force_login(owner)
    confirm = client.get(
        reverse("inventory-delete", args=[study.pk, "tasks", "T1"]), headers={"HX-Request": "true"}
    ).content.decode()
    assert "link T1 precedes T2" in confirm and "the allocation of T1 in plan manual" in confirm
    client.post(reverse("inventory-delete", args=[study.pk, "tasks", "T1"]))
    assert [t["id"] for t in selectors.study_document(study)["tasks"]] == ["G1", "T2"]


def test_viewer_gets_403_on_edits(client, study, member_of):
    client.force_login(member_of("viewer"))
    assert client.get(item_url(study.pk, "agents", "resident")).status_code == 403
    response = client.post(
        item_url(study.pk, "agents", "new"), {"id": "x", "name": "x", "kind": "human"}
    )
    assert response.status_code == 403


def test_new_study_from_the_list_page(client, owner):
    client.force_login(owner)
    response = client.post(
        reverse("study-new"), {"id": "night-watch", "title": "Night watch", "scale": "sv10"}
    )
    assert response.status_code == 302 and response["Location"].endswith("/inventory")


def test_duty_hours_are_saved_from_the_agent_form_and_shown(client, study, owner):
    client.force_login(owner)
    url = item_url(study.pk, "agents", "resident")
    page = client.get(url).content.decode()
    assert 'name="on_duty_from"' in page
    data = {
        "id": "resident",
        "name": "Resident",
        "kind": "human",
        "on_duty_from": "08:00",
        "on_duty_to": "18:00",
    }
    client.post(url, data)
    agent = selectors.study_document(study)["agents"][0]
    assert agent["on_duty"] == ["08:00", "18:00"]
    listing = client.get(reverse("study-inventory", args=[study.pk])).content.decode()
    assert "08:00–18:00" in listing
