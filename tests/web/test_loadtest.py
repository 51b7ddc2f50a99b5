"""The load test's pure parts: latency statistics, the lost-edit check, reading the plan
editor's rows, and judging a save's answer. The run itself (gunicorn on PostgreSQL,
16 users) is in ``.ci/run``."""

from __future__ import annotations

import random

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation import models as m
from allocation.forms.plans import AssignmentForm
from loadtest.command import stored_for
from loadtest.users import (
    Edit,
    Sample,
    classify_save,
    edit_fields,
    expected_values,
    lost_edits,
    percentile,
    row_fields,
    summarise,
)

HX = {"HX-Request": "true"}


# -- statistics ----------------------------------------------------------------------------


def test_percentile_hand_worked():
    # Hyndman & Fan (1996) definition 7: position (n - 1) q / 100 of the sorted values.
    # [1, 2, 3, 4]: P50 at position 1.5 -> 2 + 0.5 x (3 - 2) = 2.5;
    # P95 at position 2.85 -> 3 + 0.85 x (4 - 3) = 3.85.
    assert percentile([4, 1, 3, 2], 50) == pytest.approx(2.5)
    assert percentile([4, 1, 3, 2], 95) == pytest.approx(3.85)
    assert percentile([7.0], 95) == 7.0
    assert np.isnan(percentile([], 50))
    with pytest.raises(ValueError):
        percentile([1.0], 101)


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(0, 1e4, allow_nan=False), min_size=1, max_size=60),
    st.floats(0, 100),
)
def test_percentile_matches_numpy(values, q):
    # NumPy's default ("linear") is the same definition 7: the reference here.
    assert percentile(values, q) == pytest.approx(np.percentile(values, q), abs=1e-9)


def test_summary_per_kind_and_overall():
    samples = [
        Sample("edit", 0.1, 200),
        Sample("edit", 0.3, 200),
        Sample("edit", 0.2, 200, conflict=True),
        Sample("export", 1.0, 500, error="HTTP 500"),
        Sample("overview", 0.4, 200),
        Sample("zzz", 0.5, 0, error="ConnectionResetError"),
    ]
    summary = summarise(samples, elapsed_s=2.0)
    # KINDS order first (overview, edit, export), then any other kind by name.
    assert [figures.kind for figures in summary.kinds] == ["overview", "edit", "export", "zzz"]
    edit = summary.kinds[1]
    assert (edit.requests, edit.errors, edit.conflicts) == (3, 0, 1)
    assert edit.median_s == pytest.approx(0.2)
    # P95 of [0.1, 0.2, 0.3]: position 1.9 -> 0.2 + 0.9 x 0.1 = 0.29.
    assert edit.p95_s == pytest.approx(0.29)
    assert edit.max_s == pytest.approx(0.3)
    overall = summary.overall
    assert (overall.requests, overall.errors, overall.conflicts) == (6, 2, 1)
    # Six requests in two seconds; the median of the six is (0.3 + 0.4) / 2.
    assert summary.throughput == pytest.approx(3.0)
    assert overall.median_s == pytest.approx(0.35)


# -- the lost-edit check against fake records ------------------------------------------------


def _values(rationale: str, who: str = "person") -> dict:
    return expected_values(
        {"who": who, "human": "resident", "automation": "controller", "level": "4",
         "status": "proposed", "rationale": rationale}
    )  # fmt: skip


def _edit(rationale: str, started: float, finished: float, key=(1, "auto", "T2"), user="a"):
    return Edit(key, _values(rationale), started, finished, user)


def test_expected_values_keep_only_what_the_choice_uses():
    person = _values("r1", "person")
    assert person["human"] == "resident" and person["automation"] is None
    assert person["level"] is None  # a level is kept for shared tasks only
    shared = _values("r2", "shared")
    assert (shared["human"], shared["automation"], shared["level"]) == (
        "resident",
        "controller",
        4,
    )
    assert _values("r3", "device")["human"] is None


def test_one_user_the_last_edit_must_be_stored():
    key = (1, "auto", "T2")
    edits = [_edit("first", 0, 1), _edit("second", 2, 3), _edit("third", 4, 5)]
    assert lost_edits(edits, {key: _values("third")}) == []
    # An older value stored means the newest acknowledged one was lost.
    (lost,) = lost_edits(edits, {key: _values("second")})
    assert lost.key == key and lost.candidates == [_values("third")]
    # A missing row is a loss too.
    assert len(lost_edits(edits, {key: None})) == 1
    assert len(lost_edits(edits, {})) == 1


def test_two_users_overlapping_edits_either_may_be_last():
    key = (1, "auto", "T2")
    # b was sent (1.5) before a was answered (2): either order of commit is possible.
    edits = [_edit("a", 1, 2, user="a"), _edit("b", 1.5, 3, user="b")]
    assert lost_edits(edits, {key: _values("a")}) == []
    assert lost_edits(edits, {key: _values("b")}) == []
    assert len(lost_edits(edits, {key: _values("other")})) == 1
    # c was sent after a and b were answered: it certainly committed last.
    edits.append(_edit("c", 4, 5, user="a"))
    assert len(lost_edits(edits, {key: _values("b")})) == 1
    assert lost_edits(edits, {key: _values("c")}) == []


