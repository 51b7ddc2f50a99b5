"""Plans side by side, and the study objective that ranks them (methods document,
``#comparison``).

The first plan given is the **baseline**; every other plan is compared with it:

- every headline figure of :meth:`PlanAnalysis.headline`, and each person's burden,
  interruptions and night interruptions, with the difference to the baseline and whether
  it is better or worse;
- the burden moved between agents, task by task: each person's seconds per day on each
  leaf task under the baseline and under the plan, who principally holds the task in
  each, and the change (what the transfer of work to automation buys and costs);
- handovers that appear or go, matched on ``(source, from_task, to_task, from_agent,
  to_agent, modes)``; findings that appear or go, matched on ``(kind, tasks, modes,
  agents)``. Both are matched as multisets: two equal keys in one plan need two in the
  other.

The **objective** is a weighted sum of normalised headline figures (tool assumption
``objective_weights``)::

    n_f(p) = (x_f(p) - min_q x_f(q)) / (max_q x_f(q) - min_q x_f(q))   (0 if max = min)
    score(p) = sum over figures f of w_f * n_f(p)

over the plans q compared, so 0 is the best plan's value of a figure and 1 the worst's,
and a figure equal in every plan adds nothing. Lower scores rank first; equal scores
keep the order the plans were given in. Its **sensitivity** moves each weight by -50 %
and +50 %, the others fixed, and reports the ranking then and which plans swap places.
Normalisation depends only on the plans compared, so adding or removing a plan can
change the others' scores: the ranking is of the plans on the table, not absolute.

References
----------
.. [1] Parasuraman, R., Sheridan, T. B., & Wickens, C. D. (2000). A model for types and
   levels of human interaction with automation. IEEE Trans. SMC-A, 30(3), 286-297
   (mental workload and situation awareness as primary criteria of an allocation).
.. [2] Pritchett, A. R., Kim, S. Y., & Feigh, K. M. (2014). Measuring human-automation
   function allocation. JCEDM, 8(1), 52-77 (workload, interruptive automation,
   incoherency of an allocation as measures to compare allocations by).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable, Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from itertools import combinations
from typing import Any, TypeVar

from ..assumptions import OBJECTIVE_FIGURES, OBJECTIVE_WEIGHTS, check_assumptions
from ..errors import BatonError
from ..registry import FIGURES as REGISTRY
from .findings import Finding
from .handovers import Handover
from .plan import PlanAnalysis

__all__ = [
    "FIGURES",
    "HEADLINE_FIGURES",
    "OBJECTIVE_FIGURES",
    "Comparison",
    "FigureRow",
    "NotComparable",
    "PlanDelta",
    "Ranking",
    "SensitivityRow",
    "TaskShift",
    "WeightShift",
    "compare_plans",
    "finding_key",
    "handover_key",
    "match",
    "objective",
    "sensitivity",
    "weight_problems",
]

#: The headline figures of :meth:`PlanAnalysis.headline`, in its order.
HEADLINE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "handovers",
    "handovers_per_day",
    "handovers_to_review",
    "max_risk",
    "mean_awareness",
    "cut_ratio",
    "modularity",
    "findings",
)
#: Each headline figure's label, unit and whether lower is better, in the registry's words.
FIGURES: dict[str, tuple[str, str, bool]] = {
    key: (REGISTRY[key].label, REGISTRY[key].unit, REGISTRY[key].lower_is_better)
    for key in HEADLINE_FIGURES
}

#: A person's figures compared plan by plan.
PERSON_FIGURES = ("burden_s_per_day", "interruptions_per_day", "night_interruptions_per_day")

#: Differences smaller than this (relative to the larger value) count as none.
_SAME = 1e-9


class NotComparable(BatonError):
    """The analyses given cannot be compared (too few, repeated, or of other studies)."""


# -- matching ----------------------------------------------------------------------------

T = TypeVar("T")


def handover_key(handover: Handover) -> tuple:
    """What makes two plans' handovers the same handover."""
    site = handover.site
    return (site.source, site.from_task, site.to_task, site.from_agent, site.to_agent, site.modes)


