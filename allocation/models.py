"""Persistence only: a study's agents, tasks, links, events, plans and mode maps as rows.

Each row keeps one thing a screen can edit on its own. Small structured values (ranges,
VACP demands, stage splits, occurrence rules, levels) are JSON columns holding exactly
the study file's form of them; the core reads and checks them (see ``selectors``).
Optional text that a study leaves out is stored as the empty string.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from django.conf import settings
from django.db import models
from django.db.models import F, Q
from django.utils import timezone

from allocation.core import vocabulary
from allocation.core.canonical import BATON_1
from allocation.core.canonical import FORMS as CANONICAL_FORMS
from allocation.core.registry import (
    ASSIGNMENT_STATUS_WORDS,
    CAUSE_WORDS,
    CUE_WORDS,
    DECISION_STATUS_WORDS,
    INITIATOR_WORDS,
    Term,
)

if TYPE_CHECKING:
    from django.contrib.auth.models import User


def _words(words: dict[str, Term]) -> list[tuple[str, str]]:
    """The choices of a fixed list in the registry's words."""
    return [(key, term.label) for key, term in words.items()]


def _choices(values: tuple[str, ...] | dict) -> list[tuple[str, str]]:
    return [(value, value.replace("_", " ")) for value in values]


def text_limit(model: type[models.Model], name: str) -> int:
    """The most characters the text column ``name`` of ``model`` holds (for messages)."""
    field = model._meta.get_field(name)
    if not isinstance(field, models.CharField) or field.max_length is None:
        raise TypeError(f"{model.__name__}.{name} is not text with a length limit")
    return field.max_length


class Role(models.TextChoices):
    OWNER = "owner", "Owner"
    EDITOR = "editor", "Editor"
    REVIEWER = "reviewer", "Reviewer"
    VIEWER = "viewer", "Viewer"

    @classmethod
    def rank(cls, role: str) -> int:
        """Higher ranks may do everything lower ranks may."""
        order: list[str] = [cls.VIEWER, cls.REVIEWER, cls.EDITOR, cls.OWNER]
        return order.index(role)


class Study(models.Model):
    key = models.CharField("id", max_length=64)
    title = models.CharField(max_length=200)
    description = models.TextField(blank=True)
    scale = models.CharField(max_length=8, choices=_choices(tuple(vocabulary.SCALES)))
    bin_s = models.FloatField(null=True, blank=True)
    assumptions = models.JSONField(null=True, blank=True)
    risk_policy = models.JSONField(null=True, blank=True)
    members: models.ManyToManyField[User, Membership] = models.ManyToManyField(
        settings.AUTH_USER_MODEL, through="Membership", related_name="studies"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        verbose_name_plural = "studies"
        ordering = ["title", "pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(scale__in=tuple(vocabulary.SCALES)), name="study_scale_known"
            ),
            models.CheckConstraint(
                condition=Q(bin_s__isnull=True) | Q(bin_s__gt=0), name="study_bin_positive"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.title} ({self.key})"


class Membership(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="memberships")
    user = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="memberships"
    )
    role = models.CharField(max_length=16, choices=Role.choices, default=Role.VIEWER)

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["study", "user"], name="membership_unique"),
            models.CheckConstraint(condition=Q(role__in=Role.values), name="membership_role"),
        ]

    def __str__(self) -> str:
        return f"{self.user} is {self.role} of {self.study}"


class Agent(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="agents")
    key = models.CharField("id", max_length=64)
    name = models.CharField(max_length=200)
    kind = models.CharField(max_length=16, choices=_choices(vocabulary.AGENT_KINDS))
    capabilities = models.JSONField(null=True, blank=True)
    asleep_from = models.CharField(max_length=8, blank=True)
    asleep_to = models.CharField(max_length=8, blank=True)
    # Duty hours of a person ("" when always available).
    on_duty_from = models.CharField(max_length=8, blank=True)
    on_duty_to = models.CharField(max_length=8, blank=True)
    response_s = models.JSONField(null=True, blank=True)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["study", "key"], name="agent_key_unique"),
            models.CheckConstraint(
                condition=Q(kind__in=vocabulary.AGENT_KINDS), name="agent_kind_known"
            ),
            models.CheckConstraint(
                condition=Q(asleep_from="", asleep_to="")
                | (Q(kind="human") & ~Q(asleep_from="") & ~Q(asleep_to="")),
                name="agent_asleep_human_both",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.name} ({self.kind})"


