"""The mode-map screens: the diagram, the findings with their step-through, and the
editor of modes, overrides and transitions.

The study is the home-heating test study (tests/core/conftest.py): in plan ``auto`` the
thermostat follows its schedule until the resident turns the dial (mode ``hold``, where
the resident holds T2); the next period returns to the schedule with no cue. Worked by
hand from the composition rules (Degani & Heymann 2002, as ``modecheck`` states them):
after 'dial turned' and the uncued 'next period' the device follows the schedule while
the resident still believes it holds their set point, so T2 is in question.
"""

from __future__ import annotations

import json
import re

import pytest
from django.urls import reverse

from allocation import models as m
from allocation import selectors
from allocation.core.cautions import CAUTIONS

HTMX = {"HTTP_HX_REQUEST": "true"}


@pytest.fixture
def signed_in(client, study):
    client.force_login(study.memberships.get().user)
    return client


def modes_of(study: m.Study, plan: str = "auto") -> dict | None:
    study.refresh_from_db()
    document = selectors.study_document(study)
    return next(p for p in document["plans"] if p["id"] == plan).get("modes")


def rows_of(study: m.Study, plan: str = "auto") -> dict:
    """The mode rows as written, independent of any cached document."""
    row = study.plans.get(key=plan)
    return {
        "initial": row.initial_mode,
        "states": list(row.mode_states.values_list("key", flat=True)),
        "transitions": [
            (t.source.key if t.source else "*", t.target.key, t.trigger, t.cue)
            for t in row.mode_transitions.select_related("source", "target")
        ],
        "overrides": sorted(
            (o.state.key, o.task.key)
            for o in m.ModeOverride.objects.filter(state__plan=row).select_related("state", "task")
        ),
    }


def finding_titles(page: str) -> list[str]:
    """The titles of the findings listed on a mode-map page, in order."""
    return re.findall(r"<summary><strong>([^<]+)</strong>", page)


def url(name: str, study: m.Study, *args) -> str:
    return reverse(name, args=[study.pk, "auto", *args])


def test_page_shows_diagram_findings_and_cautions(signed_in, study):
    page = signed_in.get(url("plan-modes", study)).content.decode()
    assert "Holding a set point" in page and "Following the schedule" in page
    assert 'data-figure="figure-modes"' in page
    assert set(finding_titles(page)) == {
        "Modes that look alike",
        "Person and device disagree",
        "Change without a cue",
        "Change the person cannot follow",
    }
    assert CAUTIONS[:60] in page
    # The figure names each transition by its row number and marks the uncued one.
    figure = json.loads(page.split('id="figure-modes" type="application/json">')[1].split("<")[0])
    label_trace = next(trace for trace in figure["data"] if trace.get("mode") == "text")
    assert label_trace["text"] == ["1", "2"]
    assert label_trace["textfont"]["color"][1] != label_trace["textfont"]["color"][0]


def test_plan_without_modes_invites_the_first_mode(signed_in, study):
    page = signed_in.get(reverse("plan-modes", args=[study.pk, "manual"])).content.decode()
    assert "This plan has no mode map" in page
    response = signed_in.post(
        reverse("mode-edit", args=[study.pk, "manual", "new"]),
        {"id": "normal", "name": "Normal", "indication": "green"},
        **HTMX,
    )
    assert response.status_code == 200
    assert modes_of(study, "manual") == {
        "initial": "normal",
        "states": [{"id": "normal", "name": "Normal", "indication": "green"}],
        "transitions": [],
    }
    assert rows_of(study, "manual")["initial"] == "normal"


def test_a_bad_mode_is_refused_beside_its_field_and_nothing_changes(signed_in, study):
    before = rows_of(study)
    response = signed_in.post(
        url("mode-edit", study, "new"), {"id": "hold", "name": "Another hold"}, **HTMX
    )
    page = response.content.decode()
    assert response.status_code == 200  # the form comes back with the message
    assert "repeats the id &#x27;hold&#x27;" in page
    assert "<code>id</code>" in page
    assert rows_of(study) == before
    # Without htmx the form page answers 400.
    response = signed_in.post(url("mode-edit", study, "new"), {"id": "", "name": "x"})
    assert response.status_code == 400


