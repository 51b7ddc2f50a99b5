"""Snapshots: freeze, verify, restore, differences, their screens and the command.

The hash is checked against one computed outside the database: the canonical text of
the imported study file itself (``tests/core/test_canonical.py`` checks that text
against RFC 8785 and SHA-256 against FIPS 180-2), and against the ``rfc8785`` package's
text hashed with :mod:`hashlib`. Snapshots taken before Baton adopted RFC 8785 are
stored here as a canonical text of that first form written out by hand. CI runs these
tests on SQLite and on PostgreSQL, so the same expected hash holds on both.
"""

from __future__ import annotations

import hashlib
import io
import json

import pytest
import rfc8785
from django.core.exceptions import PermissionDenied
from django.core.management import CommandError, call_command
from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core import StudyInvalid, read_study
from allocation.core.canonical import canonical_json, canonical_text, digest
from allocation.selectors import snapshots as reads

HX = {"HX-Request": "true"}


@pytest.fixture
def frozen(study, owner) -> m.Snapshot:
    return services.snapshot_create(study=study, title="Agreed at the workshop", user=owner)


def expected_hash(document: dict) -> str:
    """The hash of the study file as written, computed without the database."""
    return digest(canonical_json(document))


def current_hash(row: m.Study) -> str:
    return digest(canonical_text(selectors.study_load(row).study))


# -- services ---------------------------------------------------------------------------


def test_import_then_freeze_gives_the_hash_of_the_file(study, frozen, heating_document):
    assert frozen.sha256 == expected_hash(heating_document)
    assert frozen.sha256 == digest(canonical_text(read_study(heating_document)))
    assert frozen.canonical == canonical_json(heating_document)
    assert (frozen.study_key, frozen.study_title) == ("home-heating", "Home heating schedule")
    assert frozen.author_name == "olive"


def test_freezing_twice_gives_the_same_hash(study, owner, frozen):
    again = services.snapshot_create(study=study, title="Again", user=owner)
    assert again.sha256 == frozen.sha256 and again.pk != frozen.pk


def test_snapshot_keeps_each_plans_headline(study, frozen):
    stored = m.Snapshot.objects.get(pk=frozen.pk)
    for plan in ("manual", "auto"):
        headline = selectors.plan_analysis(study, plan).headline()
        assert stored.headlines[plan] == pytest.approx(headline)


def test_freezing_writes_an_audit_entry(study, frozen):
    entry = m.AuditEntry.objects.filter(study=study, action="snapshot.create").get()
    assert entry.after == {"title": "Agreed at the workshop", "sha256": frozen.sha256}


def test_a_snapshot_is_never_changed(frozen):
    frozen.title = "Other"
    with pytest.raises(ValueError):
        frozen.save()


@pytest.mark.parametrize("title", ["", "   ", "x" * 201])
def test_a_bad_title_stores_nothing(study, owner, title):
    with pytest.raises(StudyInvalid):
        services.snapshot_create(study=study, title=title, user=owner)
    assert not m.Snapshot.objects.exists()
    assert not m.AuditEntry.objects.filter(action="snapshot.create").exists()


@pytest.mark.parametrize("role", ["viewer", "reviewer"])
def test_only_editors_and_owners_freeze(study, member_of, role):
    with pytest.raises(PermissionDenied):
        services.snapshot_create(study=study, title="T", user=member_of(role))
    editor = member_of("editor", "eddie")
    assert services.snapshot_create(study=study, title="T", user=editor).author == editor


def test_verify_passes_then_a_changed_byte_fails(frozen):
    assert services.snapshot_verify(frozen)
    text = frozen.canonical
    position = text.index("Lower the set point")
    # Change the stored text behind the model's back, as a damaged database would.
    m.Snapshot.objects.filter(pk=frozen.pk).update(
        canonical=text[:position] + "l" + text[position + 1 :]
    )
    assert not services.snapshot_verify(m.Snapshot.objects.get(pk=frozen.pk))


