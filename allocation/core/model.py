"""The study model (agents, tasks, links, events, plans, mode maps) as plain, immutable
dataclasses.

Objects keep exactly what the study file said (a range given as one number stays one
number, an optional key left out stays ``None``), so that writing a study back gives
the same file. Derived views (leaves, goals, children) are computed on demand.
Time is in seconds everywhere.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Any

from .errors import UnknownReference
from .vocabulary import STAGES

__all__ = [
    "ANY_MODE",
    "Agent",
    "Assignment",
    "Event",
    "Lag",
    "Link",
    "Mode",
    "Monitoring",
    "MONITORING_STYLES",
    "ModeMap",
    "Occurs",
    "Plan",
    "Range",
    "Reliability",
    "DETECTION",
    "Study",
    "Task",
    "Transition",
    "seconds_of_day",
]

Number = int | float


def seconds_of_day(clock: str) -> int:
    """Seconds since midnight of an ``"HH:MM"`` or ``"HH:MM:SS"`` time."""
    parts = [int(part) for part in clock.split(":")]
    hours, minutes = parts[0], parts[1]
    seconds = parts[2] if len(parts) > 2 else 0
    return hours * 3600 + minutes * 60 + seconds


@dataclass(frozen=True)
class Range:
    """A duration or latency as ``[min, typical, max]`` seconds, or one number."""

    low: Number
    typical: Number
    high: Number
    single: bool = False

    @classmethod
    def exactly(cls, value: Number) -> Range:
        return cls(value, value, value, single=True)

    def to_json(self) -> Number | list[Number]:
        return self.low if self.single else [self.low, self.typical, self.high]


@dataclass(frozen=True)
class Lag:
    """A link lag as ``[min, max]`` seconds, or one number."""

    low: Number
    high: Number
    single: bool = False

    @classmethod
    def exactly(cls, value: Number) -> Lag:
        return cls(value, value, single=True)

    @property
    def typical(self) -> float:
        return (self.low + self.high) / 2

    def to_json(self) -> Number | list[Number]:
        return self.low if self.single else [self.low, self.high]


@dataclass(frozen=True)
class Agent:
    """A person or a machine that can do work."""

    id: str
    name: str
    kind: str
    capabilities: tuple[str, ...] | None = None
    asleep: tuple[str, str] | None = None
    response_s: dict[str, Range] | None = None
    notes: str | None = None
    # A person's duty hours (from, to): work reaching them outside waits for the start.
    on_duty: tuple[str, str] | None = None

    @property
    def is_human(self) -> bool:
        return self.kind == "human"

    @cached_property
    def capability_set(self) -> frozenset[str]:
        return frozenset(self.capabilities or ())


@dataclass(frozen=True)
class Event:
    """Something in the day that starts tasks: fixed times, a rate, or every N days."""

    id: str
    name: str
    times: tuple[str, ...] | None = None
    jitter_s: Number | None = None
    per_day: Number | None = None
    when: str | None = None
    every_days: Number | None = None
    notes: str | None = None
    #: Whose day a rate follows (``when`` awake or asleep, or every N days): a human's id.
    of: str | None = None


@dataclass(frozen=True)
class Occurs:
    """How a leaf task occurs by itself: exactly one of its ways is set."""

    times: tuple[str, ...] | None = None
    jitter_s: Number | None = None
    per_day: Number | None = None
    when: str | None = None
    every_days: Number | None = None
    event: str | None = None
    probability: Number | None = None
    #: Whose day a rate follows (``when`` awake or asleep, or every N days): a human's id.
    of: str | None = None

    @property
    def way(self) -> str:
        """``"times"``, ``"per_day"``, ``"every_days"`` or ``"event"``."""
        for name in ("times", "per_day", "every_days", "event"):
            if getattr(self, name) is not None:
                return name
        return "none"

    @property
    def is_schedule(self) -> bool:
        return self.way in ("times", "per_day", "every_days")


@dataclass(frozen=True)
class Task:
    """A unit of work; a task that is another's parent is a goal and carries no work."""

    id: str
    title: str
    parent: str | None = None
    occurs: Occurs | None = None
    duration_s: Range | None = None
    window_s: Number | None = None
    severity: int | None = None
    demands: dict[str, Number] | None = None
    split: dict[str, Number] | None = None
    #: Capabilities: for every stage (a tuple), or per stage (a dict of tuples).
    needs: tuple[str, ...] | dict[str, tuple[str, ...]] | None = None
    notes: str | None = None

    def carries_work(self) -> list[str]:
        """Names of the work-carrying keys this task sets (a goal must set none)."""
        keys = ("occurs", "duration_s", "window_s", "severity", "demands", "split", "needs")
        return [key for key in keys if getattr(self, key) is not None]

    @property
    def stage_split(self) -> dict[str, float]:
        """The share of the task's time in each stage; equal shares by default."""
        if self.split is None:
            return {stage: 1 / len(STAGES) for stage in STAGES}
        return {stage: float(self.split.get(stage, 0)) for stage in STAGES}

    @cached_property
    def needs_by_stage(self) -> dict[str, frozenset[str]]:
        """The capabilities each stage needs; a plain list applies to every stage (made
        once: read it, do not change it)."""
        if isinstance(self.needs, dict):
            return {stage: frozenset(self.needs.get(stage, ())) for stage in STAGES}
        return {stage: frozenset(self.needs or ()) for stage in STAGES}


