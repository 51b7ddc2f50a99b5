"""Backup and restore: ``manage.py backup``, ``backup --verify`` and
``restore``.

The references are outside the backup code: every model's rows as the ORM reads them
(``values()``, field by field) before the backup and after the restore; each snapshot
verifying against its own SHA-256 (:func:`services.snapshot_verify`) and each study's
canonical text hashing as before (:mod:`allocation.core.canonical`); the database's own
description of each table (every column is in the backup); the SHA-256 of no bytes,
e3b0c442…b855 (FIPS 180-4 test value, the hash of an empty model); and a password the
user typed still signing them in.
"""

from __future__ import annotations

import gzip
import hashlib
import json
import os
import stat
from pathlib import Path

import pytest
from django.contrib.auth import get_user_model
from django.core.management import call_command
from django.core.management.base import CommandError
from django.core.management.color import no_style
from django.core.management.sql import sql_flush
from django.db import connection
from django.test import override_settings

from allocation import models as m
from allocation import selectors, services, tasks
from allocation.core import load_study
from allocation.core.canonical import canonical_text, digest
from allocation.core.simulation import CHUNK_DAYS
from allocation.ops import backup
from tests.web.conftest import make_user

IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
DUMMY = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
PASSWORD = "correct horse battery"  # tests.web.conftest.make_user
EMPTY_SHA256 = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"


def rows_now() -> dict[str, list[dict]]:
    """Every backed-up model's rows as the ORM reads them, by primary key."""
    return {
        model._meta.label_lower: list(model._base_manager.order_by("pk").values())
        for model in backup.backed_up_models()
    }


def total_rows() -> int:
    return sum(model._base_manager.count() for model in backup.backed_up_models())


def study_hashes() -> dict[int, str]:
    """Each study's canonical text's SHA-256, rebuilt from its rows (not from a cache)."""
    selectors.study_cache_clear()
    return {
        row.pk: digest(canonical_text(load_study(selectors.study_document(row)).study))
        for row in m.Study.objects.all()
    }


def empty_database() -> None:
    """Delete every backed-up row, children first (a new, migrated database)."""
    for model in reversed(backup.backed_up_models()):
        model._base_manager.all().delete()
    selectors.study_cache_clear()
    assert total_rows() == 0


def read_file(path: Path) -> list[dict]:
    with gzip.open(path, "rt", encoding="utf-8") as stream:
        return [json.loads(line) for line in stream]


def write_file(path: Path, lines: list[dict], *, rehash: bool) -> None:
    """Write lines back as a backup; with ``rehash`` the manifest is made to match them
    (a file that checks out but holds something the database must refuse)."""
    if rehash:
        manifest = lines[0]
        for entry in manifest["models"]:
            rows = [row for row in lines[1:] if row["model"] == entry["model"]]
            entry["count"] = len(rows)
            entry["sha256"] = hashlib.sha256(
                "".join(backup.canonical_line(row) for row in rows).encode()
            ).hexdigest()
    with gzip.open(path, "wt", encoding="utf-8") as stream:
        stream.writelines(backup.canonical_line(line) for line in lines)


def fill(owner) -> m.Study:
    """The example studies and one of everything a team server keeps about them."""
    services.examples_load(owner=owner)
    study = m.Study.objects.get(key="home-heating")
    reviewer = make_user("rita")
    m.Membership.objects.create(study=study, user=reviewer, role=m.Role.REVIEWER)
    services.snapshot_create(study=study, title="Agreed at the workshop", user=owner)
    question = services.comment_post(
        study=study, user=reviewer, kind="task", key="T2", body="Who notices <b>first</b>?"
    )
    services.comment_post(study=study, user=owner, body="The resident.", parent=question.pk)
    services.decision_save(
        study=study,
        user=owner,
        kind="plan",
        plan_key="auto",
        decision="Keep the override",
        rationale="The résidents asked for it",
    )
    services.rating_record(
        study=study,
        user=reviewer,
        plan_key="manual",
        task_key="T2",
        session="Workshop 1",
        participant="P01",
        ratings=dict(
            zip(
                ("mental", "physical", "temporal", "performance", "effort", "frustration"),
                (70, 20, 60, 40, 65, 30),
                strict=True,
            )
        ),
    )
    # A finished run with its combined result ...
    services.simulation_request(study=study, plan_key="auto", days=20, seed=7, user=owner)
    # ... and one half done (two chunks, one simulated) whose stored chunk is kept.
    with override_settings(TASKS=DUMMY):
        half = services.simulation_request(
            study=study, plan_key="manual", days=CHUNK_DAYS + 10, seed=8, user=owner
        )
    tasks.simulate_run_chunk.call(run_id=half.pk, chunk=0)
    return study


