"""Handovers (allocation.core.analysis.handovers), their risk (…analysis.risk) and the
mode-awareness index (…analysis.awareness); methods document, #awareness-index and
#handovers.

The likelihood is a weighted noisy-OR, 1 - prod(1 - w_f * f_f), worked by hand with the
weights given in the test. The properties are those the methods document states: a
stronger cue (none,
on request, display, alert, alert needing confirmation, in that order of strength) never
makes a handover likelier nor the person less aware; a wider window never tightens the
time budget.
"""

from __future__ import annotations

from dataclasses import replace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.analysis.awareness import awareness
from allocation.core.analysis.handovers import HandoverSite, assess_handover, time_budget_ratio
from allocation.core.analysis.involvement import involvement
from allocation.core.analysis.risk import (
    DEFAULT_RISK_POLICY,
    frequency_band,
    likelihood_band,
    matrix_band,
    noisy_or,
    resolve_policy,
)
from allocation.core.assumptions import resolve_assumptions
from allocation.core.model import Agent, Assignment, Range, Study, Task

#: The kinds of feedback and cue, weakest first (methods document, #awareness-factors).
CUES = ("none", "on_request", "display", "alert", "alert_confirm")
DEFAULTS = resolve_assumptions({}, "sv10")
POLICY = resolve_policy({})


def site(cue: str | None = "display", initiator: str = "automation") -> HandoverSite:
    return HandoverSite("link", "A", "B", "pump", "pat", 2.0, cue, initiator)


# -- noisy-OR, hand-worked -----------------------------------------------------------


def test_noisy_or_by_hand():
    # 1 - (1 - 0.5)(1 - 0.2) = 1 - 0.4 = 0.6
    assert noisy_or({"a": 0.5, "b": 0.2}) == pytest.approx(0.6)
    # 1 - 0.9 * 0.8 * 0.7 = 1 - 0.504 = 0.496
    assert noisy_or({"a": 0.1, "b": 0.2, "c": 0.3}) == pytest.approx(0.496)
    assert noisy_or({}) == 0.0
    assert noisy_or({"a": 0.0, "b": 0.0}) == 0.0
    # A term of 1 settles it; terms are held within [0, 1].
    assert noisy_or({"a": 1.0, "b": 0.3}) == 1.0
    assert noisy_or({"a": 1.7}) == 1.0
    assert noisy_or({"a": -0.5, "b": 0.25}) == pytest.approx(0.25)


def test_a_handover_likelihood_by_hand():
    """Weights time 0.5, load 0.2, cue 0.4, automation_initiated 0.1, awareness 0.3;
    a display cue of weakness 0.5; the automation starts it (weight 1).

    Factors: time 0.6, load 0.25, cue 0.5, initiated 1, awareness 0.4.
    Terms: 0.30, 0.05, 0.20, 0.10, 0.12.
    likelihood = 1 - 0.70 * 0.95 * 0.80 * 0.90 * 0.88 = 1 - 0.421344 = 0.578656.
    Likelihood band (default example policy, cut at 0.2/0.4/0.6/0.8): 0.4 <= 0.5787 < 0.6
    -> 3. Twice a day: expected slips a year = 2 x 365 x 0.578656 = 422.42, at least 10:
    frequent (level 5); severity 4 and frequent: unacceptable; score 4 x 5 = 20.
    """
    assumptions = resolve_assumptions(
        {
            "likelihood_weights": {
                "time": 0.5,
                "load": 0.2,
                "cue": 0.4,
                "automation_initiated": 0.1,
                "awareness": 0.3,
            },
            "cue_weakness": {"display": 0.5},
            "initiation_weight": {"automation": 1.0},
        }
    )
    handover = assess_handover(
        site("display"),
        receiver_is_human=True,
        time_ratio=0.6,
        receiver_load=0.25,
        awareness=0.4,
        severity=4,
        assumptions=assumptions,
        policy=POLICY,
    )
    assert handover.factors == pytest.approx(
        {"time": 0.6, "load": 0.25, "cue": 0.5, "automation_initiated": 1.0, "awareness": 0.4}
    )
    assert handover.contributions == pytest.approx(
        {"time": 0.3, "load": 0.05, "cue": 0.2, "automation_initiated": 0.1, "awareness": 0.12}
    )
    assert handover.likelihood == pytest.approx(0.578656)
    assert handover.frequency_per_year == pytest.approx(422.41888)
    assert (handover.likelihood_band, handover.frequency_band) == (3, "frequent")
    assert (handover.risk, handover.band) == (20, "unacceptable")


