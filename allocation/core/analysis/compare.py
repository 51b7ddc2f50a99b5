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

The **objective** scores each figure against reference points, a ``good`` and a
``poor`` value per figure (tool assumption ``objective_reference``; by default good is
0, the ideal of every figure it weighs, and poor the worst value among all the study's
plans)::

    s_f(p) = w_f * clip((x_f(p) - good_f) / (poor_f - good_f), 0, 1)
    score(p) = sum over figures f of s_f(p)

so a plan's score does not depend on which other plans are on the table. Where poor
equals good the figure scores 0 for every plan and is marked as not separating the
plans. Handovers needing review and the highest screening index count only handovers
with a person on at least one side (:func:`person_handovers`). Lower scores rank first;
equal scores keep the order the plans were given in.
Its **sensitivity** has two parts: for the two leading plans, the smallest change of each
weight alone that reverses their order (the score is linear in each weight, so it is
the difference of their totals over the difference of their scaled figures); and the
share of 1,000 weight vectors drawn from a Dirichlet distribution centred on the set
weights (concentration 20, seeded) in which each plan comes first.

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
from dataclasses import dataclass, field
from typing import Any, TypeVar

import numpy as np

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
    "Sensitivity",
    "TaskShift",
    "WeightChange",
    "compare_plans",
    "finding_key",
    "handover_key",
    "match",
    "objective",
    "objective_values",
    "person_handovers",
    "reference_points",
    "sensitivity",
    "weight_problems",
]

#: The headline figures of :meth:`PlanAnalysis.headline`, in its order.
HEADLINE_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "failures_per_day",
    "escalations_per_day",
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
PERSON_FIGURES = (
    "burden_s_per_day",
    "interruptions_per_day",
    "night_interruptions_per_day",
    "failures_per_day",
    "escalations_per_day",
)

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


def person_handovers(analysis: PlanAnalysis) -> list[Handover]:
    """The plan's handovers with a person on at least one side.

    Work passing between two automations is no handover a person makes or takes, so
    the objective does not count it against a plan that automates (methods document,
    ``#objective``). The sides are the handover's own agents; no one (``None``), or an
    agent the study does not list, is not a person. Once the analysis keeps such work
    apart from its handovers, this keeps every handover it lists.
    """
    agents = analysis.study.agents_by_id

    def person(agent_id: str | None) -> bool:
        agent = agents.get(agent_id or "")
        return agent is not None and agent.is_human

    return [
        handover
        for handover in analysis.handovers
        if person(handover.site.from_agent) or person(handover.site.to_agent)
    ]


def objective_values(analysis: PlanAnalysis) -> dict[str, float]:
    """The figures the objective weighs for one plan: its headline figures, except that
    handovers needing review and the highest screening index are taken over
    :func:`person_handovers` only."""
    headline = analysis.headline()
    handovers = person_handovers(analysis)
    own = {
        "handovers_to_review": sum(h.band != "acceptable" for h in handovers),
        "max_risk": max((h.risk for h in handovers), default=0),
    }
    return {figure: float(own.get(figure, headline[figure])) for figure in OBJECTIVE_FIGURES}


#: Weight vectors drawn for the sensitivity's shares, their Dirichlet concentration and
#: seed (tool assumptions; methods document, ``#objective-sensitivity``).
SENSITIVITY_SAMPLES = 1000
SENSITIVITY_CONCENTRATION = 20.0
SENSITIVITY_SEED = 20


@dataclass(frozen=True)
class Ranking:
    """The objective's scores of the plans compared, best first.

    ``scaled[plan][figure]`` is the figure placed between its reference points, in
    [0, 1]; ``contributions[plan][figure]`` is its weight times that; ``scores[plan]``
    their sum. ``reference[figure]`` is ``(good, poor)`` and ``separating[figure]``
    whether the figure can tell plans apart (poor differs from good).
    """

    weights: dict[str, float]
    reference: dict[str, tuple[float, float]]
    separating: dict[str, bool]
    scaled: dict[str, dict[str, float]]
    contributions: dict[str, dict[str, float]]
    scores: dict[str, float]
    order: tuple[str, ...]

    @property
    def normalised(self) -> dict[str, dict[str, float]]:
        """The scaled figures (the name the analysis file has kept)."""
        return self.scaled

    def rank(self, plan: str) -> int:
        """The plan's place, 1 for the best; plans with equal scores share a place."""
        score = self.scores[plan]
        return 1 + sum(1 for other in self.order if _below(self.scores[other], score))