def finding_key(finding: Finding) -> tuple:
    """What makes two plans' findings the same finding."""
    return (finding.kind, finding.tasks, finding.modes, finding.agents)


def match(
    before: Sequence[T], after: Sequence[T], key: Callable[[T], Hashable]
) -> tuple[list[T], list[T], int]:
    """Match two lists as multisets of their keys.

    Parameters
    ----------
    before, after : sequence
        The items of the baseline and of the other plan.
    key : callable
        The identity of an item.

    Returns
    -------
    added : list
        Items of ``after`` with no partner in ``before``, in ``after``'s order.
    removed : list
        Items of ``before`` with no partner in ``after``, in ``before``'s order.
    kept : int
        How many items found a partner.
    """
    waiting: dict[Hashable, list[int]] = defaultdict(list)
    for index, item in enumerate(before):
        waiting[key(item)].append(index)
    partnered: set[int] = set()
    added = []
    for item in after:
        bucket = waiting.get(key(item))
        if bucket:
            partnered.add(bucket.pop(0))
        else:
            added.append(item)
    removed = [item for index, item in enumerate(before) if index not in partnered]
    return added, removed, len(partnered)


# -- the objective ----------------------------------------------------------------------


@dataclass(frozen=True)
class Ranking:
    """The objective's scores of the plans compared, best first.

    ``normalised[plan][figure]`` is the figure scaled to [0, 1] across the plans;
    ``contributions[plan][figure]`` is its weight times that; ``scores[plan]`` their sum.
    """

    weights: dict[str, float]
    normalised: dict[str, dict[str, float]]
    contributions: dict[str, dict[str, float]]
    scores: dict[str, float]
    order: tuple[str, ...]

    def rank(self, plan: str) -> int:
        """The plan's place, 1 for the best; plans with equal scores share a place."""
        score = self.scores[plan]
        return 1 + sum(1 for other in self.order if _below(self.scores[other], score))


def _below(a: float, b: float) -> bool:
    """``a`` is a clearly lower score than ``b``."""
    return b - a > _SAME * max(1.0, abs(a), abs(b))


def _normalise(headlines: Mapping[str, Mapping[str, float]]) -> dict[str, dict[str, float]]:
    normalised: dict[str, dict[str, float]] = {plan: {} for plan in headlines}
    for figure in OBJECTIVE_FIGURES:
        values = {plan: float(figures[figure]) for plan, figures in headlines.items()}
        low, high = min(values.values()), max(values.values())
        spread = high - low
        equal = not _below(low, high)
        for plan, value in values.items():
            normalised[plan][figure] = 0.0 if equal else (value - low) / spread
    return normalised


def _rank(
    normalised: dict[str, dict[str, float]], weights: Mapping[str, float], plans: Sequence[str]
) -> Ranking:
    contributions = {
        plan: {
            figure: float(weights[figure]) * normalised[plan][figure]
            for figure in OBJECTIVE_FIGURES
        }
        for plan in plans
    }
    scores = {plan: sum(contributions[plan].values()) for plan in plans}
    # Sort by score, keeping the given order among equal scores (a stable insertion).
    order: list[str] = []
    for plan in plans:
        place = len(order)
        while place > 0 and _below(scores[plan], scores[order[place - 1]]):
            place -= 1
        order.insert(place, plan)
    return Ranking(
        weights={figure: float(weights[figure]) for figure in OBJECTIVE_FIGURES},
        normalised=normalised,
        contributions=contributions,
        scores=scores,
        order=tuple(order),
    )


def _weights_in_force(weights: Mapping[str, Any] | None) -> dict[str, float]:
    problems = weight_problems(weights or {})
    if problems:
        raise NotComparable(
            "objective_weights: " + "; ".join(f"{k} {m}" for k, m in problems.items())
        )
    return {**OBJECTIVE_WEIGHTS, **(weights or {})}


