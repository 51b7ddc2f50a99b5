"""Optimistic versioning: a save names the version it started from.

The reference for every case is the lost-update anomaly as Berenson et al. (1995, "A
critique of ANSI SQL isolation levels", phenomenon P4) describe it: two people read a
row at version v, both write; without a check the first write is lost. Here the second
write must be refused, with the first person's values, and nothing written; a write
naming the newer version goes through. Versions are counted by hand in each test.
"""

from __future__ import annotations

import pytest
from django.urls import reverse

from allocation import audit, selectors, services
from allocation import models as m
from allocation.services.conflicts import EditConflict

HX = {"HX-Request": "true"}


def assignment(study: m.Study, plan: str, task: str) -> m.Assignment:
    return m.Assignment.objects.get(plan__study=study, plan__key=plan, task__key=task)


# -- services ---------------------------------------------------------------------------


def test_every_edited_row_starts_at_version_one(study):
    for model in (m.Agent, m.Event, m.Task, m.Link, m.Plan, m.Assignment, m.ModeState):
        assert set(model.objects.values_list("version", flat=True)) == {1}, model
    assert m.Study.objects.get(pk=study.pk).version == 1


def test_a_save_moves_the_version_by_one_and_a_stale_save_is_refused(study, owner):
    item = {"human": "resident", "rationale": "first"}
    with audit.acting(owner, m.AuditSource.SCREEN):
        services.assignment_set(
            study=study, plan_key="manual", task_key="T2", item=item, expected_version=1
        )
    assert assignment(study, "manual", "T2").version == 2
    before = selectors.study_document(study)
    with pytest.raises(EditConflict) as caught:
        services.assignment_set(
            study=study,
            plan_key="manual",
            task_key="T2",
            item={"human": "resident", "rationale": "second"},
            expected_version=1,
        )
    error = caught.value
    assert error.version == 2 and error.current == item
    assert error.who == "olive" and "changed by olive" in error.message
    assert error.errors[0].path == "$.plans[0].assignments.T2"
    # Nothing written: rows, version and audit trail as they were.
    assert selectors.study_document(study) == before
    assert assignment(study, "manual", "T2").version == 2
    assert m.AuditEntry.objects.filter(action="assignment.set").count() == 1
    # Naming the newer version ("Use mine") saves.
    services.assignment_set(
        study=study,
        plan_key="manual",
        task_key="T2",
        item={"human": "resident", "rationale": "second"},
        expected_version=2,
    )
    assert assignment(study, "manual", "T2").rationale == "second"
    assert assignment(study, "manual", "T2").version == 3


def test_without_a_version_nothing_is_checked(study):
    for rationale in ("a", "b"):
        services.assignment_set(
            study=study,
            plan_key="manual",
            task_key="T2",
            item={"human": "resident", "rationale": rationale},
        )
    assert assignment(study, "manual", "T2").version == 3


def test_a_create_meets_a_row_created_meanwhile(study):
    item = {"id": "heater", "name": "Heater", "kind": "automation"}
    services.agent_save(study=study, key=None, item=item, expected_version=0)
    with pytest.raises(EditConflict) as caught:
        services.agent_save(
            study=study, key=None, item={**item, "name": "Boiler"}, expected_version=0
        )
    assert caught.value.current == item and caught.value.version == 1
    assert study.agents.get(key="heater").name == "Heater"


def test_an_assignment_created_meanwhile_is_a_conflict(study):
    services.assignment_set(study=study, plan_key="manual", task_key="T2", item=None)
    services.assignment_set(
        study=study,
        plan_key="manual",
        task_key="T2",
        item={"human": "resident"},
        expected_version=0,
    )
    with pytest.raises(EditConflict):
        services.assignment_set(
            study=study,
            plan_key="manual",
            task_key="T2",
            item={"automation": "thermostat"},
            expected_version=0,
        )


@pytest.mark.parametrize(
    ("save", "model", "lookup"),
    [
        (
            lambda s, v, name: services.task_save(
                study=s,
                key="T2",
                item={**selectors.study_document(s)["tasks"][2], "title": name},
                expected_version=v,
            ),
            m.Task,
            {"key": "T2"},
        ),
        (
            lambda s, v, name: services.event_save(
                study=s,
                key="leave",
                item={"id": "leave", "name": name, "times": ["08:15"]},
                expected_version=v,
            ),
            m.Event,
            {"key": "leave"},
        ),
        (
            lambda s, v, name: services.plan_save(
                study=s, key="manual", item={"id": "manual", "name": name}, expected_version=v
            ),
            m.Plan,
            {"key": "manual"},
        ),
        (
            lambda s, v, name: services.study_header_save(
                study=s,
                item={"id": "home-heating", "title": name, "scale": "sv10", "bin_s": 900},
                expected_version=v,
            ),
            m.Study,
            {},
        ),
    ],
    ids=["task", "event", "plan", "study header"],
)
def test_each_item_kind_refuses_a_stale_save(study, save, model, lookup):
    save(study, 1, "First")
    row = model.objects.get(**lookup) if lookup else m.Study.objects.get(pk=study.pk)
    assert row.version == 2
    before = selectors.study_document(study)
    with pytest.raises(EditConflict):
        save(study, 1, "Second")
    assert selectors.study_document(study) == before


