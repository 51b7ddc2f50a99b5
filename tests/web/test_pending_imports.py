"""Spreadsheets waiting between their upload and their apply: kept in the database for
their user alone, never in the session, bounded per user and in time, gone once applied,
discarded or expired, and left out of backups.

The bounds are the ones allocation/core/limits.py states; what each upload should keep or
drop is worked out by hand from them in each test (file sizes are chosen here).
"""

from __future__ import annotations

import datetime as dt
import gzip
import json
import random

import pytest
from django.apps import apps
from django.contrib.sessions.models import Session
from django.core.management import call_command
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core.limits import (
    PENDING_IMPORT_BYTES_PER_USER,
    PENDING_IMPORT_LIFETIME_S,
    PENDING_IMPORTS_PER_USER,
    SPREADSHEET_MAX_BYTES,
)
from allocation.ops import backup
from tests.web.conftest import make_user
from tests.web.test_spreadsheets import (
    apply,
    bad_workbook,
    everything,
    good_workbook,
    page_url,
    study_version,
    upload,
)


def another_study(heating_document: dict, owner, index: int, *members) -> m.Study:
    """A copy of the home-heating study under another id, ``members`` its editors."""
    document = {**heating_document, "study": {**heating_document["study"]}}
    document["study"]["id"] = f"heating-{index}"
    document["study"]["title"] = f"Heating {index}"
    row = services.study_import(data=document, owner=owner)
    for user in members:
        m.Membership.objects.create(study=row, user=user, role=m.Role.EDITOR)
    return row


def session_row_bytes(client) -> int:
    """The stored length of the client's session row (what every request reads)."""
    return len(Session.objects.get(session_key=client.session.session_key).session_data)


def waiting(user) -> list[tuple[str, str]]:
    """The files ``user`` has waiting, oldest first: (study id, file name)."""
    rows = m.PendingImport.objects.filter(user=user).order_by("created_at", "pk")
    return list(rows.values_list("study__key", "name"))


@pytest.fixture
def editor(client, member_of):
    user = member_of("editor")
    client.force_login(user)
    return user


# -- the session stays small; the bounds per user -------------------------------------