def test_a_save_without_an_answer_may_or_may_not_be_stored():
    key = (1, "auto", "T2")
    acknowledged = _edit("a", 0, 1)
    # Sent after "a" was answered, but never answered itself: either value may be stored.
    unanswered = Edit(key, _values("b"), 2, float("inf"), "a", answered=False)
    assert lost_edits([acknowledged, unanswered], {key: _values("a")}) == []
    assert lost_edits([acknowledged, unanswered], {key: _values("b")}) == []
    assert len(lost_edits([acknowledged, unanswered], {key: _values("c")})) == 1


def test_keys_are_checked_separately():
    first, second = (1, "auto", "T2"), (2, "auto", "T2")
    edits = [_edit("x", 0, 1, key=first), _edit("y", 0, 1, key=second)]
    lost = lost_edits(edits, {first: _values("x"), second: _values("x")})
    assert [item.key for item in lost] == [second]


# -- against the real plan editor (Django's test client) ------------------------------------


@pytest.fixture
def signed_in(client, owner):
    client.force_login(owner)
    return client


def _editor(client, study) -> str:
    response = client.get(f"/studies/{study.pk}/plans/auto/edit")
    assert response.status_code == 200
    return response.content.decode()


def test_rows_read_as_htmx_posts_them(signed_in, study, heating_document):
    rows = row_fields(_editor(signed_in, study))
    leaves = m.Task.objects.filter(study=study, children__isnull=True)
    assert set(rows) == set(leaves.values_list("key", flat=True))
    plan = next(plan for plan in heating_document["plans"] if plan["id"] == "auto")
    for task, row in rows.items():
        # The selected values are the stored assignment's, as the form would show them.
        initial = AssignmentForm.initial_for(plan["assignments"].get(task))
        for name in ("who", "human", "automation", "level", "status", "rationale"):
            assert row.fields[name] == str(initial.get(name, "")), (task, name)
        assert row.fields["csrfmiddlewaretoken"]
        assert "tasks" not in row.fields  # an unticked box is not posted
        assert set(row.options["who"]) >= {"person", "device", "shared"}


def test_edits_through_the_view_are_found_stored_and_a_changed_row_is_lost(signed_in, study):
    rows = row_fields(_editor(signed_in, study))
    rng = random.Random(5)
    edits = []
    for number, task in enumerate(["T2", "T1", "T2"]):
        fields = edit_fields(rows[task], rng, f"load test edit {number}")
        response = signed_in.post(
            f"/studies/{study.pk}/plans/auto/tasks/{task}", fields, headers=HX
        )
        error, conflict = classify_save(
            response.status_code, response.content.decode(), task, "auto"
        )
        assert (error, conflict) == ("", False)
        # The next edit of the row starts from the answer (its new version, if any).
        rows[task] = row_fields(response.content.decode())[task]
        edits.append(
            Edit((study.pk, "auto", task), expected_values(fields), number, number + 0.5, "a")
        )
    stored = stored_for({edit.key for edit in edits})
    assert lost_edits(edits, stored) == []
    # Someone changes T2 behind the load test's back: the check reports it.
    m.Assignment.objects.filter(plan__study=study, plan__key="auto", task__key="T2").update(
        rationale="changed elsewhere"
    )
    (lost,) = lost_edits(edits, stored_for({edit.key for edit in edits}))
    assert lost.key == (study.pk, "auto", "T2")
    assert lost.stored["rationale"] == "changed elsewhere"


def test_a_stale_save_is_a_conflict_and_a_bad_one_an_error(signed_in, study):
    rows = row_fields(_editor(signed_in, study))
    rng = random.Random(9)
    url = f"/studies/{study.pk}/plans/auto/tasks/T2"
    first = edit_fields(rows["T2"], rng, "first")
    assert signed_in.post(url, first, headers=HX).status_code == 200
    # The same row again, from the version the editor showed before the first save.
    stale = edit_fields(rows["T2"], rng, "second")
    response = signed_in.post(url, stale, headers=HX)
    assert classify_save(response.status_code, response.content.decode(), "T2", "auto") == (
        "",
        True,
    )
    # A shared task without a device is refused with the row's problem: an error.
    fresh = row_fields(_editor(signed_in, study))["T2"]
    bad = {**fresh.fields, "who": "shared", "automation": ""}
    response = signed_in.post(url, bad, headers=HX)
    error, conflict = classify_save(response.status_code, response.content.decode(), "T2", "auto")
    assert not conflict and error.startswith("save of T2 refused")
    assert classify_save(500, "", "T2", "auto")[0] == "HTTP 500 for the save of T2 in plan auto"
