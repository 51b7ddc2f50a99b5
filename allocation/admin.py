"""The admin: every row type, with its study's parts inline where that helps.

The admin writes rows directly, past the services' checks; so every change made here is
recorded in the audit trail (as the study file's parts before and after, with the
study's members) and moves the study's version (``Study.updated_at``), so that pages
and caches read the study afresh. The audit trail itself is shown read-only.
"""

from __future__ import annotations

from typing import Any

from django.contrib import admin
from django.db import transaction
from django.db.models import Model, QuerySet
from django.http import HttpRequest
from django.utils import timezone

from allocation import audit, selectors
from allocation import models as m

#: Per row type, how to reach its study's number from a row.
_STUDY_PATHS: dict[type[Model], str] = {
    m.Study: "pk",
    m.Membership: "study_id",
    m.Agent: "study_id",
    m.Event: "study_id",
    m.Task: "study_id",
    m.Link: "study_id",
    m.Plan: "study_id",
    m.Assignment: "plan.study_id",
    m.ModeState: "plan.study_id",
    m.ModeTransition: "plan.study_id",
    m.ModeOverride: "state.plan.study_id",
}

State = tuple[dict[str, Any] | None, dict[str, str]]


def _study_pk(obj: Model) -> int | None:
    value: Any = obj
    for name in _STUDY_PATHS[type(obj)].split("."):
        value = getattr(value, name, None)
        if value is None:
            return None
    return value


def _study_pks(obj: Model) -> set[int]:
    """The studies a row belongs to: now, and as stored (a change may move it)."""
    pks = {_study_pk(obj)}
    if obj.pk is not None:
        stored = type(obj).objects.filter(pk=obj.pk).first()
        if stored is not None:
            pks.add(_study_pk(stored))
    return {pk for pk in pks if pk is not None}


def _state(pk: int) -> State:
    """A study's document and its members (user name: role); ``None`` once deleted."""
    study = m.Study.objects.filter(pk=pk).first()
    if study is None:
        return None, {}
    members = dict(
        study.memberships.order_by("user__username").values_list("user__username", "role")
    )
    return selectors.study_document(study), members


def _target(obj: Model) -> str:
    """A row in the study's words."""
    if isinstance(obj, m.Study):
        return f"study {obj.key}"
    if isinstance(obj, m.Membership):
        return f"member {obj.user.get_username()}"
    if isinstance(obj, m.Link):
        return f"link {obj.source.key} {obj.kind} {obj.target.key}"
    if isinstance(obj, m.Assignment):
        return f"plan {obj.plan.key} / task {obj.task.key}"
    if isinstance(obj, m.ModeState):
        return f"plan {obj.plan.key} / mode {obj.key}"
    if isinstance(obj, m.ModeOverride):
        return f"plan {obj.state.plan.key} / mode {obj.state.key} / task {obj.task.key}"
    if isinstance(obj, m.ModeTransition):
        source = obj.source.key if obj.source is not None else "*"
        return f"plan {obj.plan.key} / transition {source} → {obj.target.key}"
    return f"{obj._meta.verbose_name} {obj.key}"


class _Watch:
    """The studies an admin change touches, as they were before it."""

    def __init__(self, pks: set[int]) -> None:
        self.before: dict[int, State] = {pk: _state(pk) for pk in pks}

    def add(self, pks: set[int]) -> None:
        for pk in pks - set(self.before):
            self.before[pk] = _state(pk)

    def finish(self, pks: set[int], action: str, target: str) -> None:
        """Move each touched study to a new version and record what changed in it."""
        for pk in sorted(set(self.before) | pks):
            m.Study.objects.filter(pk=pk).update(updated_at=timezone.now())
            before_doc, before_members = self.before.get(pk, (None, {}))
            after_doc, after_members = _state(pk)
            old, new = audit.document_change(before_doc, after_doc)
            if before_members != after_members:
                # Members are not part of the study file, but who may change it matters.
                if before_doc is not None:
                    old = {**(old or {}), "members": before_members}
                if after_doc is not None:
                    new = {**(new or {}), "members": after_members}
            if old is None and new is None:
                continue
            study = m.Study.objects.filter(pk=pk).first()
            key = (after_doc or before_doc or {}).get("study", {}).get("id", "")
            audit.record(
                study=study,
                study_key=key,
                action=action,
                target=target[:300],
                before=old,
                after=new,
            )