def objective(
    headlines: Mapping[str, Mapping[str, float]], weights: Mapping[str, float] | None = None
) -> Ranking:
    """Rank plans by the weighted sum of their min-max normalised headline figures.

    Parameters
    ----------
    headlines : mapping
        Plan id to its headline figures (at least those of ``OBJECTIVE_FIGURES``), in
        the order the plans were given; that order breaks ties.
    weights : mapping, optional
        Figure to weight (at least 0, not all 0); figures left out keep the default of
        the tool assumption ``objective_weights``.

    Returns
    -------
    Ranking

    Raises
    ------
    NotComparable
        When no plan is given or a weight is not allowed.

    Examples
    --------
    Two plans that differ in burden only: the lighter one scores 0, the heavier one the
    burden weight.

    >>> base = dict.fromkeys(OBJECTIVE_FIGURES, 0.0)
    >>> ranking = objective({"a": {**base, "burden_s_per_day": 90}, "b": base})
    >>> ranking.order, ranking.scores["a"]
    (('b', 'a'), 1.0)
    """
    if not headlines:
        raise NotComparable("no plans to rank")
    in_force = _weights_in_force(weights)
    return _rank(_normalise(headlines), in_force, list(headlines))


@dataclass(frozen=True)
class WeightShift:
    """The ranking with one weight moved: the weight used, the order, the swaps.

    ``swaps`` are the pairs ``(a, b)`` where ``a`` ranked above ``b`` before and below
    it now.
    """

    weight: float
    order: tuple[str, ...]
    swaps: tuple[tuple[str, str], ...]

    @property
    def changed(self) -> bool:
        return bool(self.swaps)


@dataclass(frozen=True)
class SensitivityRow:
    """One weight moved down and up by the same share, the other weights fixed."""

    figure: str
    weight: float
    lower: WeightShift
    upper: WeightShift

    @property
    def changed(self) -> bool:
        return self.lower.changed or self.upper.changed


def _swaps(before: Sequence[str], after: Sequence[str]) -> tuple[tuple[str, str], ...]:
    place = {plan: index for index, plan in enumerate(after)}
    return tuple((a, b) for a, b in combinations(before, 2) if place[a] > place[b])


def sensitivity(
    headlines: Mapping[str, Mapping[str, float]],
    weights: Mapping[str, float] | None = None,
    step: float = 0.5,
) -> tuple[SensitivityRow, ...]:
    """How the ranking answers each weight moved by ``-step`` and ``+step`` (one at a time).

    Parameters
    ----------
    headlines, weights
        As for :func:`objective`.
    step : float
        The share each weight moves by, in (0, 1]; 0.5 gives -50 % and +50 %.

    Returns
    -------
    tuple of SensitivityRow
        One per figure of ``OBJECTIVE_FIGURES``, in that order. A weight of 0 stays 0
        either way, so its ranking cannot change.
    """
    if not 0 < step <= 1:
        raise NotComparable(f"step must be in (0, 1], not {step!r}")
    if not headlines:
        raise NotComparable("no plans to rank")
    in_force = _weights_in_force(weights)
    plans = list(headlines)
    normalised = _normalise(headlines)
    base = _rank(normalised, in_force, plans).order
    rows = []
    for figure in OBJECTIVE_FIGURES:
        shifts = []
        for factor in (1 - step, 1 + step):
            moved = {**in_force, figure: in_force[figure] * factor}
            order = _rank(normalised, moved, plans).order
            shifts.append(WeightShift(moved[figure], order, _swaps(base, order)))
        rows.append(SensitivityRow(figure, in_force[figure], shifts[0], shifts[1]))
    return tuple(rows)


def weight_problems(values: Mapping[str, Any]) -> dict[str, str]:
    """What is wrong with a table of objective weights, by figure.

    Each weight is checked on its own by the tool assumption's own check, so a message
    can stand beside its field; the table as a whole (not every weight 0) is reported
    under ``"objective_weights"``.
    """
    problems = {}
    for figure, value in values.items():
        for _key, message in check_assumptions({"objective_weights": {figure: value}}):
            problems[figure] = message
    if not problems:
        for _key, message in check_assumptions({"objective_weights": dict(values)}):
            problems["objective_weights"] = message
    return problems


# -- plans side by side -----------------------------------------------------------------