@pytest.mark.django_db(transaction=True)
def test_restore_into_an_empty_database_gives_back_every_row(settings, tmp_path, client):
    settings.TASKS = IMMEDIATE
    owner = make_user("olive")
    fill(owner)
    done = m.SimulationRun.objects.get(plan_key="auto")
    assert done.status == m.SimulationStatus.DONE and done.result
    assert m.SimulationRun.objects.get(plan_key="manual").chunks_done == 1
    for model in (m.Snapshot, m.Comment, m.Decision, m.WorkloadRating, m.SimulationChunk):
        assert model.objects.exists(), model
    assert m.AuditEntry.objects.count() >= 6
    before, hashes = rows_now(), study_hashes()
    path = tmp_path / "baton.jsonl.gz"

    call_command("backup", str(path), verbosity=0)
    # Readable by its owner only: it holds password hashes.
    assert stat.S_IMODE(os.stat(path).st_mode) == 0o600
    call_command("backup", "--verify", str(path), verbosity=0)
    manifest = read_file(path)[0]
    assert manifest["format"] == "baton-backup" and manifest["format_version"] == 1
    counts = {entry["model"]: entry["count"] for entry in manifest["models"]}
    assert counts == {label: len(rows) for label, rows in before.items()}
    for entry in manifest["models"]:
        if entry["count"] == 0:
            assert entry["sha256"] == EMPTY_SHA256

    # A new database: every table empty and every sequence back at 1 (as `flush` does,
    # with the sequences reset), so new rows would clash unless restore moves them on.
    connection.ops.execute_sql_flush(sql_flush(no_style(), connection, reset_sequences=True))
    selectors.study_cache_clear()
    assert total_rows() == 0
    call_command("restore", str(path), verbosity=0)

    after = rows_now()
    for label, rows in before.items():
        assert len(after[label]) == len(rows), label
        for was, now in zip(rows, after[label], strict=True):
            for name, value in was.items():
                assert now[name] == value, (label, was["id"], name)
    assert study_hashes() == hashes
    for snapshot in m.Snapshot.objects.all():
        assert services.snapshot_verify(snapshot)
        study = m.Study.objects.get(pk=snapshot.study_id)
        assert hashes[study.pk] == snapshot.sha256
    # Passwords came back as hashes: the person signs in with what they typed (through
    # the sign-in page: the attempt limit needs the request it comes with).
    signed_in = client.post("/accounts/login/", {"username": "rita", "password": PASSWORD})
    assert signed_in.status_code == 302 and "_auth_user_id" in client.session
    home = m.Study.objects.get(key="home-heating")
    assert client.get(f"/studies/{home.pk}/").status_code == 200
    # Sequences follow the restored keys: new rows get new numbers.
    largest = max(row["id"] for row in before["allocation.study"])
    fresh = services.study_import(
        data=json.loads(Path("allocation/examples/home-heating.json").read_text()), owner=owner
    )
    assert fresh.pk > largest


@pytest.fixture
def saved(db, study, owner, member_of, tmp_path) -> Path:
    """A backup of a small database (a study, a comment thread), then an empty database."""
    reviewer = member_of("reviewer")
    services.comment_post(study=study, user=reviewer, kind="task", key="T2", body="Why?")
    path = tmp_path / "small.jsonl.gz"
    call_command("backup", str(path), verbosity=0)
    empty_database()
    return path


def change_comment(lines):
    comment = next(line for line in lines if line.get("model") == "allocation.comment")
    comment["fields"]["body"] = "Something else"


def drop_a_task(lines):
    lines.remove(next(line for line in lines if line.get("model") == "allocation.task"))


def newer_format(lines):
    lines[0]["format_version"] = 2


TAMPERED = [
    (change_comment, "the rows of allocation.comment hash to"),
    (drop_a_task, "allocation.task has 2 rows but the manifest says 3"),
    (newer_format, "format version 2; this Baton reads version 1"),
]


