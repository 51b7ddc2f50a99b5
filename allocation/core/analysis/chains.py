"""Chains and deadlines: when each task of a chain can start and finish (methods document,
``#chain-timing``).

For each trigger (an event, or a task's own schedule), each task of its chain gets its
earliest, typical and latest start and finish, in seconds from the start of the chain:

- a root of an event's chain starts after its holder's response latency (the event
  hands the work to them); a root of a schedule starts at once;
- any other task starts when all its predecessors in the chain that can occur are done,
  each plus its link lag, plus the receiving holder's response latency when the work
  changes hands;
- it finishes its duration later (min, typical, max).

Latency is awake or asleep as the time of day makes it: a human's latency is weighted by
the share of the moments the work reaches them (the chain's starts, shifted by when the
work typically arrives) that fall in their asleep window (typical), and spans both where
both can happen (earliest, latest). A task's ``window_s`` is measured from the
start of its chain; a latest finish beyond it is a ``window_missed`` finding.

Beside these, each span carries an expected value (``mean``) under the distributions the
simulation draws: a duration or latency at its triangular mean (min + typical + max) / 3,
a lag at its midpoint (uniform), added along the chain; at a join the later of the
expected arrivals (exact without joins, a lower bound on the expected later arrival with
them). The time-of-day figures shift a chain's start by the expected start of each task.

References
----------
.. [1] Evans, M., Hastings, N., & Peacock, B. (2000). Statistical Distributions (3rd ed.),
   ch. 40 (triangular distribution, mean (a + b + c) / 3) and ch. 41 (uniform
   distribution, mean (a + b) / 2).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, NamedTuple

from ..graph import Trigger
from ..model import Lag, Range, Study
from .duty import duty_wait
from .occurrences import TriggerTiming
from .timeofday import asleep_intervals

__all__ = [
    "ChainContext",
    "ChainTiming",
    "Span",
    "TaskTiming",
    "response_latency",
    "time_chain",
]


class Span(NamedTuple):
    """Earliest, typical and latest values, and the expected value, in seconds.

    A named tuple of floats rather than a dataclass: chains make many of them, and the
    garbage collector skips tuples that hold only numbers.
    """

    low: float
    typical: float
    high: float
    mean: float

    def __add__(self, other: Span) -> Span:  # type: ignore[override]
        if other is ZERO:  # shared, not copied: a chain holds many of them
            return self
        a_low, a_typical, a_high, a_mean = self
        b_low, b_typical, b_high, b_mean = other
        return _span((a_low + b_low, a_typical + b_typical, a_high + b_high, a_mean + b_mean))

    @staticmethod
    def later(spans: list[Span]) -> Span:
        """Each of earliest, typical, latest, expected: the latest among the spans."""
        if len(spans) == 1:
            return spans[0]
        lows, typicals, highs, means = zip(*spans, strict=True)
        return _span((max(lows), max(typicals), max(highs), max(means)))

    @staticmethod
    def of(value: Range | Lag | None) -> Span:
        """A duration or latency (triangular: mean (min + typical + max) / 3) or a lag
        (uniform: mean the midpoint, its ``typical``)."""
        if value is None:
            return ZERO
        low, typical, high = float(value.low), float(value.typical), float(value.high)
        mean = typical if isinstance(value, Lag) else (low + typical + high) / 3
        return Span(low, typical, high, mean)

    def as_list(self) -> list[float]:
        return [self.low, self.typical, self.high]


ZERO = Span(0.0, 0.0, 0.0, 0.0)


def _span(values: tuple[float, float, float, float]) -> Span:
    """A span made straight from its four values (the many made in chain timing skip
    the named tuple's argument handling)."""
    return tuple.__new__(Span, values)


@dataclass(frozen=True, slots=True)
class TaskTiming:
    """One task in one chain: when it is ready, starts and finishes, and its window."""

    task_id: str
    probability: float
    ready: Span
    latency: Span
    start: Span
    finish: Span
    window_s: float | None

    @property
    def misses_window(self) -> str | None:
        """``"always"``, ``"typically"``, ``"possibly"`` or ``None``."""
        if self.window_s is None:
            return None
        if self.finish.low > self.window_s:
            return "always"
        if self.finish.typical > self.window_s:
            return "typically"
        if self.finish.high > self.window_s:
            return "possibly"
        return None


@dataclass(frozen=True)
class ChainTiming:
    """A trigger's chain with the timing of each of its tasks, in chain order."""

    trigger: Trigger
    per_day: float
    tasks: tuple[TaskTiming, ...]


def response_latency(
    study: Study,
    agent_id: str | None,
    asleep_share: float,
    default_human: list[float],
    mean_asleep_share: float | None = None,
) -> Span:
    """An agent's response latency, weighted by how often it is asleep when called on.

    A human without a latency of their own takes the assumption ``default_response_s``;
    one without an asleep latency responds as when awake. An automation without one
    responds at once. ``asleep_share`` weighs the typical latency; ``mean_asleep_share``
    (default the same) the expected one: the chance the work arrives while the person
    sleeps, by which the simulation draws the asleep or the awake latency.
    """
    agent = study.agents_by_id.get(agent_id) if agent_id else None
    if agent is None:
        return ZERO
    response = agent.response_s or {}
    if not agent.is_human:
        return Span.of(response.get("any"))
    awake_range = response.get("awake") or response.get("any")
    if awake_range:
        awake = Span.of(awake_range)
    else:
        low, typical, high = map(float, default_human)
        awake = Span(low, typical, high, (low + typical + high) / 3)
    asleep = Span.of(response["asleep"]) if "asleep" in response else awake
    share = min(max(asleep_share, 0.0), 1.0)
    mean_share = share if mean_asleep_share is None else min(max(mean_asleep_share, 0.0), 1.0)
    if share <= 0 and mean_share <= 0:
        return awake
    if share >= 1 and mean_share >= 1:
        return asleep
    both = 0 < share < 1
    return Span(
        min(awake.low, asleep.low) if both else (asleep.low if share >= 1 else awake.low),
        (1 - share) * awake.typical + share * asleep.typical,
        max(awake.high, asleep.high) if both else (asleep.high if share >= 1 else awake.high),
        (1 - mean_share) * awake.mean + mean_share * asleep.mean,
    )


@dataclass(frozen=True)
class ChainContext:
    """What every chain's timing reads of the study, made once per analysis."""

    study: Study
    default_human: list[float]
    sleep_of: dict[str, list[tuple[float, float]]]
    duty_of: dict[str, Any]
    #: Each duration's and lag's span, made once: by identity, with the value kept so
    #: that its identity is not reused.
    spans: dict[int, tuple[Range | Lag, Span]] = field(default_factory=dict)

    def span(self, value: Range | Lag | None) -> Span:
        """:meth:`Span.of` a duration or lag of the study or its plans, made once."""
        if value is None:
            return ZERO
        made = self.spans.get(id(value))
        if made is None or made[0] is not value:
            made = self.spans[id(value)] = (value, Span.of(value))
        return made[1]

    @classmethod
    def of(cls, study: Study, assumptions: dict[str, Any]) -> ChainContext:
        return cls(
            study,
            assumptions["default_response_s"],
            {agent.id: asleep_intervals(agent) for agent in study.humans},
            {agent.id: agent.on_duty for agent in study.humans if agent.on_duty},
        )


def time_chain(
    context: ChainContext,
    timing: TriggerTiming,
    members: dict[str, float],
    predecessors: dict[str, list[tuple[str, Lag | None]]],
    position: dict[str, int],
    holder: Callable[[str], str | None],
    duration: Callable[[str], Range | None],
    latencies: dict[tuple[str | None, int, int], Span],
    kept: dict[str, TaskTiming] | None = None,
    from_position: int | None = None,
) -> ChainTiming:
    """The timing of one trigger's chain under a plan: ``members`` are the tasks its
    chain reaches with their chance (above 0), ``predecessors`` each task's ``precedes``
    predecessors with their lag, ``position`` a topological order, ``holder`` and
    ``duration`` a task's principal holder and duration under the plan.

    ``latencies`` caches each agent's latency by the moment the work reaches them; it
    depends on the study and the trigger only, so a caller may keep it between plans'
    edits. With ``kept`` (the chain's earlier timing, task to timing) and
    ``from_position``, the tasks placed before that position in the topological order
    keep their timing: a change to a task changes nothing upstream of it.
    """
    study, default_human = context.study, context.default_human
    sleep_of, duty_of = context.sleep_of, context.duty_of

    def latency_of(agent_id: str | None, after: Span) -> Span:
        """The agent's latency when the work reaches them ``after`` the chain's start
        (typically, and on average): asleep or awake as that moment of the day, to the
        minute, makes it. To the minute, each moment's latency is made once, and the
        same whatever reached it first."""
        key = (agent_id, round(after.typical / 60), round(after.mean / 60))
        if key not in latencies:
            pieces = sleep_of.get(agent_id or "", [])
            day = timing.timing
            duty = duty_of.get(agent_id or "")
            typical_at, mean_at = 60.0 * key[1], 60.0 * key[2]
            if duty is not None:
                # Off duty the work waits for the next duty start; on duty the person
                # answers awake (methods document, #duty-hours).
                awake = response_latency(study, agent_id, 0.0, default_human, 0.0)
                _off, typical_wait, _longest = duty_wait(day.shifted(typical_at), duty)
                _off, mean_wait, longest = duty_wait(day.shifted(mean_at), duty)
                latencies[key] = Span(
                    awake.low,
                    awake.typical + typical_wait,
                    awake.high + longest,
                    awake.mean + mean_wait,
                )
                return latencies[key]
            share = day.shifted(typical_at).share_within(pieces) if pieces else 0
            mean_share = day.shifted(mean_at).share_within(pieces) if pieces else 0
            latencies[key] = response_latency(study, agent_id, share, default_human, mean_share)
        return latencies[key]

    done: dict[str, TaskTiming] = {}
    roots = set(timing.trigger.roots)
    for task_id in sorted(members, key=position.__getitem__):
        if kept is not None and from_position is not None and position[task_id] < from_position:
            done[task_id] = kept[task_id]
            continue
        receiver = holder(task_id)
        if task_id in roots:
            ready = ZERO
            latency = latency_of(receiver, ZERO) if timing.from_event else ZERO
            start = latency
        else:
            arrivals = []
            for source, lag in predecessors.get(task_id, ()):
                if source not in done:
                    continue
                arrival = done[source].finish + context.span(lag)
                handed = receiver is not None and holder(source) != receiver
                arrivals.append((arrival, latency_of(receiver, arrival) if handed else ZERO))
            ready = Span.later([arrival for arrival, _wait in arrivals])
            if all(wait is ZERO for _arrival, wait in arrivals):
                # No handover: the start is the ready time itself, shared, which keeps
                # the memory per task-in-chain entry down.
                start, latency = ready, ZERO
            else:
                start = Span.later([arrival + wait for arrival, wait in arrivals])
                latency = Span(
                    start.low - ready.low,
                    start.typical - ready.typical,
                    start.high - ready.high,
                    start.mean - ready.mean,
                )
        task = study.task(task_id)
        done[task_id] = TaskTiming(
            task_id=task_id,
            probability=members[task_id],
            ready=ready,
            latency=latency,
            start=start,
            finish=start + context.span(duration(task_id)),
            window_s=None if task.window_s is None else float(task.window_s),
        )
    return ChainTiming(timing.trigger, timing.per_day, tuple(done.values()))