class Event(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="events")
    key = models.CharField("id", max_length=64)
    name = models.CharField(max_length=200)
    times = models.JSONField(null=True, blank=True)
    jitter_s = models.FloatField(null=True, blank=True)
    per_day = models.FloatField(null=True, blank=True)
    when = models.CharField(max_length=8, blank=True, choices=_choices(vocabulary.EVENT_WHEN))
    # Whose day a rate follows: a human's id ("" for the only sleeper, or none).
    of = models.CharField(max_length=64, blank=True)
    every_days = models.FloatField(null=True, blank=True)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["study", "key"], name="event_key_unique"),
            models.CheckConstraint(
                condition=(
                    Q(times__isnull=False, per_day__isnull=True, every_days__isnull=True)
                    | Q(times__isnull=True, per_day__isnull=False, every_days__isnull=True)
                    | Q(times__isnull=True, per_day__isnull=True, every_days__isnull=False)
                ),
                name="event_one_way",
            ),
            models.CheckConstraint(
                condition=Q(per_day__isnull=True) | Q(per_day__gt=0), name="event_rate_positive"
            ),
        ]

    def __str__(self) -> str:
        return self.name


class Task(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="tasks")
    key = models.CharField("id", max_length=64)
    title = models.CharField(max_length=300)
    parent = models.ForeignKey(
        "self", on_delete=models.CASCADE, null=True, blank=True, related_name="children"
    )
    occurs = models.JSONField(null=True, blank=True)
    duration_s = models.JSONField(null=True, blank=True)
    window_s = models.FloatField(null=True, blank=True)
    severity = models.PositiveSmallIntegerField(
        null=True,
        blank=True,
        choices=[(n, name) for n, (name, _) in vocabulary.SEVERITIES.items()],
    )
    demands = models.JSONField(null=True, blank=True)
    split = models.JSONField(null=True, blank=True)
    needs = models.JSONField(null=True, blank=True)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["study", "key"], name="task_key_unique"),
            models.CheckConstraint(
                condition=Q(severity__isnull=True) | Q(severity__gte=1, severity__lte=5),
                name="task_severity_1_5",
            ),
            models.CheckConstraint(
                condition=Q(window_s__isnull=True) | Q(window_s__gt=0),
                name="task_window_positive",
            ),
            models.CheckConstraint(condition=~Q(parent=F("pk")), name="task_not_own_parent"),
        ]

    def __str__(self) -> str:
        return f"{self.key} {self.title}"


class Link(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="links")
    source = models.ForeignKey(Task, on_delete=models.CASCADE, related_name="outgoing")
    target = models.ForeignKey(Task, on_delete=models.CASCADE, related_name="incoming")
    kind = models.CharField(max_length=16, choices=_choices(vocabulary.LINK_KINDS))
    lag_s = models.JSONField(null=True, blank=True)
    probability = models.FloatField(null=True, blank=True)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["source", "target", "kind"], name="link_unique"),
            models.CheckConstraint(condition=~Q(source=F("target")), name="link_not_to_self"),
            models.CheckConstraint(
                condition=Q(kind__in=vocabulary.LINK_KINDS), name="link_kind_known"
            ),
            models.CheckConstraint(
                condition=Q(probability__isnull=True) | Q(probability__gt=0, probability__lte=1),
                name="link_probability_range",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.source.key} {self.kind} {self.target.key}"


class Plan(models.Model):
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="plans")
    key = models.CharField("id", max_length=64)
    name = models.CharField(max_length=200)
    description = models.TextField(blank=True)
    # The mode map's initial mode; empty when the plan has no mode map.
    initial_mode = models.CharField(max_length=64, blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["study", "key"], name="plan_key_unique"),
        ]

    def __str__(self) -> str:
        return self.name