def test_renaming_a_mode_follows_the_transitions_and_the_initial_mode(signed_in, study):
    signed_in.post(
        url("mode-edit", study, "schedule"),
        {"id": "timetable", "name": "Following the timetable", "indication": "clock symbol"},
        **HTMX,
    )
    rows = rows_of(study)
    assert rows["initial"] == "timetable"
    assert rows["transitions"] == [
        ("timetable", "hold", "dial turned", "none"),
        ("hold", "timetable", "next period", "none"),
    ]
    # The overrides of a renamed mode stay with it.
    signed_in.post(url("mode-edit", study, "hold"), {"id": "held", "name": "Holding"}, **HTMX)
    assert rows_of(study)["overrides"] == [("held", "T2")]


def test_the_initial_mode_is_kept_until_another_starts(signed_in, study):
    response = signed_in.post(url("mode-delete", study, "schedule"), **HTMX)
    assert "choose another initial mode" in response.content.decode()
    assert rows_of(study)["states"] == ["schedule", "hold"]
    signed_in.post(url("mode-initial", study, "hold"), **HTMX)
    signed_in.post(url("mode-delete", study, "schedule"), **HTMX)
    rows = rows_of(study)
    assert rows == {
        "initial": "hold",
        "states": ["hold"],
        "transitions": [],
        "overrides": [("hold", "T2")],
    }
    # Deleting the last mode removes the map.
    signed_in.post(url("mode-delete", study, "hold"), **HTMX)
    assert modes_of(study) is None and rows_of(study)["initial"] == ""


def test_adding_a_cue_removes_the_uncued_findings(signed_in, study):
    page = signed_in.get(url("plan-modes", study)).content.decode()
    assert "Change without a cue" in finding_titles(page)
    response = signed_in.post(
        url("transition-edit", study, "1"),
        {
            "source": "hold",
            "target": "schedule",
            "trigger": "next period",
            "by": "automation",
            "cue": "alert",
            "per_day": "1",
            "expected_from": "hold",
            "expected_to": "schedule",
            "expected_trigger": "next period",
        },
        **HTMX,
    )
    page = response.content.decode()
    assert 'id="modes-region"' in page
    # By hand: with an alert the resident always notices the return to the schedule, so
    # the change without a cue and the one they cannot follow are gone. But Schedule and
    # Hold both show the clock symbol: having noticed the change they believe "Schedule
    # or Hold" (methods document, #mode-check), and Hold disagrees with Schedule on the
    # set points, so the look-alike indication and an error state are left.
    assert finding_titles(page) == ["Modes that look alike", "Person and device disagree"]
    assert rows_of(study)["transitions"][1] == ("hold", "schedule", "next period", "alert")


def test_a_bad_rate_is_refused_beside_its_field(signed_in, study):
    before = rows_of(study)
    response = signed_in.post(
        url("transition-edit", study, "new"),
        {
            "source": "hold",
            "target": "schedule",
            "trigger": "x",
            "by": "human",
            "cue": "alert",
            "per_day": "-2",
        },
        **HTMX,
    )
    page = response.content.decode()
    assert "<code>per_day</code>" in page
    assert rows_of(study) == before


def test_a_transition_changed_meanwhile_is_not_overwritten(signed_in, study):
    before = rows_of(study)
    response = signed_in.post(
        url("transition-delete", study, "0"),
        {"expected_from": "hold", "expected_to": "schedule", "expected_trigger": "next period"},
        **HTMX,
    )
    assert "changed since the page was opened" in response.content.decode()
    assert rows_of(study) == before
    signed_in.post(
        url("transition-delete", study, "0"),
        {"expected_from": "schedule", "expected_to": "hold", "expected_trigger": "dial turned"},
        **HTMX,
    )
    assert rows_of(study)["transitions"] == [("hold", "schedule", "next period", "none")]


