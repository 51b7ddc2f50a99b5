"""A row saved in the plan editor updates the analysis it had, and that analysis is the
one a fresh read of the stored rows gives.

The save checks the row alone and carries each plan's evaluation into the study's next
version (the edited plan's by one incremental edit); these tests compare what the pages
then show with the study rebuilt from the database and analysed afresh, figure for
figure, and check that the evaluation was carried, not rebuilt.
"""

from __future__ import annotations

import json
from importlib import resources

import pytest
from django.urls import reverse

from allocation import selectors, services
from allocation.core import load_study
from allocation.core.analysis import analyse_plan
from allocation.selectors import studies as cache

SAVES = [
    ("T2", {"who": "shared", "human": "resident", "automation": "thermostat", "level": "7"}),
    ("T1", {"who": "device", "automation": "thermostat", "accountable": "resident"}),
    ("T2", {"who": "not_applicable", "pass_through": "on"}),
    ("T1", {"who": "person", "human": "resident"}),
]


def fresh_analysis_file(study, plan: str) -> str:
    """The plan analysed from the rows, as if no page had been read before."""
    selectors.study_cache_clear()
    rebuilt = load_study(selectors.study_document(study)).require_valid()
    return json.dumps(analyse_plan(rebuilt, plan).to_json(), sort_keys=True)


def shown_analysis_file(study, plan: str) -> str:
    return json.dumps(selectors.plan_analysis(study, plan).to_json(), sort_keys=True)


@pytest.mark.parametrize("plan", ["manual", "auto"])
def test_each_saved_row_gives_the_analysis_of_the_stored_rows(client, study, owner, plan):
    client.force_login(owner)
    for task, values in SAVES:
        client.get(reverse("plan-editor", args=[study.pk, plan]))  # the analysis is cached
        evaluation = cache._LOADED[study.pk].evaluations[plan]
        response = client.post(
            reverse("plan-row-save", args=[study.pk, plan, task]),
            values,
            headers={"HX-Request": "true"},
        )
        assert response.status_code == 200
        assert cache._LOADED[study.pk].evaluations[plan] is evaluation  # carried, not rebuilt
        shown = shown_analysis_file(study, plan)
        assert shown == fresh_analysis_file(study, plan), (task, values)


def test_other_plans_keep_their_analysis_through_a_row_save(client, study, owner):
    client.force_login(owner)
    before = {plan: shown_analysis_file(study, plan) for plan in ("manual", "auto")}
    client.post(
        reverse("plan-row-save", args=[study.pk, "manual", "T2"]),
        SAVES[0][1],
        headers={"HX-Request": "true"},
    )
    assert shown_analysis_file(study, "auto") == before["auto"]
    assert shown_analysis_file(study, "manual") != before["manual"]
    assert shown_analysis_file(study, "auto") == fresh_analysis_file(study, "auto")


def test_a_refused_row_leaves_the_analysis_as_it_was(client, study, owner):
    client.force_login(owner)
    before = shown_analysis_file(study, "manual")
    response = client.post(
        reverse("plan-row-save", args=[study.pk, "manual", "T2"]),
        {"who": "device", "automation": "no-such-device"},
        headers={"HX-Request": "true"},
    )
    assert response.status_code == 200 and "no-such-device" in response.content.decode()
    assert shown_analysis_file(study, "manual") == before == fresh_analysis_file(study, "manual")


def test_the_insulin_example_follows_row_saves(client, owner):
    """The largest example (modes, failures, people asked in turn): a row of the hybrid
    loop to the partner and back to the device."""
    document = json.loads(
        (resources.files("allocation.examples") / "closed-loop-insulin.json").read_text("utf-8")
    )
    study = services.study_import(data=document, owner=owner)
    plan = next(p for p in document["plans"] if p.get("modes"))
    task, assignment = next(iter(plan["assignments"].items()))
    client.force_login(owner)
    client.get(reverse("plan-editor", args=[study.pk, plan["id"]]))
    partner = next(a["id"] for a in document["agents"] if a["kind"] == "human")
    for values in ({"who": "person", "human": partner}, {"who": "not_applicable"}):
        response = client.post(
            reverse("plan-row-save", args=[study.pk, plan["id"], task]),
            values,
            headers={"HX-Request": "true"},
        )
        assert response.status_code == 200
        shown = shown_analysis_file(study, plan["id"])
        assert shown == fresh_analysis_file(study, plan["id"]), (task, values, assignment)


def test_the_kept_analyses_stay_within_their_budget(study, owner, heating_document, monkeypatch):
    """Two studies of two leaf tasks, two plans each: 8 plan-task pairs. With room for 6,
    analysing the second study forgets the first; the one just analysed stays."""
    other = services.study_import(data={**heating_document}, owner=owner)
    monkeypatch.setattr(cache, "_LOADED_PLAN_TASKS", 6)
    selectors.study_cache_clear()
    selectors.study_analyses(study)
    assert study.pk in cache._LOADED
    selectors.study_analyses(other)
    assert other.pk in cache._LOADED and study.pk not in cache._LOADED
