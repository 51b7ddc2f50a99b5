"""Reads: database rows to study documents and core objects, and what a user may see.

A study's rows are turned into the study file's JSON form and read by the core, so the
database, the file format and the analyses share one reading and one set of checks.
"""

from __future__ import annotations

import logging
import threading
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, TypedDict

from django.contrib.auth.models import AnonymousUser, User
from django.core.exceptions import PermissionDenied
from django.db.models import F, Prefetch, QuerySet
from django.http import Http404

from allocation import models as m
from allocation.core import LoadResult, load_study
from allocation.core.analysis import PlanAnalysis, PlanEvaluation, StudyGraph, prepare
from allocation.core.model import ANY_MODE, Study
from allocation.core.reading import FORMAT_NAME, FORMAT_VERSION
from allocation.core.simulation import SimPlan, build_sim_plan


class MemberRole(TypedDict):
    """What :func:`studies_for_user` adds to each study: the user's role in it."""

    role: str


if TYPE_CHECKING:
    from django_stubs_ext import WithAnnotations

    #: A study row read for a user, with ``role`` annotated.
    StudyWithRole = WithAnnotations[m.Study, MemberRole]


def _number(value: float | None) -> int | float | None:
    """A stored float as the file wrote it: whole numbers without a decimal part."""
    if value is None:
        return None
    return int(value) if float(value).is_integer() else value


def _compact(pairs: dict[str, Any]) -> dict[str, Any]:
    return {key: value for key, value in pairs.items() if value is not None and value != ""}


def studies_for_user(*, user: User | AnonymousUser) -> QuerySet[StudyWithRole]:
    """The studies ``user`` is a member of, with their role annotated as ``role``."""
    studies = (
        m.Study.objects.filter(memberships__user=user)
        if user.is_authenticated
        else m.Study.objects.none()
    )
    return studies.annotate(role=F("memberships__role")).order_by("title", "pk")


def study_for_user(
    *, user: User | AnonymousUser, pk: int, role: str = m.Role.VIEWER
) -> StudyWithRole:
    """The study ``pk`` if ``user`` holds at least ``role`` in it.

    A non-member gets the same 404 as for a study that does not exist, so the answer
    tells nothing about other people's studies; a member with too low a role gets 403.
    """
    study = studies_for_user(user=user).filter(pk=pk).first()
    if study is None:
        raise Http404("No such study.")
    if m.Role.rank(study.role) < m.Role.rank(role):
        raise PermissionDenied(f"This needs the {role} role in the study; you are {study.role}.")
    return study


def study_rows(study: m.Study) -> m.Study:
    """The study with everything needed for its document prefetched (a fixed few queries)."""
    assignment_related = ("task", "human", "automation", "accountable", "fallback")
    return (
        m.Study.objects.filter(pk=study.pk)
        .prefetch_related(
            "agents",
            "events",
            Prefetch("tasks", queryset=m.Task.objects.select_related("parent")),
            Prefetch("links", queryset=m.Link.objects.select_related("source", "target")),
            Prefetch(
                "plans__assignments",
                queryset=m.Assignment.objects.select_related(*assignment_related),
            ),
            Prefetch(
                "plans__mode_states__overrides",
                queryset=m.ModeOverride.objects.select_related(*assignment_related),
            ),
            Prefetch(
                "plans__mode_transitions",
                queryset=m.ModeTransition.objects.select_related("source", "target", "event"),
            ),
        )
        .get()
    )


def _document_from_rows(study: m.Study) -> dict[str, Any]:
    """The study as a JSON-ready dict in the study file format (version 2)."""
    study = study_rows(study)
    header = _compact(
        {
            "id": study.key,
            "title": study.title,
            "description": study.description,
            "scale": study.scale,
            "bin_s": _number(study.bin_s),
            "assumptions": study.assumptions,
            "risk_policy": study.risk_policy,
        }
    )
    return {
        "format": FORMAT_NAME,
        "version": FORMAT_VERSION,
        "study": header,
        "agents": [_agent(agent) for agent in study.agents.all()],
        "events": [_event(event) for event in study.events.all()],
        "tasks": [_task(task) for task in study.tasks.all()],
        "links": [_link(link) for link in study.links.all()],
        "plans": [_plan(plan) for plan in study.plans.all()],
    }