def test_overrides_are_set_checked_and_removed(signed_in, study):
    form = signed_in.get(url("mode-override", study, "schedule", "T1"), **HTMX).content.decode()
    assert "In the plan itself: Thermostat" in form
    response = signed_in.post(
        url("mode-override", study, "schedule", "T1"),
        {"who": "person", "human": "resident"},
        **HTMX,
    )
    assert 'id="modes-region"' in response.content.decode()
    assert ("schedule", "T1") in rows_of(study)["overrides"]
    # A device that is not in the study is refused by the form, nothing written.
    before = rows_of(study)
    response = signed_in.post(
        url("mode-override", study, "schedule", "T1"),
        {"who": "device", "automation": "boiler"},
        **HTMX,
    )
    assert "boiler" in response.content.decode()
    assert rows_of(study) == before
    signed_in.post(url("mode-override", study, "schedule", "T1"), {"remove": "1"}, **HTMX)
    assert ("schedule", "T1") not in rows_of(study)["overrides"]
    # A goal cannot be held differently: 404.
    assert signed_in.get(url("mode-override", study, "schedule", "G1")).status_code == 404


def test_picking_a_task_opens_its_override_form(signed_in, study):
    response = signed_in.get(url("mode-override-pick", study, "hold") + "?task=T1", **HTMX)
    assert "Who does <code>T1</code>" in response.content.decode()
    response = signed_in.get(url("mode-override-pick", study, "hold") + "?task=T1")
    assert response.status_code == 302
    assert signed_in.get(url("mode-override-pick", study, "hold")).status_code == 200


def test_step_through_plays_the_events_with_both_modes(signed_in, study):
    page = signed_in.get(url("plan-modes", study)).content.decode()
    number = finding_titles(page).index("Person and device disagree")
    target = url("mode-finding", study, number)
    start = signed_in.get(target).content.decode()
    assert "Step 0 of 2" in start and "(they agree)" in start
    last = signed_in.get(target + "?step=2", **HTMX, HTTP_HX_TARGET="walkthrough")
    text = last.content.decode()
    assert text.lstrip().startswith('<section class="panel walkthrough"')
    assert "next period" in text and "not noticed: there is no cue" in text
    assert "they disagree on who does what" in text
    assert "differs" in text
    # Beyond the last step it stays on the last; a finding that is not there is 404.
    assert "Step 2 of 2" in signed_in.get(target + "?step=9").content.decode()
    assert signed_in.get(url("mode-finding", study, 99)).status_code == 404


def test_viewers_see_the_map_but_cannot_change_it(client, study, member_of):
    client.force_login(member_of(m.Role.VIEWER))
    page = client.get(url("plan-modes", study)).content.decode()
    assert "Add a mode" not in page
    before = rows_of(study)
    response = client.post(url("mode-delete", study, "hold"))
    assert response.status_code == 403
    assert rows_of(study) == before


def test_the_rows_read_back_as_the_checked_document(signed_in, study):
    signed_in.post(url("mode-edit", study, "new"), {"id": "away", "name": "Away"}, **HTMX)
    signed_in.post(
        url("transition-edit", study, "new"),
        {
            "source": "schedule",
            "target": "away",
            "trigger": "leave",
            "by": "human",
            "cue": "display",
            "per_day": "0.5",
        },
        **HTMX,
    )
    cached = modes_of(study)
    selectors.study_cache_clear()
    assert modes_of(study) == cached
    assert cached["states"][-1] == {"id": "away", "name": "Away"}
    assert cached["transitions"][-1] == {
        "from": "schedule",
        "to": "away",
        "trigger": "leave",
        "by": "human",
        "cue": "display",
        "per_day": 0.5,
    }


def test_dashboard_findings_open_the_same_step_through(signed_in, study):
    page = signed_in.get(reverse("plan-dashboard", args=[study.pk, "auto"])).content.decode()
    links = re.findall(r'<a href="([^"]+/modes/findings/\d+)">Step through', page)
    assert links
    for link in links:
        target = signed_in.get(link).content.decode()
        assert "How did we get into this mode?" in target


def test_the_mode_map_tab_opens_on_a_plan_with_modes(signed_in, study):
    # Plan 'manual' comes first and has no mode map; the tab goes to 'auto'.
    page = signed_in.get(reverse("study-detail", args=[study.pk])).content.decode()
    assert url("plan-modes", study) in page