def test_verify_fails_a_rehashed_text_that_is_not_canonical(frozen):
    spaced = frozen.canonical.replace(",", ", ", 1)
    m.Snapshot.objects.filter(pk=frozen.pk).update(canonical=spaced, sha256=digest(spaced))
    assert not services.snapshot_verify(m.Snapshot.objects.get(pk=frozen.pk))


def test_restore_gives_a_new_study_with_the_same_hash(study, owner, member_of, frozen):
    editor = member_of("editor")
    restored = services.snapshot_restore(snapshot=frozen, user=editor)
    assert restored.pk != study.pk
    assert restored.memberships.get().user == editor
    assert restored.memberships.get().role == m.Role.OWNER
    assert current_hash(restored) == frozen.sha256
    entry = m.AuditEntry.objects.filter(study=restored, action="snapshot.restore").get()
    assert entry.after["sha256"] == frozen.sha256


def test_restore_after_edits_brings_back_the_frozen_study(study, owner, frozen):
    services.task_save(study=study, key="T2", item={**read_task(study, "T2"), "title": "Changed"})
    assert current_hash(study) != frozen.sha256
    restored = services.snapshot_restore(snapshot=frozen, user=owner)
    assert current_hash(restored) == frozen.sha256


def test_restore_under_another_id(frozen, owner):
    restored = services.snapshot_restore(snapshot=frozen, user=owner, key="heating-copy")
    assert restored.key == "heating-copy"
    assert current_hash(restored) != frozen.sha256


def test_restore_with_a_bad_id_stores_nothing(frozen, owner):
    count = m.Study.objects.count()
    with pytest.raises(StudyInvalid):
        services.snapshot_restore(snapshot=frozen, user=owner, key="no spaces allowed")
    assert m.Study.objects.count() == count


def test_a_damaged_snapshot_is_not_restored(frozen, owner):
    m.Snapshot.objects.filter(pk=frozen.pk).update(canonical=frozen.canonical.replace("2", "3", 1))
    count = m.Study.objects.count()
    with pytest.raises(services.SnapshotDamaged):
        services.snapshot_restore(snapshot=m.Snapshot.objects.get(pk=frozen.pk), user=owner)
    assert m.Study.objects.count() == count


def test_reviewers_may_not_restore(frozen, member_of):
    with pytest.raises(PermissionDenied):
        services.snapshot_restore(snapshot=frozen, user=member_of("reviewer"))


# -- canonical forms ----------------------------------------------------------------------

#: A study file in Baton's first canonical form ("baton-1"), written out by hand: keys
#: sorted, no spaces, and a longest duration of 2**53 + 1 seconds kept to the digit (the
#: RFC 8785 form refuses it: RFC 7493 §2.2).
OLD_TEXT = (
    '{"agents":[{"id":"pilot","kind":"human","name":"Pilot"}],'
    '"events":[{"id":"start","name":"Start of the flight","times":["08:00"]}],'
    '"format":"baton.study","links":[],'
    '"plans":[{"assignments":{"T1":{"human":"pilot"}},"id":"manual","name":"Pilot does it"}],'
    '"study":{"id":"fuel-check","scale":"sv10","title":"Fuel check"},'
    '"tasks":[{"duration_s":[2,5,9007199254740993],"id":"T1","occurs":{"event":"start"},'
    '"severity":2,"title":"Check the fuel"}],"version":1}'
)


def stored_before(study: m.Study, text: str, **fields) -> m.Snapshot:
    """A snapshot row as Baton stored one before it recorded canonical forms: the text,
    its SHA-256 from hashlib, and no form of its own (the migration's default)."""
    return m.Snapshot.objects.create(
        study=study,
        study_key=study.key,
        study_title=study.title,
        title="Taken before RFC 8785",
        author_name="olive",
        sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        canonical=text,
        headlines={},
        baton_version="0.1.0",
        **fields,
    )


def test_a_new_snapshot_is_the_text_rfc8785_writes(frozen, heating_document):
    """RFC 8785, as written by the ``rfc8785`` package and hashed by hashlib."""
    assert frozen.canonical_form == "rfc8785"
    assert frozen.canonical.encode("utf-8") == rfc8785.dumps(heating_document)
    assert frozen.sha256 == hashlib.sha256(rfc8785.dumps(heating_document)).hexdigest()