class AssignmentFields(models.Model):
    """Who does a task and how: shared by plan assignments and mode overrides."""

    human = models.ForeignKey(
        Agent, on_delete=models.RESTRICT, null=True, blank=True, related_name="+"
    )
    automation = models.ForeignKey(
        Agent, on_delete=models.RESTRICT, null=True, blank=True, related_name="+"
    )
    levels = models.JSONField(null=True, blank=True)
    duration_s = models.JSONField(null=True, blank=True)
    accountable = models.ForeignKey(
        Agent, on_delete=models.RESTRICT, null=True, blank=True, related_name="+"
    )
    feedback = models.CharField(max_length=16, blank=True, choices=_words(CUE_WORDS))
    initiator = models.CharField(
        max_length=16,
        blank=True,
        choices=_words(INITIATOR_WORDS),
    )
    status = models.CharField(
        max_length=16,
        blank=True,
        choices=[
            (key, ASSIGNMENT_STATUS_WORDS[key].label) for key in vocabulary.ASSIGNMENT_STATUSES
        ],
    )
    rationale = models.TextField(blank=True)
    # False when the task is not done at all under the plan; then no agent is named.
    applies = models.BooleanField(default=True)
    # How the accountable person keeps watch, as the study file writes it; null: the
    # default style.
    monitoring = models.JSONField(null=True, blank=True)
    # On a task not done under the plan: its chain goes on without it.
    pass_through = models.BooleanField(default=False)
    # How often the automation fails, as the study file writes it but for the fallback
    # person (the field below, so that an agent's new id is followed); null: never.
    reliability = models.JSONField(null=True, blank=True)
    fallback = models.ForeignKey(
        Agent, on_delete=models.RESTRICT, null=True, blank=True, related_name="+"
    )
    # The people asked after ``human`` when they do not answer in time (agent ids, in
    # order; a service that renames or deletes an agent rewrites them), and how long each
    # has: the study file's ``human`` as a list and its ``escalate_after_s``.
    escalation = models.JSONField(null=True, blank=True)
    escalate_after_s = models.JSONField(null=True, blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        abstract = True
        ordering = ["position", "pk"]


def _someone_assigned(name: str) -> models.CheckConstraint:
    return models.CheckConstraint(
        condition=Q(human__isnull=False) | Q(automation__isnull=False) | Q(applies=False),
        name=name,
    )


class Assignment(AssignmentFields):
    plan = models.ForeignKey(Plan, on_delete=models.CASCADE, related_name="assignments")
    task = models.ForeignKey(Task, on_delete=models.CASCADE, related_name="assignments")

    class Meta(AssignmentFields.Meta):
        constraints = [
            models.UniqueConstraint(fields=["plan", "task"], name="assignment_unique"),
            _someone_assigned("assignment_has_agent"),
        ]

    def __str__(self) -> str:
        return f"{self.plan}: {self.task}"


class ModeState(models.Model):
    plan = models.ForeignKey(Plan, on_delete=models.CASCADE, related_name="mode_states")
    key = models.CharField("id", max_length=64)
    name = models.CharField(max_length=200)
    indication = models.TextField(blank=True)
    # Whether the study file gave this mode an "overrides" object (even an empty one).
    lists_overrides = models.BooleanField(default=False)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["plan", "key"], name="mode_key_unique"),
        ]

    def __str__(self) -> str:
        return self.name


class ModeOverride(AssignmentFields):
    state = models.ForeignKey(ModeState, on_delete=models.CASCADE, related_name="overrides")
    task = models.ForeignKey(Task, on_delete=models.CASCADE, related_name="mode_overrides")

    class Meta(AssignmentFields.Meta):
        constraints = [
            models.UniqueConstraint(fields=["state", "task"], name="override_unique"),
            _someone_assigned("override_has_agent"),
        ]


class ModeTransition(models.Model):
    plan = models.ForeignKey(Plan, on_delete=models.CASCADE, related_name="mode_transitions")
    # No source: the transition is from every mode (the study file's "from": "*").
    source = models.ForeignKey(
        ModeState, on_delete=models.CASCADE, related_name="+", null=True, blank=True
    )
    target = models.ForeignKey(ModeState, on_delete=models.CASCADE, related_name="+")
    trigger = models.CharField(max_length=300)
    by = models.CharField(max_length=16, choices=_words(CAUSE_WORDS))
    cue = models.CharField(max_length=16, choices=_words(CUE_WORDS))
    per_day = models.FloatField(null=True, blank=True)
    # Or it happens with each occurrence of an event (deleting the event leaves it to be
    # made by someone), or at fixed times of day ("HH:MM", as the study file writes them).
    event = models.ForeignKey(
        Event, on_delete=models.SET_NULL, null=True, blank=True, related_name="+"
    )
    times = models.JSONField(null=True, blank=True)
    notes = models.TextField(blank=True)
    position = models.PositiveIntegerField(default=0)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["position", "pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(per_day__isnull=True) | Q(per_day__gt=0),
                name="transition_rate_positive",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.source or 'any mode'} -> {self.target}: {self.trigger}"


