"""Degrees, principal holder and person time of one assignment
(allocation.core.analysis.involvement; methods document, #person-time, #supervision and
#monitoring).

Every expected figure is hand-worked from the methods document's formulas::

    person_s = sum over stages of split_s * duration * (1 - d_s) + supervision
    supervision = max(supervision_s[L_decision], supervision_s[L_action])

with d = (L - 1) / 9 on sv10 and Endsley & Kaber's (1999) role matrix (from memory) on
ek10. The default supervision table is a tool assumption; the tests read it from the
resolved assumptions (as an input, not an expected result), and use the methods
document's statement (#supervision) that levels 1 to 4 and 10 cost nothing by default.
"""

from __future__ import annotations

import itertools
from fractions import Fraction
from typing import Any

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.analysis.involvement import Involvement, involvement
from allocation.core.assumptions import resolve_assumptions
from allocation.core.model import Agent, Assignment, Range, Study, Task

from .studies import analyse, build, leaf
from .test_scales import ek10_expected

STAGES = ("acquisition", "analysis", "decision", "action")
SV10_DEFAULT = resolve_assumptions({}, "sv10")
SUP = SV10_DEFAULT["supervision_s"]
#: The default supervision seconds by sv10 level as Baton's methods document states them
#: (#supervision): approving 5 s, a veto window 8 s, a notification 4 s, looking things
#: up 3 s; the expectations below use these, not the code's table.
STATED = {5: 5, 6: 8, 7: 4, 8: 3, 9: 3}
SHARED = {"human": "pat", "automation": "pump"}


def involved(
    assignment: dict[str, Any],
    *,
    duration: Any = (30, 60, 90),
    split: dict[str, float] | None = None,
    scale: str = "sv10",
    assumptions: dict[str, Any] | None = None,
) -> Involvement:
    """Task T (occurring at 08:00) under ``assignment``, read through the file format."""
    extra = {"split": split} if split else {}
    task = leaf("T", duration_s=list(duration), occurs={"times": ["08:00"]}, **extra)
    study = build([task], {"T": assignment}, scale=scale, assumptions=assumptions)
    resolved = resolve_assumptions(study.assumptions, study.scale)
    return involvement(study, study.task("T"), study.plan("p").assignments["T"], resolved)


# -- person time, hand-worked --------------------------------------------------------


def test_shared_sv10_per_stage_person_time():
    """Duration typical 60 s, split 0.25 each, levels {1, 4, 5, 7}.

    active = 15*(1-0) + 15*(1-3/9) + 15*(1-4/9) + 15*(1-6/9)
           = 15 + 10 + 8.333... + 5 = 115/3 = 38.333... s
    supervision = max(5 s, 4 s) = 5 s   (decision at 5, action at 7; the stated defaults)
    """
    levels = {"acquisition": 1, "analysis": 4, "decision": 5, "action": 7}
    result = involved({**SHARED, "levels": levels})
    assert result.duration_s == 60
    assert result.active_s == pytest.approx(115 / 3)
    assert result.supervision_s == 5
    assert result.human_s == pytest.approx(115 / 3 + 5)
    assert result.category == "shared"


def test_supervision_is_the_larger_of_the_decision_and_action_costs():
    """The same task with the table overridden to 5 -> 2 s, 7 -> 9 s:
    supervision = max(2, 9) = 9; total = 115/3 + 9 = 47.333... s."""
    levels = {"acquisition": 1, "analysis": 4, "decision": 5, "action": 7}
    result = involved(
        {**SHARED, "levels": levels}, assumptions={"supervision_s": {"5": 2, "7": 9}}
    )
    assert result.supervision_s == 9
    assert result.human_s == pytest.approx(115 / 3 + 9)
    swapped = {"acquisition": 1, "analysis": 4, "decision": 7, "action": 5}
    result = involved(
        {**SHARED, "levels": swapped}, assumptions={"supervision_s": {"5": 2, "7": 9}}
    )
    # active = 15 + 10 + 15*(1-6/9) + 15*(1-4/9) = 15 + 10 + 5 + 8.333... = 115/3 again.
    assert result.active_s == pytest.approx(115 / 3)
    assert result.supervision_s == 9


