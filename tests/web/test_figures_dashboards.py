"""Figure data from a plan's analysis, checked against values worked by hand.

The home-heating test study (``tests.core.conftest.HOME_HEATING``), worked by hand
with Baton's defaults (``allocation.core.assumptions``):

- durations count at their triangular mean (min + typical + max) / 3 (Evans, Hastings &
  Peacock 2000, ch. 40): T1 [2, 5, 30] s -> 37/3 s, T2 [3, 10, 20] s -> 11 s;
- plan ``manual``: the resident does T1 (37/3 s) and T2 (11 s), each once a day (the
  ``leave`` event at 08:15 starts T1, which precedes T2): 70/3 s a day;
- plan ``auto``: T1 is the thermostat's; T2 is shared at sv10 level 7 on every stage, so
  each stage's degree is (7 - 1) / 9 = 2/3 (Parasuraman, Sheridan & Wickens 2000, Table I)
  and the resident keeps 1/3 of 11 s, plus 4 s of supervision at level 7 and 10 s of
  monitoring (accountable but not the principal holder, since 2/3 > 1/2): 53/3 s a day.
"""

from __future__ import annotations

import copy
import json
from collections import Counter

import pytest

from allocation.core import load_study
from allocation.core.analysis import analyse_plan
from allocation.core.analysis.risk import DEFAULT_RISK_POLICY, resolve_policy
from allocation.examples import example_documents
from allocation.figures import dashboards as charts
from tests.core.conftest import HOME_HEATING


def analysed(document: dict, plan: str):
    result = load_study(document)
    assert result.ok, result.errors
    return analyse_plan(result.study, plan)


@pytest.fixture(scope="module")
def heating_auto():
    return analysed(copy.deepcopy(HOME_HEATING), "auto")


@pytest.fixture(scope="module")
def heating_manual():
    return analysed(copy.deepcopy(HOME_HEATING), "manual")


@pytest.fixture(scope="module")
def insulin_hybrid():
    """The closed-loop insulin example's hybrid plan: many tasks and handovers."""
    document = next(d for d in example_documents() if d["study"]["id"] == "closed-loop-insulin")
    return analysed(document, "hybrid-loop")


def test_daily_bars_equal_the_person_figures_worked_by_hand(heating_manual, heating_auto):
    for analysis, burden in ((heating_manual, 70 / 3), (heating_auto, 53 / 3)):
        person = analysis.people["resident"]
        assert person.burden_s_per_day == pytest.approx(burden)
        figure = charts.daily_figures_chart(analysis)
        times, counts = figure["data"]
        assert times["name"] == counts["name"] == "Resident"
        # Left panel in minutes a day: time, then monitoring.
        assert [value * 60 for value in times["y"]] == pytest.approx(
            [person.burden_s_per_day, person.monitoring_s_per_day]
        )
        assert counts["y"] == pytest.approx(
            [
                person.interactions_per_day,
                person.interruptions_per_day,
                person.night_interruptions_per_day,
            ]
        )
    # By hand: in "auto" the resident touches only T2 (once a day): their own part at
    # level 7 (one interaction) and, accountable with a display as feedback, one look a
    # day of 10 s (the default periodic monitoring; methods document, #monitoring).
    auto = heating_auto.people["resident"]
    assert (auto.monitoring_s_per_day, auto.interactions_per_day) == pytest.approx((10.0, 2.0))


def test_each_person_keeps_one_colour_in_every_chart(insulin_hybrid):
    colours = charts.agent_colours(insulin_hybrid.study)
    daily = charts.daily_figures_chart(insulin_hybrid)
    goals = charts.goal_time_chart(insulin_hybrid)
    names = {insulin_hybrid.study.agent(a).name: a for a in insulin_hybrid.people}
    for trace in daily["data"] + goals["data"]:
        assert trace["marker"]["color"] == colours[names[trace["name"]]]
    assert len({colours[a] for a in insulin_hybrid.people}) == len(insulin_hybrid.people)


def test_time_by_goal_sums_the_leaves_under_each_goal(heating_manual, heating_auto):
    # One top-level goal G1 over T1 and T2 (by hand, see the module docstring).
    for analysis, seconds in ((heating_manual, 70 / 3), (heating_auto, 53 / 3)):
        rows = charts.goal_person_time(analysis)
        assert [(row["task"], row["depth"], row["leaves"]) for row in rows] == [
            ("G1", 0, ["T1", "T2"])
        ]
        assert rows[0]["seconds"]["resident"] == pytest.approx(seconds)
        bars = charts.goal_time_chart(analysis)["data"][0]
        assert bars["orientation"] == "h" and bars["x"][0] * 60 == pytest.approx(seconds)


def test_time_by_goal_shows_sub_goals_and_loose_tasks():
    """G1 > G2 > T2, T1 directly under G1, and a task T3 outside any goal (manual plan:
    T1 37/3 s, T2 11 s and T3 8 s, each once a day, from the module docstring)."""
    document = copy.deepcopy(HOME_HEATING)
    document["tasks"].insert(1, {"id": "G2", "parent": "G1", "title": "Set back the heating"})
    document["tasks"][3]["parent"] = "G2"  # T2
    document["tasks"].append(
        {
            "id": "T3",
            "title": "Check the radiators",
            "occurs": {"times": ["18:00"]},
            "duration_s": 8,
            "severity": 1,
        }
    )
    document["plans"][0]["assignments"]["T3"] = {"human": "resident"}
    document["plans"][1]["assignments"]["T3"] = {"human": "resident"}
    rows = charts.goal_person_time(analysed(document, "manual"))
    assert [(row["task"], row["depth"], row["seconds"]["resident"]) for row in rows] == [
        ("G1", 0, pytest.approx(70 / 3)),
        ("G2", 1, pytest.approx(11.0)),
        (None, 0, pytest.approx(8.0)),
    ]
    labels = charts.goal_time_chart(analysed(document, "manual"))["data"][0]["y"]
    assert labels[1].strip().startswith("↳ G2") and labels[2] == "Tasks outside any goal"


