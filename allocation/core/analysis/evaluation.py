"""A plan's analysis, kept up to date edit by edit.

>>> evaluation = PlanEvaluation(study, "hybrid-loop")
>>> evaluation.reassign("check-glucose", Assignment(human="pat"))
>>> evaluation.headline()                        # the figures after the edit
>>> evaluation.analysis()                        # the whole analysis, as analyse_plan gives

:func:`~.plan.analyse_plan` builds one of these and reads its analysis once; the plan
editor and the allocation search keep one and edit it. Every figure is kept per task,
per link or per chain, with what it was computed from; an edit of one task's assignment
computes again only what depends on it:

- its involvement, and its holder;
- when whether it is done changes: the chances of the chains that can reach it
  (:mod:`.occurrences`), and so the occurrences of the tasks below it;
- the timing of the chains it is in, from its place in the chain on (:mod:`.chains`);
- the tasks whose occurrences or timing changed, and its successors (who starts them
  can depend on its holder): their figures, awareness, findings and handover sites;
- the links at those tasks: their weight, handover sites and coherence;
- the mode-map check, when a mode overrides the task.

The sums over tasks (the people's daily figures, coherence, the headline) are taken
again over arrays, and every handover is assessed again at once (a person's load is in
every handover they receive; :mod:`.handover_table`). Both ways run the same code in the
same order, so an edited evaluation and a fresh analysis of the edited plan are equal,
figure for figure (the tests compare them over random sequences of edits).
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import replace

import numpy as np

from ..assumptions import resolve_assumptions
from ..describe import seconds_text
from ..model import Assignment, Study, Task
from ..vocabulary import STAGES
from .awareness import awareness
from .chaincut import chain_cut_findings
from .chains import ChainContext, ChainTiming, response_latency, time_chain
from .chance import ChainChance
from .coherence import LinkPartition
from .escalation import Escalation, escalation_shares, keeper_involvement, with_escalation
from .findings import Finding, accountability_findings, capability_findings
from .handover_table import HandoverTable, SiteFactors
from .handovers import HandoverSite, time_budget_ratio
from .involvement import Involvement, involvement
from .modecheck import error_state_tasks, verify_mode_map
from .modes import assignment_in_mode
from .modetime import mode_time
from .occurrences import Occurrences, occurrences, tally, trigger_chances, trigger_timings
from .plan import (
    PERSON_FIGURES,
    PersonFigures,
    PlanAnalysis,
    StudyGraph,
    TaskFigures,
    default_initiator,
    duty_shares,
    headline_figures,
    is_interruption,
    prepare,
    reach_shares,
    start_asleep_window,
    task_modes,
    window_findings,
)
from .reliability import (
    failed_involvement,
    false_alert_receiver,
    silent_failure_findings,
    with_failures,
)
from .risk import resolve_policy
from .timeofday import DAY_S, asleep_intervals

__all__ = ["PlanEvaluation"]

#: Handover sites by where they come from, in the order ties between equal risks keep.
LINK, THROUGH, SHARED, FAILURE, ESCALATION, MODE = range(6)


def _order_of(key: tuple[int, int], position: int) -> int:
    """One number that orders sites by where they come from (``key``: the group, then a
    task's or a link's place) and their place among that slot's sites; each place is
    below 2 ** 29, far above the study limits."""
    group, place = key
    return (group << 58) | (place << 29) | position


class PlanEvaluation:
    """One plan of a study, analysed, with its figures kept per task, link and chain.

    Parameters
    ----------
    study : Study
        A study without errors.
    plan_id : str
        The plan to evaluate.
    graph : StudyGraph, optional
        From :func:`~.plan.prepare`, to share between plans.
    """

    def __init__(self, study: Study, plan_id: str, graph: StudyGraph | None = None):
        self.study = study
        self.plan = study.plan(plan_id)
        self.graph = graph or prepare(study)
        self.assumptions = resolve_assumptions(study.assumptions, study.scale)
        self.policy = resolve_policy(study.risk_policy)
        self.critical = int(self.policy["critical_severity"])
        modes = self.plan.modes
        self.mode_time = (
            mode_time(study, modes, self.assumptions["every_days_when"]) if modes else None
        )
        self.mode_share = self.mode_time.share_dict() if self.mode_time else {}
        # Each transition's place among the map's expanded ones, by identity (they are
        # made once, cached), for its firings a day.
        self.fire_index = {id(t): i for i, t in enumerate(modes.expanded if modes else ())}
        self.initial = modes.initial if modes else None
        self.overridden = {
            task_id for mode in (modes.states if modes else ()) for task_id in mode.overrides or {}
        }
        self.leaves = [task.id for task in study.leaves]
        self.place = {task_id: index for index, task_id in enumerate(self.leaves)}
        self.humans = [agent.id for agent in study.humans]
        self.human_place = {human: index for index, human in enumerate(self.humans)}
        self.awake = np.array(
            [DAY_S - sum(b - a for a, b in asleep_intervals(agent)) for agent in study.humans]
        )
        self.sleep = {agent.id: asleep_intervals(agent) for agent in study.humans}
        default = self.assumptions["default_response_s"]
        self.latency_means = {
            human: (
                response_latency(study, human, 0.0, default).mean,
                response_latency(study, human, 1.0, default).mean,
            )
            for human in self.sleep
        }
        # Where work reaching each person starts while they sleep, by its ready time.
        self.start_asleep = {
            human: start_asleep_window(self.sleep[human], self.latency_means[human])
            for human in self.sleep
        }
        self.context = ChainContext.of(study, self.assumptions)
        self.reach: dict[str, list[int]] | None = None  # made at the first need
        self.all_through: Occurrences | None = None  # likewise
        self.timings = trigger_timings(study, self.assumptions["every_days_when"])
        self.links_at: dict[str, list[int]] = defaultdict(list)
        for index, link in enumerate(study.links):
            self.links_at[link.source].append(index)
            if link.target != link.source:
                self.links_at[link.target].append(index)
        self._build()

    # -- building ---------------------------------------------------------------------

    def _build(self) -> None:
        study, graph = self.study, self.graph
        self.normal = {task_id: self.involved(task_id, self.initial) for task_id in self.leaves}
        self.holders = {task_id: self.normal[task_id].principal for task_id in self.leaves}
        self.counted = Occurrences(per_day=dict.fromkeys(self.leaves, 0.0))
        self.chances: list[ChainChance] = []
        for timing in self.timings:
            self.counted.timings[timing.trigger.id] = timing
            chained = trigger_chances(
                study, timing, graph.successors, graph.position, self.applies
            )
            self.chances.append(chained)
            self.counted.chains[timing.trigger.id] = chained.chance
        self.reaching: dict[str, list[int]] = {task_id: [] for task_id in self.leaves}
        for index, chained in enumerate(self.chances):
            for task_id in chained.chance:
                self.reaching[task_id].append(index)
        for task_id in self.leaves:
            self._tally(task_id)
        self.latencies: list[dict] = [{} for _ in self.timings]
        self.chains: list[ChainTiming] = [
            self._time_chain(index, None) for index in range(len(self.timings))
        ]
        self.in_chains: dict[str, list[int]] = {task_id: [] for task_id in self.leaves}
        for index, chain in enumerate(self.chains):
            for entry in chain.tasks:
                self.in_chains[entry.task_id].append(index)
        self.entries = [{t.task_id: t for t in chain.tasks} for chain in self.chains]
        self.starts = {task_id: self._starts(task_id) for task_id in self.leaves}
        self.mode_findings = (
            verify_mode_map(study, self.plan, self.assumptions) if self.plan.modes else []
        )
        self.in_question = error_state_tasks(self.mode_findings)
        # Per task: its figures, its part of the people's figures, its own findings and
        # handover sites.
        self.tasks: dict[str, TaskFigures] = {}
        self.mixes: dict[str, list[tuple[float, Involvement]]] = {}
        self.escalations: dict[str, list[tuple[float, Escalation]]] = {}
        self.waits: dict[str, dict[str, float]] = {}
        self.keepers: dict[str, dict[str, Involvement]] = {}
        self.awareness = np.full(len(self.leaves), np.nan)  # each task's index, if any
        self.shares = np.zeros((len(self.leaves), len(self.humans), len(PERSON_FIGURES)))
        self.found: dict[tuple[int, int], list[Finding]] = {}
        self.table = HandoverTable(self.assumptions, self.policy)
        self.slots: dict[tuple[int, int], list[tuple[HandoverSite, int | None]]] = {}
        for task_id in self.leaves:
            self._figures(task_id)
        self.partition = LinkPartition([(link.source, link.target) for link in study.links])
        for task_id in self.leaves:
            self.partition.hold(task_id, self.holders[task_id])
        for task_id in self.leaves:
            self._task_sites(task_id)
        for index in range(len(study.links)):
            self._link(index)
        self.stopped: set[str] = set()
        self.passing: set[str] = set()
        for task_id in self.leaves:
            self._mark(task_id)
        self.passed: set[str] = set()  # the tasks with handover sites through them
        for task_id in self.passing:
            self._through(task_id)
        self.cuts: list[Finding] = []
        self._settle()

    # -- edits ------------------------------------------------------------------------

    def reassign(self, task_id: str, assignment: Assignment | None) -> None:
        """Give a leaf task a new assignment (``None``: none) and bring every figure up
        to date.

        Raises
        ------
        KeyError
            When ``task_id`` is not a leaf task of the study.
        """
        if task_id not in self.place:
            raise KeyError(task_id)
        assignments = dict(self.plan.assignments)
        if assignment is None:
            assignments.pop(task_id, None)
        else:
            assignments[task_id] = assignment
        before = self.normal[task_id]
        was_applying = self.applies(task_id)
        self.plan = replace(self.plan, assignments=assignments)
        self._mark(task_id)
        self.normal[task_id] = after = self.involved(task_id, self.initial)
        self.holders[task_id] = after.principal
        self.partition.hold(task_id, after.principal)
        dirty = {task_id}
        retime: dict[int, int | None] = {}
        if self.applies(task_id) != was_applying:
            dirty |= self._recount(self._reach()[task_id], retime)
        if before.principal != after.principal or self._duration_of(before) != self._duration_of(
            after
        ):
            for index in self.in_chains[task_id]:
                retime.setdefault(index, self.graph.position[task_id])
        if before.principal != after.principal:
            # Who starts a successor can follow the holder of this task.
            dirty.update(target for target, _p in self.graph.successors.get(task_id, ()))
        dirty |= self._retime(retime)
        if self._checked_by_mode_map(task_id):
            dirty |= self._check_mode_map()
        self._refresh(dirty)

    def restudy(self, study: Study) -> None:
        """Follow the study to a version that differs from this one only in its plans:
        this plan's figures stay (this plan must be as the study has it)."""
        plan = study.plan(self.plan.id)
        if plan != self.plan:
            raise ValueError(f"plan {plan.id} differs from the one evaluated")
        self.study, self.plan = study, plan
        self.context = replace(self.context, study=study, spans=self.context.spans)

    def _checked_by_mode_map(self, task_id: str, severity: int | None = None) -> bool:
        """Whether the mode-map check reads a task: one a mode overrides, or one at or
        above the critical severity (is it held in every mode?)."""
        if self.plan.modes is None:
            return False
        severity = max(severity or 0, self.study.task(task_id).severity or 0)
        return task_id in self.overridden or severity >= self.critical

    def _check_mode_map(self) -> set[str]:
        """Check the mode map again; the tasks whose holder came in or out of question."""
        self.mode_findings = verify_mode_map(self.study, self.plan, self.assumptions)
        question = error_state_tasks(self.mode_findings)
        changed = question ^ self.in_question
        self.in_question = question
        return set(changed)

    def retask(self, task: Task) -> None:
        """Change one leaf task of the study (its figures: duration, window, severity,
        needs and the like) and bring every figure up to date. A change to what starts
        the task or to its place in the task tree analyses the plan again."""
        old = self.study.task(task.id)
        study = replace(
            self.study,
            tasks=tuple(task if t.id == task.id else t for t in self.study.tasks),
            plans=tuple(self.plan if p.id == self.plan.id else p for p in self.study.plans),
        )
        if task.id not in self.place or (old.occurs, old.parent, old.title) != (
            task.occurs,
            task.parent,
            task.title,
        ):
            # Triggers and their names follow these: everything again.
            self.__init__(study, self.plan.id, self.graph)  # type: ignore[misc]
            return
        self.study = study
        self.context = ChainContext.of(self.study, self.assumptions)
        self.normal[task.id] = self.involved(task.id, self.initial)
        self.holders[task.id] = self.normal[task.id].principal
        self.partition.hold(task.id, self.holders[task.id])
        retime: dict[int, int | None] = dict.fromkeys(
            self.in_chains[task.id], self.graph.position[task.id]
        )
        dirty = {task.id} | self._retime(retime)
        if self._checked_by_mode_map(task.id, old.severity):
            dirty |= self._check_mode_map()
        self._refresh(dirty)

    def _reach(self) -> dict[str, list[int]]:
        """Per task, the triggers whose chain could reach it were every task done."""
        if self.reach is None:
            reach: dict[str, list[int]] = defaultdict(list)
            successors = self.graph.successors
            for index, timing in enumerate(self.timings):
                found = set(timing.trigger.roots)
                stack = list(found)
                while stack:
                    for target, _p in successors.get(stack.pop(), ()):
                        if target not in found:
                            found.add(target)
                            stack.append(target)
                for task_id in found:
                    reach[task_id].append(index)
            self.reach = reach
        return self.reach

    def _recount(self, indices: list[int], retime: dict[int, int | None]) -> set[str]:
        """Count the chances of some chains again; the tasks whose occurrences changed."""
        graph, changed = self.graph, set()
        for index in indices:
            timing = self.timings[index]
            before = self.chances[index].chance
            chained = trigger_chances(
                self.study, timing, graph.successors, graph.position, self.applies
            )
            self.chances[index] = chained
            self.counted.chains[timing.trigger.id] = chained.chance
            retime[index] = None
            for task_id in before.keys() - chained.chance.keys():
                self.reaching[task_id].remove(index)
            for task_id in chained.chance.keys() - before.keys():
                self.reaching[task_id].append(index)
                self.reaching[task_id].sort()
            changed |= before.keys() | chained.chance.keys()
        for task_id in changed:
            self._tally(task_id)
        return changed

    def _retime(self, retime: dict[int, int | None]) -> set[str]:
        """Time some chains again, each from a place in the order on (``None``: all of
        it); the tasks whose timing in a chain changed."""
        changed: set[str] = set()
        for index, from_position in retime.items():
            before = self.entries[index]
            chain = self._time_chain(index, from_position)
            after = {t.task_id: t for t in chain.tasks}
            self.chains[index] = chain
            self.entries[index] = after
            for task_id in before.keys() - after.keys():
                self.in_chains[task_id].remove(index)
            for task_id in after.keys() - before.keys():
                self.in_chains[task_id].append(index)
                self.in_chains[task_id].sort()
            changed.update(
                task_id
                for task_id in before.keys() | after.keys()
                if before.get(task_id) != after.get(task_id)
            )
        for task_id in changed:
            self.starts[task_id] = self._starts(task_id)
        return changed

    def _refresh(self, dirty: set[str]) -> None:
        """Compute again the figures, sites and links of the tasks in ``dirty``."""
        dirty = {task_id for task_id in dirty if task_id in self.place}
        for task_id in dirty:
            self._figures(task_id)
        for task_id in dirty:
            self._task_sites(task_id)
        links = {index for task_id in dirty for index in self.links_at.get(task_id, ())}
        for index in links:
            self._link(index)
        for task_id in self.passed - self.passing:
            self._through(task_id)
        for task_id in self.passing:
            neighbours = {task_id} | {
                end
                for index in self.links_at.get(task_id, ())
                for end in (self.study.links[index].source, self.study.links[index].target)
            }
            if task_id not in self.passed or neighbours & dirty:
                self._through(task_id)
        self._settle()

    def _settle(self) -> None:
        """The sums over tasks and the assessment of every handover."""
        stopped = sorted(self.stopped, key=self.place.__getitem__)
        self.cuts = self._chain_cuts(stopped) if stopped else []
        totals = self.shares.sum(axis=0)
        self.people = {
            human: PersonFigures(
                human,
                **dict(zip(PERSON_FIGURES, map(float, totals[index]), strict=True)),
                awake_s=float(self.awake[index]),
            )
            for index, human in enumerate(self.humans)
        }
        loads = np.array([self.people[human].load for human in self.humans])
        self.table.assess(loads)

    # -- reading ----------------------------------------------------------------------

    def headline(self) -> dict[str, float]:
        """The plan's headline figures (as :meth:`.PlanAnalysis.headline`), read without
        building the analysis."""
        aware = self.awareness[~np.isnan(self.awareness)].tolist()
        findings = sum(len(items) for items in self.found.values()) + len(self.cuts)
        return headline_figures(
            self.people,
            self.table.headline(),
            math.fsum(aware) / len(aware) if aware else 0.0,
            self.partition.coherence(),
            findings + len(self.mode_findings),
        )

    def analysis(self) -> PlanAnalysis:
        """The plan's analysis as it stands."""
        findings = [
            (key, index, finding)
            for key, items in self.found.items()
            for index, finding in enumerate(items)
        ]
        findings += [((3, 0), index, f) for index, f in enumerate(self.mode_findings)]
        findings += [((4, 0), index, f) for index, f in enumerate(self.cuts)]
        findings.sort(key=lambda item: (-item[2].severity, item[2].kind, item[2].tasks, item[:2]))
        interfaces = sorted(
            (
                (_order_of(key, position), site)
                for key, sites in self.slots.items()
                for position, (site, row) in enumerate(sites)
                if row is None
            ),
            key=lambda item: item[0],
        )
        study = self.study
        if study.plan(self.plan.id) is not self.plan:
            study = replace(
                study,
                plans=tuple(self.plan if p.id == self.plan.id else p for p in study.plans),
            )
        return PlanAnalysis(
            study=study,
            plan=self.plan,
            assumptions=self.assumptions,
            policy=self.policy,
            occurrences=replace(
                self.counted,
                per_day=dict(self.counted.per_day),
                probability=dict(self.counted.probability),
                from_trigger=dict(self.counted.from_trigger),
                chains=dict(self.counted.chains),
                se_per_day=dict(self.counted.se_per_day),
            ),
            tasks=dict(self.tasks),
            people=self.people,
            chains=list(self.chains),
            handovers=self.table.handovers(),
            coherence=self.partition.coherence(),
            findings=[finding for _key, _index, finding in findings],
            mode_share=self.mode_share,
            interfaces=[site for _order, site in interfaces],
            mode_time=self.mode_time,
            escalations={t: self.escalations[t] for t in self.leaves if t in self.escalations},
        )

    # -- pieces -------------------------------------------------------------------------

    def involved(self, task_id: str, mode: str | None) -> Involvement:
        task = self.study.task(task_id)
        return involvement(
            self.study, task, assignment_in_mode(self.plan, mode, task_id), self.assumptions
        )

    def applies(self, task_id: str) -> bool:
        """Whether a task's chain goes on through it: it is done, or the plan lets the
        chain go on without it."""
        assignment = self.plan.assignments.get(task_id)
        return assignment is None or assignment.is_applicable or bool(assignment.pass_through)

    def _duration_of(self, involved: Involvement):
        assignment = involved.assignment
        if assignment is not None and not assignment.is_applicable:
            return None  # a step the chain passes through in no time
        if assignment is not None and assignment.duration_s is not None:
            return assignment.duration_s
        return self.study.task(involved.task_id).duration_s

    def _tally(self, task_id: str) -> None:
        tally(
            self.counted,
            task_id,
            [(self.timings[index], self.chances[index]) for index in self.reaching[task_id]],
        )

    def _time_chain(self, index: int, from_position: int | None) -> ChainTiming:
        timing = self.timings[index]
        members = {
            task_id: chance for task_id, chance in self.chances[index].chance.items() if chance > 0
        }
        return time_chain(
            self.context,
            timing,
            members,
            self.graph.predecessors,
            self.graph.position,
            self.holders.get,
            lambda task_id: self._duration_of(self.normal[task_id]),
            self.latencies[index],
            self.entries[index] if from_position is not None else None,
            from_position,
        )

    def _starts(self, task_id: str):
        """Per chain the task is in: its weight (occurrences a day), its timing, the
        chain's time-of-day spread and its trigger."""
        result = []
        for index in self.in_chains[task_id]:
            chain, timing = self.chains[index], self.entries[index][task_id]
            spread = self.timings[index].timing
            result.append((chain.per_day * timing.probability, timing, spread, chain.trigger))
        return result

    def _mark(self, task_id: str) -> None:
        """Whether a task is not done under the plan, and if so whether its chain stops
        with it or goes on."""
        self.stopped.discard(task_id)
        self.passing.discard(task_id)
        assignment = self.plan.assignments.get(task_id)
        if assignment is not None and not assignment.is_applicable:
            (self.passing if assignment.pass_through else self.stopped).add(task_id)

    # -- one task -----------------------------------------------------------------------

    def _figures(self, task_id: str) -> None:
        """A task's figures, its involvements in force, its part of the people's daily
        figures and its own findings."""
        study = self.study
        task = study.task(task_id)
        normal = self.normal[task_id]
        starts = self.starts[task_id]
        total = sum(item[0] for item in starts)
        mix = self._mode_mix(task_id, normal, starts)
        assignment = normal.assignment
        initiator = (
            assignment.initiator
            if assignment and assignment.initiator
            else default_initiator(study, task_id, self.graph, self.holders)
        )
        holder = self.holders[task_id]
        asleep_share = dict.fromkeys(self.sleep, 0.0)
        for weight, timing, day, _trigger in starts if total else ():
            moved = None  # the chain's day shifted by the expected start, made once
            for human, pieces in self.sleep.items():
                if not pieces:
                    continue
                if holder == human and timing.latency.mean > 0:
                    window = self.start_asleep[human]
                    share = day.shifted(timing.ready.mean).share_within(window)
                else:
                    moved = moved or day.shifted(timing.start.mean)
                    share = moved.share_within(pieces)
                asleep_share[human] += weight * share / total
        ready = (
            sum(weight * timing.ready.typical for weight, timing, _d, _t in starts) / total
            if total
            else 0.0
        )
        figures = TaskFigures(
            involved=normal,
            per_day=self.counted.per_day[task_id],
            initiator=initiator,
            person_s_per_day={},
            asleep_share=asleep_share,
            ready_s=ready,
            duty_share=duty_shares(study, starts, total, holder),
            segments=reach_shares(study, mix, starts, total),
        )
        default = self.assumptions["default_response_s"]

        def shares_of(assignment: Assignment, segments=figures.segments) -> Escalation:
            return escalation_shares(
                study,
                assignment.people_asked,
                float(assignment.escalate_after_s or 0.0),
                segments,
                default,
                assignment.feedback,
            )

        mix, asked = with_escalation(study, task, mix, shares_of, self.assumptions)
        self.mixes[task_id] = mix
        if asked:
            self.escalations[task_id] = asked
        else:
            self.escalations.pop(task_id, None)
        self.tasks[task_id] = figures
        self._people_share(task_id, figures, mix, asked)
        figures.awareness = awareness(
            study,
            normal,
            initiator,
            figures.per_day,
            self._mode_cue(task_id),
            self.assumptions,
            in_error_state=task_id in self.in_question,
        )
        self.awareness[self.place[task_id]] = (
            np.nan if figures.awareness is None else figures.awareness.index
        )
        self._findings(task_id)

    def _mode_mix(self, task_id: str, normal: Involvement, starts):
        """The task's assignments in force, weighted by the chance that its work is
        ready in each mode (methods document, #mode-share), each that can fail split
        into its normal and failed occurrences."""
        mix = [(1.0, normal)]
        timed = self.mode_time
        if timed is not None and task_id in self.overridden:
            shares = task_modes(timed, starts)
            mix = [
                (float(share), self.involved(task_id, mode))
                for mode, share in zip(timed.modes, shares, strict=True)
                if share > 0
            ]
        return with_failures(self.study, self.study.task(task_id), mix, self.assumptions)

    def _people_share(self, task_id, figures: TaskFigures, mix, asked) -> None:
        """The task's part of each person's daily figures (methods document,
        ``#daily-figures``)."""
        index = self.human_place
        row = self.shares[self.place[task_id]]
        row[:] = 0.0
        burden, interactions, interruptions, night, monitoring, failures, escalations = range(7)
        for share, involved in mix:
            rate = figures.per_day * share
            for human in involved.people():
                if human not in index:
                    continue
                seconds = involved.time_of(human)
                row[index[human], burden] += rate * seconds
                figures.person_s_per_day[human] = (
                    figures.person_s_per_day.get(human, 0.0) + rate * seconds
                )
                if human == involved.monitor:
                    row[index[human], monitoring] += rate * involved.watch_s
            if involved.failed and involved.human in index:
                row[index[involved.human], failures] += rate
            for human in involved.interacting():
                if human not in index:
                    continue
                person = row[index[human]]
                person[interactions] += rate
                if is_interruption(involved, figures.initiator, human):
                    # Work reaching a person off duty waits: not an interruption; one who
                    # answered a call in time was on duty.
                    on, at_night = figures.duty_share.get(
                        human, (1.0, figures.asleep_share.get(human, 0.0))
                    )
                    if involved.kept_shares is not None and human == involved.human:
                        on, at_night = involved.kept_shares
                    person[interruptions] += rate * on
                    person[night] += rate * at_night
        # The people asked in turn who did not answer in time: each call an interaction
        # and an interruption (at night while they sleep), costing no time; every call
        # after the first an escalation of the person it goes to.
        for share, shares in asked:
            rate = figures.per_day * share
            for place, person_id in enumerate(shares.people):
                if person_id not in index:
                    continue
                person = row[index[person_id]]
                person[interactions] += rate * shares.unanswered[place]
                person[interruptions] += rate * shares.unanswered[place]
                person[night] += rate * shares.unanswered_asleep[place]
                if place > 0:
                    reached = shares.unanswered[place] + shares.keep[place]
                    person[escalations] += rate * reached
        self._looks(task_id, figures, row, index)

    def _looks(self, task_id: str, figures: TaskFigures, row: np.ndarray, index) -> None:
        """Checks a day whatever the task's occurrences (methods document,
        ``#monitoring``): a monitor's periodic looks, started by the person, spread over
        their awake time (interactions, never interruptions), and the automation's false
        alerts to its accountable person (each an interruption, at any time of the day).
        Both go with a task that occurs under the plan."""
        if figures.per_day <= 0:
            return
        own = figures.involved
        if self.initial is not None and task_id in self.overridden:
            own = self.involved(task_id, None)  # the plan's own, not the mode's
        checks: list[tuple[str, float, bool]] = []
        if own.monitor is not None and own.monitor in index and own.looks_per_day > 0:
            checks.append((own.monitor, own.looks_per_day, False))
        alerted = false_alert_receiver(self.study, own)
        if alerted is not None and alerted[0] in index:
            checks.append((*alerted, True))
        for who, per_day, interrupts in checks:
            person = row[index[who]]
            seconds = per_day * float(self.assumptions["monitoring_s"])
            person[0] += seconds
            person[4] += seconds
            figures.person_s_per_day[who] = figures.person_s_per_day.get(who, 0.0) + seconds
            person[1] += per_day
            if interrupts:
                person[2] += per_day
                asleep = sum(b - a for a, b in self.sleep[who])
                person[3] += per_day * asleep / DAY_S

    def _mode_changes(self, task_id: str):
        """The transitions that change the task's holder: (place, transition, from, to)."""
        modes = self.plan.modes
        if not modes or task_id not in self.overridden:
            return []
        changes = []
        holder_in: dict[str, str | None] = {}
        for place, transition in enumerate(modes.expanded):
            source, target = modes.by_id.get(transition.source), modes.by_id.get(transition.target)
            if source is None or target is None or source.id == target.id:
                continue
            if task_id not in (source.overrides or {}) and task_id not in (target.overrides or {}):
                continue
            for mode in (source.id, target.id):
                if mode not in holder_in:
                    holder_in[mode] = self.involved(task_id, mode).principal
            if holder_in[source.id] != holder_in[target.id]:
                changes.append((place, transition, holder_in[source.id], holder_in[target.id]))
        return changes

    def _mode_cue(self, task_id: str) -> str | None:
        """The weakest cue among the transitions that change the task's holder."""
        weakness = self.assumptions["cue_weakness"]
        cue = None
        for _place, transition, _before, _after in self._mode_changes(task_id):
            if cue is None or weakness[transition.cue] > weakness[cue]:
                cue = transition.cue
        return cue

    def _findings(self, task_id: str) -> None:
        """The task's own findings: in its normal mode, in each mode that overrides it,
        and its worst missed window."""
        study, place = self.study, self.place[task_id]
        normal = self.normal[task_id]
        found = accountability_findings(study, normal) + capability_findings(study, normal)
        self.found[(0, place)] = found + self._failure_findings(normal)
        modes = self.plan.modes
        for position, mode in enumerate(modes.states if modes else ()):
            key = (1, position * len(self.leaves) + place)
            if mode.id == self.initial or task_id not in (mode.overrides or {}):
                self.found.pop(key, None)
                continue
            involved = self.involved(task_id, mode.id)
            self.found[key] = (
                accountability_findings(study, involved, mode.id)
                + capability_findings(study, involved, mode.id)
                + self._failure_findings(involved, mode.id)
            )
        self.found[(2, place)] = window_findings(study, self.starts[task_id])

    def _failure_findings(self, involved: Involvement, mode: str | None = None) -> list[Finding]:
        """A failure nobody is told of, and a fallback person without what the task
        needs (methods document, ``#reliability``)."""
        study = self.study
        found = silent_failure_findings(study, involved, self.critical, mode, mode or self.initial)
        failed = failed_involvement(
            study, study.task(involved.task_id), involved, self.assumptions
        )
        if failed is not None:
            found += capability_findings(study, failed, mode, after_failure=True)
        return found

    def _chain_cuts(self, stopped: list[str]) -> list[Finding]:
        """The tasks each task not done takes away (methods document,
        ``#finding-chain-cut``): occurrences counted again as if every such task let its
        chain go on."""
        graph = self.graph
        if self.all_through is None:
            self.all_through = occurrences(
                self.study,
                graph.successors,
                graph.position,
                lambda _task_id: True,
                self.assumptions["every_days_when"],
            )
        through = self.all_through
        return chain_cut_findings(
            self.study,
            stopped,
            self.counted.per_day,
            through.per_day,
            graph.successors,
            lambda task_id: self.tasks[task_id].person_s,
            {
                task_id: 4 * (self.counted.se_per_day.get(task_id, 0.0) + se)
                for task_id, se in through.se_per_day.items()
            },
        )

    # -- handover sites -----------------------------------------------------------------

    def _place_sites(self, key: tuple[int, int], sites: list[HandoverSite]) -> None:
        """Put a slot's sites in place of its old ones: those with a person on either
        side in the handover table, the others (automation interfaces) beside it."""
        for _site, row in self.slots.pop(key, ()):
            if row is not None:
                self.table.remove(row)
        if not sites:
            return
        placed = []
        for position, site in enumerate(sites):
            row = None
            if self._involves_a_person(site):
                row = self.table.add(self._factors(site, _order_of(key, position)))
            placed.append((site, row))
        self.slots[key] = placed

    def _task_sites(self, task_id: str) -> None:
        """The handovers of one task: between the stages of a shared assignment, on its
        automation's failures, on calls passed on, and on mode changes."""
        place = self.place[task_id]
        # The calls passed on first: their waits count in the time budget of every
        # handover of the task to the people called.
        escalation = self._escalation_sites(task_id)
        self._place_sites((SHARED, place), self._shared_sites(task_id))
        self._place_sites((FAILURE, place), self._failure_sites(task_id))
        self._place_sites((ESCALATION, place), escalation)
        if task_id in self.overridden or (MODE, place) in self.slots:
            self._place_sites((MODE, place), self._mode_sites(task_id))

    def _shared_sites(self, task_id: str) -> list[HandoverSite]:
        figures = self.tasks[task_id]
        involved = figures.involved
        if not involved.applies or involved.category != "shared":
            return []
        holders = involved.stage_holders()
        return [
            HandoverSite(
                "shared",
                task_id,
                task_id,
                holders[index - 1],
                holders[index],
                figures.per_day,
                involved.assignment.feedback if involved.assignment else None,
                figures.initiator,
                stage=STAGES[index],
            )
            for index in range(1, len(STAGES))
            if holders[index] != holders[index - 1]
        ]

    def _failure_sites(self, task_id: str) -> list[HandoverSite]:
        """A failure of the automation hands the whole task to the fallback person, as
        often as it fails, with the cue that tells them (methods document,
        ``#reliability``); one site per fallback (the modes' failures add up)."""
        figures, mix = self.tasks[task_id], self.mixes[task_id]
        found: dict[tuple[str | None, str | None], HandoverSite] = {}
        # A failed involvement follows the normal one it is the failure of.
        for (_share, normal), (share, involved) in zip(mix, mix[1:], strict=False):
            if not involved.failed:
                continue
            key = (normal.automation, involved.human)
            site = found.get(key)
            found[key] = HandoverSite(
                "failure",
                task_id,
                task_id,
                normal.automation,
                involved.human,
                figures.per_day * share + (site.per_day if site else 0.0),
                involved.assignment.feedback if involved.assignment else None,
                "automation",
                trigger="failure",
            )
        return list(found.values())

    def _escalation_sites(self, task_id: str) -> list[HandoverSite]:
        """Each call that moves on from one person asked to the next, as often as it
        does, cued as the assignment tells its people (methods document,
        ``#escalation``); one site per pair of people."""
        found: dict[tuple[str, str], HandoverSite] = {}
        waits: dict[str, float] = {}
        keepers: dict[str, Involvement] = {}
        per_day = self.tasks[task_id].per_day
        for share, shares in self.escalations.get(task_id, ()):
            for index in range(1, len(shares.people)):
                before, after = shares.people[index - 1], shares.people[index]
                site = found.get((before, after))
                found[(before, after)] = HandoverSite(
                    "escalation",
                    task_id,
                    task_id,
                    before,
                    after,
                    per_day * share * shares.asked[index] + (site.per_day if site else 0.0),
                    shares.cue,
                    "automation",
                    trigger=f"no answer within {seconds_text(shares.after_s)}",
                )
                waits[after] = index * shares.after_s
                if shares.base is not None:
                    keepers[after] = keeper_involvement(
                        self.study,
                        self.study.task(task_id),
                        shares.base,
                        index,
                        None,
                        self.assumptions,
                    )
        self.waits[task_id], self.keepers[task_id] = waits, keepers
        return list(found.values())

    def _mode_sites(self, task_id: str) -> list[HandoverSite]:
        sites = []
        for _place, transition, before, after in self._mode_changes(task_id):
            if before is None or after is None:
                continue
            sites.append(
                HandoverSite(
                    "mode",
                    task_id,
                    task_id,
                    before,
                    after,
                    self.mode_time.fires[self.fire_index[id(transition)]]
                    if self.mode_time is not None
                    else 0.0,
                    transition.cue,
                    {"environment": "event"}.get(transition.by, transition.by),
                    modes=(transition.source, transition.target),
                    trigger=transition.trigger,
                )
            )
        return sites

    def _link(self, index: int) -> None:
        """A link's weight (occurrences a day it carries) and its handover site."""
        link = self.study.links[index]
        per_day = self.counted.per_day
        source, target = per_day.get(link.source, 0.0), per_day.get(link.target, 0.0)
        if link.kind == "precedes":
            probability = 1.0 if link.probability is None else float(link.probability)
            weight = min(source * probability, target)
        else:
            weight = min(source, target)
        self.partition.carry(index, weight)
        self._place_sites(
            (LINK, index), self._link_site(link.source, link.target, weight, link.kind)
        )

    def _through(self, middle: str) -> None:
        """Work passing across a task not done whose chain goes on (``pass_through``):
        from the holder before it to the holder after it, as often as the lesser of the
        two links carries (methods document, #handover-sites)."""
        key = (THROUGH, self.place[middle])
        assignment = self.plan.assignments.get(middle)
        if assignment is None or assignment.is_applicable or not assignment.pass_through:
            self.passed.discard(middle)
            self._place_sites(key, [])
            return
        self.passed.add(middle)
        links, weights = self.study.links, self.partition.weight
        into = [
            (links[i].source, float(weights[i]))
            for i in self.links_at[middle]
            if links[i].kind == "precedes" and links[i].target == middle
        ]
        out_of = [
            (links[i].target, float(weights[i]))
            for i in self.links_at[middle]
            if links[i].kind == "precedes" and links[i].source == middle
        ]
        sites = []
        for source, weight_in in into:
            for target, weight_out in out_of:
                trigger = f"precedes through {middle}"
                sites += self._link_site(source, target, min(weight_in, weight_out), trigger)
        self._place_sites(key, sites)

    def _link_site(self, source, target, weight, trigger) -> list[HandoverSite]:
        """The handover point of work passing from ``source`` to ``target``, if their
        holders differ (none where either is held by nobody)."""
        before, after = self.holders.get(source), self.holders.get(target)
        if before is None or after is None or before == after:
            return []
        cue = self._strongest_cue(self.tasks[source].involved, self.tasks[target].involved)
        return [
            HandoverSite(
                "link",
                source,
                target,
                before,
                after,
                weight,
                cue,
                self.tasks[target].initiator,
                trigger=trigger,
            )
        ]

    def _strongest_cue(self, *involved: Involvement) -> str | None:
        """The best cue either side of a link gives: the sender's alarm or the receiver's
        display both tell the person the work is now theirs."""
        weakness = self.assumptions["cue_weakness"]
        cues = [
            item.assignment.feedback
            for item in involved
            if item.assignment is not None and item.assignment.feedback
        ]
        return min(cues, key=lambda cue: weakness[cue], default=None)

    def _involves_a_person(self, site: HandoverSite) -> bool:
        """A handover is a change of holder with a human on at least one side; between
        two automations it is an automation interface."""
        return site.from_agent in self.human_place or site.to_agent in self.human_place

    def _factors(self, site: HandoverSite, order: int) -> SiteFactors:
        """Everything of a handover's assessment but the receiver's load."""
        study = self.study
        receiver = study.agents_by_id.get(site.to_agent or "")
        is_human = receiver is not None and receiver.is_human
        target = self.tasks[site.to_task]
        if site.source == "mode":
            involved = self.involved(site.to_task, site.modes[1])
        elif site.source == "failure":
            # The fallback person does the whole task.
            involved = next(
                item
                for _share, item in self.mixes[site.to_task]
                if item.failed and item.human == site.to_agent
            )
        elif site.source == "escalation":
            # The person the call reached does the task.
            involved = self.keepers[site.to_task][site.to_agent or ""]
        else:
            involved = target.involved
        # The budget of a typical occurrence: typical work, latency and ready time
        # (methods document, #time-budget-ratio).
        if receiver is not None and is_human:
            work = involved.typical_time_of(receiver.id) or involved.typical_duration_s
        else:
            work = involved.typical_duration_s
        latency = response_latency(
            study,
            site.to_agent,
            target.asleep_share.get(site.to_agent or "", 0.0),
            self.assumptions["default_response_s"],
        ).typical
        window = study.task(site.to_task).window_s
        ready = 0.0 if site.source == "mode" else target.ready_s
        # The calls before this one count in its time budget.
        ready += self.waits.get(site.to_task, {}).get(site.to_agent or "", 0.0)
        ratio = time_budget_ratio(
            latency,
            work,
            None if window is None else float(window),
            ready,
            float(self.assumptions["time_budget_floor_s"]),
        )
        return SiteFactors(
            site=site,
            time_ratio=ratio,
            receiver_is_human=is_human,
            awareness=target.awareness.index if target.awareness else 0.0,
            severity=study.task(site.to_task).severity or 1,
            person=self.human_place.get(site.to_agent or "", -1),
            order=order,
        )