def test_a_time_ratio_above_one_counts_as_one_and_no_window_as_none():
    """Only the time factor weighs here (others 0): ratio 1.7 -> factor 1 -> 0.5;
    no window (ratio None) -> 0."""
    assumptions = resolve_assumptions(
        {
            "likelihood_weights": {
                "time": 0.5,
                "load": 0,
                "cue": 0,
                "automation_initiated": 0,
                "awareness": 0,
            }
        }
    )
    common = {
        "receiver_is_human": True,
        "receiver_load": 0.3,
        "awareness": 0.3,
        "severity": 1,
        "assumptions": assumptions,
        "policy": POLICY,
    }
    assert assess_handover(site(), time_ratio=1.7, **common).likelihood == pytest.approx(0.5)
    late = assess_handover(site(), time_ratio=None, **common)
    assert late.likelihood == 0.0
    assert late.factors["time"] == 0.0


def test_an_automation_receiver_is_not_cued():
    handover = assess_handover(
        site("none"),
        receiver_is_human=False,
        time_ratio=None,
        receiver_load=0.0,
        awareness=0.0,
        severity=1,
        assumptions=DEFAULTS,
        policy=POLICY,
    )
    assert handover.factors["cue"] == 0.0


# -- risk banding under the default (example) policy ----------------------------------


def test_the_default_policy_is_an_example_and_says_so():
    """Methods, #handover-risk: the default policy is an example only and says so (ISO 14971: the
    manufacturer sets its own). The values read here are the inputs of the next tests."""
    assert POLICY["is_example"] is True
    assert "Example" in POLICY["note"] and "ISO 14971" in POLICY["note"]
    assert DEFAULT_RISK_POLICY["likelihood_bands"] == [0.2, 0.4, 0.6, 0.8]
    assert DEFAULT_RISK_POLICY["frequency_bands"] == [10, 1, 0.1, 0.01]
    assert resolve_policy({"frequency_bands": [5, 1, 0.1, 0.01]})["is_example"] is False
    # The score thresholds of revision 1 no longer set a band: a policy of them alone is
    # still the example.
    assert resolve_policy({"review": 8})["is_example"] is True


@pytest.mark.parametrize(
    ("likelihood", "band"),
    # Five equal bands of [0, 1], cuts at 0.2, 0.4, 0.6, 0.8; a cut belongs to the band
    # above it.
    [(0.0, 1), (0.19, 1), (0.2, 2), (0.39, 2), (0.4, 3), (0.6, 4), (0.79, 4), (0.8, 5), (1.0, 5)],
)
def test_likelihood_bands_of_the_default_policy(likelihood, band):
    assert likelihood_band(likelihood, POLICY) == band


#: The example matrix written out by hand from its rule (methods document,
#: #handover-risk): unacceptable where frequent and severity >= 3, probable or more and
#: severity >= 4, or occasional or more and severity 5; acceptable where improbable,
#: where remote and severity <= 3, or severity 1; review otherwise.
BY_HAND = {
    "frequent": ["acceptable", "review", "unacceptable", "unacceptable", "unacceptable"],
    "probable": ["acceptable", "review", "review", "unacceptable", "unacceptable"],
    "occasional": ["acceptable", "review", "review", "review", "unacceptable"],
    "remote": ["acceptable", "acceptable", "acceptable", "review", "review"],
    "improbable": ["acceptable"] * 5,
}


@pytest.mark.parametrize("frequency", list(BY_HAND))
@pytest.mark.parametrize("severity", [1, 2, 3, 4, 5])
def test_every_cell_of_the_example_matrix(frequency, severity):
    assert matrix_band(frequency, severity, POLICY) == BY_HAND[frequency][severity - 1]


@pytest.mark.parametrize(
    ("per_year", "name"),
    # Cuts at 10, 1, 0.1, 0.01 a year; a cut belongs to the band above it.
    [
        (50, "frequent"),
        (10, "frequent"),
        (9.99, "probable"),
        (1, "probable"),
        (0.5, "occasional"),
        (0.1, "occasional"),
        (0.05, "remote"),
        (0.01, "remote"),
        (0.009, "improbable"),
        (0, "improbable"),
    ],
)
def test_frequency_bands_of_the_default_policy(per_year, name):
    assert frequency_band(per_year, POLICY) == name