def test_risk_matrix_counts_are_the_handovers_by_severity_and_frequency(insulin_hybrid):
    # Counted from the handovers' own severity and frequency band (level 1 improbable to
    # 5 frequent, the chart's columns from left to right).
    order = ("improbable", "remote", "occasional", "probable", "frequent")
    counts = charts.risk_matrix_counts(insulin_hybrid)
    expected = Counter(
        (h.severity, order.index(h.frequency_band) + 1) for h in insulin_hybrid.handovers
    )
    assert len(insulin_hybrid.handovers) > 50
    for severity in range(1, 6):
        for level in range(1, 6):
            assert counts[severity - 1][level - 1] == expected[(severity, level)]
    assert sum(map(sum, counts)) == len(insulin_hybrid.handovers)


def test_risk_matrix_of_heating_auto_by_hand(heating_auto):
    """Both mode handovers of T2 (severity 2) come with transitions without a rate: 0 a
    day, 0 slips a year, improbable."""
    counts = charts.risk_matrix_counts(heating_auto)
    assert counts[1][0] == 2 and sum(map(sum, counts)) == 2
    figure = charts.risk_matrix_chart(heating_auto.policy, counts)
    heatmap = figure["data"][0]
    assert heatmap["text"][1][0] == "2" and heatmap["text"][0][0] == "·"


def test_risk_matrix_cells_follow_the_policy_matrix():
    """The example matrix's rule (methods document, #handover-risk), cells by hand: rows
    severity 1-5, columns improbable .. frequent. Severity 2 frequent: review; 4 probable:
    unacceptable; 3 remote: acceptable; 5 occasional: unacceptable; 4 occasional: review."""
    policy = resolve_policy({})
    z = charts.risk_matrix_chart(policy)["data"][0]["z"]
    codes = charts.BAND_CODES
    assert z[1][4] == codes["review"]
    assert z[3][3] == codes["unacceptable"]
    assert z[2][1] == codes["acceptable"]
    assert z[4][2] == codes["unacceptable"]
    assert z[3][2] == codes["review"]
    own = resolve_policy(
        {"band_matrix": {**DEFAULT_RISK_POLICY["band_matrix"], "remote": ["review"] * 5}}
    )
    z = charts.risk_matrix_chart(own)["data"][0]["z"]
    assert [z[row][1] for row in range(5)] == [codes["review"]] * 5


def test_frequency_band_labels_follow_the_cut_points():
    assert charts.frequency_band_labels(DEFAULT_RISK_POLICY) == [
        "improbable: below 0.01 a year",
        "remote: 0.01 to 0.1 a year",
        "occasional: 0.1 to 1 a year",
        "probable: 1 to 10 a year",
        "frequent: 10 a year or more",
    ]


def test_awareness_bars_stack_the_factor_contributions_worked_by_hand(heating_auto):
    """T2 in "auto", with the default weights 0.30, 0.25, 0.15, 0.20, 0.10: automation
    (2/3 + 2/3) / 2 = 2/3; feedback "display" 0.5; started by the automation 1; the "hold"
    mode gives T2 to the resident, cued "none" (weakness 1); hands-on 1/3 a day against
    practice 1 a day, so rarity 2/3."""
    expected = {
        "automation": 0.30 * 2 / 3,
        "feedback": 0.25 * 0.5,
        "initiation": 0.15 * 1.0,
        "mode_change": 0.20 * 1.0,
        "rarity": 0.10 * 2 / 3,
    }
    figure = charts.awareness_chart(heating_auto)
    by_factor = {
        factor: trace["x"]
        for factor, trace in zip(charts.AWARENESS_COLOURS, figure["data"], strict=True)
    }
    assert figure["data"][0]["y"] == ["T2 Lower the set point"]
    for factor, value in expected.items():
        assert by_factor[factor] == [pytest.approx(value)]
    index = heating_auto.tasks["T2"].awareness.index
    assert index == pytest.approx(sum(expected.values()))


def test_awareness_chart_shows_the_thirty_highest_indices(insulin_hybrid):
    indices = sorted(
        (t.awareness.index for t in insulin_hybrid.tasks.values() if t.awareness), reverse=True
    )
    assert len(indices) > 30
    figure = charts.awareness_chart(insulin_hybrid)
    stacked = [sum(values) for values in zip(*(t["x"] for t in figure["data"]), strict=True)]
    assert stacked == pytest.approx(indices[:30])


def test_mode_share_bars_are_percentages_of_the_day(heating_auto):
    """Only "next period" (hold -> schedule) has a rate, so the thermostat starting in
    "schedule" stays there: 100 % and 0 %."""
    bars = charts.mode_share_chart(heating_auto)["data"][0]
    assert bars["y"] == ["schedule Following the schedule", "hold Holding a set point"]
    assert bars["x"] == pytest.approx([100.0, 0.0])


def test_every_figure_is_plain_json(insulin_hybrid):
    policy = insulin_hybrid.policy
    figures = [
        charts.daily_figures_chart(insulin_hybrid),
        charts.goal_time_chart(insulin_hybrid),
        charts.risk_matrix_chart(policy, charts.risk_matrix_counts(insulin_hybrid)),
        charts.risk_matrix_chart(policy),
        charts.awareness_chart(insulin_hybrid),
        charts.mode_share_chart(insulin_hybrid),
    ]
    for figure in figures:
        assert json.loads(json.dumps(figure, allow_nan=False)) == figure
        assert set(figure) == {"data", "layout"}
