"""Cross-reference checks of a study: ids, references, hierarchy, cycles, levels.

These run on a :class:`~allocation.core.model.Study` whose values already have the right
shapes (see :mod:`allocation.core.reading`) and report what only the whole study shows:
duplicate ids, references to missing agents, tasks, events or modes, goals carrying work,
levels that do not fit the study's scale, cycles in the hierarchy and in ``precedes``
links (naming the tasks on the cycle), and, as warnings, leaf tasks that never occur or
that a plan leaves unallocated.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any

from .analysis.modecheck import mode_search_size
from .analysis.reliability import fallback_person
from .assumptions import resolve_assumptions
from .errors import Problem
from .graph import chain_entries, hierarchy_cycle, never_occurring, precedence_cycle, triggers
from .limits import CHAIN_ENTRIES_MAX, MODE_TIME_WORK_MAX, MODE_TIMES_MAX
from .model import ANY_MODE, Assignment, Event, ModeMap, Occurs, Plan, Study
from .reading import child_path

__all__ = ["Checker", "check_study", "unallocated"]

Locate = Callable[[object, str], str]


def _no_map(_obj: object, default: str) -> str:
    return default


def unallocated(plan_id: str, task_id: str) -> str:
    """The warning of a leaf task a plan does not allocate."""
    return f"plan {plan_id} does not allocate leaf task {task_id}"


def check_study(study: Study, locate: Locate = _no_map) -> list[Problem]:
    """Every cross-reference problem of ``study``, errors and warnings.

    Parameters
    ----------
    study : Study
        The study to check.
    locate : callable, optional
        ``locate(obj, default)`` gives the JSON path where ``obj`` was read; by default
        the path follows the object's position in the study.

    Returns
    -------
    list of Problem
    """
    return Checker(study, locate).run()


class Checker:
    """The study checks; :meth:`run` makes them all (the plan editor's row check calls
    :meth:`assignments` alone)."""

    def __init__(self, study: Study, locate: Locate = _no_map):
        self.study = study
        self.locate = locate
        self.problems: list[Problem] = []
        self.task_paths = {
            task.id: locate(task, f"$.tasks[{i}]") for i, task in enumerate(study.tasks)
        }

    def error(self, path: str, message: str) -> None:
        self.problems.append(Problem(path, message))

    def warn(self, path: str, message: str) -> None:
        self.problems.append(Problem(path, message, "warning"))

    def run(self) -> list[Problem]:
        study = self.study
        for name, items in (
            ("agents", study.agents),
            ("events", study.events),
            ("tasks", study.tasks),
            ("plans", study.plans),
        ):
            self.unique_ids(name, items, "$")
        self.agents()
        self.hierarchy()
        self.tasks()
        self.whose_days()
        cycle_free = self.links()
        for index, plan in enumerate(study.plans):
            self.plan(plan, self.locate(plan, f"$.plans[{index}]"))
        if cycle_free:
            self.chain_size()
            self.occurrence_warnings()
        return self.problems

    def chain_size(self) -> None:
        """Refuse chains too large to analyse (``CHAIN_ENTRIES_MAX``), counted with a
        budget so that the count itself stays bounded."""
        total, counted = chain_entries(self.study, CHAIN_ENTRIES_MAX)
        if total <= CHAIN_ENTRIES_MAX:
            return
        trigger = counted[-1][0]
        if trigger.kind == "event":
            index = next(i for i, e in enumerate(self.study.events) if e.id == trigger.id)
            path = self.locate(self.study.events[index], f"$.events[{index}]")
        else:
            path = child_path(self.task_paths[trigger.roots[0]], "occurs")
        largest = sorted(counted, key=lambda item: -item[1])[:3]
        named = ", ".join(f"{t.id} ({n:,} tasks)" for t, n in largest)
        self.error(
            path,
            f"the precedes chains hold at least {total:,} task-in-chain entries (each "
            "trigger counts every task its chain reaches) after "
            f"{len(counted):,} of the triggers; the limit is {CHAIN_ENTRIES_MAX:,} "
            f"(CHAIN_ENTRIES_MAX), as chain analysis times every entry. Largest chains "
            f"counted: {named}. Split the chain, or start fewer of its tasks by their own "
            "schedule",
        )

    def unique_ids(self, name: str, items: Iterable[Any], base: str) -> None:
        seen: dict[str, str] = {}
        for index, item in enumerate(items):
            path = self.locate(item, f"{base}.{name}[{index}]")
            if item.id in seen:
                self.error(
                    child_path(path, "id"),
                    f"repeats the id {item.id!r} already used at {seen[item.id]}",
                )
            else:
                seen[item.id] = path

    def agents(self) -> None:
        for index, agent in enumerate(self.study.agents):
            path = self.locate(agent, f"$.agents[{index}]")
            if agent.asleep is not None and not agent.is_human:
                self.error(
                    child_path(path, "asleep"),
                    f"only a human has an asleep window; {agent.id} is an automation",
                )
            if agent.on_duty is not None and not agent.is_human:
                self.error(
                    child_path(path, "on_duty"),
                    f"only a human has duty hours; {agent.id} is an automation",
                )
            keys = set(agent.response_s or {})
            if not agent.is_human and keys - {"any"}:
                self.error(
                    child_path(path, "response_s"),
                    'an automation has one response time, under "any"',
                )
            elif "any" in keys and keys & {"awake", "asleep"}:
                self.error(
                    child_path(path, "response_s"),
                    'give either "any", or "awake" and "asleep", not both',
                )

    def hierarchy(self) -> None:
        tasks = self.study.tasks_by_id
        for task in self.study.tasks:
            path = self.task_paths[task.id]
            if task.parent is None:
                continue
            if task.parent == task.id:
                self.error(child_path(path, "parent"), f"task {task.id} cannot be its own parent")
            elif task.parent not in tasks:
                self.error(
                    child_path(path, "parent"),
                    f"names the task {task.parent!r}, which the study does not have",
                )
        cycle = hierarchy_cycle(self.study)
        if cycle and len(cycle) > 1:
            self.error(
                child_path(self.task_paths[cycle[0]], "parent"),
                f"the hierarchy goes round in a circle: {' -> '.join(cycle + cycle[:1])}",
            )

    def tasks(self) -> None:
        study = self.study
        for task in study.tasks:
            path = self.task_paths[task.id]
            if study.is_goal(task.id):
                children = ", ".join(study.children[task.id][:5])
                for key in task.carries_work():
                    self.error(
                        child_path(path, key),
                        f"task {task.id} is a goal (it has the sub-tasks {children}) "
                        f"and carries no work itself; move {key} to a leaf task",
                    )
                continue
            if (
                task.occurs is not None
                and task.occurs.event is not None
                and (task.occurs.event not in study.events_by_id)
            ):
                self.error(
                    child_path(child_path(path, "occurs"), "event"),
                    f"names the event {task.occurs.event!r}, which the study does not have",
                )
            if task.duration_s is None:
                self.warn(path, f"leaf task {task.id} has no duration_s; it counts as 0 s")
            if task.severity is None:
                self.warn(
                    path, f"leaf task {task.id} has no severity; it counts as 1 (negligible)"
                )

    def whose_days(self) -> None:
        """Every rate that follows someone's awake or asleep day says whose, where more
        than one person sleeps; and names a human of the study."""
        study = self.study
        sleepers = [agent.id for agent in study.humans if agent.asleep is not None]
        assumptions = study.assumptions if isinstance(study.assumptions, dict) else {}
        every_days_awake = resolve_assumptions(assumptions)["every_days_when"] == "awake"
        rules: list[tuple[Event | Occurs, str]] = [
            (event, self.locate(event, f"$.events[{index}]"))
            for index, event in enumerate(study.events)
        ]
        rules += [
            (task.occurs, child_path(self.task_paths[task.id], "occurs"))
            for task in study.tasks
            if task.occurs is not None and not study.is_goal(task.id)
        ]
        for rule, path in rules:
            if rule.of is not None:
                agent = study.agents_by_id.get(rule.of)
                if agent is None or not agent.is_human:
                    what = "an automation" if agent is not None else "not in the study"
                    self.error(
                        child_path(path, "of"),
                        f"names {rule.of!r}, {what}: a rate follows the day of a human",
                    )
                continue
            follows = rule.per_day is not None and rule.when in ("awake", "asleep")
            follows = follows or (rule.every_days is not None and every_days_awake)
            if follows and len(sleepers) > 1:
                what = f"{rule.when} time" if rule.per_day is not None else "awake day"
                self.error(
                    child_path(path, "of"),
                    f"is missing: the rate follows someone's {what}, and "
                    f"{', '.join(sleepers)} each have an asleep window; say whose",
                )

    def links(self) -> bool:
        """Check links; ``False`` when the ``precedes`` links form a cycle."""
        study = self.study
        seen: dict[tuple[str, str, str], str] = {}
        for index, link in enumerate(study.links):
            path = self.locate(link, f"$.links[{index}]")
            for key, task_id in (("from", link.source), ("to", link.target)):
                if task_id not in study.tasks_by_id:
                    self.error(
                        child_path(path, key),
                        f"names the task {task_id!r}, which the study does not have",
                    )
                elif study.is_goal(task_id):
                    self.error(
                        child_path(path, key), f"{task_id} is a goal; links join leaf tasks"
                    )
            if link.source == link.target:
                self.error(path, f"links task {link.source} to itself")
            signature = (link.source, link.target, link.kind)
            if signature in seen:
                self.error(
                    path,
                    f"repeats the {link.kind} link {link.source} -> "
                    f"{link.target} of {seen[signature]}",
                )
            seen.setdefault(signature, path)
        known = [
            link
            for link in study.links
            if link.source in study.tasks_by_id and link.target in study.tasks_by_id
        ]
        cycle = precedence_cycle(study)
        if cycle:
            first = next(
                i
                for i, link in enumerate(study.links)
                if link.kind == "precedes"
                and link.source == cycle[0]
                and link.target == (cycle + cycle[:1])[1]
            )
            path = self.locate(study.links[first], f"$.links[{first}]")
            self.error(
                path,
                "the precedes links go round in a circle: "
                f"{' -> '.join(cycle + cycle[:1])}; no task on it could ever start",
            )
            return False
        return len(known) == len(study.links)

    def plan(self, plan: Plan, path: str) -> None:
        study = self.study
        assignments_path = child_path(path, "assignments")
        self.assignments(plan.assignments, assignments_path)
        for task in study.leaves:
            if task.id not in plan.assignments:
                self.warn(assignments_path, unallocated(plan.id, task.id))
        if plan.modes is not None:
            self.mode_map(plan.modes, child_path(path, "modes"))

    def assignments(self, assignments: dict[str, Assignment], path: str) -> None:
        study = self.study
        for task_id, assignment in assignments.items():
            item_path = child_path(path, task_id)
            if task_id not in study.tasks_by_id:
                self.error(
                    item_path, f"allocates the task {task_id!r}, which the study does not have"
                )
            elif study.is_goal(task_id):
                self.error(item_path, f"{task_id} is a goal; only leaf tasks are allocated")
            self.assignment(assignment, item_path)

    def assignment(self, assignment: Assignment, path: str) -> None:
        agents = self.study.agents_by_id
        named = [
            (child_path(path, "human") + (f"[{index}]" if assignment.escalation else ""), who)
            for index, who in enumerate(assignment.people_asked)
        ]
        if assignment.automation is not None:
            named.append((child_path(path, "automation"), assignment.automation))
        for agent_path, agent_id in named:
            kind = "automation" if agent_path.endswith("automation") else "human"
            if agent_id not in agents:
                self.error(
                    agent_path, f"names the agent {agent_id!r}, which the study does not have"
                )
            elif agents[agent_id].kind != kind:
                self.error(agent_path, f"{agent_id} is {agents[agent_id].kind}, not {kind}")
        if assignment.accountable is not None and assignment.accountable not in agents:
            self.error(
                child_path(path, "accountable"),
                f"names the agent {assignment.accountable!r}, which the study does not have",
            )
        self.reliability(assignment, path)
        levels_path = child_path(path, "levels")
        if assignment.is_shared and assignment.levels is None:
            self.error(
                path, "shares the task between a human and an automation, so it needs levels"
            )
        elif (
            not assignment.is_shared
            and assignment.levels is not None
            and (assignment.human is not None or assignment.automation is not None)
        ):
            self.error(
                levels_path, "levels apply only when a human and an automation share the task"
            )
        if isinstance(assignment.levels, dict) and self.study.scale != "sv10":
            self.error(
                levels_path,
                f"the {self.study.scale} scale takes one level per assignment, not one per stage",
            )

    def reliability(self, assignment: Assignment, path: str) -> None:
        """A failure falls back to a person: the one named, else the assignment's human,
        else the accountable one (methods document, ``#reliability``)."""
        reliability = assignment.reliability
        if reliability is None or not reliability.fails_per_1000:
            return
        agents = self.study.agents_by_id
        path = child_path(path, "reliability")
        if reliability.fallback is not None:
            agent = agents.get(reliability.fallback)
            if agent is None:
                self.error(
                    child_path(path, "fallback"),
                    f"names the agent {reliability.fallback!r}, which the study does not have",
                )
            elif not agent.is_human:
                self.error(
                    child_path(path, "fallback"),
                    f"{agent.id} is {agent.kind}: a failure falls back to a person",
                )
            return
        if fallback_person(self.study, assignment) is None:
            self.error(
                path,
                "a failure falls back to a person, and this assignment names none: give "
                "a fallback, a human or an accountable person",
            )

    def mode_map(self, modes: ModeMap, path: str) -> None:
        self.unique_ids("states", modes.states, path)
        mode_ids = {mode.id for mode in modes.states}
        if modes.initial and modes.initial not in mode_ids:
            self.error(
                child_path(path, "initial"),
                f"names the mode {modes.initial!r}, which is not among the states",
            )
        for index, mode in enumerate(modes.states):
            mode_path = self.locate(mode, f"{path}.states[{index}]")
            if mode.overrides:
                self.assignments(mode.overrides, child_path(mode_path, "overrides"))
                for task_id, override in mode.overrides.items():
                    if override.pass_through:
                        # Chains are the plan's; a mode changes who does a task, not
                        # whether its chain goes on.
                        self.error(
                            child_path(child_path(mode_path, "overrides"), task_id)
                            + ".pass_through",
                            "goes on the plan's own assignment, not on a mode's override",
                        )
        clocks: set[str] = set()
        edges = 0  # the edges of the parts of the day the rated events that move it use
        for index, transition in enumerate(modes.transitions):
            item_path = self.locate(transition, f"{path}.transitions[{index}]")
            clocks.update(transition.times or ())
            if transition.event is not None:
                event = self.study.events_by_id.get(transition.event)
                if event is None:
                    self.error(
                        child_path(item_path, "event"),
                        f"names the event {transition.event!r}, which the study does not have",
                    )
                else:
                    clocks.update(event.times or ())
                    edges += 0 if event.times else 4  # an awake or asleep window: 2 pieces
            if len(clocks) > MODE_TIMES_MAX:
                self.error(
                    path,
                    f"changes mode at more than {MODE_TIMES_MAX:,} times of day (its "
                    "transitions' times and the times of the events that move it; "
                    "MODE_TIMES_MAX)",
                )
                clocks.clear()
            for key, mode_id in (("from", transition.source), ("to", transition.target)):
                if mode_id not in mode_ids and not (key == "from" and mode_id == ANY_MODE):
                    self.error(
                        child_path(item_path, key),
                        f"names the mode {mode_id!r}, which is not among the states",
                    )
        size = mode_search_size(modes)
        if size.over:
            self.error(path, size.refusal())
        stretches = len(clocks) + edges + 1
        work = stretches * len(modes.states) ** 3
        if work > MODE_TIME_WORK_MAX:
            self.error(
                path,
                f"the time in each mode would take {stretches:,} stretches of the day x "
                f"{len(modes.states):,} modes cubed = {work:,} (the limit is "
                f"{MODE_TIME_WORK_MAX:,}, MODE_TIME_WORK_MAX): fewer modes or fewer times "
                "of day",
            )

    def occurrence_warnings(self) -> None:
        study = self.study
        for trigger in triggers(study):
            if trigger.kind == "event" and not trigger.roots:
                index = next(i for i, e in enumerate(study.events) if e.id == trigger.id)
                path = self.locate(study.events[index], f"$.events[{index}]")
                self.warn(path, f"event {trigger.id} starts no task")
        for task_id in never_occurring(study):
            self.warn(
                self.task_paths[task_id],
                f"leaf task {task_id} never occurs: give it occurs, or a precedes link "
                "from a task that does",
            )