@dataclass
class _Loaded:
    """One study at one version: its document, what the core made of it, its analyses
    and the evaluations they were read from (which follow a plan row's edit into the
    next version)."""

    version: Any
    document: dict[str, Any]
    result: LoadResult
    graph: StudyGraph | None = None
    analyses: dict[str, PlanAnalysis] = field(default_factory=dict)
    evaluations: dict[str, PlanEvaluation] = field(default_factory=dict)
    #: Each plan's simulation tables, built from its analysis.
    sim_plans: dict[str, SimPlan] = field(default_factory=dict)
    lock: threading.Lock = field(default_factory=threading.Lock, repr=False)


logger = logging.getLogger(__name__)

#: Recently read studies, by primary key, newest last. Every write through the services
#: moves the study's ``updated_at``, which is the version an entry is valid for, so an
#: entry is never served after its study changed. Per process; a handful of studies.
_LOADED: OrderedDict[int, _Loaded] = OrderedDict()
_LOADED_SIZE = 8
_LOADED_LOCK = threading.Lock()
#: At most this many plan-task pairs analysed among the kept studies (an evaluation with
#: its analysis takes about 14 KB a pair: two studies at the size limits, about 570 MB);
#: past it the studies read longest ago are forgotten.
_LOADED_PLAN_TASKS = 40_000


def _loaded(study: m.Study) -> _Loaded:
    # The version comes from the database, not from the row object passed in, which
    # may have been read before the latest edit.
    version = m.Study.objects.filter(pk=study.pk).values_list("updated_at", flat=True).first()
    with _LOADED_LOCK:
        entry = _LOADED.get(study.pk)
        if entry is not None and entry.version == version:
            _LOADED.move_to_end(study.pk)
            return entry
    document = _document_from_rows(study)
    entry = _Loaded(version, document, load_study(document))
    with _LOADED_LOCK:
        _LOADED[study.pk] = entry
        _LOADED.move_to_end(study.pk)
        while len(_LOADED) > _LOADED_SIZE:
            _LOADED.popitem(last=False)
    return entry


def study_cache_clear() -> None:
    """Forget every cached study (tests and the bench measure reads from the rows)."""
    with _LOADED_LOCK:
        _LOADED.clear()


def study_remember(
    study: m.Study,
    document: dict[str, Any],
    result: LoadResult,
    *,
    before: dict[str, Any] | None = None,
    row: tuple[str, str] | None = None,
) -> None:
    """Keep a document the services have just checked and written as the study's
    current version (``study.updated_at``), so that reading it back costs no rebuild.

    With ``row`` (plan, task), the edit changed that one plan row of the version whose
    document is ``before``: the plans' evaluations of that version, if this process
    holds them, follow the edit (the edited plan's by one incremental edit) instead of
    being analysed again.
    """
    entry = _Loaded(study.updated_at, document, result)
    with _LOADED_LOCK:
        previous = _LOADED.get(study.pk)
    checked = result.valid_study
    if row is not None and previous is not None and previous.document is before and checked:
        with previous.lock:
            carried, previous.evaluations = previous.evaluations, {}
        plan_id, task_id = row
        try:
            for key, evaluation in carried.items():
                if key == plan_id:
                    evaluation.reassign(task_id, checked.plan(plan_id).assignments.get(task_id))
                evaluation.restudy(checked)
        except Exception:
            # A cache: the edit stands, and the analyses are made afresh when read.
            logger.exception("the analyses of study %s did not follow its edit", study.pk)
            carried = {}
        entry.graph, entry.evaluations = previous.graph, carried
    with _LOADED_LOCK:
        _LOADED[study.pk] = entry
        _LOADED.move_to_end(study.pk)
        while len(_LOADED) > _LOADED_SIZE:
            _LOADED.popitem(last=False)