@pytest.mark.parametrize(("tamper", "message"), TAMPERED, ids=lambda v: getattr(v, "__name__", ""))
def test_a_tampered_backup_is_refused_and_nothing_written(saved, tamper, message):
    lines = read_file(saved)
    assert sum(line.get("model") == "allocation.task" for line in lines) == 3
    tamper(lines)
    write_file(saved, lines, rehash=False)
    with pytest.raises(CommandError, match="Nothing was restored") as refused:
        call_command("restore", str(saved), verbosity=0)
    assert message in str(refused.value)
    assert total_rows() == 0
    with pytest.raises(CommandError) as checked:
        call_command("backup", "--verify", str(saved), verbosity=0)
    assert message in str(checked.value)


def test_a_damaged_or_foreign_file_is_refused(saved, tmp_path):
    data = saved.read_bytes()
    cut = tmp_path / "cut.jsonl.gz"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(CommandError, match="cut short"):
        call_command("restore", str(cut), verbosity=0)
    plain = tmp_path / "study.json"
    plain.write_text('{"format": 1}')
    with pytest.raises(CommandError, match="not a Baton backup \\(not a gzip file\\)"):
        call_command("backup", "--verify", str(plain), verbosity=0)
    stranger = tmp_path / "other.jsonl.gz"
    with gzip.open(stranger, "wt") as stream:
        stream.write('{"format": "something-else"}\n')
    with pytest.raises(CommandError, match="line 1 \\(the manifest\\): not a Baton backup"):
        call_command("restore", str(stranger), verbosity=0)
    with pytest.raises(CommandError, match="no such file"):
        call_command("restore", str(tmp_path / "missing.gz"), verbosity=0)
    assert total_rows() == 0


def test_a_row_the_database_refuses_rolls_back_everything(saved):
    """A file whose hashes check out but whose membership names a user it lacks: the
    rows before it are written, then the whole restore is rolled back."""
    lines = read_file(saved)
    membership = next(line for line in lines if line.get("model") == "allocation.membership")
    membership["fields"]["user"] = 999_999
    write_file(saved, lines, rehash=True)
    call_command("backup", "--verify", str(saved), verbosity=0)  # the hashes agree
    with pytest.raises(CommandError, match="Nothing was restored"):
        call_command("restore", str(saved), verbosity=0)
    assert total_rows() == 0


def test_restore_refuses_a_database_with_rows(saved):
    make_user("somebody")
    with pytest.raises(CommandError, match=r"not empty: auth\.user \(1 rows\)"):
        call_command("restore", str(saved), verbosity=0)
    assert total_rows() == 1


def test_fields_unknown_here_are_refused_and_missing_ones_take_their_defaults(saved):
    lines = read_file(saved)
    study_entry = next(e for e in lines[0]["models"] if e["model"] == "allocation.study")
    study_row = next(line for line in lines if line.get("model") == "allocation.study")
    # An older backup, made before Study had a description: the default fills it.
    study_entry["fields"].remove("description")
    del study_row["fields"]["description"]
    write_file(saved, lines, rehash=True)
    call_command("restore", str(saved), verbosity=0)
    assert m.Study.objects.get().description == ""
    empty_database()
    # A newer backup, with a field this Baton does not have: refused, by name.
    study_entry["fields"].append("colour")
    study_row["fields"]["colour"] = "blue"
    write_file(saved, lines, rehash=True)
    with pytest.raises(CommandError, match="allocation.study: the backup's fields colour"):
        call_command("restore", str(saved), verbosity=0)
    assert total_rows() == 0


def test_every_column_of_every_table_is_in_the_backup(saved):
    """Against the database's own description of each table, so fields added by a later
    migration are carried without the backup naming them."""
    manifest = read_file(saved)[0]
    by_label = {entry["model"]: entry for entry in manifest["models"]}
    assert set(by_label) == {model._meta.label_lower for model in backup.backed_up_models()}
    with connection.cursor() as cursor:
        for model in backup.backed_up_models():
            table = model._meta.db_table
            columns = {
                c.name for c in connection.introspection.get_table_description(cursor, table)
            }
            stored = {
                model._meta.get_field(name).column
                for name in by_label[model._meta.label_lower]["fields"]
            }
            assert stored == columns - {model._meta.pk.column}, table
    assert "password" in by_label["auth.user"]["fields"]