@dataclass(frozen=True)
class Link:
    """A dependency between two leaf tasks."""

    source: str
    target: str
    kind: str
    lag_s: Lag | None = None
    probability: Number | None = None
    notes: str | None = None


#: How an accountable person keeps watch over work another agent holds.
MONITORING_STYLES = ("each", "periodic", "exception", "continuous")


@dataclass(frozen=True)
class Monitoring:
    """How the accountable person keeps watch (methods document, ``#monitoring``).

    ``each``: a check of every occurrence when told of it; ``periodic``: ``per_day``
    looks a day on their own initiative; ``exception``: a check per flag the automation
    raises; ``continuous``: ``share`` of their attention while the task runs.
    """

    style: str
    per_day: float | None = None
    share: float | None = None


#: How the person learns that the automation failed (a failure's cue).
DETECTION = ("alert", "display", "none")


@dataclass(frozen=True)
class Reliability:
    """How often an assignment's automation fails, and what follows (methods document,
    ``#reliability``).

    Each occurrence fails with probability ``fails_per_1000 / 1000``; a failure hands the
    whole task to ``fallback`` (default: the assignment's human, else the accountable
    person), who learns of it by ``detected_by``. ``false_alerts_per_day`` are alerts
    with nothing wrong, each a check for the accountable person.
    """

    fails_per_1000: float
    detected_by: str | None = None
    fallback: str | None = None
    false_alerts_per_day: float | None = None

    @property
    def chance(self) -> float:
        """The chance that one occurrence fails."""
        return float(self.fails_per_1000) / 1000

    @property
    def detected(self) -> bool:
        """Whether the person is told of a failure (by an alert or on a display)."""
        return self.detected_by in ("alert", "display")


@dataclass(frozen=True)
class Assignment:
    """A plan's decision for one task."""

    human: str | None = None
    automation: str | None = None
    levels: int | dict[str, int] | None = None
    duration_s: Range | None = None
    accountable: str | None = None
    feedback: str | None = None
    initiator: str | None = None
    status: str | None = None
    rationale: str | None = None
    # ``False`` when the task is not done at all under the plan (for example sensor care
    # in a plan without a sensor); ``None`` means the default, that it applies.
    applies: bool | None = None
    # ``None``: the default style (each with an alert, otherwise periodic once a day).
    monitoring: Monitoring | None = None
    # ``True`` on a task not done under the plan: its chain goes on without it.
    pass_through: bool | None = None
    # How often the automation fails and who takes over (``None``: it never fails).
    reliability: Reliability | None = None
    # The people asked after ``human``, in order, when the one asked does not answer
    # within ``escalate_after_s`` (the file's ``human`` as a list).
    escalation: tuple[str, ...] | None = None
    escalate_after_s: Number | None = None

    @property
    def people_asked(self) -> tuple[str, ...]:
        """The people asked in turn: the human, then those escalated to."""
        if self.human is None:
            return ()
        return (self.human, *(self.escalation or ()))

    @property
    def is_applicable(self) -> bool:
        return self.applies is not False

    @property
    def is_shared(self) -> bool:
        return self.human is not None and self.automation is not None


@dataclass(frozen=True)
class Mode:
    """A mode of the automation, what it shows, and who holds which task in it."""

    id: str
    name: str
    indication: str | None = None
    overrides: dict[str, Assignment] | None = None
    notes: str | None = None


#: A transition's ``from`` that means every mode of the map.
ANY_MODE = "*"


@dataclass(frozen=True)
class Transition:
    """A change from one mode to another; ``source`` may be :data:`ANY_MODE`.

    It happens at a rate (``per_day`` while in the source mode), with each occurrence
    of an event (``event``), at fixed times of day (``times``), or only when someone
    makes it (none of them)."""

    source: str
    target: str
    trigger: str
    by: str
    cue: str
    per_day: Number | None = None
    notes: str | None = None
    event: str | None = None
    times: tuple[str, ...] | None = None

    @property
    def driven(self) -> str | None:
        """How it happens by itself: ``"rate"``, ``"event"``, ``"times"`` or ``None``."""
        if self.per_day:
            return "rate"
        if self.event is not None:
            return "event"
        if self.times:
            return "times"
        return None