def study_document(study: m.Study) -> dict[str, Any]:
    """The study as a JSON-ready dict in the study file format (version 2).

    Shared with other readers of the same version: do not change it; copy it first.
    """
    return _loaded(study).document


def study_load(study: m.Study) -> LoadResult:
    """The study as a core object, with any problems the core finds in it."""
    return _loaded(study).result


def _analysis(entry: _Loaded, checked: Study, plan_id: str) -> PlanAnalysis:
    """Plan ``plan_id`` of the entry's checked study analysed, kept with the entry."""
    made = False
    with entry.lock:
        if plan_id not in entry.analyses:
            if entry.graph is None:
                entry.graph = prepare(checked)
            evaluation = entry.evaluations.get(plan_id)
            if evaluation is None:
                made = True
                evaluation = entry.evaluations[plan_id] = PlanEvaluation(
                    checked, plan_id, entry.graph
                )
            entry.analyses[plan_id] = evaluation.analysis()
        analysis = entry.analyses[plan_id]
    if made:
        _forget_past_budget(keep=entry)
    return analysis


def _forget_past_budget(*, keep: _Loaded) -> None:
    """Forget the studies read longest ago while the kept analyses hold more plan-task
    pairs than ``_LOADED_PLAN_TASKS`` (never ``keep``, the one just analysed)."""
    with _LOADED_LOCK:

        def pairs(entry: _Loaded) -> int:
            study = entry.result.study
            leaves = len(study.leaves) if study is not None else 0
            return leaves * max(len(entry.evaluations), len(entry.analyses))

        total = sum(pairs(entry) for entry in _LOADED.values())
        for key in list(_LOADED):
            if total <= _LOADED_PLAN_TASKS:
                break
            if _LOADED[key] is not keep:
                total -= pairs(_LOADED.pop(key))


def plan_sim_tables(study: m.Study, plan_id: str) -> SimPlan | None:
    """A plan's simulation tables, built once per study version from the analysis the
    pages show, for every chunk of its runs this process simulates; ``None`` while the
    study has errors."""
    entry = _loaded(study)  # one version for the analysis and the tables
    checked = entry.result.valid_study
    if checked is None or plan_id not in checked.plans_by_id:
        return None
    analysis = _analysis(entry, checked, plan_id)
    with entry.lock:
        if plan_id not in entry.sim_plans:
            assert entry.graph is not None  # made with the analysis
            entry.sim_plans[plan_id] = build_sim_plan(analysis.study, analysis, entry.graph)
        return entry.sim_plans[plan_id]


def plan_analysis(study: m.Study, plan_id: str) -> PlanAnalysis | None:
    """One plan analysed (kept with the study's version); ``None`` while it has errors."""
    entry = _loaded(study)
    checked = entry.result.valid_study
    if checked is None or plan_id not in checked.plans_by_id:
        return None
    return _analysis(entry, checked, plan_id)


def study_analyses(study: m.Study) -> dict[str, PlanAnalysis]:
    """Every plan of the study analysed; none while it has errors."""
    entry = _loaded(study)
    checked = entry.result.valid_study
    if checked is None:
        return {}
    return {plan.id: _analysis(entry, checked, plan.id) for plan in checked.plans}


def _agent(agent: m.Agent) -> dict[str, Any]:
    return _compact(
        {
            "id": agent.key,
            "name": agent.name,
            "kind": agent.kind,
            "capabilities": agent.capabilities,
            "asleep": [agent.asleep_from, agent.asleep_to] if agent.asleep_from else None,
            "on_duty": [agent.on_duty_from, agent.on_duty_to] if agent.on_duty_from else None,
            "response_s": agent.response_s,
            "notes": agent.notes,
        }
    )