@dataclass(frozen=True)
class FigureRow:
    """One figure across the plans, with its difference to the baseline.

    ``verdicts`` says per plan ``"baseline"``, ``"better"``, ``"worse"`` or ``"same"``.
    ``agent`` is the person for a person's figure, ``None`` for a plan's headline.
    """

    key: str
    label: str
    unit: str
    lower_is_better: bool
    values: tuple[float, ...]
    differences: tuple[float | None, ...]
    verdicts: tuple[str, ...]
    agent: str | None = None


def _figure_row(
    key: str, values: Sequence[float], agent: str | None = None, label: str | None = None
) -> FigureRow:
    name, unit, lower = FIGURES[key]
    base = values[0]
    differences: list[float | None] = [None]
    verdicts = ["baseline"]
    for value in values[1:]:
        difference = value - base
        differences.append(difference)
        if not _below(min(value, base), max(value, base)):
            verdicts.append("same")
        elif (difference < 0) == lower:
            verdicts.append("better")
        else:
            verdicts.append("worse")
    return FigureRow(
        key, label or name, unit, lower, tuple(values), tuple(differences), tuple(verdicts), agent
    )


@dataclass(frozen=True)
class TaskShift:
    """One leaf task under the baseline and under another plan.

    ``person_s_before`` and ``person_s_after`` give each person's seconds per day on it;
    the change is positive where the plan adds person time and negative where it saves
    some. ``holder_*`` is the principal holder (methods document, ``#principal-holder``),
    ``category_*`` person, device, shared or not_applicable, ``awareness_*`` the
    mode-awareness index (``None`` when no person is involved or accountable).
    """

    task_id: str
    title: str
    goal: str | None
    goal_title: str | None
    holder_before: str | None
    holder_after: str | None
    category_before: str
    category_after: str
    person_s_before: dict[str, float]
    person_s_after: dict[str, float]
    awareness_before: float | None
    awareness_after: float | None

    @property
    def total_before(self) -> float:
        return sum(self.person_s_before.values())

    @property
    def total_after(self) -> float:
        return sum(self.person_s_after.values())

    @property
    def change(self) -> float:
        return self.total_after - self.total_before

    @property
    def holder_changed(self) -> bool:
        return self.holder_before != self.holder_after

    def person_change(self, agent: str) -> float:
        return self.person_s_after.get(agent, 0.0) - self.person_s_before.get(agent, 0.0)


@dataclass(frozen=True)
class PlanDelta:
    """One plan against the baseline: burden moved, handovers and findings that change."""

    baseline: str
    plan: str
    shifts: tuple[TaskShift, ...]
    handovers_added: tuple[Handover, ...]
    handovers_removed: tuple[Handover, ...]
    handovers_kept: int
    findings_added: tuple[Finding, ...]
    findings_removed: tuple[Finding, ...]
    findings_kept: int

    @property
    def burden_change(self) -> float:
        """Person seconds per day the plan adds (positive) or saves (negative) in all."""
        return sum(shift.change for shift in self.shifts)

    @property
    def seconds_saved(self) -> float:
        """Person seconds per day saved on the tasks that got lighter (a positive number)."""
        return -sum(shift.change for shift in self.shifts if shift.change < 0)

    @property
    def seconds_added(self) -> float:
        """Person seconds per day added on the tasks that got heavier."""
        return sum(shift.change for shift in self.shifts if shift.change > 0)


def _category(analysis: PlanAnalysis, task_id: str) -> str:
    involved = analysis.tasks[task_id].involved
    return involved.category if involved.applies else "not_applicable"


def _awareness(analysis: PlanAnalysis, task_id: str) -> float | None:
    aware = analysis.tasks[task_id].awareness
    return None if aware is None else aware.index