@dataclass(frozen=True)
class ModeMap:
    """The modes of a plan's automation and the transitions between them."""

    initial: str
    states: tuple[Mode, ...] = ()
    transitions: tuple[Transition, ...] = ()

    @cached_property
    def by_id(self) -> dict[str, Mode]:
        return {mode.id: mode for mode in self.states}

    @cached_property
    def expanded(self) -> tuple[Transition, ...]:
        """The transitions with each one from :data:`ANY_MODE` made one per mode, in
        file order; in a mode that has its own transition with the same trigger, that
        one holds instead of the one from every mode."""
        if not any(t.source == ANY_MODE for t in self.transitions):
            return self.transitions
        own = {(t.source, t.trigger) for t in self.transitions if t.source != ANY_MODE}
        result: list[Transition] = []
        for t in self.transitions:
            if t.source != ANY_MODE:
                result.append(t)
                continue
            result.extend(
                replace(t, source=mode.id)
                for mode in self.states
                if (mode.id, t.trigger) not in own
            )
        return tuple(result)


@dataclass(frozen=True)
class Plan:
    """One alternative allocation of every leaf task."""

    id: str
    name: str
    assignments: dict[str, Assignment] = field(default_factory=dict)
    modes: ModeMap | None = None
    description: str | None = None


@dataclass(frozen=True)
class Study:
    """One workflow under analysis."""

    id: str
    title: str
    scale: str
    agents: tuple[Agent, ...] = ()
    events: tuple[Event, ...] = ()
    tasks: tuple[Task, ...] = ()
    links: tuple[Link, ...] = ()
    plans: tuple[Plan, ...] = ()
    description: str | None = None
    bin_s: Number | None = None
    assumptions: dict[str, Any] | None = None
    risk_policy: dict[str, Any] | None = None

    @cached_property
    def agents_by_id(self) -> dict[str, Agent]:
        return {agent.id: agent for agent in self.agents}

    @cached_property
    def events_by_id(self) -> dict[str, Event]:
        return {event.id: event for event in self.events}

    @cached_property
    def tasks_by_id(self) -> dict[str, Task]:
        return {task.id: task for task in self.tasks}

    @cached_property
    def plans_by_id(self) -> dict[str, Plan]:
        return {plan.id: plan for plan in self.plans}

    @cached_property
    def children(self) -> dict[str, list[str]]:
        """Child task ids of every task, in file order."""
        result: dict[str, list[str]] = {task.id: [] for task in self.tasks}
        for task in self.tasks:
            if task.parent is not None and task.parent in result:
                result[task.parent].append(task.id)
        return result

    @cached_property
    def leaves(self) -> tuple[Task, ...]:
        """Tasks that carry work: those that are no task's parent."""
        return tuple(task for task in self.tasks if not self.children[task.id])

    @cached_property
    def goals(self) -> tuple[Task, ...]:
        return tuple(task for task in self.tasks if self.children[task.id])

    def is_goal(self, task_id: str) -> bool:
        return bool(self.children.get(task_id))

    def with_plan(self, plan: Plan) -> Study:
        """The study with one of its plans (by id) replaced; what it has made of its
        agents, events and tasks comes along (they are the same)."""
        changed = replace(self, plans=tuple(plan if p.id == plan.id else p for p in self.plans))
        for name in ("agents_by_id", "events_by_id", "tasks_by_id", "children", "leaves", "goals"):
            if name in self.__dict__:
                changed.__dict__[name] = self.__dict__[name]
        return changed

    def agent(self, agent_id: str) -> Agent:
        try:
            return self.agents_by_id[agent_id]
        except KeyError:
            raise UnknownReference("agent", agent_id) from None

    def task(self, task_id: str) -> Task:
        try:
            return self.tasks_by_id[task_id]
        except KeyError:
            raise UnknownReference("task", task_id) from None

    def plan(self, plan_id: str) -> Plan:
        try:
            return self.plans_by_id[plan_id]
        except KeyError:
            raise UnknownReference("plan", plan_id) from None

    @property
    def humans(self) -> tuple[Agent, ...]:
        return tuple(agent for agent in self.agents if agent.is_human)

    @property
    def bin_seconds(self) -> Number:
        """The timeline bin width; 900 s by default (methods document, ``#occupancy``)."""
        return 900 if self.bin_s is None else self.bin_s
