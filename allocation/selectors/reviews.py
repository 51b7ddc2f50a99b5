"""Reads for the review: a plan's items to review, each with its threads and decisions.

An item is one thing a remark can be about, named in the study's words:

- ``task``: the task's id (the task itself, whatever the plan; stored without a plan);
- ``assignment``: the plan and the task's id (who does it under that plan);
- ``handover``: the plan and ``from>to`` of the handover's tasks, with the stage for a
  handover inside a shared task (``T2>T2/action``) and the modes for one made by a mode
  change (``T2>T2@schedule>hold``), so that each handover of a plan has its own key;
- ``finding``: the plan and the finding's kind, tasks, modes and agents
  (``error_state:T2/schedule,hold``), the identity the plan comparison uses;
- ``plan`` and ``study``: the plan, or the study as a whole.

The *open* items of a plan are its assignments whose status is open or proposed, its
handovers in the review or unacceptable band, its findings, and anything with an
unresolved comment or an open decision. Remarks about a thing the plan no longer has (a
finding that went away when the plan changed) are kept and shown as such.
"""

from __future__ import annotations

import re
import zlib
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from typing import Any

from allocation import models as m
from allocation.core import Study
from allocation.core.analysis import PlanAnalysis
from allocation.core.analysis.findings import Finding
from allocation.core.analysis.handovers import Handover
from allocation.core.describe import severity_text
from allocation.core.registry import (
    ASSIGNMENT_STATUS_WORDS,
    CUE_WORDS,
    FINDING_KINDS,
    FREQUENCY_BAND_WORDS,
    HANDOVER_SOURCES,
    RISK_BANDS,
    figure,
    figure_number,
    figure_text,
    finding_kind,
)
from allocation.core.scales import level_text, stage_levels
from allocation.core.vocabulary import STAGES

__all__ = [
    "OPEN_STATUSES",
    "REVIEW_BANDS",
    "ReviewItem",
    "Thread",
    "finding_key",
    "handover_key",
    "review_items",
]

#: Assignment statuses that still wait for the team.
OPEN_STATUSES = ("open", "proposed")
#: Handover bands that call for a review.
REVIEW_BANDS = ("review", "unacceptable")


def handover_key(handover: Handover) -> str:
    """The key of a handover: ``T1>T2``, ``T2>T2/action`` or ``T2>T2@schedule>hold``."""
    site = handover.site
    key = f"{site.from_task}>{site.to_task}"
    if site.source == "shared" and site.stage:
        key += f"/{site.stage}"
    if site.source == "mode" and site.modes:
        key += "@" + ">".join(site.modes)
    return key


def finding_key(finding: Finding) -> str:
    """The key of a finding: its kind, then its tasks, modes and agents where it has any
    (``capability:T1@resident``, ``error_state:T2/schedule,hold``)."""
    key = f"{finding.kind}:{','.join(finding.tasks)}"
    if finding.modes:
        key += "/" + ",".join(finding.modes)
    if finding.agents:
        key += "@" + ",".join(finding.agents)
    return key


@dataclass
class Thread:
    """A comment and every reply under it, oldest first; resolved when its first
    comment is."""

    root: m.Comment
    replies: list[m.Comment] = field(default_factory=list)

    @property
    def resolved(self) -> bool:
        return self.root.resolved


