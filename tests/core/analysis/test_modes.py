"""The mode map in the analyses (allocation.core.analysis.modes): the matrix exponential,
the share of the day in each mode, and the assignment in force in a mode.

scipy is the reference for the matrix exponential (``scipy.linalg.expm``) and for the
integral of the occupancy of a larger map (``scipy.integrate.quad_vec``); the two-mode
occupancy is checked against its closed form, derived by hand below.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core import read_study
from allocation.core.analysis.modes import assignment_in_mode, expm, mode_occupancy
from allocation.core.model import Mode, ModeMap, Transition

from .studies import analyse, leaf


def generator(rng: np.random.Generator, size: int, scale: float) -> np.ndarray:
    """A random rate matrix: non-negative off the diagonal, rows adding up to 0."""
    rates = rng.uniform(0, scale, (size, size)) * (rng.random((size, size)) < 0.7)
    np.fill_diagonal(rates, 0)
    return rates - np.diag(rates.sum(axis=1))


@pytest.mark.parametrize("seed", range(12))
def test_expm_matches_scipy_on_random_generator_matrices(seed):
    # scipy as reference.
    rng = np.random.default_rng(seed)
    size = int(rng.integers(1, 7))
    scale = [0.01, 1.0, 10.0, 100.0, 1000.0, 10000.0][seed % 6]
    matrix = generator(rng, size, scale)
    expected = scipy.linalg.expm(matrix)
    assert np.allclose(expm(matrix), expected, rtol=1e-9, atol=1e-10)
    # Rows of exp(Q t) are probabilities: non-negative, adding up to 1.
    assert np.allclose(expm(matrix).sum(axis=1), 1.0)


@pytest.mark.parametrize("seed", range(6))
def test_expm_matches_scipy_on_van_loan_block_matrices(seed):
    """The block [[Q, I], [0, 0]] that mode_occupancy exponentiates (scipy as reference)."""
    rng = np.random.default_rng(100 + seed)
    size = int(rng.integers(2, 5))
    matrix = generator(rng, size, 50.0)
    block = np.zeros((2 * size, 2 * size))
    block[:size, :size] = matrix
    block[:size, size:] = np.eye(size)
    assert np.allclose(expm(block), scipy.linalg.expm(block), rtol=1e-9, atol=1e-12)


def test_expm_of_zero_is_the_identity():
    assert np.array_equal(expm(np.zeros((3, 3))), np.eye(3))


def two_modes(a: float | None, b: float | None) -> ModeMap:
    return ModeMap(
        "A",
        (Mode("A", "Mode A"), Mode("B", "Mode B")),
        (
            Transition("A", "B", "fault", "automation", "alert", per_day=a),
            Transition("B", "A", "repair", "human", "display", per_day=b),
        ),
    )


def closed_form_share_b(a: float, b: float, days: float = 1.0) -> float:
    """Day-average share of time in B of a two-state Markov chain that starts in A.

    Hand-worked. With rates a (A -> B) and b (B -> A), p_B' = a (1 - p_B) - b p_B, and
    p_B(0) = 0, so p_B(t) = a/(a+b) * (1 - exp(-(a+b) t)). Averaged over [0, T]:

        (1/T) * integral_0^T p_B dt = a/(a+b) * (1 - (1 - exp(-(a+b) T)) / ((a+b) T)).
    """
    k = a + b
    return a / k * (1 - (1 - math.exp(-k * days)) / (k * days))


@pytest.mark.parametrize(
    ("a", "b"), [(1.0, 1.0), (2.0, 48.0), (0.1, 0.5), (48.0, 2.0), (24.0, 24.0), (0.5, 0.0)]
)
def test_two_mode_occupancy_matches_the_closed_form(a, b):
    shares = mode_occupancy(two_modes(a, b or None))
    assert shares["B"] == pytest.approx(closed_form_share_b(a, b), rel=1e-9)
    assert shares["A"] + shares["B"] == pytest.approx(1.0)


def test_one_way_occupancy_by_hand():
    """b = 0: p_B(t) = 1 - exp(-a t); the day average is 1 - (1 - exp(-a)) / a.
    With a = 1: 1 - (1 - 1/e) = 1/e = 0.36788."""
    assert mode_occupancy(two_modes(1.0, None))["B"] == pytest.approx(math.exp(-1))


@settings(deadline=None, max_examples=100)
@given(
    a=st.floats(min_value=0.01, max_value=200, allow_nan=False),
    b=st.floats(min_value=0.01, max_value=200, allow_nan=False),
)
def test_two_mode_occupancy_matches_the_closed_form_for_any_rates(a, b):
    assert mode_occupancy(two_modes(a, b))["B"] == pytest.approx(
        closed_form_share_b(a, b), rel=1e-7, abs=1e-10
    )


def test_a_longer_horizon_uses_the_same_closed_form():
    assert mode_occupancy(two_modes(0.3, 0.2), horizon_days=7)["B"] == pytest.approx(
        closed_form_share_b(0.3, 0.2, days=7)
    )


def test_without_rates_all_time_is_spent_in_the_initial_mode():
    assert mode_occupancy(two_modes(None, None)) == {"A": 1.0, "B": 0.0}


def test_only_rated_transitions_move_time_and_self_loops_do_nothing():
    modes = ModeMap(
        "A",
        (Mode("A", "A"), Mode("B", "B"), Mode("C", "C")),
        (
            Transition("A", "B", "switch", "human", "none"),
            Transition("A", "A", "tick", "automation", "none", per_day=40),
            Transition("B", "C", "fault", "automation", "none", per_day=10),
        ),
    )
    assert mode_occupancy(modes) == {"A": 1.0, "B": 0.0, "C": 0.0}


def test_three_mode_occupancy_matches_a_numerical_integral():
    """A -> B 3/day, B -> C 5/day, C -> A 2/day, B -> A 1/day: the day average of
    e_A . expm(Q t) by scipy.integrate.quad_vec and scipy.linalg.expm (the reference)."""
    modes = ModeMap(
        "A",
        (Mode("A", "A"), Mode("B", "B"), Mode("C", "C")),
        (
            Transition("A", "B", "1", "automation", "none", per_day=3),
            Transition("B", "C", "2", "automation", "none", per_day=5),
            Transition("C", "A", "3", "human", "none", per_day=2),
            Transition("B", "A", "4", "human", "none", per_day=1),
        ),
    )
    q = np.array([[-3.0, 3.0, 0.0], [1.0, -6.0, 5.0], [2.0, 0.0, -2.0]])
    integral, _error = scipy.integrate.quad_vec(lambda t: scipy.linalg.expm(q * t)[0], 0, 1)
    shares = mode_occupancy(modes)
    assert [shares[m] for m in "ABC"] == pytest.approx(list(integral), rel=1e-8)


def test_an_unknown_initial_mode_gives_no_shares():
    assert mode_occupancy(ModeMap("Z", (Mode("A", "A"),))) == {}


def test_a_mode_override_replaces_the_plan_assignment(make_study):
    """Home heating (test study): in mode ``hold`` the resident holds T2 alone; in mode
    ``schedule`` and with no mode, the plan's shared assignment applies."""
    study = read_study(make_study())
    plan = study.plan("auto")
    held = assignment_in_mode(plan, "hold", "T2")
    assert (held.human, held.automation, held.levels, held.feedback) == (
        "resident",
        None,
        None,
        None,
    )
    normal = assignment_in_mode(plan, "schedule", "T2")
    assert normal is plan.assignments["T2"]
    assert (normal.automation, normal.levels) == ("thermostat", 7)
    assert assignment_in_mode(plan, None, "T2") is plan.assignments["T2"]
    assert assignment_in_mode(plan, "hold", "T1") is plan.assignments["T1"]


