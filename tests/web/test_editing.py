"""Edits to a stored study: checked as an import would be, written row by row, lossless."""

from __future__ import annotations

import pytest

from allocation import models as m
from allocation import selectors, services
from allocation.core import StudyInvalid

from .test_services import row_counts


def document(study: m.Study) -> dict:
    return selectors.study_document(study)


def test_new_study_is_empty_and_owned(owner):
    study = services.study_new(owner=owner, key="night-watch", title="Night watch", scale="ek10")
    assert document(study)["study"] == {
        "id": "night-watch",
        "title": "Night watch",
        "scale": "ek10",
    }
    assert m.Membership.objects.get(study=study).role == m.Role.OWNER


def test_new_study_with_a_bad_id_says_where(owner):
    with pytest.raises(StudyInvalid) as caught:
        services.study_new(owner=owner, key="no spaces", title="x", scale="sv10")
    assert caught.value.errors[0].path == "$.study.id"
    assert not m.Study.objects.exists()


def test_agent_rename_follows_every_reference(study):
    item = {
        "id": "occupant",
        "name": "Occupant",
        "kind": "human",
        "capabilities": ["judgement"],
        "asleep": ["23:00", "07:00"],
    }
    services.agent_save(study=study, key="resident", item=item)
    after = document(study)
    assert after["agents"][0] == item
    assert after["plans"][0]["assignments"]["T1"] == {"human": "occupant"}
    assert after["plans"][1]["assignments"]["T2"]["accountable"] == "occupant"
    assert after["plans"][1]["modes"]["states"][1]["overrides"]["T2"] == {"human": "occupant"}


def test_an_edit_that_adds_an_error_is_refused_and_changes_nothing(study):
    before = document(study)
    counts = row_counts()
    with pytest.raises(StudyInvalid) as caught:
        services.agent_save(
            study=study, key="thermostat", item={"id": "thermostat", "name": "T", "kind": "human"}
        )
    # The plan names the thermostat as an automation; the core says where.
    assert "$.plans[1].assignments.T1.automation" in [p.path for p in caught.value.errors]
    assert document(study) == before and row_counts() == counts


def test_task_rename_and_move_keep_the_study_consistent(study):
    item = {
        "id": "T2b",
        "parent": "G1",
        "title": "Lower the set point",
        "duration_s": [3, 10, 20],
        "severity": 2,
        "demands": {"visual": 4.0, "auditory": 0, "cognitive": 1.2, "psychomotor": 2.2},
    }
    services.task_save(study=study, key="T2", item=item)
    after = document(study)
    assert after["links"][0] == {"from": "T1", "to": "T2b", "kind": "precedes", "lag_s": [0, 60]}
    assert list(after["plans"][1]["assignments"]) == ["T1", "T2b"]


def test_making_a_leaf_with_work_a_goal_is_refused_with_the_reason(study):
    new_task = {"id": "T3", "parent": "T1", "title": "A sub-task", "duration_s": 5}
    with pytest.raises(StudyInvalid) as caught:
        services.task_save(study=study, key=None, item=new_task)
    messages = " ".join(p.message for p in caught.value.errors)
    assert "task T1 is a goal" in messages and "carries no work itself" in messages


def test_task_delete_takes_its_subtree_links_and_assignments(study):
    consequences = services.task_delete_consequences(study=study, key="G1")
    texts = [c.text for c in consequences]
    assert "sub-task T1" in texts and "link T1 precedes T2" in texts
    services.task_delete(study=study, key="G1")
    after = document(study)
    assert after["tasks"] == [] and after["links"] == []
    assert after["plans"][0]["assignments"] == {}
    assert not m.ModeOverride.objects.exists()


def test_agent_delete_unallocates_or_narrows_assignments(study):
    consequences = services.agent_delete_consequences(study=study, key="thermostat")
    assert any("T2" in c.text for c in consequences)
    services.agent_delete(study=study, key="thermostat")
    after = document(study)
    assert "T1" not in after["plans"][1]["assignments"]  # it was the thermostat's alone
    assert after["plans"][1]["assignments"]["T2"]["human"] == "resident"
    assert "levels" not in after["plans"][1]["assignments"]["T2"]


def test_event_delete_leaves_its_tasks_to_chains(study):
    services.event_delete(study=study, key="leave")
    after = document(study)
    assert after["events"] == [] and "occurs" not in after["tasks"][1]


def test_link_save_and_delete(study):
    link = m.Link.objects.get(study=study)
    services.link_save(study=study, pk=link.pk, item={"from": "T1", "to": "T2", "kind": "informs"})
    assert document(study)["links"] == [{"from": "T1", "to": "T2", "kind": "informs"}]
    with pytest.raises(StudyInvalid, match="goes only with kind"):
        services.link_save(
            study=study, pk=link.pk, item={"from": "T1", "to": "T2", "kind": "informs", "lag_s": 5}
        )
    services.link_delete(study=study, pk=link.pk)
    assert document(study)["links"] == []


def test_assignment_set_and_remove(study):
    item = {"human": "resident", "automation": "thermostat", "levels": 5, "status": "agreed"}
    services.assignment_set(study=study, plan_key="manual", task_key="T2", item=item)
    assert document(study)["plans"][0]["assignments"]["T2"] == item
    services.assignment_set(study=study, plan_key="manual", task_key="T2", item=None)
    assert "T2" not in document(study)["plans"][0]["assignments"]