@dataclass
class ReviewItem:
    """One thing to review under a plan, what makes it open, and what was said of it."""

    kind: str
    key: str
    plan_key: str
    title: str
    present: bool = True
    reasons: list[str] = field(default_factory=list)
    facts: list[tuple[str, str]] = field(default_factory=list)
    message: str = ""
    band: str = ""
    threads: list[Thread] = field(default_factory=list)
    decisions: list[m.Decision] = field(default_factory=list)

    @property
    def anchor(self) -> str:
        """A stable HTML id: readable, with a checksum so that keys differing only in
        punctuation stay apart."""
        readable = re.sub(r"[^A-Za-z0-9_-]+", "-", f"{self.kind}-{self.key}").strip("-")
        return f"item-{readable}-{zlib.crc32(f'{self.kind}|{self.key}'.encode()):08x}"

    @property
    def kind_label(self) -> str:
        """What the item is, in words."""
        return m.ReviewTarget(self.kind).label

    @property
    def unresolved(self) -> int:
        return sum(1 for thread in self.threads if not thread.resolved)

    @property
    def open_decisions(self) -> int:
        return sum(1 for decision in self.decisions if decision.status == m.DecisionStatus.OPEN)

    @property
    def decided(self) -> m.Decision | None:
        """The latest decision that is not open, if any."""
        return next(
            (d for d in self.decisions if d.status != m.DecisionStatus.OPEN),
            None,
        )

    @property
    def is_open(self) -> bool:
        return bool(self.reasons) or self.unresolved > 0 or self.open_decisions > 0

    @property
    def open_words(self) -> list[str]:
        """Why the item is open, in words."""
        words = list(self.reasons)
        if self.unresolved:
            words.append(f"{self.unresolved} unresolved thread{'s' * (self.unresolved != 1)}")
        if self.open_decisions:
            plural = "s" * (self.open_decisions != 1)
            words.append(f"{self.open_decisions} open decision{plural}")
        return words


def _agent_name(study: Study, agent_id: str | None) -> str:
    if agent_id is None:
        return "nobody"
    agent = study.agents_by_id.get(agent_id)
    return agent.name if agent else agent_id


def _levels_words(study: Study, assignment) -> str:
    """The assignment's level of automation with its words, stage by stage where the
    stages differ."""
    if assignment is None or not assignment.is_applicable:
        return "not done under this plan"
    if not assignment.is_shared:
        if assignment.automation is not None:
            return "automation alone (no person involved)"
        if assignment.human is not None:
            return "the person alone (no automation)"
        return "nobody assigned yet"
    levels = stage_levels(assignment)
    if levels is None:
        return "shared, no level set"
    if study.scale == "ek10" or len(set(levels.values())) == 1:
        level = next(iter(levels.values()))
        return f"level {level}: {level_text(study.scale, level)}"
    return "; ".join(
        f"{stage} {levels[stage]}: {level_text(study.scale, levels[stage])}" for stage in STAGES
    )


def _assignment_item(
    study: Study,
    plan_id: str,
    task_id: str,
    analysis: PlanAnalysis | None,
    crossings: Counter[str] | None = None,
) -> ReviewItem:
    task = study.task(task_id)
    assignment = study.plans_by_id[plan_id].assignments.get(task_id)
    status = assignment.status if assignment is not None else None
    who = "nobody assigned"
    if assignment is not None:
        names = [_agent_name(study, a) for a in (assignment.human, assignment.automation) if a]
        who = " with ".join(names) or who
    facts = [("Who", who), ("Level", _levels_words(study, assignment))]
    if assignment is not None and assignment.accountable:
        facts.append(("Accountable", _agent_name(study, assignment.accountable)))
    if assignment is not None and assignment.feedback:
        facts.append(("Feedback", CUE_WORDS[assignment.feedback].label))
    words = ASSIGNMENT_STATUS_WORDS[status].label if status else None
    facts.append(("Status", words or "not set"))
    if analysis is not None and task_id in analysis.tasks:
        figures = analysis.tasks[task_id]
        for key, value in (
            ("person_s_per_day", sum(figures.person_s_per_day.values())),
            ("occurrences_per_day", figures.per_day),
            ("awareness", None if figures.awareness is None else figures.awareness.index),
        ):
            facts.append(_figure_fact(key, value))
        crossing = (crossings or _crossings(analysis))[task_id]
        facts.append(_figure_fact("handovers", crossing))
    reasons = [f"status {words.lower()}"] if words and status in OPEN_STATUSES else []
    return ReviewItem(
        kind=m.ReviewTarget.ASSIGNMENT,
        key=task_id,
        plan_key=plan_id,
        title=f"{task_id} {task.title}",
        reasons=reasons,
        facts=facts,
        message=(assignment.rationale or "") if assignment is not None else "",
    )


def _crossings(analysis: PlanAnalysis) -> Counter[str]:
    """How many handovers each task takes part in, counted once for the whole plan."""
    counts: Counter[str] = Counter()
    for handover in analysis.handovers:
        counts[handover.site.from_task] += 1
        if handover.site.to_task != handover.site.from_task:
            counts[handover.site.to_task] += 1
    return counts