def _below(a: float, b: float) -> bool:
    """``a`` is a clearly lower score than ``b``."""
    return b - a > _SAME * max(1.0, abs(a), abs(b))


def reference_points(
    headlines: Mapping[str, Mapping[str, float]],
    given: Mapping[str, Mapping[str, float]] | None = None,
) -> dict[str, tuple[float, float]]:
    """Each figure's ``(good, poor)``: as given, else good 0 and poor the worst value
    among ``headlines`` (all the study's plans). Where that worst value lies below a
    given good (every plan better than good), poor is good: the figure does not
    separate the plans, rather than scoring the better plans higher."""
    given = given or {}
    points = {}
    for figure in OBJECTIVE_FIGURES:
        stated = given.get(figure, {})
        worst = max((float(values[figure]) for values in headlines.values()), default=0.0)
        good = float(stated.get("good", 0.0))
        poor = float(stated["poor"]) if "poor" in stated else max(worst, good)
        points[figure] = (good, poor)
    return points


def _scaled(value: float, good: float, poor: float) -> float:
    if not _below(min(good, poor), max(good, poor)):
        return 0.0
    return min(max((value - good) / (poor - good), 0.0), 1.0)


def _rank(
    headlines: Mapping[str, Mapping[str, float]],
    weights: Mapping[str, float],
    reference: Mapping[str, tuple[float, float]],
) -> Ranking:
    plans = list(headlines)
    scaled = {
        plan: {
            figure: _scaled(float(headlines[plan][figure]), *reference[figure])
            for figure in OBJECTIVE_FIGURES
        }
        for plan in plans
    }
    contributions = {
        plan: {figure: float(weights[figure]) * scaled[plan][figure] for figure in scaled[plan]}
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
        reference={figure: reference[figure] for figure in OBJECTIVE_FIGURES},
        separating={
            figure: _below(min(reference[figure]), max(reference[figure]))
            for figure in OBJECTIVE_FIGURES
        },
        scaled=scaled,
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
    headlines: Mapping[str, Mapping[str, float]],
    weights: Mapping[str, float] | None = None,
    reference: Mapping[str, Mapping[str, float]] | None = None,
    study_headlines: Mapping[str, Mapping[str, float]] | None = None,
) -> Ranking:
    """Rank plans by the weighted sum of their figures scaled between reference points.

    Parameters
    ----------
    headlines : mapping
        Plan id to its headline figures (at least those of ``OBJECTIVE_FIGURES``), in
        the order the plans were given; that order breaks ties.
    weights : mapping, optional
        Figure to weight (at least 0, not all 0); figures left out keep the default of
        the tool assumption ``objective_weights``.
    reference : mapping, optional
        Figure to ``{"good": g, "poor": p}`` (either may be left out): the tool
        assumption ``objective_reference``.
    study_headlines : mapping, optional
        Every plan of the study, for the default poor value (the worst among them);
        by default ``headlines``.

    Returns
    -------
    Ranking

    Raises
    ------
    NotComparable
        When no plan is given or a weight is not allowed.

    Examples
    --------
    Two plans that differ in burden only: by default good is 0 and poor the heavier
    plan's burden, so the lighter plan scores its share of it.

    >>> base = dict.fromkeys(OBJECTIVE_FIGURES, 0.0)
    >>> ranking = objective({"a": {**base, "burden_s_per_day": 90},
    ...                      "b": {**base, "burden_s_per_day": 30}})
    >>> ranking.order, ranking.scores["a"], round(ranking.scores["b"], 4)
    (('b', 'a'), 1.0, 0.3333)
    """
    if not headlines:
        raise NotComparable("no plans to rank")
    in_force = _weights_in_force(weights)
    points = reference_points(study_headlines or headlines, reference)
    return _rank(headlines, in_force, points)


@dataclass(frozen=True)
class WeightChange:
    """The smallest change of one weight alone that reverses the two leading plans.

    ``change`` is ``None`` where no weight of at least 0 reverses them (the figure does
    not tell them apart, or moving it only widens the gap).
    """

    figure: str
    weight: float
    change: float | None

    @property
    def reversing_weight(self) -> float | None:
        return None if self.change is None else self.weight + self.change