def _event(event: m.Event) -> dict[str, Any]:
    return _compact(
        {
            "id": event.key,
            "name": event.name,
            "times": event.times,
            "jitter_s": _number(event.jitter_s),
            "per_day": _number(event.per_day),
            "when": event.when,
            "of": event.of,
            "every_days": _number(event.every_days),
            "notes": event.notes,
        }
    )


def _task(task: m.Task) -> dict[str, Any]:
    return _compact(
        {
            "id": task.key,
            "parent": task.parent.key if task.parent else None,
            "title": task.title,
            "occurs": task.occurs,
            "duration_s": task.duration_s,
            "window_s": _number(task.window_s),
            "severity": task.severity,
            "demands": task.demands,
            "split": task.split,
            "needs": task.needs,
            "notes": task.notes,
        }
    )


def _link(link: m.Link) -> dict[str, Any]:
    return _compact(
        {
            "from": link.source.key,
            "to": link.target.key,
            "kind": link.kind,
            "lag_s": link.lag_s,
            "probability": _number(link.probability),
            "notes": link.notes,
        }
    )


def _assignment(row: m.AssignmentFields) -> dict[str, Any]:
    return _compact(
        {
            "human": _people(row),
            "automation": row.automation.key if row.automation else None,
            "levels": row.levels,
            "duration_s": row.duration_s,
            "accountable": row.accountable.key if row.accountable else None,
            "feedback": row.feedback,
            "initiator": row.initiator,
            "status": row.status,
            "rationale": row.rationale,
            "applies": None if row.applies else False,
            "monitoring": row.monitoring,
            "pass_through": True if row.pass_through else None,
            "reliability": _reliability(row),
            "escalate_after_s": row.escalate_after_s,
        }
    )


def _people(row: m.AssignmentFields) -> str | list[str] | None:
    """The file's ``human``: one id, or the ids asked in turn."""
    if row.human is None:
        return None
    return [row.human.key, *row.escalation] if row.escalation else row.human.key


def _reliability(row: m.AssignmentFields) -> dict[str, Any] | None:
    """The reliability as the study file writes it, the fallback person put back."""
    if row.reliability is None:
        return None
    fallback = {"fallback": row.fallback.key} if row.fallback is not None else {}
    return {**row.reliability, **fallback}


def _plan(plan: m.Plan) -> dict[str, Any]:
    document = _compact(
        {
            "id": plan.key,
            "name": plan.name,
            "description": plan.description,
        }
    )
    document["assignments"] = {row.task.key: _assignment(row) for row in plan.assignments.all()}
    if plan.initial_mode:
        document["modes"] = {
            "initial": plan.initial_mode,
            "states": [_mode(state) for state in plan.mode_states.all()],
            "transitions": [_transition(item) for item in plan.mode_transitions.all()],
        }
    return document


def _mode(state: m.ModeState) -> dict[str, Any]:
    document = _compact(
        {
            "id": state.key,
            "name": state.name,
            "indication": state.indication,
            "notes": state.notes,
        }
    )
    if state.lists_overrides:
        document["overrides"] = {row.task.key: _assignment(row) for row in state.overrides.all()}
    return document


def _transition(item: m.ModeTransition) -> dict[str, Any]:
    return _compact(
        {
            "from": item.source.key if item.source is not None else ANY_MODE,
            "to": item.target.key,
            "trigger": item.trigger,
            "by": item.by,
            "cue": item.cue,
            "per_day": _number(item.per_day),
            "event": item.event.key if item.event is not None else None,
            "times": item.times,
            "notes": item.notes,
        }
    )


def studies_by_reference(*, reference: str) -> list[m.Study]:
    """Studies whose id is ``reference``, or the one whose number it is (for commands)."""
    matches = list(m.Study.objects.filter(key=reference).order_by("pk"))
    if not matches and reference.isdigit():
        matches = list(m.Study.objects.filter(pk=int(reference)))
    return matches
