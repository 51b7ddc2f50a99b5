"""NASA-TLX scores (Hart & Staveland 1988): a worked check of the published weighted and
raw formulas, the messages for bad ratings and comparisons, and properties that hold for
every input.

The tally check (Landau 1953) is compared with a brute-force enumeration of all 2^15
ways to answer the 15 pairs.
"""

from __future__ import annotations

import itertools

import pytest
from hypothesis import given
from hypothesis import strategies as st

from allocation.core.tlx import (
    PAIRS,
    SUBSCALES,
    RatingInvalid,
    check_tallies,
    raw_tlx,
    tally_choices,
    tlx_score,
    weighted_tlx,
)

# Worked by hand (constructed, not a published example) from the weighted score of Hart &
# Staveland (1988), sum of weight x rating / 15, and the raw score of Byers, Bittner & Hill
# (1989), the mean: ratings 70, 20, 60, 40, 65, 30 with weights 5, 0, 3, 2, 4, 1 ->
# weighted 60.0, raw 47.5.
CHECK_RATINGS = dict(zip(SUBSCALES, (70, 20, 60, 40, 65, 30), strict=True))
CHECK_TALLIES = dict(zip(SUBSCALES, (5, 0, 3, 2, 4, 1), strict=True))


def test_the_hand_worked_check_value():
    """Weighted 60.0 = (350 + 0 + 180 + 80 + 260 + 30) / 15; raw 47.5 = 285 / 6."""
    result = tlx_score(CHECK_RATINGS, CHECK_TALLIES)
    assert result.weighted == pytest.approx(60.0)
    assert result.raw == pytest.approx(47.5)
    assert result.score == pytest.approx(60.0) and result.kind == "weighted"


def test_the_check_value_from_the_fifteen_choices():
    """Choices in which the subscale earlier in CHECK_TALLIES' order of strength wins give
    the same tallies, hence the same score."""
    strength = {key: CHECK_TALLIES[key] for key in SUBSCALES}
    choices = [max(pair, key=strength.get) for pair in PAIRS]
    assert tally_choices(choices) == CHECK_TALLIES
    assert tlx_score(CHECK_RATINGS, choices=choices).weighted == pytest.approx(60.0)


def test_raw_score_without_comparisons():
    result = tlx_score(CHECK_RATINGS)
    assert result.kind == "raw" and result.tallies is None
    assert result.score == pytest.approx(47.5)


def test_there_are_fifteen_pairs_each_subscale_in_five():
    assert len(PAIRS) == 15 and len(set(PAIRS)) == 15
    assert all(sum(key in pair for pair in PAIRS) == 5 for key in SUBSCALES)


def messages(error: RatingInvalid) -> dict[str, str]:
    return {problem.path: problem.message for problem in error.problems}


def test_bad_ratings_name_the_subscale_and_why():
    ratings = {**CHECK_RATINGS, "mental": 120, "effort": "lots", "sleepiness": 5}
    del ratings["frustration"]
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(ratings)
    found = messages(caught.value)
    assert found["ratings.mental"] == "Mental demand must be from 0 to 100; got 120"
    assert found["ratings.effort"] == "Effort must be a number from 0 to 100; got 'lots'"
    assert found["ratings.frustration"] == "Frustration: no rating given"
    assert "'sleepiness' is not a NASA-TLX subscale" in found["ratings.sleepiness"]


@pytest.mark.parametrize("value", [True, float("nan"), float("inf"), -5, None])
def test_non_ratings_are_refused(value):
    with pytest.raises(RatingInvalid) as caught:
        tlx_score({**CHECK_RATINGS, "physical": value})
    assert list(messages(caught.value)) == ["ratings.physical"]


def test_a_value_between_the_marks_is_kept_with_a_warning():
    result = tlx_score({**CHECK_RATINGS, "temporal": 62})
    assert result.ratings["temporal"] == 62
    [warning] = result.warnings
    assert warning.level == "warning" and warning.path == "ratings.temporal"
    assert "between the scale's marks (drawn in steps of 5)" in warning.message


def test_tallies_must_add_up_to_fifteen():
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(CHECK_RATINGS, {**CHECK_TALLIES, "physical": 1})
    assert messages(caught.value) == {
        "tallies": "the tallies add up to 16; the 15 comparisons give 15 in all"
    }


def test_a_tally_above_five_names_the_subscale():
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(CHECK_RATINGS, {**CHECK_TALLIES, "mental": 6, "effort": 3})
    assert (
        "Mental demand must be chosen a whole number of times from 0 to 5"
        in (messages(caught.value)["tallies.mental"])
    )