@dataclass(frozen=True)
class Sensitivity:
    """How far the ranking holds: the two leading plans' reversing weight changes, and
    the share of sampled weight vectors in which each plan comes first."""

    leader: str
    runner_up: str | None
    gap: float
    changes: tuple[WeightChange, ...]
    first_shares: dict[str, float]
    samples: int

    @property
    def changed(self) -> bool:
        """Whether any single weight change reverses the two leading plans."""
        return any(change.change is not None for change in self.changes)


def _reversing_change(gap: float, weight: float, leader: float, runner: float) -> float | None:
    """Solve gap + change * (leader - runner) = 0 for one weight (linear in it), where
    ``gap`` = runner's total - leader's total >= 0 and the scaled figures are given."""
    difference = leader - runner
    if not _below(0.0, abs(difference)):
        return None
    change = gap / difference
    return change if weight + change >= 0 else None


def sensitivity(
    headlines: Mapping[str, Mapping[str, float]],
    weights: Mapping[str, float] | None = None,
    reference: Mapping[str, Mapping[str, float]] | None = None,
    study_headlines: Mapping[str, Mapping[str, float]] | None = None,
    samples: int = SENSITIVITY_SAMPLES,
    seed: int = SENSITIVITY_SEED,
) -> Sensitivity:
    """How the ranking holds when the weights move.

    Parameters
    ----------
    headlines, weights, reference, study_headlines
        As for :func:`objective`.
    samples, seed : int
        Weight vectors drawn from a Dirichlet distribution with mean the set weights'
        shares and concentration ``SENSITIVITY_CONCENTRATION``, scaled to their sum;
        figures weighted 0 stay 0.

    Returns
    -------
    Sensitivity
    """
    ranking = objective(headlines, weights, reference, study_headlines)
    order = ranking.order
    leader = order[0]
    runner = order[1] if len(order) > 1 else None
    changes = []
    gap = 0.0
    if runner is not None:
        gap = ranking.scores[runner] - ranking.scores[leader]
        for figure in OBJECTIVE_FIGURES:
            weight = ranking.weights[figure]
            change = _reversing_change(
                gap, weight, ranking.scaled[leader][figure], ranking.scaled[runner][figure]
            )
            changes.append(WeightChange(figure, weight, change))
    used = [figure for figure in OBJECTIVE_FIGURES if ranking.weights[figure] > 0]
    total = sum(ranking.weights[figure] for figure in used)
    mean = np.array([ranking.weights[figure] / total for figure in used])
    drawn = np.random.default_rng(seed).dirichlet(SENSITIVITY_CONCENTRATION * mean, samples)
    scaled = np.array([[ranking.scaled[plan][figure] for figure in used] for plan in order])
    totals = (drawn * total) @ scaled.T  # samples x plans
    # Ties go to the plan ranked first now (argmin takes the first lowest).
    winners = np.argmin(totals + _SAME * np.arange(len(order)), axis=1)
    counts = np.bincount(winners, minlength=len(order))
    return Sensitivity(
        leader=leader,
        runner_up=runner,
        gap=gap,
        changes=tuple(changes),
        first_shares={plan: counts[index] / samples for index, plan in enumerate(order)},
        samples=samples,
    )


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
    """Plans side by side (the first one the baseline) and their ranking.

    ``weighed[plan]`` holds the figures the objective weighs (:func:`objective_values`).
    """

    plans: tuple[str, ...]
    names: dict[str, str]
    figures: tuple[FigureRow, ...]
    people: tuple[FigureRow, ...]
    deltas: tuple[PlanDelta, ...]
    ranking: Ranking
    sensitivity: Sensitivity
    weighed: dict[str, dict[str, float]] = field(default_factory=dict)

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
    analyses: Iterable[PlanAnalysis],
    weights: Mapping[str, float] | None = None,
    study_headlines: Mapping[str, Mapping[str, float]] | None = None,
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
    study_headlines : mapping, optional
        The figures the objective weighs (:func:`objective_values`) of every plan of
        the study, for the default poor value of each figure (the worst among them); by
        default those of the plans compared.

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
    reference = analyses[0].assumptions.get("objective_reference") or {}
    plans = tuple(analysis.plan.id for analysis in analyses)
    headlines = {analysis.plan.id: analysis.headline() for analysis in analyses}
    weighed = {analysis.plan.id: objective_values(analysis) for analysis in analyses}
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
        ranking=objective(weighed, weights, reference, study_headlines),
        sensitivity=sensitivity(weighed, weights, reference, study_headlines),
        weighed=weighed,
    )