def test_an_old_snapshot_still_verifies(study):
    old = stored_before(study, OLD_TEXT)
    assert old.canonical_form == "baton-1"
    assert services.snapshot_verify(m.Snapshot.objects.get(pk=old.pk))
    # Read in the current form instead, the same text fails: why the form is recorded.
    m.Snapshot.objects.filter(pk=old.pk).update(canonical_form="rfc8785")
    assert not services.snapshot_verify(m.Snapshot.objects.get(pk=old.pk))


def test_an_old_snapshot_of_the_same_study_has_the_new_snapshots_hash(study, frozen):
    """Without whole numbers beyond 2**53 − 1 nothing changed: a text of the first form
    (here the package's text of the same study file) verifies, and hashes as now."""
    old = stored_before(study, frozen.canonical)
    assert services.snapshot_verify(old) and old.sha256 == frozen.sha256


def test_a_tampered_old_snapshot_fails_and_is_not_restored(study, owner):
    old = stored_before(study, OLD_TEXT)
    changed = OLD_TEXT.replace("Check the fuel", "Check the fuek")
    m.Snapshot.objects.filter(pk=old.pk).update(canonical=changed)
    old = m.Snapshot.objects.get(pk=old.pk)
    assert not services.snapshot_verify(old)
    count = m.Study.objects.count()
    with pytest.raises(services.SnapshotDamaged):
        services.snapshot_restore(snapshot=old, user=owner)
    assert m.Study.objects.count() == count
    m.Snapshot.objects.filter(pk=old.pk).update(canonical=OLD_TEXT, canonical_form="other")
    assert not services.snapshot_verify(m.Snapshot.objects.get(pk=old.pk))


def test_an_old_snapshot_restores_exactly_and_refreezing_names_the_number(client, study, owner):
    """The restored study keeps 2**53 + 1 to the digit; freezing it is refused with the
    path of that number, on the screen too, and nothing is stored."""
    old = stored_before(study, OLD_TEXT)
    restored = services.snapshot_restore(snapshot=old, user=owner)
    assert read_task(restored, "T1")["duration_s"][2] == 2**53 + 1
    with pytest.raises(StudyInvalid) as caught:
        services.snapshot_create(study=restored, title="Again", user=owner)
    assert [problem.path for problem in caught.value.errors] == ["$.tasks[0].duration_s[2]"]
    client.force_login(owner)
    response = client.post(url("snapshot-create", restored), {"title": "Again"})
    assert response.status_code == 400
    assert "$.tasks[0].duration_s[2]" in response.content.decode()
    assert not restored.snapshots.exists()
    # The differences still read both sides: nothing changed, and now has no hash.
    now = reads.study_now(restored)
    assert now.sha256 is None
    assert reads.version_difference(reads.snapshot_version(old), now).same


def read_task(row: m.Study, key: str) -> dict:
    return next(t for t in selectors.study_document(row)["tasks"] if t["id"] == key)


def test_difference_between_a_snapshot_and_now(study, owner, frozen):
    services.task_save(study=study, key="T2", item={**read_task(study, "T2"), "severity": 3})
    difference = reads.version_difference(reads.snapshot_version(frozen), reads.study_now(study))
    assert [(c.kind, c.key, c.field, c.before, c.after) for c in difference.changes] == [
        ("tasks", "T2", "severity", 2, 3)
    ]
    plans = {row.plan for row in difference.headlines}
    assert plans == {"manual", "auto"}


def test_snapshots_of_other_studies_are_not_found(study, frozen, owner, heating_document):
    heating_document["study"]["id"] = "other"
    other = services.study_import(data=heating_document, owner=owner)
    assert reads.snapshot_for_study(study=other, pk=frozen.pk) is None
    assert reads.snapshot_for_study(study=study, pk="x") is None
    assert reads.snapshot_for_study(study=study, pk=str(frozen.pk)) == frozen