def test_acquisition_and_analysis_levels_cost_no_supervision():
    """Supervision reads the decision and action levels only: here both are 1, which
    costs nothing by default (Methods, #supervision: levels 1 to 4 and 10 cost none)."""
    levels = {"acquisition": 6, "analysis": 5, "decision": 1, "action": 1}
    result = involved({**SHARED, "levels": levels})
    # active = 15*(1-5/9) + 15*(1-4/9) + 15 + 15 = 6.666... + 8.333... + 30 = 45
    assert result.active_s == pytest.approx(45)
    assert result.supervision_s == 0


def test_an_uneven_split_weighs_the_stages():
    """Duration typical 90 s, split 0.5/0.3/0.1/0.1, levels {10, 7, 4, 1}.

    active = 45*(1-1) + 27*(1-6/9) + 9*(1-3/9) + 9*(1-0) = 0 + 9 + 6 + 9 = 24 s
    supervision = max(sup[4], sup[1]) = 0 (Methods, #supervision: 1 to 4 cost none by default)
    """
    split = {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1}
    levels = {"acquisition": 10, "analysis": 7, "decision": 4, "action": 1}
    result = involved({**SHARED, "levels": levels}, duration=(60, 90, 120), split=split)
    assert result.active_s == pytest.approx(24)
    assert result.supervision_s == 0
    assert result.human_s == pytest.approx(24)


def test_the_default_sv10_table_charges_levels_5_to_9_only():
    """Methods, #supervision: approving (5), a veto window (6), a notification (7), looking things
    up (8, 9) cost time; levels 1-4 and 10 cost none by default."""
    assert [SUP[str(level)] for level in (1, 2, 3, 4, 10)] == [0] * 5
    assert {level: SUP[str(level)] for level in range(5, 10)} == STATED


def test_human_only_costs_the_whole_duration():
    result = involved({"human": "pat"})
    assert (result.active_s, result.supervision_s, result.human_s) == (60, 0, 60)
    assert result.category == "person"
    assert result.time_of("pat") == 60


def test_automation_only_costs_no_person_time():
    result = involved({"automation": "pump"})
    assert (result.active_s, result.supervision_s, result.human_s) == (0, 0, 0)
    assert result.category == "device"
    assert result.time_of("pat") == 0
    assert result.people() == []


def test_the_assignment_duration_overrides_the_task_duration():
    """Task typical 60 s, assignment [2, 4, 8]: the assignment's range counts, at its
    triangular mean (2 + 4 + 8) / 3 = 14/3 s (Evans, Hastings & Peacock 2000, ch. 40),
    and at its typical 4 s beside it.

    human only: 14/3 s (typical 4 s). Shared at level 7 everywhere: 14/3 * (1 - 6/9) =
    14/9 s (typical 4/3 s) + sup[7].
    """
    alone = involved({"human": "pat", "duration_s": [2, 4, 8]})
    assert alone.human_s == pytest.approx(14 / 3)
    assert alone.human_typical_s == pytest.approx(4)
    result = involved({**SHARED, "levels": 7, "duration_s": [2, 4, 8]})
    assert result.duration_s == pytest.approx(14 / 3)
    assert result.typical_duration_s == 4
    assert result.active_s == pytest.approx(14 / 9)
    assert result.active_typical_s == pytest.approx(4 / 3)
    assert result.supervision_s == STATED[7]


def test_a_single_number_duration_is_its_own_typical():
    result = involved({"human": "pat"}, duration=(25, 25, 25))
    assert result.human_s == 25


# -- principal holder ------------------------------------------------------------------


@pytest.mark.parametrize(
    ("scale", "levels", "split", "principal"),
    [
        # sum split*d = 0.25*(0 + 0 + 1 + 1) = 0.5 exactly: not above 0.5, the human.
        ("sv10", {"acquisition": 1, "analysis": 1, "decision": 10, "action": 10}, None, "pat"),
        # 0.25*(0 + 1/9 + 1 + 1) = 0.5278 > 0.5: the automation.
        ("sv10", {"acquisition": 1, "analysis": 2, "decision": 10, "action": 10}, None, "pump"),
        # level 5 everywhere: 4/9 = 0.444 -> human; level 6: 5/9 = 0.556 -> automation.
        ("sv10", 5, None, "pat"),
        ("sv10", 6, None, "pump"),
        # split 0.5/0.3/0.1/0.1: 0.5*1 = 0.5 exactly -> human; plus 0.3*(1/9) -> automation.
        (
            "sv10",
            {"acquisition": 10, "analysis": 1, "decision": 1, "action": 1},
            {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1},
            "pat",
        ),
        (
            "sv10",
            {"acquisition": 10, "analysis": 2, "decision": 1, "action": 1},
            {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1},
            "pump",
        ),
        # ek10 (Endsley & Kaber 1999 role matrix, from memory), equal split:
        # 4 -> 0.25*(0.5+0.5+0+0.5) = 0.375 human; 5 -> 0.25*(0.5+0.5+0+1) = 0.5 human;
        # 6 -> 0.25*(0.5+0.5+0.5+1) = 0.625 automation.
        ("ek10", 4, None, "pat"),
        ("ek10", 5, None, "pat"),
        ("ek10", 6, None, "pump"),
    ],
)
def test_the_automation_is_principal_only_above_one_half(scale, levels, split, principal):
    result = involved({**SHARED, "levels": levels}, split=split, scale=scale)
    assert result.principal == principal