def test_assignment_levels_out_of_range_are_refused_at_their_path(study):
    with pytest.raises(StudyInvalid) as caught:
        services.assignment_set(
            study=study,
            plan_key="manual",
            task_key="T2",
            item={"human": "resident", "automation": "thermostat", "levels": 11},
        )
    assert caught.value.errors[0].path == "$.plans[0].assignments.T2.levels"


def test_bulk_levels_go_to_shared_tasks_only(study):
    changed = services.assignments_bulk_set(
        study=study, plan_key="auto", task_keys=["T1", "T2"], changes={"levels": 9}
    )
    assert changed == ["T2"]
    assert document(study)["plans"][1]["assignments"]["T2"]["levels"] == 9


def test_plan_copy_is_an_independent_copy(study):
    services.plan_copy(study=study, key="auto", new_key="auto-2", new_name="Second try")
    after = document(study)
    copy = after["plans"][2]
    assert copy["id"] == "auto-2" and copy["name"] == "Second try"
    assert copy["assignments"] == after["plans"][1]["assignments"]
    assert copy["modes"] == after["plans"][1]["modes"]
    services.assignment_set(
        study=study, plan_key="auto-2", task_key="T1", item={"human": "resident"}
    )
    assert document(study)["plans"][1]["assignments"]["T1"] == {"automation": "thermostat"}


def test_plan_copy_to_an_existing_id_is_refused(study):
    with pytest.raises(StudyInvalid, match="repeats the id 'manual'"):
        services.plan_copy(study=study, key="auto", new_key="manual", new_name="x")


def test_the_remembered_document_is_what_the_rows_say(study):
    """After every kind of edit, the document the cache serves equals the one rebuilt from
    the rows: the rows were written exactly as checked."""

    def same() -> None:
        assert selectors.studies._document_from_rows(study) == selectors.study_document(study)

    services.agent_save(
        study=study, key=None, item={"id": "helper", "name": "Helper", "kind": "human"}
    )
    same()
    services.event_save(
        study=study,
        key="leave",
        item={"id": "out", "name": "Go out", "per_day": 1.5, "when": "awake"},
    )
    same()
    services.task_save(
        study=study,
        key=None,
        item={
            "id": "T3",
            "parent": "G1",
            "title": "Close the windows",
            "occurs": {"event": "out"},
            "duration_s": [5, 10, 30],
        },
    )
    same()
    services.link_save(study=study, pk=None, item={"from": "T3", "to": "T2", "kind": "informs"})
    same()
    services.assignment_set(
        study=study,
        plan_key="auto",
        task_key="T3",
        item={
            "human": "helper",
            "automation": "thermostat",
            "levels": {"acquisition": 9, "analysis": 5, "decision": 2, "action": 1},
            "feedback": "alert",
        },
    )
    same()
    services.plan_copy(study=study, key="auto", new_key="auto-2", new_name="Second")
    same()
    services.assignments_bulk_set(
        study=study, plan_key="auto-2", task_keys=["T2", "T3"], changes={"status": "open"}
    )
    same()
    services.study_header_save(
        study=study, item={"id": "heating", "title": "Heating", "scale": "sv10", "bin_s": 600}
    )
    same()
    services.agent_delete(study=study, key="helper")
    same()
    services.task_delete(study=study, key="T3")
    same()


def test_a_failure_s_fallback_follows_a_new_id_and_goes_with_its_device(study):
    item = {
        "automation": "thermostat",
        "reliability": {"fails_per_1000": 5, "detected_by": "alert", "fallback": "resident"},
    }
    services.assignment_set(study=study, plan_key="manual", task_key="T2", item=item)
    assert document(study)["plans"][0]["assignments"]["T2"] == item
    occupant = {"id": "occupant", "name": "Occupant", "kind": "human"}
    services.agent_save(study=study, key="resident", item=occupant)
    reliability = document(study)["plans"][0]["assignments"]["T2"]["reliability"]
    assert reliability["fallback"] == "occupant"
    consequences = services.agent_delete_consequences(study=study, key="occupant")
    assert any("takes over after a failure of T2" in c.text for c in consequences)
    # The device goes, and with it how often it fails.
    services.assignment_set(
        study=study,
        plan_key="manual",
        task_key="T2",
        item={
            "human": "occupant",
            "automation": "thermostat",
            "levels": 5,
            "reliability": {**item["reliability"], "fallback": "occupant"},
        },
    )
    services.agent_delete(study=study, key="thermostat")
    assert document(study)["plans"][0]["assignments"]["T2"] == {"human": "occupant"}
    assert m.Assignment.objects.filter(reliability__isnull=False).count() == 0


def test_people_asked_in_turn_follow_a_new_id_and_lose_a_deleted_person(study):
    services.agent_save(
        study=study, key=None, item={"id": "partner", "name": "Partner", "kind": "human"}
    )
    item = {"human": ["resident", "partner"], "escalate_after_s": 300}
    services.assignment_set(study=study, plan_key="manual", task_key="T2", item=item)
    assert document(study)["plans"][0]["assignments"]["T2"] == item
    services.agent_save(
        study=study, key="partner", item={"id": "carer", "name": "Carer", "kind": "human"}
    )
    assert document(study)["plans"][0]["assignments"]["T2"]["human"] == ["resident", "carer"]
    consequences = services.agent_delete_consequences(study=study, key="carer")
    assert any("no longer asked in turn for T2" in c.text for c in consequences)
    services.agent_delete(study=study, key="carer")
    assert document(study)["plans"][0]["assignments"]["T2"] == {"human": "resident"}