# -- screens ----------------------------------------------------------------------------


def url(name: str, study: m.Study, **query) -> str:
    from urllib.parse import urlencode

    base = reverse(name, args=[study.pk])
    return f"{base}?{urlencode(query)}" if query else base


def test_list_page_and_fragment(client, study, owner, frozen):
    client.force_login(owner)
    page = client.get(url("study-snapshots", study)).content.decode()
    assert "Agreed at the workshop" in page and frozen.sha256[:12] in page
    assert 'id="snapshot-region"' in page and "RFC 8785" in page and "Cautions" in page
    assert 'aria-current="page">Snapshots' in page
    fragment = client.get(url("study-snapshots", study), headers=HX).content.decode()
    assert fragment.lstrip().startswith('<div id="snapshot-region">')
    assert "<footer" not in fragment


def test_list_is_empty_before_the_first_freeze(client, study, member_of):
    client.force_login(member_of("viewer"))
    page = client.get(url("study-snapshots", study)).content.decode()
    assert "No snapshots yet" in page and 'name="title"' not in page


def test_freeze_from_the_screen(client, study, owner):
    client.force_login(owner)
    response = client.post(url("snapshot-create", study), {"title": "Workshop 1"})
    assert response.status_code == 302
    snapshot = m.Snapshot.objects.get()
    assert snapshot.sha256 == current_hash(study)
    entry = m.AuditEntry.objects.get(action="snapshot.create")
    assert (entry.username, entry.source) == ("olive", m.AuditSource.SCREEN)
    fragment = client.post(url("snapshot-create", study), {"title": "Again"}, headers=HX)
    text = fragment.content.decode()
    assert fragment.status_code == 200 and text.lstrip().startswith('<div id="snapshot-region">')
    assert "Frozen as" in text and "Again" in text


def test_freeze_with_an_empty_title_says_so(client, study, owner):
    client.force_login(owner)
    response = client.post(url("snapshot-create", study), {"title": "  "})
    assert response.status_code == 400
    assert "Title is empty" in response.content.decode()
    fragment = client.post(url("snapshot-create", study), {"title": ""}, headers=HX)
    assert "Title is empty" in fragment.content.decode()
    assert not m.Snapshot.objects.exists()


def test_freeze_escapes_the_title(client, study, owner):
    client.force_login(owner)
    client.post(url("snapshot-create", study), {"title": "<script>x</script>"})
    page = client.get(url("study-snapshots", study)).content.decode()
    assert "<script>x</script>" not in page and "&lt;script&gt;x&lt;/script&gt;" in page


@pytest.mark.parametrize("role", ["viewer", "reviewer"])
def test_freeze_and_restore_need_the_editor_role(client, study, member_of, frozen, role):
    client.force_login(member_of(role))
    assert client.post(url("snapshot-create", study), {"title": "T"}).status_code == 403
    posted = client.post(url("snapshot-restore", study), {"snapshot": frozen.pk})
    assert posted.status_code == 403
    assert m.Snapshot.objects.count() == 1 and m.Study.objects.count() == 1


def test_verify_one_as_a_fragment_and_all_as_a_page(client, study, member_of, frozen):
    client.force_login(member_of("viewer"))
    cell = client.get(url("snapshot-verify", study, snapshot=frozen.pk), headers=HX)
    text = cell.content.decode()
    assert text.startswith(f'<td id="snapshot-verify-{frozen.pk}"') and "✓" in text
    page = client.get(url("snapshot-verify", study, snapshot=frozen.pk)).content.decode()
    assert "✓ matches its hash" in page and "<footer" in page
    m.Snapshot.objects.filter(pk=frozen.pk).update(canonical=frozen.canonical + " ")
    page = client.get(url("snapshot-verify", study)).content.decode()
    assert "✗ does not match its hash" in page
    assert client.get(url("snapshot-verify", study, snapshot=999999)).status_code == 404