def _figure_fact(key: str, value: float | None) -> tuple[str, str]:
    """A figure as a fact of an item: the registry's label and its value with its unit."""
    return figure(key).label, figure_text(key, value)


def _task_words(study: Study, task_id: str) -> str:
    task = study.tasks_by_id.get(task_id)
    return f"{task_id} ({task.title})" if task else task_id


def _handover_item(study: Study, plan_id: str, handover: Handover) -> ReviewItem:
    site = handover.site
    source = HANDOVER_SOURCES[site.source].label
    if site.stage:
        source += f" (to {site.stage})"
    if site.modes:
        source += f" ({' → '.join(site.modes)})"
    facts = [
        ("Who", f"{_agent_name(study, site.from_agent)} → {_agent_name(study, site.to_agent)}"),
        ("Where", source + (f", on {site.trigger!r}" if site.trigger else "")),
        _figure_fact("handovers_per_day", site.per_day),
        (
            figure("likelihood").label,
            f"{figure_number('likelihood', handover.likelihood)} "
            f"(band {handover.likelihood_band})",
        ),
        (
            figure("frequency_per_year").label,
            f"{figure_number('frequency_per_year', handover.frequency_per_year)} "
            f"({FREQUENCY_BAND_WORDS[handover.frequency_band].label.lower()})",
        ),
        ("Severity", severity_text(handover.severity)),
        (figure("risk").label, f"{handover.risk} ({RISK_BANDS[handover.band].label})"),
        ("Cue", CUE_WORDS[site.cue or "none"].label),
    ]
    band = RISK_BANDS[handover.band].label.lower()
    reasons = [f"{band} band"] if handover.band in REVIEW_BANDS else []
    same = site.from_task == site.to_task
    tasks = _task_words(study, site.from_task)
    if not same:
        tasks += f" → {_task_words(study, site.to_task)}"
    return ReviewItem(
        kind=m.ReviewTarget.HANDOVER,
        key=handover_key(handover),
        plan_key=plan_id,
        title=f"Handover {tasks}",
        reasons=reasons,
        facts=facts,
        band=handover.band,
    )


def _finding_item(study: Study, plan_id: str, finding: Finding) -> ReviewItem:
    facts = [
        ("Kind", finding_kind(finding.kind).label),
        ("Severity", severity_text(finding.severity)),
        ("Tasks", ", ".join(_task_words(study, t) for t in finding.tasks) or "—"),
    ]
    if finding.modes:
        facts.append(("Modes", ", ".join(finding.modes)))
    if finding.agents:
        facts.append(("Agents", ", ".join(_agent_name(study, a) for a in finding.agents)))
    return ReviewItem(
        kind=m.ReviewTarget.FINDING,
        key=finding_key(finding),
        plan_key=plan_id,
        title=f"Finding: {finding_kind(finding.kind).label} ({', '.join(finding.tasks) or '—'})",
        reasons=["raised by the analysis"],
        facts=facts,
        message=finding.message,
    )


def _gone_words(kind: str, key: str) -> str:
    """The key of a thing the plan no longer has, a finding's kind in words."""
    if kind == m.ReviewTarget.FINDING:
        found, _, rest = key.partition(":")
        if found in FINDING_KINDS:
            return f"{FINDING_KINDS[found].label} ({rest or '—'})"
    return key


def _gone_item(kind: str, plan_key: str, key: str) -> ReviewItem:
    return ReviewItem(
        kind=kind,
        key=key,
        plan_key=plan_key,
        title=f"{m.ReviewTarget(kind).label} {_gone_words(kind, key)}",
        present=False,
        facts=[("Now", "no longer in the study or the plan")],
    )


