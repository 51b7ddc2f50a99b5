"""The edit API every service goes through (``services.edits.study_edit``): a refused
edit writes nothing and keeps the version; a passed one records one audit entry and
moves the version; a form opened at an older version is refused, also when two edits
of one study race.

The study is the home-heating file of the tests' fixtures; the expected errors are read
off that file by hand against the file format (allocation/core/FORMAT.md).
"""

from __future__ import annotations

import threading
import time
from concurrent.futures import ThreadPoolExecutor

import pytest
from django.db import connection, connections

from allocation import models as m
from allocation import selectors, services
from allocation.core import StudyInvalid
from allocation.services.conflicts import EditConflict, version_check
from allocation.services.edits import study_edit
from tests.web.conftest import make_user

from .test_services import row_counts


def stored(study: m.Study) -> tuple:
    """What an edit may move: the study row's version and time stamp, the audit entries."""
    row = m.Study.objects.get(pk=study.pk)
    return row.version, row.updated_at, m.AuditEntry.objects.filter(study=study).count()


def rebuilt(study: m.Study) -> dict:
    """The study's document read from its rows, not from the cache."""
    selectors.study_cache_clear()
    return selectors.study_document(study)


def test_an_edit_that_adds_an_error_writes_nothing_and_keeps_the_version(study):
    """The thermostat made a person: plan "auto" (plans[1]) names it as the automation
    of T1 and of T2, which must be an automation agent: the errors are at those two."""
    before, counts, document = stored(study), row_counts(), rebuilt(study)
    with (
        pytest.raises(StudyInvalid) as caught,
        study_edit(study=study, action="agent.save", target="agent thermostat") as edit,
    ):
        edit.document["agents"][1]["kind"] = "human"
        edit.check()
        edit.study.agents.filter(key="thermostat").update(kind="human")
    assert [p.path for p in caught.value.errors] == [
        "$.plans[1].assignments.T1.automation",
        "$.plans[1].assignments.T2.automation",
    ]
    assert stored(study) == before and row_counts() == counts
    assert rebuilt(study) == document


def test_rows_written_before_the_check_are_rolled_back(study):
    """A block that writes and leaves without checking is checked as it ends; the error
    undoes what it wrote (T2 given to an agent the study does not have)."""
    before, document = stored(study), rebuilt(study)
    with (
        pytest.raises(StudyInvalid) as caught,
        study_edit(study=study, action="assignment.set", target="plan manual / T2") as edit,
    ):
        edit.document["plans"][0]["assignments"]["T2"] = {"human": "nobody"}
        m.Assignment.objects.filter(plan__study=study, task__key="T2").delete()
    assert [p.path for p in caught.value.errors] == ["$.plans[0].assignments.T2.human"]
    assert stored(study) == before and rebuilt(study) == document


def test_a_passed_edit_gives_before_and_after_and_one_audit_entry(study):
    version, updated_at, entries = stored(study)
    with study_edit(study=study, action="agent.save", target="agent resident") as edit:
        edit.document["agents"][0]["name"] = "Occupant"
        edit.check()
        edit.study.agents.filter(key="resident").update(name="Occupant")
    assert edit.before["agents"][0]["name"] == "Resident"
    assert edit.after["agents"][0]["name"] == "Occupant"
    assert edit.result is not None and edit.result.ok
    # One entry, keeping only the agent that changed.
    assert m.AuditEntry.objects.filter(study=study).count() == entries + 1
    entry = m.AuditEntry.objects.filter(study=study).latest("pk")
    assert entry == edit.entry
    assert (entry.action, entry.target) == ("agent.save", "agent resident")
    assert entry.before == {"agents": [edit.before["agents"][0]]}
    assert entry.after == {"agents": [{**edit.before["agents"][0], "name": "Occupant"}]}
    # The study row's version count stays (only the agent changed); its time moves.
    row = m.Study.objects.get(pk=study.pk)
    assert row.version == version and row.updated_at > updated_at
    # The cached document is the one the rows give.
    assert selectors.study_document(study) == rebuilt(study) == edit.after