def test_exactly_one_half_stays_with_the_human_despite_rounding():
    """Split 1/8, 3/8, 1/8, 3/8 (exact in binary), levels {6, 8, 5, 3}:
    sum = (1*5 + 3*7 + 1*4 + 3*2) / (8*9) = 36/72 = 1/2 exactly, so the human holds it,
    although (L - 1)/9 in floating point adds up to a hair above one half."""
    split = {"acquisition": 0.125, "analysis": 0.375, "decision": 0.125, "action": 0.375}
    levels = {"acquisition": 6, "analysis": 8, "decision": 5, "action": 3}
    assert involved({**SHARED, "levels": levels}, split=split).principal == "pat"


@pytest.mark.parametrize("parts", [(1, 3, 1, 3), (1, 3, 2, 2), (3, 1, 3, 1), (1, 1, 1, 1)])
def test_the_principal_follows_the_exact_weighted_degree_at_every_level(parts):
    """Every combination of sv10 levels (10^4) under a split in eighths: the automation
    holds the task exactly when sum(split * (L - 1)/9) > 1/2, computed in exact
    fractions (fractions.Fraction as the reference)."""
    total = sum(parts)
    split = {stage: part / total for stage, part in zip(STAGES, parts, strict=True)}
    task = Task("T", "T", duration_s=Range(60, 60, 60), split=split)
    study = Study("s", "s", "sv10", agents=PEOPLE, tasks=(task,))
    wrong = []
    for combination in itertools.product(range(1, 11), repeat=4):
        levels = dict(zip(STAGES, combination, strict=True))
        exact = sum(
            Fraction(part, total) * Fraction(level - 1, 9)
            for part, level in zip(parts, combination, strict=True)
        )
        expected = "pump" if exact > Fraction(1, 2) else "pat"
        result = involvement(study, task, Assignment(levels=levels, **SHARED), SV10_DEFAULT)
        if result.principal != expected:
            wrong.append(combination)
    assert wrong == []


def test_sole_agents_are_principal():
    assert involved({"human": "pat"}).principal == "pat"
    assert involved({"automation": "pump"}).principal == "pump"


# -- monitoring by an accountable person who does not hold the task (Methods, #monitoring)


def test_an_accountable_human_monitors_when_the_automation_holds_the_task():
    """Shared at level 8 everywhere: d = 7/9, sum = 7/9 > 0.5, the pump holds it; the
    accountable person (by default the assignment's human) monitors it.

    pat: active 60*(1-7/9) = 13.333... + 3 s supervision (level 8) + a check of 42 s (the
    study's override).
    """
    result = involved(
        {**SHARED, "levels": 8, "monitoring": "each"}, assumptions={"monitoring_s": 42}
    )
    assert result.principal == "pump"
    assert result.monitor == "pat"
    assert result.monitoring_s == 42
    assert result.time_of("pat") == pytest.approx(60 * 2 / 9 + STATED[8] + 42)


def test_the_default_monitoring_time_is_used_without_an_override():
    result = involved({**SHARED, "levels": 8})
    assert result.monitoring_s == SV10_DEFAULT["monitoring_s"] > 0


def test_an_accountable_human_of_automation_only_work_monitors_it():
    result = involved(
        {"automation": "pump", "accountable": "pat", "monitoring": "each"},
        assumptions={"monitoring_s": 42},
    )
    assert (result.monitor, result.human_s, result.time_of("pat")) == ("pat", 0, 42)
    assert result.people() == ["pat"]