class SimulationStatus(models.TextChoices):
    QUEUED = "queued", "Queued"
    RUNNING = "running", "Running"
    DONE = "done", "Done"
    FAILED = "failed", "Failed"
    CANCELLED = "cancelled", "Cancelled"

    @classmethod
    def active(cls) -> tuple[str, ...]:
        """Statuses of a run that workers may still add to."""
        return (cls.QUEUED, cls.RUNNING)

    @classmethod
    def reusable(cls) -> tuple[str, ...]:
        """Statuses of a run that a new request for the same figures joins instead."""
        return (cls.QUEUED, cls.RUNNING, cls.DONE)


#: The largest run the database accepts; requests are held to a smaller limit
#: (``services.SIMULATION_MAX_DAYS``), which may grow without a migration.
SIMULATION_DAYS_LIMIT = 100_000


class SimulationRun(models.Model):
    """N simulated days of one plan, at one version of its study, with one seed.

    The days are simulated in chunks of ``CHUNK_DAYS`` by background tasks, one task per
    chunk (``allocation.tasks``); the task that stores the last chunk combines them into
    ``result``. ``study_version`` is the study's ``updated_at`` the run was made for: a
    run is only current while the study still has that version.
    """

    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="simulation_runs")
    plan_key = models.CharField("plan id", max_length=64)
    days = models.PositiveIntegerField()
    seed = models.PositiveBigIntegerField()
    study_version = models.DateTimeField()
    status = models.CharField(
        max_length=16, choices=SimulationStatus.choices, default=SimulationStatus.QUEUED
    )
    chunks_total = models.PositiveIntegerField()
    chunks_done = models.PositiveIntegerField(default=0)
    # {"simulation": ..., "summary": ..., "typical": ..., "worst": ...} once done.
    result = models.JSONField(null=True, blank=True)
    error = models.TextField(blank=True)
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.SET_NULL,
        null=True,
        blank=True,
        related_name="simulation_runs",
    )
    created_at = models.DateTimeField(auto_now_add=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    cancel_requested = models.BooleanField(default=False)
    # When the run last moved: asked for, a chunk taken by a worker, or a chunk stored. A
    # running run that has not moved for ``limits.SIMULATION_STALLED_S`` has lost its
    # worker and is failed as ``stalled``, keeping its chunks for a restart.
    progress_at = models.DateTimeField(default=timezone.now)
    stalled = models.BooleanField(default=False)

    class Meta:
        ordering = ["-created_at", "-pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(days__gte=1, days__lte=SIMULATION_DAYS_LIMIT),
                name="simulation_days_range",
            ),
            models.CheckConstraint(condition=Q(seed__gte=0), name="simulation_seed_natural"),
            models.CheckConstraint(
                condition=Q(status__in=SimulationStatus.values), name="simulation_status_known"
            ),
            models.CheckConstraint(
                condition=Q(chunks_total__gte=1, chunks_done__lte=F("chunks_total")),
                name="simulation_chunks_counted",
            ),
            models.CheckConstraint(
                condition=Q(result__isnull=True) | Q(status=SimulationStatus.DONE),
                name="simulation_result_when_done",
            ),
            # At most one live or finished run per question: concurrent requests for the
            # same figures join it instead of simulating them twice.
            models.UniqueConstraint(
                fields=["study", "study_version", "plan_key", "days", "seed"],
                condition=Q(status__in=SimulationStatus.reusable()),
                name="simulation_one_per_question",
            ),
        ]
        indexes = [
            models.Index(fields=["study", "plan_key", "days", "seed"], name="simulation_lookup")
        ]

    def __str__(self) -> str:
        return f"{self.study.key}/{self.plan_key}: {self.days} days, seed {self.seed}"

    @property
    def progress(self) -> float:
        """Share of the chunks simulated, 0 to 1."""
        return self.chunks_done / self.chunks_total if self.chunks_total else 0.0

    @property
    def finished(self) -> bool:
        return self.status not in SimulationStatus.active()

    @property
    def restartable(self) -> bool:
        """Still going (its worker may have died), or failed as stalled."""
        return not self.finished or self.stalled


class SimulationChunk(models.Model):
    """One chunk of a run's days, as the core's ``SimulationChunk.to_json()`` gave it."""

    run = models.ForeignKey(SimulationRun, on_delete=models.CASCADE, related_name="chunks")
    index = models.PositiveIntegerField()
    result = models.JSONField()

    class Meta:
        ordering = ["run", "index"]
        constraints = [
            models.UniqueConstraint(fields=["run", "index"], name="simulation_chunk_unique"),
        ]

    def __str__(self) -> str:
        return f"{self.run} chunk {self.index}"