def test_a_transition_from_any_mode_is_stored_shown_and_read_back(signed_in, study):
    """'power cut' from any mode to the schedule, with no cue: stored with no source
    row, listed as from "any mode", read back as "from": "*". By hand (composition
    rules): from ``hold`` it changes who holds T2 (the resident's there, the
    thermostat's on the schedule) with no cue, so a change without a cue is found."""
    page = signed_in.get(url("transition-edit", study, "new")).content.decode()
    assert 'value="*"' in page and "any mode" in page
    signed_in.post(
        url("transition-edit", study, "new"),
        {
            "source": "*",
            "target": "schedule",
            "trigger": "power cut",
            "by": "environment",
            "cue": "none",
        },
        **HTMX,
    )
    stored = study.plans.get(key="auto").mode_transitions.get(trigger="power cut")
    assert stored.source is None and stored.target.key == "schedule"
    selectors.study_cache_clear()
    assert modes_of(study)["transitions"][-1] == {
        "from": "*",
        "to": "schedule",
        "trigger": "power cut",
        "by": "environment",
        "cue": "none",
    }
    page = signed_in.get(url("plan-modes", study)).content.decode()
    assert "<td>any mode</td>" in page
    assert "power cut&#x27; changes the mode from Hold" in page


def test_step_through_of_look_alike_modes_names_the_belief_as_either(signed_in, study):
    # With an alert on 'next period' the resident notices the return to Schedule, which
    # shows the clock symbol as Hold does: they believe "Schedule or Hold" (methods
    # document, #mode-check). By hand: start in Schedule; 'dial turned' (their own
    # action) leads to Hold, believed Hold; 'next period' leads to Schedule, believed
    # Schedule or Hold (named "Following the schedule or Holding a set point"); the set
    # points are the resident's in Hold and the thermostat's in Schedule.
    signed_in.post(
        url("transition-edit", study, "1"),
        {
            "source": "hold",
            "target": "schedule",
            "trigger": "next period",
            "by": "automation",
            "cue": "alert",
            "per_day": "1",
            "expected_from": "hold",
            "expected_to": "schedule",
            "expected_trigger": "next period",
        },
        **HTMX,
    )
    page = signed_in.get(url("plan-modes", study)).content.decode()
    number = finding_titles(page).index("Person and device disagree")
    target = url("mode-finding", study, number)
    last = signed_in.get(target + "?step=2").content.decode()
    assert "Step 2 of 2" in last
    assert "Following the schedule or Holding a set point" in last
    assert "they look alike, so the person cannot tell which" in last
    assert "they disagree on who does what" in last


def test_a_failure_nobody_is_told_of_is_played_in_the_mode_map(client, owner):
    """The thermostat fails at T7 (severity raised to 4, the critical severity) and
    nothing tells the resident: a finding listed with the map's, whose step-through
    starts in the initial mode with the thermostat holding T7 and, after the unnoticed
    failure, has the resident holding it while believed to be the thermostat's."""
    from allocation import services
    from allocation.examples import example_documents

    document = next(d for d in example_documents() if d["study"]["id"] == "home-heating")
    next(t for t in document["tasks"] if t["id"] == "T7")["severity"] = 4
    plan = document["plans"][1]
    plan["assignments"]["T7"]["reliability"] = {"fails_per_1000": 20, "detected_by": "none"}
    study = services.study_import(data=document, owner=owner)
    client.force_login(owner)
    page = client.get(url("plan-modes", study)).content.decode()
    number = finding_titles(page).index("Failure nobody is told of")
    target = url("mode-finding", study, number)
    start = client.get(target).content.decode()
    assert "Step 0 of 1" in start and "(they agree)" in start
    failed = client.get(target + "?step=1").content.decode()
    assert "Thermostat fails at T7" in failed and "not noticed: there is no cue" in failed
    assert "they disagree on who does what" in failed
    row = failed.split("<code>T7</code>")[1].split("</tr>")[0]
    assert "Resident" in row and "Thermostat" in row and "differs" in row
