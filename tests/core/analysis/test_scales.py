"""Levels of automation (allocation.core.scales): the two scales as data, stage degrees,
the overall degree of automation and the category.

The level texts and the role matrix are written out here from the published sources
(Parasuraman, Sheridan & Wickens 2000, Table I; Endsley & Kaber 1999), not copied from
the code, and compared word for word and cell for cell. Stage degrees follow the rules of
the methods document, #levels-of-automation (sv10: d = (L - 1) / 9; ek10: H = 0,
H/C = 0.5, C = 1), worked by hand.
"""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core.model import Assignment
from allocation.core.scales import (
    EK10_LEVELS,
    SV10_LEVELS,
    category_of,
    degree_of_automation,
    level_text,
    stage_degrees,
    weighted_degree,
)

STAGES = ("acquisition", "analysis", "decision", "action")

#: Parasuraman, Sheridan & Wickens (2000), IEEE Trans. SMC-A 30(3), Table I, after
#: Sheridan & Verplank (1978). "The computer ..."
SV10_EXPECTED = {
    1: "offers no assistance: human must take all decisions and actions",
    2: "offers a complete set of decision/action alternatives",
    3: "narrows the selection down to a few",
    4: "suggests one alternative",
    5: "executes that suggestion if the human approves",
    6: "allows the human a restricted time to veto before automatic execution",
    7: "executes automatically, then necessarily informs the human",
    8: "informs the human only if asked",
    9: "informs the human only if it, the computer, decides to",
    10: "decides everything, acts autonomously, ignoring the human",
}

#: Endsley & Kaber (1999), Ergonomics 42(3). Level names as tabulated by Beer, Fisk &
#: Rogers (2014), J. Human-Robot Interaction 3(2), Table 3; the role matrix recalled from
#: Endsley & Kaber (1999), from memory. Columns: Monitoring, Generating, Selecting,
#: Implementing.
EK10_TABLE = """
| 1  | Manual Control            | H   | H   | H   | H   |
| 2  | Action Support            | H/C | H   | H   | H/C |
| 3  | Batch Processing          | H/C | H   | H   | C   |
| 4  | Shared Control            | H/C | H/C | H   | H/C |
| 5  | Decision Support          | H/C | H/C | H   | C   |
| 6  | Blended Decision Making   | H/C | H/C | H/C | C   |
| 7  | Rigid System              | H/C | C   | H   | C   |
| 8  | Automated Decision Making | H/C | H/C | C   | C   |
| 9  | Supervisory Control       | H/C | C   | C   | C   |
| 10 | Full Automation           | C   | C   | C   | C   |
"""


def ek10_expected() -> dict[int, tuple[str, tuple[str, ...]]]:
    rows = {}
    for line in EK10_TABLE.strip().splitlines():
        cells = [cell.strip() for cell in line.strip("|").split("|")]
        rows[int(cells[0])] = (cells[1], tuple(cells[2:]))
    return rows


SHARED = {"human": "pat", "automation": "pump"}


def shared(levels: int | dict[str, int]) -> Assignment:
    return Assignment(levels=levels, **SHARED)


# -- the scales as data ----------------------------------------------------------------


def test_sv10_has_ten_levels_with_the_published_words():
    # Parasuraman, Sheridan & Wickens (2000), Table I.
    assert SV10_LEVELS == SV10_EXPECTED


@pytest.mark.parametrize("level", range(1, 11))
def test_level_text_gives_the_sv10_words(level):
    # Parasuraman, Sheridan & Wickens (2000), Table I.
    assert level_text("sv10", level) == SV10_EXPECTED[level]


def test_ek10_names_and_role_matrix_match_the_table_cell_for_cell():
    # Endsley & Kaber (1999): names via Beer, Fisk & Rogers (2014), role matrix from memory.
    expected = ek10_expected()
    assert sorted(expected) == list(range(1, 11))
    assert {level: (name, tuple(roles)) for level, (name, roles) in EK10_LEVELS.items()} == (
        expected
    )


@pytest.mark.parametrize("level", range(1, 11))
def test_level_text_gives_the_ek10_name(level):
    # Endsley & Kaber (1999) level names (via Beer, Fisk & Rogers 2014, Table 3).
    assert level_text("ek10", level) == ek10_expected()[level][0]


# -- stage degrees -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("level", "degree"),
    # Methods, #levels-of-automation: d = (L - 1) / 9, worked by hand.
    [(1, 0.0), (4, 3 / 9), (5, 4 / 9), (7, 6 / 9), (10, 1.0)],
)
def test_one_sv10_level_for_all_stages_gives_the_same_degree_everywhere(level, degree):
    degrees = stage_degrees(shared(level), "sv10")
    assert degrees == pytest.approx(dict.fromkeys(STAGES, degree))


def test_sv10_levels_per_stage_give_a_degree_per_stage():
    # Hand-worked: (1-1)/9 = 0, (4-1)/9 = 1/3, (5-1)/9 = 4/9, (7-1)/9 = 2/3.
    levels = {"acquisition": 1, "analysis": 4, "decision": 5, "action": 7}
    assert stage_degrees(shared(levels), "sv10") == pytest.approx(
        {"acquisition": 0.0, "analysis": 1 / 3, "decision": 4 / 9, "action": 2 / 3}
    )