def test_an_edit_that_finds_nothing_to_change_records_nothing(study):
    before = stored(study)
    with study_edit(study=study, action="study.save", target="study header") as edit:
        edit.leave_unchanged()
    assert stored(study) == before


def test_a_form_opened_before_another_save_is_refused(study):
    """Two people open the header at version 1; the first saves, the second is told."""
    opened = m.Study.objects.get(pk=study.pk).version

    def save_title(title: str) -> None:
        with study_edit(study=study, action="study.save", target="study header") as edit:
            version_check(
                study=edit.study,
                stored=edit.study.version,
                expected=opened,
                path="$.study",
                what="the study's header",
                current={"title": edit.study.title},
                target="study header",
            )
            edit.document["study"]["title"] = title
            edit.check()
            edit.study_set({"title": title})

    save_title("Heating, first")
    after_first = stored(study)
    with pytest.raises(EditConflict) as caught:
        save_title("Heating, second")
    assert caught.value.version == opened + 1
    assert caught.value.current == {"title": "Heating, first"}
    assert stored(study) == after_first
    assert rebuilt(study)["study"]["title"] == "Heating, first"


@pytest.mark.django_db(transaction=True)
def test_two_racing_edits_take_turns_and_the_second_sees_the_first(heating_document):
    """Two threads (each with its own connection) open the header at the same version
    and save at once. The study row lock makes the second wait until the first commits;
    it then reads the new version and is refused: no save is lost."""
    if connection.vendor != "postgresql":
        pytest.skip("needs a database with row locks and concurrent writers (PostgreSQL)")
    owner = make_user("olive")
    study = services.study_import(data=heating_document, owner=owner)
    opened = m.Study.objects.get(pk=study.pk).version
    header = selectors.study_document(study)["study"]
    first_holds_the_lock = threading.Event()

    def first() -> str:
        try:
            with study_edit(study=study, action="study.save", target="study header") as edit:
                version_check(
                    study=edit.study,
                    stored=edit.study.version,
                    expected=opened,
                    path="$.study",
                    what="the study's header",
                    current=None,
                )
                first_holds_the_lock.set()
                time.sleep(0.5)  # the second editor arrives meanwhile
                edit.document["study"]["title"] = "Heating, first"
                edit.check()
                edit.study_set({"title": "Heating, first"})
            return "saved"
        finally:
            connections.close_all()

    def second() -> str:
        try:
            first_holds_the_lock.wait(timeout=30)
            services.study_header_save(
                study=study, item={**header, "title": "Heating, second"}, expected_version=opened
            )
            return "saved"
        except EditConflict:
            return "refused"
        finally:
            connections.close_all()

    with ThreadPoolExecutor(2) as pool:
        outcomes = (pool.submit(first), pool.submit(second))
        assert (outcomes[0].result(), outcomes[1].result()) == ("saved", "refused")
    row = m.Study.objects.get(pk=study.pk)
    assert (row.title, row.version) == ("Heating, first", opened + 1)
    assert m.AuditEntry.objects.filter(study=study, action="study.save").count() == 1


def test_a_header_edit_to_a_too_fine_workload_bin_is_refused_and_writes_nothing(study):
    """A 1-second bin is under SIMULATION_MIN_BIN_S (60 s, allocation/core/limits.py):
    the edit is refused at the header's bin and the study keeps its version."""
    before, document = stored(study), rebuilt(study)
    header = {k: document["study"][k] for k in ("id", "title", "scale")}
    with pytest.raises(StudyInvalid) as caught:
        services.study_header_save(study=study, item={**header, "bin_s": 1})
    assert [p.path for p in caught.value.errors] == ["$.study.bin_s"]
    assert "SIMULATION_MIN_BIN_S" in caught.value.errors[0].message
    assert stored(study) == before and rebuilt(study) == document
