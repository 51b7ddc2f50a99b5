"""The admin: every row type, with its study's parts inline where that helps."""

from django.contrib import admin

from allocation import models as m


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
class StudyAdmin(admin.ModelAdmin):
    list_display = ["title", "key", "scale", "updated_at"]
    search_fields = ["title", "key"]
    inlines = [MembershipInline, AgentInline, PlanInline]


@admin.register(m.Task)
class TaskAdmin(admin.ModelAdmin):
    list_display = ["key", "title", "study", "parent", "severity"]
    list_filter = ["study", "severity"]
    search_fields = ["key", "title"]
    raw_id_fields = ["parent"]


@admin.register(m.Assignment)
class AssignmentAdmin(admin.ModelAdmin):
    list_display = ["plan", "task", "human", "automation", "levels", "status"]
    list_filter = ["plan__study", "status"]
    raw_id_fields = ["task", "human", "automation", "accountable"]


@admin.register(m.ModeOverride)
class ModeOverrideAdmin(admin.ModelAdmin):
    list_display = ["state", "task", "human", "automation", "levels"]
    raw_id_fields = ["task", "human", "automation", "accountable"]


for model in (m.Membership, m.Agent, m.Event, m.Link, m.Plan, m.ModeState, m.ModeTransition):
    admin.site.register(model)