def test_a_second_person_accountable_for_human_work_monitors_it():
    result = involved(
        {"human": "pat", "accountable": "sam", "monitoring": "each"},
        assumptions={"monitoring_s": 42},
    )
    assert result.monitor == "sam"
    assert result.time_of("pat") == 60
    assert result.time_of("sam") == 42
    assert result.people() == ["pat", "sam"]


@pytest.mark.parametrize(
    "assignment", [{"human": "pat"}, {**SHARED, "levels": 5}, {"automation": "pump"}]
)
def test_no_monitoring_when_the_accountable_person_holds_it_or_nobody_is_accountable(assignment):
    result = involved(assignment)
    assert result.monitor is None
    assert result.monitoring_s == 0


def test_monitoring_enters_the_daily_burden_and_raises_an_accountability_finding():
    """Twice a day (08:00, 20:00), the pump does T, pat is accountable and checks each
    occurrence, 42 s each: monitoring = burden = 2 * 42 = 84 s per day; 2 interactions."""
    task = leaf("T", occurs={"times": ["08:00", "20:00"]})
    result = analyse(
        [task],
        {"T": {"automation": "pump", "accountable": "pat", "monitoring": "each"}},
        assumptions={"monitoring_s": 42},
    )
    pat = result.people["pat"]
    assert pat.monitoring_s_per_day == pytest.approx(84)
    assert pat.burden_s_per_day == pytest.approx(84)
    assert pat.interactions_per_day == pytest.approx(2)
    kinds = [(f.kind, f.tasks) for f in result.findings]
    assert ("accountability", ("T",)) in kinds


# -- ek10 ----------------------------------------------------------------------------


def test_ek10_person_time_and_supervision_by_level():
    """ek10 level 6 (H/C, H/C, H/C, C -> 0.5, 0.5, 0.5, 1), duration 60, equal split:
    active = 15*0.5 + 15*0.5 + 15*0.5 + 15*0 = 22.5 s; supervision is the table's
    entry for level 6 (overridden to 11 s)."""
    result = involved(
        {**SHARED, "levels": 6}, scale="ek10", assumptions={"supervision_s": {"6": 11}}
    )
    assert result.active_s == pytest.approx(22.5)
    assert result.supervision_s == 11
    assert result.human_s == pytest.approx(33.5)


@pytest.mark.parametrize("level", range(1, 11))
def test_ek10_default_supervision_follows_the_implementing_role(level):
    """Methods, #supervision: ek10 levels map by their Selecting and Implementing roles, as sv10
    levels 1-4 (the computer does not act) and 10 (nobody is told) cost none. Read with
    Endsley & Kaber's (1999) role matrix (memory): where the person takes part in
    implementing (I = H or H/C), or at Full Automation, no supervision; where the
    computer implements and the person still has a role, some."""
    table = resolve_assumptions({}, "ek10")["supervision_s"]
    result = involved({**SHARED, "levels": level}, scale="ek10")
    assert result.supervision_s == table[str(level)]
    implementing = ek10_expected()[level][1][3]
    if implementing != "C" or level == 10:
        assert result.supervision_s == 0
    else:
        assert result.supervision_s > 0


# -- monotonicity ----------------------------------------------------------------------

PEOPLE = (
    Agent("pat", "Pat", "human"),
    Agent("pump", "Pump", "automation"),
)


@st.composite
def splits(draw) -> dict[str, float]:
    """Stage shares adding up to 1 (some may be 0)."""
    parts = draw(st.lists(st.integers(min_value=0, max_value=10), min_size=4, max_size=4))
    if not sum(parts):
        parts = [1, 1, 1, 1]
    return {stage: part / sum(parts) for stage, part in zip(STAGES, parts, strict=True)}


def person_time(levels: dict[str, int], split: dict[str, float], duration: float) -> Involvement:
    task = Task("T", "T", duration_s=Range(duration, duration, duration), split=split)
    study = Study("s", "s", "sv10", agents=PEOPLE, tasks=(task,))
    return involvement(study, task, Assignment(levels=levels, **SHARED), SV10_DEFAULT)


level = st.integers(min_value=1, max_value=10)
levels_strategy = st.fixed_dictionaries(dict.fromkeys(STAGES, level))
durations = st.floats(min_value=0.1, max_value=1e5, allow_nan=False)


