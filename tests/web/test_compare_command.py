"""``manage.py compare``: the comparison without the web pages, on the home-heating test
study (values worked by hand in tests/core/analysis/test_compare.py)."""

from __future__ import annotations

import copy
import io
import json

import pytest
from django.core.management import CommandError, call_command

from tests.core.conftest import HOME_HEATING


@pytest.fixture
def study_file(tmp_path):
    path = tmp_path / "heating.json"
    path.write_text(json.dumps(copy.deepcopy(HOME_HEATING)), encoding="utf-8")
    return str(path)


def run(*args: str) -> str:
    out = io.StringIO()
    call_command("compare", *args, stdout=out)
    return out.getvalue()


def test_json_gives_figures_scores_and_sensitivity(study_file):
    payload = json.loads(run(study_file, "--json"))
    assert payload["order"] == ["manual", "auto"]
    plans = {plan["id"]: plan for plan in payload["plans"]}
    # auto = 53/70 + 1 + 2 + 1 + 1 (hand-worked in test_compare.py).
    assert plans["auto"]["total"] == pytest.approx(5 + 53 / 70)
    assert plans["auto"]["scores"]["max_risk"] == pytest.approx(2.0)
    assert plans["manual"]["figures"]["burden_s_per_day"] == pytest.approx(70 / 3)
    assert payload["reference"]["burden_s_per_day"] == {
        "good": 0.0,
        "poor": pytest.approx(70 / 3),
        "separates": True,
    }
    held = payload["sensitivity"]
    assert (held["leader"], held["runner_up"]) == ("manual", "auto")
    assert sum(held["first_shares"].values()) == pytest.approx(1.0)
    assert "does not replace usability engineering" in payload["cautions"]


def test_plans_named_keep_their_order_and_unknown_ones_are_refused(study_file):
    text = run(study_file, "--plans", "auto", "manual")
    assert "ranked by the study objective" in text and "Sensitivity:" in text
    with pytest.raises(CommandError, match="has no plan 'nope'"):
        run(study_file, "--plans", "nope")
    with pytest.raises(CommandError, match="at least two plans"):
        run(study_file, "--plans", "auto")


def test_json_gives_the_figures_the_objective_weighs(tmp_path):
    """The insulin example: handovers needing review count only those with a person on a
    side; sensor-to-controller-to-pump work is an automation interface, in neither the
    headline nor the objective, so the two agree; each score is the weight times the
    figure's place between the reference points printed beside it."""
    from allocation.examples import example_paths

    path = next(p for p in example_paths() if p.name == "closed-loop-insulin.json")
    payload = json.loads(run(str(path), "--plans", "hybrid-loop", "injections", "--json"))
    plans = {plan["id"]: plan for plan in payload["plans"]}
    hybrid = plans["hybrid-loop"]
    review = "handovers_to_review"
    assert hybrid["objective_figures"][review] == hybrid["figures"][review] > 0
    for plan in plans.values():
        for figure, score in plan["scores"].items():
            point = payload["reference"][figure]
            value = plan["objective_figures"][figure]
            place = (value - point["good"]) / (point["poor"] - point["good"])
            expected = payload["weights"][figure] * min(1.0, max(0.0, place))
            assert score == pytest.approx(expected if point["separates"] else 0.0), figure