def test_equal_factors_a_hundred_times_apart_in_frequency_land_in_different_bands():
    """Two handovers with the same factors (likelihood 0.5 from the time factor alone),
    severity 4; one happens once a day, the other once in a hundred days.

    Daily: 1 x 365 x 0.5 = 182.5 a year, frequent -> unacceptable (score 4 x 5 = 20).
    Rare: 0.01 x 365 x 0.5 = 1.825 a year, probable -> unacceptable too at severity 4, so
    at severity 3: daily frequent -> unacceptable, rare probable -> review.
    """
    assumptions = resolve_assumptions(
        {
            "likelihood_weights": {
                "time": 0.5,
                "load": 0,
                "cue": 0,
                "automation_initiated": 0,
                "awareness": 0,
            }
        }
    )
    common = {
        "receiver_is_human": True,
        "time_ratio": 1.0,
        "receiver_load": 0.0,
        "awareness": 0.0,
        "severity": 3,
        "assumptions": assumptions,
        "policy": POLICY,
    }
    daily = HandoverSite("link", "A", "B", "pump", "pat", 1.0, "display", "human")
    rare = HandoverSite("link", "A", "B", "pump", "pat", 0.01, "display", "human")
    first, second = assess_handover(daily, **common), assess_handover(rare, **common)
    assert first.likelihood == second.likelihood == pytest.approx(0.5)
    assert first.frequency_per_year == pytest.approx(182.5)
    assert second.frequency_per_year == pytest.approx(1.825)
    assert (first.frequency_band, first.band, first.risk) == ("frequent", "unacceptable", 15)
    assert (second.frequency_band, second.band, second.risk) == ("probable", "review", 12)


def test_a_study_policy_moves_the_bands():
    policy = resolve_policy(
        {
            "likelihood_bands": [0.1, 0.2, 0.3, 0.4],
            "frequency_bands": [100, 10, 1, 0.1],
            "band_matrix": {**DEFAULT_RISK_POLICY["band_matrix"], "probable": ["review"] * 5},
        }
    )
    assert likelihood_band(0.25, policy) == 3
    assert frequency_band(50, policy) == "probable"
    assert matrix_band("probable", 1, policy) == "review"
    # A matrix given in part keeps the example's other rows.
    partial = resolve_policy({"band_matrix": {"remote": ["review"] * 5}})
    assert matrix_band("remote", 1, partial) == "review"
    assert matrix_band("frequent", 5, partial) == "unacceptable"


def test_the_default_cue_weakness_falls_with_cue_strength():
    weakness = [DEFAULTS["cue_weakness"][cue] for cue in CUES]
    assert weakness == sorted(weakness, reverse=True)
    assert len(set(weakness)) == len(CUES)


@st.composite
def cue_pair(draw) -> tuple[str, str]:
    """(weaker, stronger): two cues in that order, the second at least as strong."""
    weak = draw(st.integers(min_value=0, max_value=len(CUES) - 1))
    strong = draw(st.integers(min_value=weak, max_value=len(CUES) - 1))
    return CUES[weak], CUES[strong]


unit = st.floats(min_value=0, max_value=1, allow_nan=False)


@settings(deadline=None, max_examples=100)
@given(
    pair=cue_pair(),
    time_ratio=st.one_of(st.none(), st.floats(min_value=0, max_value=5, allow_nan=False)),
    load=unit,
    aware=unit,
    initiator=st.sampled_from(["human", "automation", "event", "schedule"]),
    severity=st.integers(min_value=1, max_value=5),
    human=st.booleans(),
)
def test_a_stronger_cue_never_raises_handover_likelihood(
    pair, time_ratio, load, aware, initiator, severity, human
):
    weak, strong = pair
    common = {
        "receiver_is_human": human,
        "time_ratio": time_ratio,
        "receiver_load": load,
        "awareness": aware,
        "severity": severity,
        "assumptions": DEFAULTS,
        "policy": POLICY,
    }
    weaker = assess_handover(site(weak, initiator), **common)
    stronger = assess_handover(site(strong, initiator), **common)
    assert stronger.likelihood <= weaker.likelihood + 1e-12
    assert stronger.risk <= weaker.risk


PAT = Agent("pat", "Pat", "human")
PUMP = Agent("pump", "Pump", "automation")


def aware_index(assignment: Assignment, initiator: str, per_day: float, mode_cue: str | None):
    task = Task("T", "T", duration_s=Range(30, 60, 90))
    study = Study("s", "s", "sv10", agents=(PAT, PUMP), tasks=(task,))
    involved = involvement(study, task, assignment, DEFAULTS)
    return awareness(study, involved, initiator, per_day, mode_cue, DEFAULTS)


assignments = st.one_of(
    st.builds(
        lambda level: Assignment(human="pat", automation="pump", levels=level),
        st.integers(min_value=1, max_value=10),
    ),
    st.just(Assignment(automation="pump", accountable="pat")),
)