@st.composite
def level_rise(draw, pairs=None) -> tuple[int, int]:
    """A level and a higher one; from ``pairs`` when given."""
    if pairs is not None:
        return draw(st.sampled_from(pairs))
    low = draw(st.integers(min_value=1, max_value=9))
    return low, draw(st.integers(min_value=low + 1, max_value=10))


@settings(deadline=None, max_examples=100)
@given(levels_strategy, st.sampled_from(STAGES), level_rise(), splits(), durations)
def test_raising_a_level_never_raises_active_person_time(levels, stage, rise, split, duration):
    """Each stage's active share split_s * duration * (1 - d_s) falls as d_s rises."""
    low, high = rise
    before = person_time(levels | {stage: low}, split, duration)
    after = person_time(levels | {stage: high}, split, duration)
    assert after.active_s <= before.active_s + 1e-9


#: Pairs of levels (lower, higher) between which the default table does not rise.
NOT_RISING = [
    (low, high)
    for low in range(1, 10)
    for high in range(low + 1, 11)
    if SUP[str(high)] <= SUP[str(low)]
]


@settings(deadline=None, max_examples=100)
@given(levels_strategy, st.sampled_from(STAGES), level_rise(NOT_RISING), splits(), durations)
def test_raising_a_level_never_raises_person_time_where_the_table_does_not_rise(
    levels, stage, rise, split, duration
):
    """Person time (Methods, #person-time: active + supervision) never rises with a level,
    provided the supervision table does not rise between the two levels.

    That proviso is needed on purpose: the default table makes 4 -> 5 a possible rise,
    because approving each suggestion (sv10 level 5) costs the person time that levels
    1-4 do not; a task short enough loses less active time than the approval adds. The
    default table also rises from 5 (approve) to 6 (watch a veto window), so the pairs
    drawn here are those where it does not: within 1-4, from 6 upward, 5 to 7-10, and
    any level to 10.

    It is about the assignment's own person time: an accountable person's monitoring
    (Methods, #monitoring) is added on top when a raise passes the task to the automation (see
    test_monitoring_can_start_when_a_raise_passes_the_task_to_the_automation).
    """
    low, high = rise
    before = person_time(levels | {stage: low}, split, duration)
    after = person_time(levels | {stage: high}, split, duration)
    assert after.human_s <= before.human_s + 1e-9


def test_the_pairs_drawn_cover_levels_one_to_four_and_six_upward():
    assert {(1, 2), (1, 4), (3, 4), (6, 7), (7, 8), (8, 9), (9, 10), (5, 7), (4, 10)} <= set(
        NOT_RISING
    )


def test_approving_can_cost_more_than_the_automation_saves():
    """Decision 4 -> 5 on a 1 s task, equal split: active falls by 0.25*1*(1/9) = 0.028 s,
    supervision rises from sup[4] = 0 to sup[5] > 0 (Methods, #supervision)."""
    base = {"acquisition": 1, "analysis": 1, "decision": 4, "action": 1}
    split = dict.fromkeys(STAGES, 0.25)
    before = person_time(base, split, 1.0)
    after = person_time(base | {"decision": 5}, split, 1.0)
    assert after.active_s == pytest.approx(before.active_s - 0.25 / 9)
    assert after.human_s == pytest.approx(before.human_s - 0.25 / 9 + STATED[5])
    assert after.human_s > before.human_s


def test_monitoring_can_start_when_a_raise_passes_the_task_to_the_automation():
    """{1, 1, 10, 10} -> {1, 2, 10, 10}, 60 s, equal split, accountable pat:
    sum split*d goes from 0.5 (pat holds it) to 0.528 (the pump does); pat's active time
    falls by 15/9 = 1.667 s, supervision stays max(sup[10], sup[10]) = 0, and
    a check of each occurrence, 42 s, is added."""
    base = {"acquisition": 1, "analysis": 1, "decision": 10, "action": 10}
    assumptions = {"monitoring_s": 42}
    each = {**SHARED, "monitoring": "each"}
    before = involved({**each, "levels": base}, assumptions=assumptions)
    after = involved({**each, "levels": base | {"analysis": 2}}, assumptions=assumptions)
    assert (before.principal, after.principal) == ("pat", "pump")
    assert after.human_s == pytest.approx(before.human_s - 15 / 9)
    assert after.time_of("pat") == pytest.approx(before.time_of("pat") - 15 / 9 + 42)