# -- reviews and submissions -------------------------------------------------------------


class Snapshot(models.Model):
    """A study frozen as it was: its canonical study file, identified by the SHA-256 of
    that text. Never changed once stored (``save`` refuses an update)."""

    study = models.ForeignKey(
        Study, on_delete=models.SET_NULL, null=True, blank=True, related_name="snapshots"
    )
    # Kept apart from the study row, so that a snapshot outlives a deleted study.
    study_key = models.CharField("study id", max_length=64)
    study_title = models.CharField(max_length=200)
    title = models.CharField(max_length=200)
    author = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.SET_NULL,
        null=True,
        blank=True,
        related_name="snapshots",
    )
    author_name = models.CharField(max_length=150)
    created_at = models.DateTimeField(auto_now_add=True)
    sha256 = models.CharField(max_length=64, db_index=True)
    # The canonical JSON text itself (not a JSON column: databases may reorder keys).
    canonical = models.TextField()
    # The canonical form of that text, in which it is verified. A row that does not say
    # (rows from before forms were recorded, and their backups) is in Baton's own first
    # form; the snapshot service writes every new one in the current form.
    canonical_form = models.CharField(
        max_length=16, choices=list(CANONICAL_FORMS.items()), default=BATON_1
    )
    # Each plan's headline figures when frozen, for differences: {plan id: {figure: value}}.
    headlines = models.JSONField(default=dict)
    baton_version = models.CharField(max_length=32)

    class Meta:
        ordering = ["-created_at", "-pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(sha256__regex=r"^[0-9a-f]{64}$"), name="snapshot_hash_hex"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.study_key}: {self.title} ({self.sha256[:12]})"

    def save(self, *args, **kwargs) -> None:
        if self.pk is not None and not kwargs.pop("allow_update", False):
            raise ValueError("a snapshot is never changed once stored")
        super().save(*args, **kwargs)


class AuditSource(models.TextChoices):
    SCREEN = "screen", "Screen"
    IMPORT = "import", "Import"
    COMMAND = "command", "Command"
    ADMIN = "admin", "Admin"
    SYSTEM = "system", "System"


class AuditEntry(models.Model):
    """One change to a study: who, when, from where, what, and the values before and
    after (study-file form). Never changed once stored."""

    study = models.ForeignKey(
        Study, on_delete=models.SET_NULL, null=True, blank=True, related_name="audit_entries"
    )
    study_key = models.CharField("study id", max_length=64)
    user = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.SET_NULL,
        null=True,
        blank=True,
        related_name="audit_entries",
    )
    username = models.CharField(max_length=150, blank=True)
    at = models.DateTimeField(auto_now_add=True, db_index=True)
    source = models.CharField(max_length=16, choices=AuditSource.choices)
    # What was done, e.g. "task.save", "assignment.set", "snapshot.create".
    action = models.CharField(max_length=64)
    # What it was done to, in words of the study, e.g. "task T2", "plan auto / task T2".
    target = models.CharField(max_length=300, blank=True)
    before = models.JSONField(null=True, blank=True)
    after = models.JSONField(null=True, blank=True)

    class Meta:
        ordering = ["-at", "-pk"]
        verbose_name_plural = "audit entries"
        constraints = [
            models.CheckConstraint(
                condition=Q(source__in=AuditSource.values), name="audit_source_known"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.at:%Y-%m-%d %H:%M} {self.username} {self.action} {self.target}"

    def save(self, *args, **kwargs) -> None:
        if self.pk is not None:
            raise ValueError("an audit entry is never changed once stored")
        super().save(*args, **kwargs)


class ReviewTarget(models.TextChoices):
    """What a comment or a decision is about."""

    STUDY = "study", "Study"
    PLAN = "plan", "Plan"
    TASK = "task", "Task"
    ASSIGNMENT = "assignment", "Assignment"
    HANDOVER = "handover", "Handover"
    FINDING = "finding", "Finding"


class Comment(models.Model):
    """A remark in a review thread about one thing of a study (replies point to the
    comment they answer)."""

    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="comments")
    plan_key = models.CharField("plan id", max_length=64, blank=True)
    target_kind = models.CharField(max_length=16, choices=ReviewTarget.choices)
    # The thing's key in the study's words: a task id, "T1>T2" for a handover, a finding's
    # kind and tasks ("error_state:T2") …
    target_key = models.CharField(max_length=300, blank=True)
    parent = models.ForeignKey(
        "self", on_delete=models.CASCADE, null=True, blank=True, related_name="replies"
    )
    author = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.SET_NULL, null=True, related_name="+"
    )
    author_name = models.CharField(max_length=150)
    body = models.TextField()
    created_at = models.DateTimeField(auto_now_add=True)
    resolved = models.BooleanField(default=False)

    class Meta:
        ordering = ["created_at", "pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(target_kind__in=ReviewTarget.values), name="comment_target_known"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.author_name} on {self.target_kind} {self.target_key}"


class DecisionStatus(models.TextChoices):
    """A decision's status, in the registry's words."""

    OPEN = "open", DECISION_STATUS_WORDS["open"].label
    AGREED = "agreed", DECISION_STATUS_WORDS["agreed"].label
    REJECTED = "rejected", DECISION_STATUS_WORDS["rejected"].label
    DEFERRED = "deferred", DECISION_STATUS_WORDS["deferred"].label


class Decision(models.Model):
    """An entry of the decision log: what was decided about one thing, why, by whom."""

    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="decisions")
    plan_key = models.CharField("plan id", max_length=64, blank=True)
    target_kind = models.CharField(max_length=16, choices=ReviewTarget.choices)
    target_key = models.CharField(max_length=300, blank=True)
    decision = models.TextField()
    rationale = models.TextField(blank=True)
    status = models.CharField(
        max_length=16, choices=DecisionStatus.choices, default=DecisionStatus.OPEN
    )
    decided_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.SET_NULL, null=True, related_name="+"
    )
    decided_by_name = models.CharField(max_length=150)
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)
    # Optimistic versioning: every service write adds one; a save names the
    # version it started from and is refused when the row has moved on since.
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["-created_at", "-pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(target_kind__in=ReviewTarget.values), name="decision_target_known"
            ),
            models.CheckConstraint(
                condition=Q(status__in=DecisionStatus.values), name="decision_status_known"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.get_status_display()}: {self.decision[:60]}"


