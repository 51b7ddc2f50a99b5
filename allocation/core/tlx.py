"""NASA-TLX workload ratings: the six subscales, the 15 pairwise comparisons, and the raw
and weighted scores.

A participant rates a task on six subscales from 0 to 100; the scale is drawn in steps
of 5 (21 marks), so a value off those marks is kept as typed but flagged. For the
weighted score the participant also chooses, in each of the 15 pairs of subscales, the
one that contributed more to the workload of the task; a subscale's *tally* (weight) is
how often it was chosen, 0 to 5, and the tallies add up to 15. The weighted score is
``Σ rating × tally / 15``; the raw score (no comparisons) is the mean of the six ratings.

Not every six tallies that add up to 15 can come from 15 choices: two subscales cannot
both win all five of their pairs, since they meet in one. Tallies given directly are
therefore checked against Landau's (1953) condition for the score sequence of a
round-robin tournament: sorted ascending, the first ``k`` add up to at least
``k (k - 1) / 2`` for every ``k``, and all six to exactly 15.

References
----------
.. [1] Hart, S. G., & Staveland, L. E. (1988). Development of NASA-TLX (Task Load
   Index): results of empirical and theoretical research. In P. A. Hancock & N. Meshkati
   (Eds.), Human Mental Workload, Advances in Psychology 52, 139-183.
.. [2] Byers, J. C., Bittner, A. C., & Hill, S. G. (1989). Traditional and raw task load
   index (TLX) correlations: are paired comparisons necessary? In A. Mital (Ed.),
   Advances in Industrial Ergonomics and Safety I, 481-485. (Pages, and raw TLX as the
   *mean* of the six ratings, from memory.)
.. [3] Landau, H. G. (1953). On dominance relations and the structure of animal
   societies: III. The condition for a score structure. Bulletin of Mathematical
   Biophysics, 15(2), 143-148.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from itertools import combinations
from numbers import Real
from typing import Any

from .errors import BatonError, Problem

__all__ = [
    "PAIRS",
    "SCALE_MAX",
    "SCALE_STEP",
    "SUBSCALES",
    "SUBSCALE_NAMES",
    "SUBSCALE_QUESTIONS",
    "TOTAL_TALLY",
    "RatingInvalid",
    "TlxScore",
    "check_ratings",
    "check_tallies",
    "raw_tlx",
    "tally_choices",
    "tlx_score",
    "weighted_tlx",
]

#: The six subscales, in the order of Hart & Staveland (1988).
SUBSCALES = ("mental", "physical", "temporal", "performance", "effort", "frustration")
SUBSCALE_NAMES = {
    "mental": "Mental demand",
    "physical": "Physical demand",
    "temporal": "Temporal demand",
    "performance": "Performance",
    "effort": "Effort",
    "frustration": "Frustration",
}
#: What each subscale asks, in our own words, with the ends of its scale.
SUBSCALE_QUESTIONS = {
    "mental": ("How much thinking, deciding and remembering did the task take?", "low", "high"),
    "physical": ("How much physical activity did the task take?", "low", "high"),
    "temporal": ("How much time pressure did the pace of the task put on you?", "low", "high"),
    # Performance runs the other way: 0 is complete success, 100 is failure.
    "performance": ("How well did you do what the task asked of you?", "perfect", "failure"),
    "effort": ("How hard did you have to work to do as well as you did?", "low", "high"),
    "frustration": ("How irritated, stressed or discouraged did you feel?", "low", "high"),
}
#: The 15 pairwise comparisons, each pair once, in a fixed order.
PAIRS: tuple[tuple[str, str], ...] = tuple(combinations(SUBSCALES, 2))
SCALE_MAX = 100
SCALE_STEP = 5
#: The tallies of the 15 comparisons add up to 15.
TOTAL_TALLY = len(PAIRS)
MAX_TALLY = len(SUBSCALES) - 1


class RatingInvalid(BatonError):
    """Ratings or comparisons that cannot be scored; ``problems`` says which value and why.

    Each problem's ``path`` is ``ratings.<subscale>``, ``tallies.<subscale>``,
    ``tallies`` (the set as a whole) or ``pairs[<n>]`` (pair ``n``, counted from 1).
    """

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        errors = [p for p in problems if p.is_error]
        super().__init__("; ".join(f"{p.path}: {p.message}" for p in errors))

    @property
    def errors(self) -> list[Problem]:
        return [p for p in self.problems if p.is_error]


def _number(value: Any) -> float | None:
    """A finite real number (not a bool), or ``None``."""
    if isinstance(value, bool) or not isinstance(value, Real):
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _count(number: int, word: str) -> str:
    return f"{number} {word}{'' if number == 1 else 's'}"


def _keys_problems(given: Mapping[str, Any], prefix: str, what: str) -> list[Problem]:
    problems = [
        Problem(f"{prefix}.{key}", f"{SUBSCALE_NAMES[key]}: no {what} given")
        for key in SUBSCALES
        if key not in given
    ]
    problems += [
        Problem(
            f"{prefix}.{key}",
            f"{key!r} is not a NASA-TLX subscale; the six are {', '.join(SUBSCALES)}",
        )
        for key in given
        if key not in SUBSCALES
    ]
    return problems


def check_ratings(ratings: Mapping[str, Any]) -> tuple[dict[str, float], list[Problem]]:
    """The six ratings as numbers, with every problem found.

    Parameters
    ----------
    ratings : mapping
        Subscale (one of :data:`SUBSCALES`) to its rating, a number from 0 to 100.

    Returns
    -------
    ratings : dict
        Each subscale's rating as a float (only those that are valid numbers).
    problems : list of Problem
        Errors (missing, unknown, not a number, outside 0-100) and warnings (a value off
        the scale's marks in steps of 5: kept as typed). Paths are ``ratings.<subscale>``.

    References
    ----------
    Hart & Staveland (1988): six subscales rated 0-100 in steps of 5.
    """
    problems = _keys_problems(ratings, "ratings", "rating")
    checked: dict[str, float] = {}
    for key in SUBSCALES:
        if key not in ratings:
            continue
        name = SUBSCALE_NAMES[key]
        value = _number(ratings[key])
        if value is None:
            problems.append(
                Problem(
                    f"ratings.{key}",
                    f"{name} must be a number from 0 to 100; got {ratings[key]!r}",
                )
            )
        elif not 0 <= value <= SCALE_MAX:
            problems.append(
                Problem(f"ratings.{key}", f"{name} must be from 0 to 100; got {value:g}")
            )
        else:
            checked[key] = value
            if value % SCALE_STEP:
                problems.append(
                    Problem(
                        f"ratings.{key}",
                        f"{name} {value:g} is between the scale's marks (drawn in steps of "
                        f"{SCALE_STEP}); kept as given",
                        "warning",
                    )
                )
    return checked, problems


def check_tallies(tallies: Mapping[str, Any]) -> tuple[dict[str, int], list[Problem]]:
    """The six tallies of the pairwise comparisons as whole numbers, with every problem.

    Parameters
    ----------
    tallies : mapping
        Subscale to how many of its five pairs it was chosen in: a whole number 0 to 5.

    Returns
    -------
    tallies : dict
        Each subscale's tally (only those that are valid whole numbers).
    problems : list of Problem
        Errors naming the subscale (``tallies.<subscale>``), or the set as a whole
        (``tallies``) when the tallies do not add up to 15 or no 15 choices could give
        them (Landau's condition).

    References
    ----------
    Hart & Staveland (1988): 15 pairwise comparisons, weights 0-5 summing to 15.
    Landau (1953): the score sequences of round-robin tournaments.
    """
    problems = _keys_problems(tallies, "tallies", "tally")
    checked: dict[str, int] = {}
    for key in SUBSCALES:
        if key not in tallies:
            continue
        value = _number(tallies[key])
        if value is None or not value.is_integer() or not 0 <= value <= MAX_TALLY:
            problems.append(
                Problem(
                    f"tallies.{key}",
                    f"{SUBSCALE_NAMES[key]} must be chosen a whole number of times from 0 to "
                    f"{MAX_TALLY} (it is in {MAX_TALLY} of the pairs); got {tallies[key]!r}",
                )
            )
        else:
            checked[key] = int(value)
    if problems:
        return checked, problems
    total = sum(checked.values())
    if total != TOTAL_TALLY:
        problems.append(
            Problem(
                "tallies",
                f"the tallies add up to {total}; the {TOTAL_TALLY} comparisons give "
                f"{TOTAL_TALLY} in all",
            )
        )
        return checked, problems
    ordered = sorted(checked.items(), key=lambda item: item[1])
    running = 0
    for k, (_key, value) in enumerate(ordered, start=1):
        running += value
        if running < k * (k - 1) // 2:
            names = [SUBSCALE_NAMES[key] for key, _value in ordered[:k]]
            least = k * (k - 1) // 2
            problems.append(
                Problem(
                    "tallies",
                    f"no set of {TOTAL_TALLY} choices gives these tallies: "
                    f"{', '.join(names[:-1])} and {names[-1]} meet in {_count(least, 'pair')}, "
                    f"so between them they must be chosen at least {_count(least, 'time')}, "
                    f"not {_count(running, 'time')}",
                )
            )
            break
    return checked, problems


def tally_choices(choices: Sequence[str | None]) -> dict[str, int]:
    """The tallies of 15 pairwise choices.

    Parameters
    ----------
    choices : sequence of str
        For each pair of :data:`PAIRS`, in order, the subscale chosen as contributing
        more to the task's workload (one of the pair's two).

    Returns
    -------
    dict
        Each subscale's tally, 0 to 5; they add up to 15.

    Raises
    ------
    RatingInvalid
        Naming each pair (``pairs[n]``, counted from 1) left unanswered or answered with
        a subscale that is not one of the pair.

    References
    ----------
    Hart & Staveland (1988): the 15 pairwise comparisons.
    """
    if len(choices) != len(PAIRS):
        raise RatingInvalid(
            [Problem("pairs", f"{len(PAIRS)} pairs need a choice each; got {len(choices)}")]
        )
    if all(chosen in (None, "") for chosen in choices):
        # One message, not fifteen, for comparisons not made at all.
        raise RatingInvalid(
            [Problem("pairs", "none of the 15 pairs is answered; choose in each, or score raw")]
        )
    problems = []
    tallies = dict.fromkeys(SUBSCALES, 0)
    for number, (pair, chosen) in enumerate(zip(PAIRS, choices, strict=True), start=1):
        words = f"pair {number} ({SUBSCALE_NAMES[pair[0]]} or {SUBSCALE_NAMES[pair[1]]})"
        if chosen in (None, ""):
            problems.append(Problem(f"pairs[{number}]", f"{words}: choose one of the two"))
        elif chosen not in pair:
            problems.append(
                Problem(f"pairs[{number}]", f"{words}: {chosen!r} is not one of the two")
            )
        else:
            tallies[chosen] += 1
    if problems:
        raise RatingInvalid(problems)
    return tallies


def raw_tlx(ratings: Mapping[str, float]) -> float:
    """The raw TLX score: the mean of the six ratings.

    References
    ----------
    Byers, Bittner & Hill (1989) (raw TLX; "mean" from memory).
    """
    return math.fsum(ratings[key] for key in SUBSCALES) / len(SUBSCALES)


def weighted_tlx(ratings: Mapping[str, float], tallies: Mapping[str, int]) -> float:
    """The weighted TLX score: ``Σ rating × tally / 15``.

    References
    ----------
    Hart & Staveland (1988).
    """
    return math.fsum(ratings[key] * tallies[key] for key in SUBSCALES) / TOTAL_TALLY


@dataclass(frozen=True)
class TlxScore:
    """One participant's ratings of one task, scored.

    ``score`` is the weighted score when there are tallies, otherwise the raw score;
    ``raw`` is always given. ``warnings`` are the problems that did not stop scoring.
    """

    ratings: dict[str, float]
    tallies: dict[str, int] | None
    raw: float
    weighted: float | None
    warnings: list[Problem] = field(default_factory=list)

    @property
    def kind(self) -> str:
        return "raw" if self.tallies is None else "weighted"

    @property
    def score(self) -> float:
        return self.raw if self.weighted is None else self.weighted


def tlx_score(
    ratings: Mapping[str, Any],
    tallies: Mapping[str, Any] | None = None,
    choices: Sequence[str | None] | None = None,
) -> TlxScore:
    """Check and score one set of ratings, weighted when comparisons are given.

    Parameters
    ----------
    ratings : mapping
        Subscale to rating, 0 to 100.
    tallies : mapping, optional
        Subscale to tally (0 to 5, adding up to 15, as 15 choices could give them).
    choices : sequence, optional
        The 15 pairwise choices in the order of :data:`PAIRS` (instead of ``tallies``).

    Returns
    -------
    TlxScore

    Raises
    ------
    RatingInvalid
        With every problem found in the ratings and the comparisons at once.

    References
    ----------
    Hart & Staveland (1988); Byers, Bittner & Hill (1989); Landau (1953).

    Examples
    --------
    A worked check (constructed, not from a source):

    >>> ratings = dict(zip(SUBSCALES, (70, 20, 60, 40, 65, 30)))
    >>> result = tlx_score(ratings, dict(zip(SUBSCALES, (5, 0, 3, 2, 4, 1))))
    >>> result.weighted, result.raw
    (60.0, 47.5)
    """
    if tallies is not None and choices is not None:
        raise RatingInvalid(
            [Problem("pairs", "give the pairwise choices or the tallies, not both")]
        )
    checked, problems = check_ratings(ratings)
    counted: dict[str, int] | None = None
    if choices is not None:
        try:
            counted = tally_choices(choices)
        except RatingInvalid as invalid:
            problems += invalid.problems
    elif tallies is not None:
        counted, tally_problems = check_tallies(tallies)
        problems += tally_problems
    errors = [problem for problem in problems if problem.is_error]
    if errors:
        raise RatingInvalid(problems)
    return TlxScore(
        ratings=checked,
        tallies=counted,
        raw=raw_tlx(checked),
        weighted=None if counted is None else weighted_tlx(checked, counted),
        warnings=problems,
    )