def _threads(comments: list[m.Comment]) -> list[Thread]:
    """Comments grouped into threads: each first comment with every reply under it (at
    any depth), oldest first."""
    by_pk = {comment.pk: comment for comment in comments}

    def root_of(comment: m.Comment) -> m.Comment:
        seen = set()
        while comment.parent_id in by_pk and comment.pk not in seen:
            seen.add(comment.pk)
            comment = by_pk[comment.parent_id]
        return comment

    threads: dict[int, Thread] = {}
    for comment in comments:  # oldest first (the model's ordering)
        root = root_of(comment)
        thread = threads.setdefault(root.pk, Thread(root))
        if comment is not root:
            thread.replies.append(comment)
    return list(threads.values())


def review_items(
    row: m.Study,
    study: Study,
    plan_id: str,
    analysis: PlanAnalysis | None,
    *,
    show_all: bool = False,
) -> list[ReviewItem]:
    """The plan's items to review, in order: assignments (task outline order),
    handovers (as the analysis ranks them), findings, then tasks, the plan and the study,
    then remarks about things no longer there. Only the open ones unless ``show_all``.

    Two queries: the remarks of the study that concern this plan or no plan.
    """
    plan_keys = (plan_id, "")
    comments = list(
        m.Comment.objects.filter(study=row, plan_key__in=plan_keys).order_by("created_at", "pk")
    )
    decisions = list(m.Decision.objects.filter(study=row, plan_key__in=plan_keys))
    said: dict[tuple[str, str, str], list[m.Comment]] = defaultdict(list)
    for comment in comments:
        said[(comment.target_kind, comment.plan_key, comment.target_key)].append(comment)
    decided: dict[tuple[str, str, str], list[m.Decision]] = defaultdict(list)
    for decision in decisions:  # newest first (the model's ordering)
        decided[(decision.target_kind, decision.plan_key, decision.target_key)].append(decision)

    items: list[ReviewItem] = []
    crossings = None if analysis is None else _crossings(analysis)
    for task in study.leaves:
        items.append(_assignment_item(study, plan_id, task.id, analysis, crossings))
    if analysis is not None:
        seen_keys = set()
        for handover in analysis.handovers:
            item = _handover_item(study, plan_id, handover)
            if item.key not in seen_keys:  # two links between the same tasks: one item
                seen_keys.add(item.key)
                items.append(item)
        seen_keys = set()
        for finding in analysis.findings:
            item = _finding_item(study, plan_id, finding)
            if item.key not in seen_keys:
                seen_keys.add(item.key)
                items.append(item)
    for task in study.tasks:
        items.append(
            ReviewItem(
                kind=m.ReviewTarget.TASK,
                key=task.id,
                plan_key="",
                title=f"Task {task.id} {task.title}",
                facts=[("About", "the task itself, under every plan")],
            )
        )
    plan = study.plans_by_id[plan_id]
    items.append(
        ReviewItem(
            kind=m.ReviewTarget.PLAN,
            key="",
            plan_key=plan_id,
            title=f"Plan {plan.id}: {plan.name}",
            message=plan.description or "",
        )
    )
    items.append(
        ReviewItem(
            kind=m.ReviewTarget.STUDY,
            key="",
            plan_key="",
            title=f"Study: {study.title}",
            facts=[("About", "the study as a whole")],
        )
    )
    known = {(item.kind, item.plan_key, item.key) for item in items}
    # Remarks about things that are gone (a finding the plan no longer raises, or any
    # finding and handover while the study has errors), in the order first remarked.
    gone = []
    for target in list(said) + list(decided):
        if target not in known:
            known.add(target)
            gone.append(_gone_item(target[0], target[1], target[2]))
    items.extend(gone)
    for item in items:
        target = (item.kind, item.plan_key, item.key)
        item.threads = _threads(said.get(target, []))
        item.decisions = decided.get(target, [])
    if show_all:
        # Every task is already the subject of its assignment: list the task itself only
        # when something was said of it.
        return [
            item
            for item in items
            if item.kind != m.ReviewTarget.TASK or item.threads or item.decisions
        ]
    return [item for item in items if item.is_open]


def review_summary(items: list[ReviewItem]) -> dict[str, Any]:
    """Counts for the page head: items, open threads, open and settled decisions."""
    return {
        "items": len(items),
        "unresolved": sum(item.unresolved for item in items),
        "open_decisions": sum(item.open_decisions for item in items),
        "decided": sum(1 for item in items if item.decided is not None),
    }
