"""The audit trail: a change from every entry point is recorded with
its user and source, with its values before and after; the History page filters, pages
and exports it; entries are never changed.

The expected before/after values are the home-heating test study file (the fixture),
edited by hand: only the parts that differ are kept.
"""

from __future__ import annotations

import copy
import csv
import datetime
import io
import json
from io import StringIO

import pytest
from django.core.management import call_command
from django.urls import reverse
from django.utils import timezone

from allocation import __version__, audit, selectors, services
from allocation import models as m
from allocation.core import StudyInvalid
from allocation.core.cautions import CAUTIONS
from allocation.selectors import history as trail

from .conftest import make_user

HTMX = {"HX-Request": "true"}


def entries(study: m.Study, action: str | None = None) -> list[m.AuditEntry]:
    found = m.AuditEntry.objects.filter(study=study).order_by("pk")
    return list(found.filter(action=action) if action else found)


def history_url(study: m.Study, **query: str) -> str:
    url = reverse("study-history", args=[study.pk])
    return url + ("?" + "&".join(f"{k}={v}" for k, v in query.items()) if query else "")


# -- every entry point --------------------------------------------------------------


def test_a_form_post_on_a_screen_is_recorded_as_screen_by_its_user(client, study, owner):
    client.force_login(owner)
    response = client.post(
        reverse("inventory-item", args=[study.pk, "agents", "thermostat"]),
        {"id": "thermostat", "name": "Smart thermostat", "kind": "automation"},
    )
    assert response.status_code == 302
    (entry,) = entries(study, "agent.save")
    assert (entry.source, entry.user, entry.username) == ("screen", owner, "olive")
    assert entry.target == "agent thermostat"
    assert entry.before["agents"][0]["name"] == "Thermostat"
    assert entry.after["agents"][0]["name"] == "Smart thermostat"


def test_an_upload_is_recorded_as_import(client, owner, heating_document):
    client.force_login(owner)
    upload = io.BytesIO(json.dumps(heating_document).encode())
    upload.name = "heating.json"
    response = client.post(reverse("study-upload"), {"file": upload})
    assert response.status_code == 302
    study = m.Study.objects.get()
    (entry,) = entries(study)
    assert (entry.action, entry.source, entry.username) == ("study.import", "import", "olive")
    assert entry.target == "study home-heating"
    # The whole study file is the "after" of an import (the study file's own form).
    assert entry.before is None and entry.after == selectors.study_document(study)


def test_import_study_command_is_recorded_as_command(tmp_path, heating_document, db, settings):
    settings.DATA_DIR = tmp_path
    make_user("carol")
    source = tmp_path / "in.json"
    source.write_text(json.dumps(heating_document))
    call_command("import_study", str(source), "--owner", "carol", stdout=StringIO())
    (entry,) = entries(m.Study.objects.get())
    assert (entry.action, entry.source, entry.username) == ("study.import", "command", "carol")


def test_load_examples_is_recorded_as_command(db, tmp_path, settings):
    settings.DATA_DIR = tmp_path
    make_user("carol")
    call_command("load_examples", "--owner", "carol", stdout=StringIO())
    studies = m.Study.objects.all()
    assert studies.count() >= 3
    for study in studies:
        (entry,) = entries(study)
        assert (entry.action, entry.source, entry.username) == ("study.import", "command", "carol")


@pytest.fixture
def staff(db):
    user = make_user("admin-ann")
    user.is_staff = user.is_superuser = True
    user.save()
    return user


def test_an_admin_change_is_recorded_as_admin_and_moves_the_version(client, study, staff):
    task = study.tasks.get(key="T2")
    version = m.Study.objects.get(pk=study.pk).updated_at
    before_document = copy.deepcopy(selectors.study_document(study))
    client.force_login(staff)
    url = reverse("admin:allocation_task_change", args=[task.pk])
    form = client.get(url).context["adminform"].form
    data = {name: form[name].value() for name in form.fields}
    data = {k: ("" if v is None else v) for k, v in data.items()}
    for name in ("occurs", "duration_s", "demands", "split", "needs"):
        value = getattr(task, name)
        data[name] = "null" if value is None else json.dumps(value)
    data["title"] = "Lower the set point by hand"
    response = client.post(url, data)
    assert response.status_code == 302, response.content.decode()[:2000]
    (entry,) = entries(study, "task.save")
    assert (entry.source, entry.username, entry.target) == ("admin", "admin-ann", "task T2")
    old_t2 = next(t for t in before_document["tasks"] if t["id"] == "T2")
    assert entry.before == {"tasks": [old_t2]}
    assert entry.after == {"tasks": [{**old_t2, "title": "Lower the set point by hand"}]}
    # The version moved, so pages read the change (the cache is per version).
    assert m.Study.objects.get(pk=study.pk).updated_at > version
    titles = {t["id"]: t["title"] for t in selectors.study_document(study)["tasks"]}
    assert titles["T2"] == "Lower the set point by hand"