def _shifts(before: PlanAnalysis, after: PlanAnalysis) -> tuple[TaskShift, ...]:
    study = before.study
    shifts = []
    for position, task in enumerate(study.leaves):
        goal = study.tasks_by_id.get(task.parent) if task.parent else None
        shift = TaskShift(
            task_id=task.id,
            title=task.title,
            goal=goal.id if goal else None,
            goal_title=goal.title if goal else None,
            holder_before=before.tasks[task.id].involved.principal,
            holder_after=after.tasks[task.id].involved.principal,
            category_before=_category(before, task.id),
            category_after=_category(after, task.id),
            person_s_before=dict(before.tasks[task.id].person_s_per_day),
            person_s_after=dict(after.tasks[task.id].person_s_per_day),
            awareness_before=_awareness(before, task.id),
            awareness_after=_awareness(after, task.id),
        )
        shifts.append((position, shift))
    shifts.sort(key=lambda item: (-abs(item[1].change), item[0]))
    return tuple(shift for _position, shift in shifts)


def _delta(before: PlanAnalysis, after: PlanAnalysis) -> PlanDelta:
    added, removed, kept = match(before.handovers, after.handovers, handover_key)
    found, lost, same = match(before.findings, after.findings, finding_key)
    return PlanDelta(
        baseline=before.plan.id,
        plan=after.plan.id,
        shifts=_shifts(before, after),
        handovers_added=tuple(added),
        handovers_removed=tuple(removed),
        handovers_kept=kept,
        findings_added=tuple(found),
        findings_removed=tuple(lost),
        findings_kept=same,
    )


@dataclass(frozen=True)
class Comparison:
    """Plans side by side (the first one the baseline) and their ranking."""

    plans: tuple[str, ...]
    names: dict[str, str]
    figures: tuple[FigureRow, ...]
    people: tuple[FigureRow, ...]
    deltas: tuple[PlanDelta, ...]
    ranking: Ranking
    sensitivity: tuple[SensitivityRow, ...]

    @property
    def baseline(self) -> str:
        return self.plans[0]

    def delta(self, plan: str) -> PlanDelta:
        """The named plan against the baseline."""
        for delta in self.deltas:
            if delta.plan == plan:
                return delta
        raise KeyError(plan)


def _check_analyses(analyses: Sequence[PlanAnalysis]) -> None:
    if len(analyses) < 2:
        raise NotComparable("pick at least two plans to compare")
    ids = [analysis.plan.id for analysis in analyses]
    repeated = sorted({plan for plan in ids if ids.count(plan) > 1})
    if repeated:
        raise NotComparable(f"each plan may be picked once; repeated: {', '.join(repeated)}")
    if any(analysis.study is not analyses[0].study for analysis in analyses):
        raise NotComparable("the plans must all come from one analysed study")


def compare_plans(
    analyses: Iterable[PlanAnalysis], weights: Mapping[str, float] | None = None
) -> Comparison:
    """Compare plans of one study, the first the baseline, and rank them.

    Parameters
    ----------
    analyses : iterable of PlanAnalysis
        At least two plans of the same study (the same analysed :class:`Study` object),
        each once, the baseline first.
    weights : mapping, optional
        Objective weights; by default the study's assumption ``objective_weights`` in
        force in the first analysis.

    Returns
    -------
    Comparison

    Raises
    ------
    NotComparable
        Fewer than two plans, a plan repeated, plans of different studies, or weights
        that are not allowed.
    """
    analyses = list(analyses)
    _check_analyses(analyses)
    if weights is None:
        weights = analyses[0].assumptions.get("objective_weights", OBJECTIVE_WEIGHTS)
    plans = tuple(analysis.plan.id for analysis in analyses)
    headlines = {analysis.plan.id: analysis.headline() for analysis in analyses}
    figures = tuple(_figure_row(key, [headlines[plan][key] for plan in plans]) for key in FIGURES)
    people = []
    for human in analyses[0].study.humans:
        for key in PERSON_FIGURES:
            values = [
                getattr(analysis.people[human.id], key) if human.id in analysis.people else 0.0
                for analysis in analyses
            ]
            people.append(_figure_row(key, values, agent=human.id))
    base = analyses[0]
    return Comparison(
        plans=plans,
        names={analysis.plan.id: analysis.plan.name for analysis in analyses},
        figures=figures,
        people=tuple(people),
        deltas=tuple(_delta(base, other) for other in analyses[1:]),
        ranking=objective(headlines, weights),
        sensitivity=sensitivity(headlines, weights),
    )