def test_tallies_no_choices_could_give_are_refused():
    """5, 5, 5, 0, 0, 0 adds up to 15, but the three fives meet each other."""
    tallies = dict(zip(SUBSCALES, (5, 5, 5, 0, 0, 0), strict=True))
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(CHECK_RATINGS, tallies)
    message = messages(caught.value)["tallies"]
    assert message.startswith("no set of 15 choices gives these tallies")
    # The two lowest (both 0) meet in one pair, which one of them must win.
    assert message.endswith(
        "Performance and Effort meet in 1 pair, so between them they must be chosen at "
        "least 1 time, not 0 times"
    )


def test_landau_condition_agrees_with_every_way_to_answer_the_pairs():
    """Brute force: the tallies of all 2^15 answer sheets are exactly the tallies the check
    accepts among all 0-5 sextuples adding up to 15 (Landau 1953)."""
    possible = set()
    for bits in range(2 ** len(PAIRS)):
        choices = [pair[(bits >> i) & 1] for i, pair in enumerate(PAIRS)]
        tallies = tally_choices(choices)
        possible.add(tuple(tallies[key] for key in SUBSCALES))
    accepted = {
        values
        for values in itertools.product(range(6), repeat=6)
        if sum(values) == 15 and not check_tallies(dict(zip(SUBSCALES, values, strict=True)))[1]
    }
    assert accepted == possible
    assert len(possible) < sum(  # the check refuses some sums of 15
        1 for values in itertools.product(range(6), repeat=6) if sum(values) == 15
    )


def test_pairs_left_open_or_wrongly_answered_are_named():
    choices = [pair[0] for pair in PAIRS]
    choices[2] = None
    choices[4] = "effort"  # pair 5 is mental demand or frustration
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(CHECK_RATINGS, choices=choices)
    found = messages(caught.value)
    assert found["pairs[3]"] == "pair 3 (Mental demand or Performance): choose one of the two"
    assert found["pairs[5]"] == (
        "pair 5 (Mental demand or Frustration): 'effort' is not one of the two"
    )


def test_no_pair_answered_is_one_message():
    with pytest.raises(RatingInvalid) as caught:
        tlx_score(CHECK_RATINGS, choices=[None] * 15)
    assert messages(caught.value) == {
        "pairs": "none of the 15 pairs is answered; choose in each, or score raw"
    }


def test_both_tallies_and_choices_is_refused():
    with pytest.raises(RatingInvalid, match="not both"):
        tlx_score(CHECK_RATINGS, CHECK_TALLIES, [pair[0] for pair in PAIRS])


# -- properties ------------------------------------------------------------------------

rating_values = st.integers(0, 20).map(lambda n: n * 5)
ratings_strategy = st.lists(rating_values, min_size=6, max_size=6).map(
    lambda values: dict(zip(SUBSCALES, values, strict=True))
)
choices_strategy = st.lists(st.integers(0, 1), min_size=15, max_size=15).map(
    lambda bits: [pair[bit] for pair, bit in zip(PAIRS, bits, strict=True)]
)


@given(ratings_strategy, choices_strategy)
def test_weighted_score_lies_between_the_chosen_ratings(ratings, choices):
    tallies = tally_choices(choices)
    weighted = weighted_tlx(ratings, tallies)
    chosen = [ratings[key] for key in SUBSCALES if tallies[key]]
    assert min(chosen) - 1e-9 <= weighted <= max(chosen) + 1e-9
    assert min(ratings.values()) <= raw_tlx(ratings) <= max(ratings.values())


@given(rating_values, choices_strategy)
def test_equal_ratings_score_that_rating(value, choices):
    ratings = dict.fromkeys(SUBSCALES, value)
    result = tlx_score(ratings, choices=choices)
    assert result.weighted == pytest.approx(value) and result.raw == pytest.approx(value)


@given(ratings_strategy, choices_strategy)
def test_weighted_score_is_the_mean_rating_of_the_fifteen_winners(ratings, choices):
    """Σ rating × tally / 15 counts each winner's rating once per pair it won."""
    winners = [ratings[chosen] for chosen in choices]
    assert tlx_score(ratings, choices=choices).weighted == pytest.approx(sum(winners) / 15)


@given(ratings_strategy)
def test_choosing_the_higher_rating_in_every_pair_never_lowers_the_score(ratings):
    """Each subscale is in five pairs, so the mean over pairs of (a + b) / 2 is the raw
    score; choosing the larger of each pair gives at least that, the smaller at most."""
    higher = [max(pair, key=ratings.get) for pair in PAIRS]
    lower = [min(pair, key=ratings.get) for pair in PAIRS]
    raw = raw_tlx(ratings)
    up = tlx_score(ratings, choices=higher).weighted
    down = tlx_score(ratings, choices=lower).weighted
    assert down - 1e-9 <= raw <= up + 1e-9
    assert up + down == pytest.approx(2 * raw)


@given(choices_strategy)
def test_tallies_of_any_answers_pass_the_check(choices):
    tallies = tally_choices(choices)
    assert sum(tallies.values()) == 15
    assert check_tallies(tallies)[1] == []