def test_burden_and_mode_handovers_follow_the_share_of_the_day_in_each_mode():
    """T once a day (08:00), 60 s. Mode A (initial): the pump does it alone; mode B: pat
    does it alone. A -> B at a = 2 a day, B -> A at b = 6 a day.

    share_B = the long-run share a / (a + b) = 0.25 (the stationary distribution of the
    two-mode chain; the mode is carried across midnight); pat's burden = 1 * share_B *
    60 s. Mode handovers, each at its rate times the share of the day in its source
    mode: A -> B (pump to pat) a * share_A, B -> A (pat to pump) b * share_B.
    """
    plan = {
        "id": "p",
        "name": "Plan",
        "assignments": {"T": {"automation": "pump"}},
        "modes": {
            "initial": "A",
            "states": [
                {"id": "A", "name": "Automatic"},
                {"id": "B", "name": "Manual", "overrides": {"T": {"human": "pat"}}},
            ],
            "transitions": [
                {
                    "from": "A",
                    "to": "B",
                    "trigger": "fault",
                    "by": "automation",
                    "cue": "alert",
                    "per_day": 2,
                },
                {
                    "from": "B",
                    "to": "A",
                    "trigger": "resume",
                    "by": "human",
                    "cue": "display",
                    "per_day": 6,
                },
            ],
        },
    }
    task = leaf("T", occurs={"times": ["08:00"]}, duration_s=60)
    result = analyse([task], plans=[plan])
    share_b = 2 / (2 + 6)
    assert result.mode_share["B"] == pytest.approx(share_b)
    assert result.people["pat"].burden_s_per_day == pytest.approx(share_b * 60)
    assert result.people["pat"].interactions_per_day == pytest.approx(share_b)
    modes = {
        (h.site.from_agent, h.site.to_agent): h.site.per_day
        for h in result.handovers
        if h.site.source == "mode"
    }
    assert modes == pytest.approx(
        {("pump", "pat"): 2 * (1 - share_b), ("pat", "pump"): 6 * share_b}
    )