def test_link_versions(study):
    link = study.links.get()
    item = {"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 90]}
    services.link_save(study=study, pk=link.pk, item=item, expected_version=1)
    with pytest.raises(EditConflict) as caught:
        services.link_save(
            study=study, pk=link.pk, item={**item, "lag_s": [0, 5]}, expected_version=1
        )
    assert caught.value.current["lag_s"] == [0, 90]


def test_bulk_set_checks_every_task_named(study):
    services.assignment_set(
        study=study,
        plan_key="auto",
        task_key="T2",
        item=selectors.study_document(study)["plans"][1]["assignments"]["T2"]
        | {"status": "agreed"},
    )
    before = selectors.study_document(study)
    with pytest.raises(EditConflict):
        services.assignments_bulk_set(
            study=study,
            plan_key="auto",
            task_keys=["T1", "T2"],
            changes={"status": "rejected"},
            expected_versions={"T1": 1, "T2": 1},
        )
    assert selectors.study_document(study) == before
    changed = services.assignments_bulk_set(
        study=study,
        plan_key="auto",
        task_keys=["T1", "T2"],
        changes={"status": "rejected"},
        expected_versions={"T1": 1, "T2": 2},
    )
    assert changed == ["T1", "T2"]
    assert assignment(study, "auto", "T1").version == 2
    assert assignment(study, "auto", "T2").version == 3


def test_renames_and_deletions_move_the_rows_they_change(study):
    services.event_save(
        study=study, key="leave", item={"id": "go", "name": "Go", "times": ["08:15"]}
    )
    assert study.tasks.get(key="T1").version == 2  # its "occurs" now names "go"
    assert study.tasks.get(key="T2").version == 1
    services.agent_delete(study=study, key="thermostat")
    # T2 in auto was shared: it keeps the resident and loses its levels.
    assert assignment(study, "auto", "T2").version == 2


def test_assumptions_and_policy_are_versioned_on_the_study_row(study, owner):
    services.study_assumption_set(
        study=study, key="channel_limit", value=6.5, user=owner, expected_version=1
    )
    with pytest.raises(EditConflict) as caught:
        services.study_assumption_set(
            study=study, key="channel_limit", value=7.5, user=owner, expected_version=1
        )
    assert caught.value.current == {"channel_limit": 6.5}
    assert m.Study.objects.get(pk=study.pk).assumptions == {"channel_limit": 6.5}
    with pytest.raises(EditConflict):
        services.study_risk_policy_reset(study=study, user=owner, expected_version=1)
    services.study_assumption_reset(
        study=study, key="channel_limit", user=owner, expected_version=2
    )
    assert m.Study.objects.get(pk=study.pk).version == 3


def test_mode_rows_keep_their_versions_through_the_rewrite(study):
    # Editing one override rewrites the plan's mode rows: the others keep their versions.
    services.mode_override_set(
        study=study,
        plan_key="auto",
        mode_key="hold",
        task_key="T2",
        item={"automation": "thermostat"},
        expected_version=1,
    )
    versions = dict(m.ModeState.objects.values_list("key", "version"))
    assert versions == {"schedule": 1, "hold": 1}
    override = m.ModeOverride.objects.get(state__key="hold", task__key="T2")
    assert override.version == 2
    assert list(m.ModeTransition.objects.values_list("version", flat=True)) == [1, 1]
    with pytest.raises(EditConflict) as caught:
        services.mode_override_set(
            study=study,
            plan_key="auto",
            mode_key="hold",
            task_key="T2",
            item={"human": "resident"},
            expected_version=1,
        )
    assert caught.value.current == {"automation": "thermostat"}
    # A renamed mode carries its version on, one more.
    services.mode_save(
        study=study,
        plan_key="auto",
        key="hold",
        item={"id": "held", "name": "Held", "indication": "clock symbol"},
        expected_version=1,
    )
    assert dict(m.ModeState.objects.values_list("key", "version")) == {
        "schedule": 1,
        "held": 2,
    }
    # Both transitions name "hold": they changed, one more each.
    assert list(m.ModeTransition.objects.values_list("version", flat=True)) == [2, 2]
    with pytest.raises(EditConflict):
        services.transition_save(
            study=study,
            plan_key="auto",
            index=0,
            item={"from": "schedule", "to": "held", "trigger": "x", "by": "human", "cue": "none"},
            expected_version=1,
        )
    services.transition_delete(study=study, plan_key="auto", index=0)
    assert list(m.ModeTransition.objects.values_list("version", flat=True)) == [2]


def test_decision_status_is_versioned(study, owner):
    decision = services.decision_save(
        study=study, user=owner, kind="task", plan_key="", key="T2", decision="Keep it manual"
    )
    services.decision_status_set(
        study=study, user=owner, decision=decision.pk, status="agreed", expected_version=1
    )
    with pytest.raises(EditConflict) as caught:
        services.decision_status_set(
            study=study, user=owner, decision=decision.pk, status="rejected", expected_version=1
        )
    assert caught.value.current["status"] == "agreed"
    assert m.Decision.objects.get(pk=decision.pk).status == "agreed"


# -- plan editor ------------------------------------------------------------------------


def row_url(study: m.Study, plan: str, task: str) -> str:
    return reverse("plan-row-save", args=[study.pk, plan, task])


def test_editor_rows_carry_their_versions(client, study, owner):
    client.force_login(owner)
    page = client.get(reverse("plan-editor", args=[study.pk, "manual"])).content.decode()
    assert '<input type="hidden" name="version" value="1" form="f-T2">' in page
    assert '<input type="hidden" name="version-T2" value="1" form="bulk-form">' in page


def test_a_stale_row_save_shows_theirs_and_yours(client, study, owner, member_of):
    editor = member_of("editor", "edna")
    client.force_login(editor)
    with audit.acting(owner, m.AuditSource.SCREEN):
        services.assignment_set(
            study=study,
            plan_key="manual",
            task_key="T2",
            item={"human": "resident", "rationale": "theirs"},
        )
    response = client.post(
        row_url(study, "manual", "T2"),
        {"who": "person", "human": "resident", "rationale": "mine", "version": "1"},
        headers=HX,
    )
    fragment = response.content.decode()
    assert response.status_code == 200 and fragment.lstrip().startswith('<tr id="row-T2"')
    assert "Plan manual / task T2 was changed by olive since you opened it" in fragment
    assert "<td>theirs</td><td>mine</td>" in fragment
    assert 'value="mine"' in fragment  # the row keeps what was typed …
    assert '<input type="hidden" name="version" value="2" form="f-T2">' in fragment  # … at v2
    assert "Keep theirs" in fragment and "Use mine" in fragment
    assert assignment(study, "manual", "T2").rationale == "theirs"
    # "Use mine": the same values against their version.
    client.post(
        row_url(study, "manual", "T2"),
        {"who": "person", "human": "resident", "rationale": "mine", "version": "2"},
        headers=HX,
    )
    assert assignment(study, "manual", "T2").rationale == "mine"


def test_keep_theirs_reloads_the_row_as_stored(client, study, owner):
    client.force_login(owner)
    services.assignment_set(
        study=study, plan_key="manual", task_key="T2", item={"human": "resident", "rationale": "x"}
    )
    fragment = client.get(row_url(study, "manual", "T2"), headers=HX).content.decode()
    assert fragment.lstrip().startswith('<tr id="row-T2"') and 'value="x"' in fragment
    assert '<input type="hidden" name="version" value="2" form="f-T2">' in fragment
    page = client.get(row_url(study, "manual", "T2"))
    assert page.status_code == 200 and "<html" in page.content.decode()


def test_a_stale_row_save_without_htmx_says_so(client, study, owner):
    client.force_login(owner)
    services.assignment_set(
        study=study, plan_key="manual", task_key="T2", item={"human": "resident", "rationale": "x"}
    )
    response = client.post(
        row_url(study, "manual", "T2"),
        {"who": "person", "human": "resident", "rationale": "mine", "version": "1"},
        follow=True,
    )
    assert "was changed by" in response.content.decode()
    assert assignment(study, "manual", "T2").rationale == "x"


def test_a_stale_bulk_set_changes_nothing_and_says_whose_values(client, study, owner):
    client.force_login(owner)
    services.assignment_set(
        study=study,
        plan_key="auto",
        task_key="T1",
        item={"automation": "thermostat", "status": "agreed"},
    )
    response = client.post(
        reverse("plan-bulk", args=[study.pk, "auto"]),
        {"tasks": ["T1", "T2"], "status": "rejected", "version-T1": "1", "version-T2": "1"},
        follow=True,
    )
    page = response.content.decode()
    assert (
        "Nothing was changed" in page
        and "Theirs: automation thermostat, status agreed; yours: status rejected" in page
    )
    assert assignment(study, "auto", "T1").status == "agreed"
    assert assignment(study, "auto", "T2").status == "proposed"


# -- the other form families ------------------------------------------------------------


def test_inventory_form_carries_its_version_and_a_stale_save_shows_both(client, study, owner):
    client.force_login(owner)
    url = reverse("inventory-item", args=[study.pk, "agents", "thermostat"])
    assert '<input type="hidden" name="version" value="1">' in client.get(url).content.decode()
    services.agent_save(
        study=study,
        key="thermostat",
        item={"id": "thermostat", "name": "Smart thermostat", "kind": "automation"},
    )
    data = {"id": "thermostat", "name": "Dial", "kind": "automation", "version": "1"}
    fragment = client.post(url, data, headers=HX).content.decode()
    assert fragment.lstrip().startswith('<form class="item-form"')
    assert "Agent thermostat was changed by" in fragment
    assert "<td>Smart thermostat</td><td>Dial</td>" in fragment
    assert '<input type="hidden" name="version" value="2">' in fragment
    assert study.agents.get(key="thermostat").name == "Smart thermostat"
    page = client.post(url, data)
    assert page.status_code == 409 and "<html" in page.content.decode()
    client.post(url, {**data, "version": "2"}, headers=HX)  # "Use mine"
    assert study.agents.get(key="thermostat").name == "Dial"


def test_mode_override_form_stale_save(client, study, owner):
    client.force_login(owner)
    url = reverse("mode-override", args=[study.pk, "auto", "hold", "T2"])
    assert 'name="version" value="1"' in client.get(url, headers=HX).content.decode()
    services.mode_override_set(
        study=study,
        plan_key="auto",
        mode_key="hold",
        task_key="T2",
        item={"automation": "thermostat"},
    )
    data = {"who": "person", "human": "resident", "rationale": "mine", "version": "1"}
    fragment = client.post(url, data, headers=HX).content.decode()
    assert "was changed by" in fragment and "<td>thermostat</td><td>—</td>" in fragment
    assert m.ModeOverride.objects.get(state__key="hold").automation.key == "thermostat"


def test_mode_form_stale_save(client, study, owner):
    client.force_login(owner)
    url = reverse("mode-edit", args=[study.pk, "auto", "hold"])
    services.mode_save(
        study=study,
        plan_key="auto",
        key="hold",
        item={"id": "hold", "name": "Held by hand", "indication": "clock symbol"},
    )
    data = {"id": "hold", "name": "Mine", "indication": "clock symbol", "version": "1"}
    fragment = client.post(url, data, headers=HX).content.decode()
    assert "<td>Held by hand</td><td>Mine</td>" in fragment
    assert m.ModeState.objects.get(key="hold").name == "Held by hand"


def test_assumption_form_stale_save(client, study, owner):
    client.force_login(owner)
    services.study_assumption_set(study=study, key="channel_limit", value=6.5, user=owner)
    url = reverse("study-assumption-set", args=[study.pk])
    data = {"key": "channel_limit", "value": "8", "version": "1"}
    fragment = client.post(url, data, headers=HX).content.decode()
    assert "Assumption channel_limit was changed by" in fragment
    assert "<td>6.5</td><td>8</td>" in fragment
    assert '<input type="hidden" name="version" value="2">' in fragment
    assert m.Study.objects.get(pk=study.pk).assumptions == {"channel_limit": 6.5}
    assert client.post(url, data).status_code == 409
    client.post(url, {**data, "version": "2"}, headers=HX)
    assert m.Study.objects.get(pk=study.pk).assumptions == {"channel_limit": 8}


def test_decision_status_stale_change(client, study, owner):
    client.force_login(owner)
    decision = services.decision_save(
        study=study, user=owner, kind="plan", plan_key="auto", decision="Ship it"
    )
    services.decision_status_set(study=study, user=owner, decision=decision.pk, status="agreed")
    url = reverse("review-decision-status", args=[study.pk, "auto"])
    data = {"decision": decision.pk, "status": "rejected", "version": "1", "view": "review"}
    page = client.post(url, data, follow=True).content.decode()
    assert "theirs is agreed, yours was rejected" in page
    assert m.Decision.objects.get(pk=decision.pk).status == "agreed"