def test_an_admin_deletion_is_recorded_and_moves_the_version(client, study, staff):
    link = study.links.get()
    version = m.Study.objects.get(pk=study.pk).updated_at
    client.force_login(staff)
    url = reverse("admin:allocation_link_delete", args=[link.pk])
    assert client.post(url, {"post": "yes"}).status_code == 302
    (entry,) = entries(study, "link.delete")
    assert entry.source == "admin" and entry.target == "link T1 precedes T2"
    assert entry.before == {
        "links": [{"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 60]}]
    }
    assert entry.after == {"links": []}
    assert m.Study.objects.get(pk=study.pk).updated_at > version
    assert selectors.study_document(study)["links"] == []


def test_admin_bulk_delete_is_recorded_per_study(client, study, staff):
    client.force_login(staff)
    assignments = m.Assignment.objects.filter(plan__study=study, plan__key="manual")
    response = client.post(
        reverse("admin:allocation_assignment_changelist"),
        {
            "action": "delete_selected",
            "post": "yes",
            "_selected_action": [str(pk) for pk in assignments.values_list("pk", flat=True)],
        },
    )
    assert response.status_code == 302
    (entry,) = entries(study, "assignment.delete")
    assert entry.before == {
        "plans": [
            {
                "id": "manual",
                "assignments": {"T1": {"human": "resident"}, "T2": {"human": "resident"}},
            }
        ]
    }
    assert entry.after == {"plans": [{"id": "manual", "assignments": {}}]}


def test_outside_any_entry_point_the_system_is_named(study):
    services.plan_save(study=study, key="manual", item={"id": "manual", "name": "By hand"})
    (entry,) = entries(study, "plan.save")
    assert (entry.source, entry.user, entry.username) == ("system", None, "")


# -- what is recorded ---------------------------------------------------------------


def test_an_edit_keeps_only_the_item_before_and_after(study, owner, heating_document):
    with audit.acting(owner, m.AuditSource.SCREEN):
        services.assignment_set(
            study=study,
            plan_key="auto",
            task_key="T2",
            item={"human": "resident", "automation": "thermostat", "levels": 5},
        )
    (entry,) = entries(study, "assignment.set")
    old = heating_document["plans"][1]["assignments"]["T2"]
    assert entry.target == "plan auto / task T2"
    assert entry.before == {"plans": [{"id": "auto", "assignments": {"T2": old}}]}
    assert entry.after == {
        "plans": [
            {
                "id": "auto",
                "assignments": {
                    "T2": {"human": "resident", "automation": "thermostat", "levels": 5}
                },
            }
        ]
    }
    lines = {
        change.path: (change.before, change.after)
        for change in trail.changes(entry.before, entry.after)
    }
    assert lines["plans[auto].assignments.T2.levels"] == (7, 5)
    assert lines["plans[auto].assignments.T2.rationale"] == (old["rationale"], trail.MISSING)


def test_a_rename_records_what_followed_it(study, heating_document):
    """Renaming T2 moves its link and its assignments too; the entry holds them all."""
    t2 = {**heating_document["tasks"][2], "id": "T9"}
    services.task_save(study=study, key="T2", item=t2)
    (entry,) = entries(study, "task.save")
    assert entry.target == "task T2 (now T9)"
    assert [t["id"] for t in entry.before["tasks"]] == ["T2"]
    assert [t["id"] for t in entry.after["tasks"]] == ["T9"]
    assert entry.after["links"] == [{**heating_document["links"][0], "to": "T9"}]
    assert {p["id"] for p in entry.after["plans"]} == {"manual", "auto"}


def test_a_mode_map_edit_and_an_assumption_are_recorded(study, owner):
    services.mode_initial_set(study=study, plan_key="auto", key="hold")
    (entry,) = entries(study, "mode.initial")
    assert entry.target == "plan auto / mode hold"
    assert entry.before["plans"][0]["modes"]["initial"] == "schedule"
    assert entry.after["plans"][0]["modes"]["initial"] == "hold"
    services.study_assumption_set(study=study, key="monitoring_s", value=20, user=owner)
    (entry,) = entries(study, "assumption.set")
    assert entry.before == {"study": {"assumptions": {}}}
    assert entry.after == {"study": {"assumptions": {"monitoring_s": 20}}}


def test_an_edit_refused_by_the_checks_records_nothing(client, study, owner):
    client.force_login(owner)
    count = m.AuditEntry.objects.count()
    with pytest.raises(StudyInvalid):
        services.task_save(
            study=study, key="T2", item={"id": "T2", "title": "x", "duration_s": [30, 10, 20]}
        )
    response = client.post(
        reverse("inventory-item", args=[study.pk, "tasks", "T2"]),
        {
            "id": "T2",
            "title": "x",
            "parent": "G1",
            "duration_low": "30",
            "duration_typical": "10",
            "duration_high": "20",
        },
        headers=HTMX,
    )
    assert response.status_code == 200
    assert m.AuditEntry.objects.count() == count


def test_a_change_that_changes_nothing_is_not_recorded(study, heating_document):
    services.agent_save(study=study, key="resident", item=heating_document["agents"][0])
    assert entries(study, "agent.save") == []


# -- immutability -------------------------------------------------------------------


def test_an_entry_is_never_changed(study):
    entry = entries(study)[0]
    entry.target = "something else"
    with pytest.raises(ValueError, match="never changed"):
        entry.save()
    assert m.AuditEntry.objects.get(pk=entry.pk).target == "study home-heating"


def test_the_admin_shows_entries_but_cannot_change_or_delete_them(client, study, staff):
    entry = entries(study)[0]
    client.force_login(staff)
    change = reverse("admin:allocation_auditentry_change", args=[entry.pk])
    page = client.get(change)
    assert page.status_code == 200 and "Save" not in page.content.decode().split("<form")[-1]
    client.post(change, {"target": "edited"})
    assert (
        client.get(reverse("admin:allocation_auditentry_delete", args=[entry.pk])).status_code
        == 403
    )
    assert client.get(reverse("admin:allocation_auditentry_add")).status_code == 403
    assert m.AuditEntry.objects.get(pk=entry.pk).target == "study home-heating"


def test_entries_outlive_their_study(study):
    pk = study.pk
    study.delete()
    entry = m.AuditEntry.objects.get(study_key="home-heating")
    assert entry.study is None and entry.action == "study.import"
    assert not m.Study.objects.filter(pk=pk).exists()


def test_the_history_page_offers_no_way_to_change_entries(client, study, owner):
    client.force_login(owner)
    assert client.post(history_url(study)).status_code == 405


# -- the History page ---------------------------------------------------------------


@pytest.fixture
def busy_study(study, owner, member_of):
    """The study (imported by the fixture outside any entry point: the system) with edits
    by two people from two entry points, a day later."""
    editor = member_of("editor", "ed")
    with audit.acting(owner, m.AuditSource.SCREEN):
        services.plan_save(study=study, key="manual", item={"id": "manual", "name": "By hand"})
    with audit.acting(editor, m.AuditSource.COMMAND):
        services.assignment_set(study=study, plan_key="manual", task_key="T1", item=None)
    yesterday = timezone.now() - datetime.timedelta(days=1)
    # The import happened "yesterday" (set in the database; entries refuse save()).
    m.AuditEntry.objects.filter(study=study, action="study.import").update(at=yesterday)
    return study


def test_the_page_lists_entries_newest_first(client, busy_study, member_of):
    client.force_login(member_of("viewer"))
    response = client.get(history_url(busy_study))
    assert response.status_code == 200
    page = response.content.decode()
    assert 'id="history-entries"' in page and "History</a>" in page
    first, second, third = (
        page.index(a) for a in ("assignment.delete", "plan.save", "study.import")
    )
    assert first < second < third
    # Before and after side by side, escaped; and field by field.
    assert "plans[manual].name" in page and "&quot;Resident does it&quot;" in page
    assert "Created with </" not in page and "the whole study file: 2 agents, 1 events" in page


@pytest.mark.parametrize(
    ("query", "actions"),
    [
        ({"who": "ed"}, ["assignment.delete"]),
        ({"who": "olive"}, ["plan.save"]),
        ({"who": "(system)"}, ["study.import"]),
        ({"action": "plan.save"}, ["plan.save"]),
        ({"source": "command"}, ["assignment.delete"]),
        ({"text": "t1"}, ["assignment.delete"]),
        ({"since": "TODAY"}, ["assignment.delete", "plan.save"]),
        ({"until": "YESTERDAY"}, ["study.import"]),
        ({"since": "YESTERDAY", "until": "YESTERDAY"}, ["study.import"]),
    ],
)
def test_the_filters(client, busy_study, owner, query, actions):
    today = timezone.localdate()
    days = {"TODAY": today, "YESTERDAY": today - datetime.timedelta(days=1)}
    query = {k: days[v].isoformat() if v in days else v for k, v in query.items()}
    client.force_login(owner)
    fragment = client.get(history_url(busy_study, **query), headers=HTMX).content.decode()
    assert fragment.startswith('<section class="panel" id="history-entries">')
    shown = [a for a in ("assignment.delete", "plan.save", "study.import") if f">{a}<" in fragment]
    assert shown == actions


def test_a_bad_date_says_which_filter_is_wrong(client, busy_study, owner):
    client.force_login(owner)
    page = client.get(history_url(busy_study, since="2024-13-40")).content.decode()
    assert "From: is not a date; write it as YYYY-MM-DD (this filter is not applied)" in page
    page = client.get(
        history_url(busy_study, since="2025-02-02", until="2025-02-01")
    ).content.decode()
    assert "To: is before the From date" in page


def test_the_page_is_paged(client, study, owner):
    for number in range(30):
        services.plan_save(
            study=study, key="manual", item={"id": "manual", "name": f"Plan {number}"}
        )
    client.force_login(owner)
    first = client.get(history_url(study)).content.decode()
    assert "31 entries" in first and "page 1 of 2" in first
    assert "Plan 29" in first and "Older" in first
    second = client.get(history_url(study, page="2"), headers=HTMX).content.decode()
    assert "study.import" in second and "Plan 29" not in second and "Newer" in second


def test_the_page_query_count_does_not_grow_with_entries(
    client, study, owner, django_assert_max_num_queries
):
    for number in range(20):
        services.plan_save(
            study=study, key="manual", item={"id": "manual", "name": f"Plan {number}"}
        )
    client.force_login(owner)
    client.get(history_url(study))
    with django_assert_max_num_queries(12):
        client.get(history_url(study))


# -- the exports --------------------------------------------------------------------


def test_the_csv_export_names_the_study_version_and_cautions(client, busy_study, member_of):
    client.force_login(member_of("viewer"))
    response = client.get(reverse("study-history-csv", args=[busy_study.pk]) + "?who=olive")
    assert response["Content-Disposition"] == 'attachment; filename="home-heating.history.csv"'
    rows = list(csv.reader(response.content.decode().splitlines()))
    header = [row[0] for row in rows if row[0].startswith("# ")]
    assert header[0] == "# Baton audit trail"
    assert f"# study: home-heating (Home heating schedule), number {busy_study.pk}" in header
    assert f"# Baton version: {__version__}" in header
    assert "# filters: who=olive" in header
    assert f"# cautions: {CAUTIONS}" in header
    exported = next(line for line in header if line.startswith("# exported: "))
    assert datetime.datetime.fromisoformat(exported.removeprefix("# exported: ")) <= timezone.now()
    table = [row for row in rows if not row[0].startswith("# ")]
    assert table[0] == ["id", "at", "who", "source", "action", "target", "before", "after"]
    (row,) = [dict(zip(table[0], row, strict=True)) for row in table[1:]]
    assert (row["action"], row["who"], row["source"]) == ("plan.save", "olive", "screen")
    assert json.loads(row["before"]) == {"plans": [{"id": "manual", "name": "Resident does it"}]}
    assert json.loads(row["after"]) == {"plans": [{"id": "manual", "name": "By hand"}]}


def test_the_csv_export_defuses_formulas(client, study, owner):
    """A cell a spreadsheet would run as a formula (OWASP, "CSV Injection") starts with
    an apostrophe instead."""
    with audit.acting(make_user("=HYPERLINK(1)"), m.AuditSource.SCREEN):
        services.plan_save(study=study, key="manual", item={"id": "manual", "name": "x"})
    client.force_login(owner)
    text = client.get(reverse("study-history-csv", args=[study.pk])).content.decode()
    rows = list(csv.reader(text.splitlines()))
    assert "'=HYPERLINK(1)" in rows[-2]
    assert all(not cell.startswith("=") for row in rows for cell in row)


def test_the_json_export_holds_every_entry_with_its_header(client, busy_study, owner):
    client.force_login(owner)
    response = client.get(reverse("study-history-json", args=[busy_study.pk]))
    payload = json.loads(response.content)
    assert payload["format"] == "baton-audit-trail"
    assert payload["study_id"] == "home-heating" and payload["baton_version"] == __version__
    assert payload["cautions"] == CAUTIONS and payload["filters"] == {}
    assert [e["action"] for e in payload["entries"]] == [
        "assignment.delete",
        "plan.save",
        "study.import",
    ]
    assert [e["who"] for e in payload["entries"]] == ["ed", "olive", "(system)"]
    assert payload["entries"][0]["source"] == "command"
    only = client.get(
        reverse("study-history-json", args=[busy_study.pk])
        + f"?entry={payload['entries'][1]['id']}"
    )
    assert [e["action"] for e in json.loads(only.content)["entries"]] == ["plan.save"]


def test_non_members_get_404_on_exports(client, study):
    client.force_login(make_user("stranger"))
    for name in ("study-history", "study-history-csv", "study-history-json"):
        assert client.get(reverse(name, args=[study.pk])).status_code == 404