@settings(deadline=None, max_examples=100)
@given(
    base=assignments,
    pair=cue_pair(),
    other=st.sampled_from(CUES),
    initiator=st.sampled_from(["human", "automation", "event", "schedule"]),
    per_day=st.floats(min_value=0, max_value=50, allow_nan=False),
    which=st.sampled_from(["feedback", "mode_cue"]),
)
def test_a_stronger_cue_never_raises_the_awareness_index(
    base, pair, other, initiator, per_day, which
):
    """The same task twice, differing only in the feedback it gives or in the cue of a
    mode change that moves it: the stronger one never scores worse (Methods,
    #awareness-factors)."""
    weak, strong = pair
    if which == "feedback":
        weaker = aware_index(replace(base, feedback=weak), initiator, per_day, other)
        stronger = aware_index(replace(base, feedback=strong), initiator, per_day, other)
    else:
        with_feedback = replace(base, feedback=other)
        weaker = aware_index(with_feedback, initiator, per_day, weak)
        stronger = aware_index(with_feedback, initiator, per_day, strong)
    assert stronger.index <= weaker.index + 1e-12


def test_awareness_by_hand():
    """Shared at sv10 level 7 (d = 2/3 everywhere), display feedback, started by the
    automation, 2 a day, no mode change, with the weights and tables of the test:

    automation = (2/3 + 2/3)/2 = 2/3; feedback = 0.5; initiation = 1; mode_change = 0;
    rarity: hands-on 2 * (1 - 2/3) = 2/3 a day against practice 1 a day -> 1 - 2/3 = 1/3.
    index = 0.3*(2/3) + 0.25*0.5 + 0.15*1 + 0.2*0 + 0.1*(1/3)
          = 0.2 + 0.125 + 0.15 + 0 + 0.0333... = 0.508333...
    """
    assumptions = resolve_assumptions(
        {
            "awareness_weights": {
                "automation": 0.3,
                "feedback": 0.25,
                "initiation": 0.15,
                "mode_change": 0.2,
                "rarity": 0.1,
            },
            "cue_weakness": {"display": 0.5},
            "initiation_weight": {"automation": 1.0},
            "practice_per_day": 1.0,
        }
    )
    task = Task("T", "T", duration_s=Range(30, 60, 90))
    study = Study("s", "s", "sv10", agents=(PAT, PUMP), tasks=(task,))
    assignment = Assignment(human="pat", automation="pump", levels=7, feedback="display")
    involved = involvement(study, task, assignment, assumptions)
    result = awareness(study, involved, "automation", 2.0, None, assumptions)
    assert result.factors == pytest.approx(
        {
            "automation": 2 / 3,
            "feedback": 0.5,
            "initiation": 1.0,
            "mode_change": 0.0,
            "rarity": 1 / 3,
        }
    )
    assert result.index == pytest.approx(0.2 + 0.125 + 0.15 + 1 / 30)


def test_awareness_is_none_without_a_person_involved_or_accountable():
    assert aware_index(Assignment(automation="pump"), "automation", 1.0, None) is None
    assert (
        aware_index(Assignment(automation="pump", accountable="pat"), "automation", 1.0, None)
        is not None
    )


# -- time budget ---------------------------------------------------------------------


def test_time_budget_ratio_by_hand():
    # (latency 20 + work 40) / (window 300 - ready 100) = 60 / 200 = 0.3
    assert time_budget_ratio(20, 40, 300, 100) == pytest.approx(0.3)
    # No window, no ratio.
    assert time_budget_ratio(20, 40, None, 100) is None
    # Ready after the window closes: the time left is floored at 1 s -> 60 / 1.
    assert time_budget_ratio(20, 40, 300, 500) == pytest.approx(60)


seconds = st.floats(min_value=0, max_value=1e6, allow_nan=False)


@settings(deadline=None, max_examples=100)
@given(
    latency=seconds,
    work=seconds,
    window=st.floats(min_value=1, max_value=1e6),
    wider_by=seconds,
    ready=seconds,
)
def test_a_wider_window_never_raises_the_time_budget_ratio(latency, work, window, wider_by, ready):
    narrow = time_budget_ratio(latency, work, window, ready)
    wide = time_budget_ratio(latency, work, window + wider_by, ready)
    assert wide <= narrow * (1 + 1e-12)


def test_the_time_budget_floor_is_a_study_setting():
    """Work ready at 400 s for a 300 s window: no time is left, so latency 20 s + work
    10 s is divided by the floor. Default floor 1 s: 30 / 1 = 30;
    a study floor of 60 s: 30 / 60 = 0.5 (methods document, #time-budget-ratio)."""
    assert time_budget_ratio(20, 10, 300, 400) == pytest.approx(30)
    assert time_budget_ratio(20, 10, 300, 400, 60) == pytest.approx(0.5)
    assert resolve_assumptions({})["time_budget_floor_s"] == 1
    assert resolve_assumptions({"time_budget_floor_s": 60})["time_budget_floor_s"] == 60


def test_a_bad_time_budget_floor_is_refused_with_its_key():
    from allocation.core.assumptions import check_assumptions

    assert [key for key, _m in check_assumptions({"time_budget_floor_s": 0})] == [
        "time_budget_floor_s"
    ]