def test_eleven_large_uploads_leave_the_session_small(
    client, study, editor, owner, heating_document
):
    """The reported case: eleven files of 1.9 MB, one per study, none applied. Kept in
    the session they made one row of 28 MB (base64 of incompressible bytes, as an XLSX
    archive is); now the session holds none of them. The byte bound keeps
    floor(PENDING_IMPORT_BYTES_PER_USER / 1.9 MB) of them: the newest, by hand 4 at 8 MiB."""
    size = 1_900_000
    assert size <= SPREADSHEET_MAX_BYTES
    studies = [study] + [another_study(heating_document, owner, i, editor) for i in range(10)]
    client.get(reverse("study-list"))
    empty = session_row_bytes(client)
    for index, row in enumerate(studies):
        data = random.Random(index).randbytes(size)
        assert upload(client, row, data, f"f{index}.xlsx").status_code == 302
    # Flash messages (the dropped files) may reach the session; a single file would be
    # 2.5 MB of base64 there.
    assert session_row_bytes(client) < empty + 8_000
    kept = min(PENDING_IMPORTS_PER_USER, PENDING_IMPORT_BYTES_PER_USER // size)
    assert kept == 4  # 8 MiB = 8,388,608 bytes hold four of 1,900,000, not five
    assert waiting(editor) == [(r.key, f"f{i}.xlsx") for i, r in enumerate(studies)][-kept:]
    total = sum(m.PendingImport.objects.filter(user=editor).values_list("size", flat=True))
    assert total == kept * size <= PENDING_IMPORT_BYTES_PER_USER


def test_past_the_count_the_oldest_is_dropped_and_named(
    client, study, editor, owner, heating_document
):
    studies = [study] + [
        another_study(heating_document, owner, i, editor) for i in range(PENDING_IMPORTS_PER_USER)
    ]
    for index, row in enumerate(studies[:-1]):
        upload(client, row, good_workbook(), f"g{index}.xlsx")
    assert len(waiting(editor)) == PENDING_IMPORTS_PER_USER
    response = upload(client, studies[-1], good_workbook(), "last.xlsx")
    page = client.get(response["Location"]).content.decode()
    assert [name for _, name in waiting(editor)] == [
        f"g{i}.xlsx" for i in range(1, PENDING_IMPORTS_PER_USER)
    ] + ["last.xlsx"]
    # The message names the bound, what the user had, and the file dropped.
    assert f"You had {PENDING_IMPORTS_PER_USER} spreadsheet(s) waiting" in page
    assert f"at most {PENDING_IMPORTS_PER_USER} files and 8.0 MiB wait per person" in page
    assert f"g0.xlsx (plan auto of {study.title}" in page


def test_another_users_files_do_not_count_against_ones_bound(
    client, study, editor, member_of, heating_document, owner
):
    other = member_of("editor", "second-editor")
    for index in range(PENDING_IMPORTS_PER_USER):
        row = another_study(heating_document, owner, index, other)
        services.pending_import_keep(
            user=other, study=row, plan_key="auto", upload=_upload(f"o{index}.xlsx")
        )
    upload(client, study, good_workbook(), "mine.xlsx")
    assert waiting(editor) == [(study.key, "mine.xlsx")]
    assert len(waiting(other)) == PENDING_IMPORTS_PER_USER


def _upload(name: str):
    from allocation.core.spreadsheets.reading import Upload

    return Upload(name, good_workbook())


def test_a_new_upload_for_the_study_replaces_the_one_waiting(client, study, editor):
    upload(client, study, good_workbook(), "first.xlsx", plan="manual")
    upload(client, study, good_workbook(), "second.xlsx", plan="auto")
    assert waiting(editor) == [(study.key, "second.xlsx")]


# -- gone on apply, on discard, on expiry ---------------------------------------------


def test_apply_removes_the_waiting_file(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    assert len(waiting(editor)) == 1
    apply(client, study)
    assert m.Task.objects.filter(study=study, key="T3").exists()
    assert waiting(editor) == []


def test_discard_removes_the_waiting_file_and_stores_nothing(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    before = everything(study)
    client.post(page_url(study, action="discard"))
    assert waiting(editor) == []
    assert everything(study) == before


def test_an_expired_file_is_gone_when_its_user_looks(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    seen = client.get(page_url(study)).content.decode()
    sha256 = m.PendingImport.objects.get().sha256
    assert "Preview of g.xlsx" in seen
    # Its lifetime counts from when it was kept; move both one second past it.
    row = m.PendingImport.objects.get()
    lifetime = dt.timedelta(seconds=PENDING_IMPORT_LIFETIME_S)
    assert row.expires_at - row.created_at == lifetime
    now = dt.datetime.now(dt.UTC)
    gone = now - dt.timedelta(seconds=1)
    m.PendingImport.objects.update(created_at=gone - lifetime, expires_at=gone)
    before = everything(study)
    response = client.post(
        page_url(study, action="apply"), {"version": study_version(study), "sha256": sha256}
    )
    page = client.get(response["Location"]).content.decode()
    assert "No file is waiting to be imported" in page and "Preview of" not in page
    assert not m.PendingImport.objects.exists()
    assert everything(study) == before


def test_expired_files_go_on_anyones_upload_and_by_housekeeping(
    client, study, editor, member_of, heating_document, owner
):
    """No scheduler is needed: another user's upload deletes them."""
    other = member_of("editor", "second-editor")
    now = dt.datetime.now(dt.UTC)
    lifetime = dt.timedelta(seconds=PENDING_IMPORT_LIFETIME_S)
    long_ago = now - lifetime - dt.timedelta(minutes=1)
    services.pending_import_keep(
        user=other, study=study, plan_key="auto", upload=_upload("old.xlsx"), now=long_ago
    )
    upload(client, study, good_workbook(), "new.xlsx")
    assert waiting(other) == [] and waiting(editor) == [(study.key, "new.xlsx")]

    services.pending_import_keep(
        user=other, study=study, plan_key="auto", upload=_upload("old.xlsx"), now=long_ago
    )
    call_command("housekeeping", verbosity=0)
    assert waiting(other) == [] and waiting(editor) == [(study.key, "new.xlsx")]


# -- one user's file, the study's roles -----------------------------------------------


def test_another_user_neither_sees_nor_applies_the_file(client, study, editor, member_of):
    upload(client, study, good_workbook(), "g.xlsx")
    sha256 = m.PendingImport.objects.get().sha256
    before = everything(study)
    client.force_login(member_of("owner", "second-owner"))
    assert "Preview of" not in client.get(page_url(study)).content.decode()
    response = client.post(
        page_url(study, action="apply"), {"version": study_version(study), "sha256": sha256}
    )
    assert "No file is waiting" in client.get(response["Location"]).content.decode()
    client.post(page_url(study, action="discard"))
    assert everything(study) == before
    assert waiting(editor) == [(study.key, "g.xlsx")]
    # The service, called directly, refuses it too.
    row = m.PendingImport.objects.get()
    assert services.spreadsheet_apply_pending(pending=row, user=make_user("stranger")) is None
    assert everything(study) == before


def test_an_uploader_no_longer_editor_may_not_apply(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    fields = {"version": study_version(study), "sha256": m.PendingImport.objects.get().sha256}
    m.Membership.objects.filter(study=study, user=editor).update(role=m.Role.VIEWER)
    before = everything(study)
    assert client.post(page_url(study, action="apply"), fields).status_code == 403
    assert everything(study) == before


# -- two tabs, two studies ------------------------------------------------------------


def test_two_tabs_on_two_studies_each_keep_their_file(
    client, study, editor, owner, heating_document
):
    second = another_study(heating_document, owner, 2, editor)
    upload(client, study, good_workbook(), "one.xlsx")
    upload(client, second, bad_workbook(), "two.xlsx")
    assert "Preview of one.xlsx" in client.get(page_url(study)).content.decode()
    assert "Preview of two.xlsx" in client.get(page_url(second)).content.decode()
    apply(client, study)
    assert m.Task.objects.filter(study=study, key="T3").exists()
    assert waiting(editor) == [(second.key, "two.xlsx")]
    assert "Preview of two.xlsx" in client.get(page_url(second)).content.decode()


def test_the_same_file_applied_from_two_tabs_is_applied_once(client, study, editor):
    upload(client, study, good_workbook(), "g.xlsx")
    page = client.get(page_url(study)).content.decode()
    assert "Apply to plan auto" in page
    fields = {"version": study_version(study), "sha256": m.PendingImport.objects.get().sha256}
    client.post(page_url(study, action="apply"), fields)
    response = client.post(page_url(study, action="apply"), fields)
    assert "No file is waiting" in client.get(response["Location"]).content.decode()
    assert m.AuditEntry.objects.filter(action="spreadsheet.import").count() == 1


# -- a failed apply changes nothing ---------------------------------------------------


def test_a_failure_while_applying_keeps_the_study_and_the_waiting_file(study, editor, monkeypatch):
    from allocation.services import spreadsheets as spreadsheet_service

    def broken(*args, **kwargs):
        raise RuntimeError("disk full")

    kept = services.pending_import_keep(
        user=editor, study=study, plan_key="auto", upload=_upload("g.xlsx")
    )
    monkeypatch.setattr(spreadsheet_service, "_write_assignments", broken)
    before = everything(study)
    with pytest.raises(RuntimeError):
        services.spreadsheet_apply_pending(pending=kept.pending, user=editor)
    assert everything(study) == before
    assert waiting(editor) == [(study.key, "g.xlsx")]


def test_a_failure_deleting_the_waiting_file_undoes_the_import(study, editor, monkeypatch):
    """The import and the file's deletion are one transaction."""
    kept = services.pending_import_keep(
        user=editor, study=study, plan_key="auto", upload=_upload("g.xlsx")
    )

    def broken(self, *args, **kwargs):
        raise RuntimeError("connection lost")

    monkeypatch.setattr(m.PendingImport, "delete", broken)
    before = everything(study)
    with pytest.raises(RuntimeError):
        services.spreadsheet_apply_pending(pending=kept.pending, user=editor)
    assert everything(study) == before
    assert waiting(editor) == [(study.key, "g.xlsx")]


def test_a_file_with_errors_stays_waiting_after_apply(client, study, editor):
    upload(client, study, bad_workbook(), "bad.xlsx")
    before = everything(study)
    fields = {"version": study_version(study), "sha256": m.PendingImport.objects.get().sha256}
    client.post(page_url(study, action="apply"), fields)
    assert everything(study) == before
    assert waiting(editor) == [(study.key, "bad.xlsx")]


def test_a_damaged_waiting_file_is_not_read(client, study, editor):
    """Bytes that no longer match their SHA-256 are deleted, never previewed."""
    upload(client, study, good_workbook(), "g.xlsx")
    m.PendingImport.objects.update(data=b"not the file that was uploaded")
    assert "Preview of" not in client.get(page_url(study)).content.decode()
    assert waiting(editor) == []


def test_files_left_in_the_session_by_earlier_versions_are_removed(client, study, editor):
    session = client.session
    session[f"baton.spreadsheet.{study.pk}.auto"] = {"data": "QUJD" * 1000, "size": 3000}
    session.save()
    client.get(page_url(study))
    assert not any(key.startswith("baton.spreadsheet") for key, _ in client.session.items())


# -- transient: left out of backups ---------------------------------------------------


def test_waiting_files_are_left_out_of_backups(study, editor, tmp_path):
    services.pending_import_keep(
        user=editor, study=study, plan_key="auto", upload=_upload("g.xlsx")
    )
    path = tmp_path / "b.jsonl.gz"
    call_command("backup", str(path), verbosity=0)
    with gzip.open(path, "rt", encoding="utf-8") as stream:
        lines = [json.loads(line) for line in stream]
    labels = {entry["model"] for entry in lines[0]["models"]}
    assert "allocation.pendingimport" not in labels
    assert all(line["model"] != "allocation.pendingimport" for line in lines[1:])
    # Every model of the app is either backed up or named transient, never both.
    app = {
        model._meta.label_lower
        for model in apps.get_app_config("allocation").get_models(include_auto_created=True)
    }
    backed_up = {model._meta.label_lower for model in backup.backed_up_models()}
    assert {"allocation.pendingimport"} == backup.TRANSIENT_MODELS
    assert app == (backed_up & app) | backup.TRANSIENT_MODELS
    assert not backed_up & backup.TRANSIENT_MODELS


def test_the_bounds_fit_the_largest_file():
    """A file of the largest size read always fits the per-user byte bound by itself, so
    a new upload is never refused for what waits: it drops the oldest instead."""
    assert SPREADSHEET_MAX_BYTES <= PENDING_IMPORT_BYTES_PER_USER
