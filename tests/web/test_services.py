"""Import into the database: all or nothing, and lossless through the rows."""

from __future__ import annotations

import pytest

from allocation import models as m
from allocation import selectors, services
from allocation.core import StudyInvalid
from allocation.examples import example_documents

ROW_MODELS = (
    m.Study,
    m.Membership,
    m.Agent,
    m.Event,
    m.Task,
    m.Link,
    m.Plan,
    m.Assignment,
    m.ModeState,
    m.ModeOverride,
    m.ModeTransition,
)


def row_counts() -> dict[str, int]:
    return {model.__name__: model.objects.count() for model in ROW_MODELS}


def test_import_then_document_gives_the_same_file(study, heating_document):
    assert selectors.study_document(study) == heating_document


@pytest.mark.django_db
def test_every_example_survives_the_database_unchanged(owner):
    """Import, export and re-import each example: the documents are identical."""
    documents = example_documents()
    assert len(documents) == 3
    for document in documents:
        first = services.study_import(data=document, owner=owner)
        exported = selectors.study_document(first)
        assert exported == document
        second = services.study_import(data=exported, owner=owner)
        assert selectors.study_document(second) == document


def test_bad_file_changes_nothing(study, owner, heating_document):
    """A file with an error deep inside (a plan's assignment) stores no row at all."""
    before = row_counts()
    heating_document["study"]["id"] = "another"
    heating_document["plans"][1]["assignments"]["T2"]["levels"] = 11
    with pytest.raises(StudyInvalid) as caught:
        services.study_import(data=heating_document, owner=owner)
    assert [p.path for p in caught.value.errors] == ["$.plans[1].assignments.T2.levels"]
    assert row_counts() == before


def test_failure_while_writing_rolls_everything_back(study, owner, heating_document, monkeypatch):
    """A fault half-way through writing (here: in the plans) leaves no partial study."""
    before = row_counts()

    def broken(**kwargs):
        raise RuntimeError("disk went away")

    monkeypatch.setattr(services.studies, "plan_create", broken)
    with pytest.raises(RuntimeError):
        services.study_import(data=heating_document, owner=owner)
    assert row_counts() == before


def test_importer_becomes_owner(study, owner):
    membership = m.Membership.objects.get(study=study)
    assert (membership.user, membership.role) == (owner, m.Role.OWNER)


def test_examples_load_skips_what_the_owner_has(owner):
    first = services.examples_load(owner=owner)
    second = services.examples_load(owner=owner)
    assert all(imported for _key, imported in first)
    assert not any(imported for _key, imported in second)
    assert m.Study.objects.count() == 3


def test_study_document_query_count_is_fixed(study, django_assert_num_queries):
    """Reading a study's rows costs the same few queries whatever its size; reading it
    again at the same version costs one (the version check)."""
    selectors.study_cache_clear()
    with django_assert_num_queries(11):
        selectors.study_document(study)
    with django_assert_num_queries(1):
        selectors.study_document(study)


def test_a_write_moves_the_version_so_nothing_stale_is_served(study):
    first = selectors.study_load(study)
    services.assignment_set(study=study, plan_key="manual", task_key="T1", item=None)
    again = selectors.study_load(study)
    assert again is not first
    assert "T1" not in selectors.study_document(study)["plans"][0]["assignments"]


def test_local_user_keeps_its_password(tmp_path, db):
    user, password = services.local_user_ensure(data_dir=tmp_path)
    again, same = services.local_user_ensure(data_dir=tmp_path)
    assert (again.pk, same) == (user.pk, password)
    assert again.check_password(password)
    (tmp_path / "local-sign-in.txt").unlink()
    _user, renewed = services.local_user_ensure(data_dir=tmp_path)
    assert renewed != password