@pytest.mark.parametrize(
    ("level", "degrees"),
    # Endsley & Kaber's (1999) role matrix (memory), H = 0, H/C = 0.5, C = 1 (Methods).
    [
        (1, [0.0, 0.0, 0.0, 0.0]),
        (2, [0.5, 0.0, 0.0, 0.5]),
        (3, [0.5, 0.0, 0.0, 1.0]),
        (4, [0.5, 0.5, 0.0, 0.5]),
        (5, [0.5, 0.5, 0.0, 1.0]),
        (6, [0.5, 0.5, 0.5, 1.0]),
        (7, [0.5, 1.0, 0.0, 1.0]),
        (8, [0.5, 0.5, 1.0, 1.0]),
        (9, [0.5, 1.0, 1.0, 1.0]),
        (10, [1.0, 1.0, 1.0, 1.0]),
    ],
)
def test_ek10_levels_give_degrees_through_the_role_matrix(level, degrees):
    assert stage_degrees(shared(level), "ek10") == dict(zip(STAGES, degrees, strict=True))


@pytest.mark.parametrize("scale", ["sv10", "ek10"])
def test_human_only_is_all_zero_and_automation_only_all_one(scale):
    # Methods, #levels-of-automation: human-only and automation-only assignments need no
    # levels.
    assert stage_degrees(Assignment(human="pat"), scale) == dict.fromkeys(STAGES, 0.0)
    assert stage_degrees(Assignment(automation="pump"), scale) == dict.fromkeys(STAGES, 1.0)


@pytest.mark.parametrize("scale", ["sv10", "ek10"])
def test_an_assignment_that_does_not_apply_is_all_zero(scale):
    assert stage_degrees(Assignment(applies=False), scale) == dict.fromkeys(STAGES, 0.0)


# -- category ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("assignment", "scale", "category"),
    # Methods, #levels-of-automation: all 0 -> person, all 1 -> device, otherwise shared.
    [
        (Assignment(human="pat"), "sv10", "person"),
        (Assignment(automation="pump"), "sv10", "device"),
        (shared(5), "sv10", "shared"),
        (
            shared({"acquisition": 10, "analysis": 10, "decision": 10, "action": 9}),
            "sv10",
            "shared",
        ),
        (shared(1), "sv10", "person"),
        (shared(10), "sv10", "device"),
        (shared(1), "ek10", "person"),
        (shared(6), "ek10", "shared"),
        (shared(10), "ek10", "device"),
    ],
)
def test_the_category_derives_from_the_degrees(assignment, scale, category):
    assert category_of(stage_degrees(assignment, scale)) == category


# -- degree of automation -------------------------------------------------------------

levels_strategy = st.integers(min_value=1, max_value=10)


@st.composite
def level_rise(draw):
    """A level and a higher one on the same scale of 1-10."""
    low = draw(st.integers(min_value=1, max_value=9))
    return low, draw(st.integers(min_value=low + 1, max_value=10))


@settings(deadline=None, max_examples=100)
@given(
    level=st.integers(min_value=2, max_value=10),
    stages=st.lists(st.sampled_from(STAGES), min_size=2, max_size=2, unique=True),
)
def test_a_later_stage_at_the_same_level_gives_a_higher_doa(level, stages):
    """Onnasch, Wickens, Li & Manzey (2014), Human Factors 56(3), abstract: DOA rises with
    later stages.

    The level is put on one stage with the others at 1; moving it to a later stage must
    raise the overall degree.
    """
    earlier, later = sorted(stages, key=STAGES.index)
    low = dict.fromkeys(STAGES, 1) | {earlier: level}
    high = dict.fromkeys(STAGES, 1) | {later: level}
    assert degree_of_automation(stage_degrees(shared(high), "sv10")) > degree_of_automation(
        stage_degrees(shared(low), "sv10")
    )


@settings(deadline=None, max_examples=100)
@given(
    levels=st.fixed_dictionaries(dict.fromkeys(STAGES, levels_strategy)),
    stage=st.sampled_from(STAGES),
    rise=level_rise(),
)
def test_a_higher_level_gives_a_higher_doa(levels, stage, rise):
    """Onnasch, Wickens, Li & Manzey (2014), Human Factors 56(3), abstract: DOA rises with
    higher levels."""
    low, high = rise
    before = levels | {stage: low}
    after = levels | {stage: high}
    assert degree_of_automation(stage_degrees(shared(after), "sv10")) > degree_of_automation(
        stage_degrees(shared(before), "sv10")
    )


def test_doa_runs_from_zero_for_the_person_to_one_for_the_device():
    assert degree_of_automation(dict.fromkeys(STAGES, 0.0)) == pytest.approx(0.0)
    assert degree_of_automation(dict.fromkeys(STAGES, 1.0)) == pytest.approx(1.0)


def test_ek10_doa_rises_with_the_level_where_roles_only_pass_to_the_computer():
    """Going from one ek10 level to another that only moves roles toward the computer
    (H -> H/C -> C, per Endsley & Kaber's 1999 role matrix, from memory) raises the DOA."""
    matrix = ek10_expected()
    rank = {"H": 0, "H/C": 1, "C": 2}
    pairs = 0
    for low in range(1, 11):
        for high in range(low + 1, 11):
            a, b = matrix[low][1], matrix[high][1]
            if all(rank[x] <= rank[y] for x, y in zip(a, b, strict=True)) and a != b:
                pairs += 1
                assert degree_of_automation(
                    stage_degrees(shared(high), "ek10")
                ) > degree_of_automation(stage_degrees(shared(low), "ek10"))
    assert pairs > 10


def test_weighted_degree_is_split_times_degree():
    # Hand-worked: 0.5*0 + 0.3*(1/3) + 0.1*(4/9) + 0.1*(2/3) = 0.1 + 0.0444.. + 0.0666.. = 0.2111..
    degrees = {"acquisition": 0.0, "analysis": 1 / 3, "decision": 4 / 9, "action": 2 / 3}
    split = {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1}
    assert weighted_degree(degrees, split) == pytest.approx(0.1 + 0.4 / 9 + 0.2 / 3)