class AuditedAdmin(admin.ModelAdmin):
    """Records each change in the audit trail and moves the study's version."""

    def _watch(self, request: HttpRequest) -> _Watch | None:
        return getattr(request, "_baton_audit_watch", None)

    def save_model(self, request: HttpRequest, obj: Model, form, change: bool) -> None:
        watch = self._watch(request)
        if watch is None:
            request._baton_audit_watch = _Watch(_study_pks(obj))
        else:
            # The change list saves several rows in one request.
            watch.add(_study_pks(obj))
        super().save_model(request, obj, form, change)

    def save_related(self, request: HttpRequest, form, formsets, change: bool) -> None:
        super().save_related(request, form, formsets, change)
        watch = self._watch(request)
        obj = form.instance
        if watch is not None:
            request._baton_audit_watch = None
            watch.finish(_study_pks(obj), f"{obj._meta.model_name}.save", _target(obj))

    def delete_model(self, request: HttpRequest, obj: Model) -> None:
        target, pks = _target(obj), _study_pks(obj)
        watch = _Watch(pks)
        super().delete_model(request, obj)
        watch.finish(pks, f"{obj._meta.model_name}.delete", target)

    def delete_queryset(self, request: HttpRequest, queryset: QuerySet) -> None:
        rows = list(queryset)
        with transaction.atomic():
            by_study: dict[int, list[Model]] = {}
            for row in rows:
                for pk in _study_pks(row):
                    by_study.setdefault(pk, []).append(row)
            watches = {pk: _Watch({pk}) for pk in by_study}
            words = {
                pk: ", ".join(_target(row) for row in deleted) for pk, deleted in by_study.items()
            }
            super().delete_queryset(request, queryset)
            name = self.model._meta.model_name
            for pk, watch in watches.items():
                watch.finish({pk}, f"{name}.delete", words[pk])


class MembershipInline(admin.TabularInline):
    model = m.Membership
    extra = 0


class AgentInline(admin.TabularInline):
    model = m.Agent
    extra = 0
    fields = ["key", "name", "kind", "position"]


class PlanInline(admin.TabularInline):
    model = m.Plan
    extra = 0
    fields = ["key", "name", "initial_mode", "position"]


@admin.register(m.Study)
class StudyAdmin(AuditedAdmin):
    list_display = ["title", "key", "scale", "updated_at"]
    search_fields = ["title", "key"]
    inlines = [MembershipInline, AgentInline, PlanInline]


@admin.register(m.Task)
class TaskAdmin(AuditedAdmin):
    list_display = ["key", "title", "study", "parent", "severity"]
    list_filter = ["study", "severity"]
    search_fields = ["key", "title"]
    raw_id_fields = ["parent"]


@admin.register(m.Assignment)
class AssignmentAdmin(AuditedAdmin):
    list_display = ["plan", "task", "human", "automation", "levels", "status"]
    list_filter = ["plan__study", "status"]
    raw_id_fields = ["task", "human", "automation", "accountable"]


@admin.register(m.ModeOverride)
class ModeOverrideAdmin(AuditedAdmin):
    list_display = ["state", "task", "human", "automation", "levels"]
    raw_id_fields = ["task", "human", "automation", "accountable"]


for model in (m.Membership, m.Agent, m.Event, m.Link, m.Plan, m.ModeState, m.ModeTransition):
    admin.site.register(model, AuditedAdmin)


@admin.register(m.AuditEntry)
class AuditEntryAdmin(admin.ModelAdmin):
    """The trail, to read: nobody adds, changes or deletes an entry, not even here."""

    list_display = ["at", "study_key", "username", "source", "action", "target"]
    list_filter = ["source", "action"]
    search_fields = ["study_key", "username", "target"]
    date_hierarchy = "at"

    def has_add_permission(self, request: HttpRequest) -> bool:
        return False

    def has_change_permission(self, request: HttpRequest, obj=None) -> bool:
        return False

    def has_delete_permission(self, request: HttpRequest, obj=None) -> bool:
        return False