def test_restore_from_the_screen_opens_the_new_study(client, study, owner, frozen):
    client.force_login(owner)
    response = client.post(url("snapshot-restore", study), {"snapshot": frozen.pk, "key": ""})
    restored = m.Study.objects.exclude(pk=study.pk).get()
    assert response.status_code == 302
    assert response["Location"] == reverse("study-detail", args=[restored.pk])
    assert current_hash(restored) == frozen.sha256


def test_restore_with_a_bad_id_shows_where(client, study, owner, frozen):
    client.force_login(owner)
    response = client.post(url("snapshot-restore", study), {"snapshot": frozen.pk, "key": "a b"})
    assert response.status_code == 400
    assert "Not restored: the id" in response.content.decode()
    assert m.Study.objects.count() == 1


def test_difference_page_and_fragment(client, study, owner, frozen):
    services.task_save(study=study, key="T2", item={**read_task(study, "T2"), "severity": 3})
    client.force_login(owner)
    address = url("snapshot-difference", study, **{"from": frozen.pk, "to": "now"})
    page = client.get(address).content.decode()
    assert 'id="difference-tasks"' in page and "severity" in page
    assert "Headline figures" in page and "Method." in page
    fragment = client.get(address, headers=HX).content.decode()
    assert fragment.lstrip().startswith('<div id="snapshot-difference">')
    assert 'id="difference-tasks"' in fragment and "<footer" not in fragment


def test_difference_between_two_snapshots_with_no_change(client, study, owner, frozen):
    second = services.snapshot_create(study=study, title="Second", user=owner)
    client.force_login(owner)
    address = url("snapshot-difference", study, **{"from": frozen.pk, "to": second.pk})
    page = client.get(address).content.decode()
    assert "No differences: both versions have the same hash." in page


def test_difference_names_a_missing_snapshot(client, study, owner, frozen):
    client.force_login(owner)
    page = client.get(url("snapshot-difference", study, **{"from": "12345"})).content.decode()
    assert "This study has no snapshot “12345”" in page


def test_difference_without_snapshots_is_an_empty_state(client, study, owner):
    client.force_login(owner)
    response = client.get(url("snapshot-difference", study))
    assert response.status_code == 200 and "No snapshots yet" in response.content.decode()


def test_list_query_count_is_fixed(client, study, owner, django_assert_max_num_queries):
    """The list costs the same queries with one snapshot as with five."""
    client.force_login(owner)
    services.snapshot_create(study=study, title="one", user=owner)
    client.get(url("study-snapshots", study))
    with django_assert_max_num_queries(30) as one:
        client.get(url("study-snapshots", study))
    for index in range(4):
        services.snapshot_create(study=study, title=f"more {index}", user=owner)
    with django_assert_max_num_queries(len(one.captured_queries)):
        client.get(url("study-snapshots", study))


# -- command ----------------------------------------------------------------------------


def test_command_prints_the_hash(study, owner, heating_document):
    out, err = io.StringIO(), io.StringIO()
    call_command(
        "snapshot",
        "home-heating",
        "--title",
        "From the shell",
        "--user",
        "olive",
        stdout=out,
        stderr=err,
    )
    assert out.getvalue().strip() == expected_hash(heating_document)
    snapshot = m.Snapshot.objects.get()
    assert snapshot.title == "From the shell" and snapshot.author == owner
    entry = m.AuditEntry.objects.get(action="snapshot.create")
    assert entry.source == m.AuditSource.COMMAND


def test_command_refuses_a_non_member_and_an_unknown_study(study, member_of):
    from tests.web.conftest import make_user

    make_user("stranger")
    with pytest.raises(CommandError, match="editor or owner"):
        call_command("snapshot", str(study.pk), "--title", "T", "--user", "stranger")
    with pytest.raises(CommandError, match="no study"):
        call_command("snapshot", "nope", "--title", "T", "--user", "stranger")
    with pytest.raises(CommandError):
        call_command("snapshot", str(study.pk))
    assert not m.Snapshot.objects.exists()


def test_snapshot_text_is_json_of_the_study(frozen, heating_document):
    assert json.loads(frozen.canonical) == heating_document