class WorkloadRating(models.Model):
    """NASA-TLX ratings of one task under one plan by one participant of a session.

    ``ratings`` maps the six subscales to 0-100; ``weights`` (weighted TLX only) maps them
    to how often each was chosen in the 15 pairwise comparisons (summing to 15).
    """

    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="workload_ratings")
    plan_key = models.CharField("plan id", max_length=64)
    task_key = models.CharField("task id", max_length=64)
    session = models.CharField(max_length=200)
    # A participant code, never a name.
    participant = models.CharField(max_length=64)
    ratings = models.JSONField()
    weights = models.JSONField(null=True, blank=True)
    score = models.FloatField()
    notes = models.TextField(blank=True)
    recorded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.SET_NULL, null=True, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["plan_key", "task_key", "created_at", "pk"]
        constraints = [
            models.CheckConstraint(
                condition=Q(score__gte=0, score__lte=100), name="workload_score_range"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.plan_key}/{self.task_key} {self.participant}: {self.score:.1f}"


# -- pending work ------------------------------------------------------------------------


class PendingImport(models.Model):
    """A spreadsheet one user uploaded for a plan and has not applied or discarded yet.

    The file is kept as uploaded (at most ``SPREADSHEET_MAX_BYTES``; smaller than the
    study it would propose, and read again against the study as it is when applied), for
    that user alone. Transient: deleted on apply, on discard and once ``expires_at`` has
    passed; left out of backups. One waits per user and study (an upload for another plan
    of the study replaces it).
    """

    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="+")
    study = models.ForeignKey(Study, on_delete=models.CASCADE, related_name="+")
    plan_key = models.CharField("plan id", max_length=64)
    name = models.CharField(max_length=200)
    data = models.BinaryField()
    sha256 = models.CharField(max_length=64)
    size = models.PositiveIntegerField()
    created_at = models.DateTimeField()
    expires_at = models.DateTimeField(db_index=True)

    class Meta:
        ordering = ["created_at", "pk"]
        constraints = [
            models.UniqueConstraint(fields=["user", "study"], name="pending_import_one_per_study"),
            models.CheckConstraint(
                condition=Q(sha256__regex=r"^[0-9a-f]{64}$"), name="pending_import_hash_hex"
            ),
            models.CheckConstraint(condition=Q(size__gte=1), name="pending_import_not_empty"),
            models.CheckConstraint(
                condition=Q(expires_at__gt=F("created_at")), name="pending_import_expires_later"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.name} for {self.study_id}/{self.plan_key} ({self.size:,} bytes)"