def downloads(client) -> dict[str, tuple[bytes, bytes]]:
    """Each study's study-file download (the view's bytes) and its first plan's XLSX
    export with a fixed export time, by study key."""
    from datetime import UTC, datetime

    from allocation.exports.source import export_source
    from allocation.exports.xlsx import allocation_xlsx

    selectors.study_cache_clear()
    found = {}
    for row in m.Study.objects.order_by("key"):
        study_file = client.get(f"/studies/{row.pk}/download")
        assert study_file.status_code == 200, row.key
        plan = selectors.study_document(row)["plans"][0]["id"]
        source = export_source(row, plan, now=datetime(2025, 3, 1, 9, 30, tzinfo=UTC))
        found[row.key] = (study_file.content, allocation_xlsx(source))
    return found


def test_restored_studies_download_and_export_the_same_bytes(db, tmp_path, client):
    """The example studies write their channel demands, stage splits, response times
    and levels with keys out of sorted order (visual before auditory, acquisition before
    action): the study file and the XLSX export of a restored database must be the bytes
    of the original's, which they are only if the backup keeps each value's key order."""
    owner = make_user("olive")
    client.force_login(owner)
    services.examples_load(owner=owner)
    example = json.loads(Path("allocation/examples/home-heating.json").read_text())
    demands = next(task["demands"] for task in example["tasks"] if "demands" in task)
    assert list(demands) != sorted(demands)  # the case the test is about
    before = downloads(client)
    assert set(before) == {"home-heating", "driver-support", "closed-loop-insulin"}
    # The downloaded study file keeps the example file's own order (its reference).
    home = json.loads(before["home-heating"][0])
    assert list(next(t["demands"] for t in home["tasks"] if "demands" in t)) == list(demands)
    path = tmp_path / "baton.jsonl.gz"
    call_command("backup", str(path), verbosity=0)
    empty_database()
    call_command("restore", str(path), verbosity=0)
    client.force_login(get_user_model().objects.get(username="olive"))
    after = downloads(client)
    for key, (study_file, workbook) in before.items():
        assert after[key][0] == study_file, f"{key}: study file"
        assert after[key][1] == workbook, f"{key}: XLSX export"
    # A file written before rows kept their order (every key sorted) checks against the
    # same manifest and restores the same studies: the hashes are over sorted keys.
    hashes = study_hashes()
    empty_database()
    write_file(path, read_file(path), rehash=False)
    call_command("backup", "--verify", str(path), verbosity=0)
    call_command("restore", str(path), verbosity=0)
    assert study_hashes() == hashes


def test_a_lone_surrogate_stored_before_text_was_checked_round_trips(db, study, tmp_path):
    """A lone surrogate (U+D800 has no UTF-8: The Unicode Standard 15.0, §3.9, D76 and
    Table 3-7) kept in JSON values on SQLite, as an import did before the reader refused
    it. Backup, verify and restore pass, and every row reads back as it was stored."""
    if connection.vendor != "sqlite":
        pytest.skip("PostgreSQL's jsonb refuses a lone surrogate when it is stored")
    # Written as the database keeps them, around the models' own checks.
    m.AuditEntry.objects.filter(
        pk=m.AuditEntry.objects.create(
            study_key=study.key, action="study.import", source=m.AuditSource.COMMAND
        ).pk
    ).update(after={"description": "heat\ud800ing", "ke\udfffy": ["\\\udc00"]})
    m.Study.objects.filter(pk=study.pk).update(risk_policy={"note": "\udbff"})
    before = rows_now()
    assert any(
        (row["after"] or {}).get("description") == "heat\ud800ing"
        for row in before["allocation.auditentry"]
    )
    path = tmp_path / "surrogates.jsonl.gz"
    call_command("backup", str(path), verbosity=0)
    call_command("backup", "--verify", str(path), verbosity=0)
    # The file is UTF-8 throughout (a strict decoder reads it), the escapes in it.
    text = gzip.decompress(path.read_bytes()).decode("utf-8", errors="strict")
    assert '"heat\\ud800ing"' in text
    empty_database()
    call_command("restore", str(path), verbosity=0)
    assert rows_now() == before
