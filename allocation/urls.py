from django.contrib import admin
from django.urls import include, path

from allocation.views import (
    assumptions,
    compare,
    dashboards,
    graph,
    inventory,
    modes,
    plans,
    simulation,
    studies,
)

urlpatterns = [
    path("", studies.study_list, name="study-list"),
    path("studies/upload", studies.study_upload, name="study-upload"),
    path("studies/<int:pk>/", studies.study_detail, name="study-detail"),
    path("studies/<int:pk>/download", studies.study_download, name="study-download"),
    path(
        "studies/<int:pk>/plans/<str:plan>/analysis.json",
        studies.plan_analysis_download,
        name="plan-analysis-download",
    ),
    path("studies/new", inventory.study_new, name="study-new"),
    path("studies/<int:pk>/inventory", inventory.study_inventory, name="study-inventory"),
    path(
        "studies/<int:pk>/inventory/<str:kind>/<str:key>",
        inventory.item_edit,
        name="inventory-item",
    ),
    path(
        "studies/<int:pk>/inventory/<str:kind>/<str:key>/delete",
        inventory.item_delete,
        name="inventory-delete",
    ),
    path("studies/<int:pk>/plans/new", plans.plan_new, name="plan-new"),
    path("studies/<int:pk>/plans/<str:plan>/edit", plans.plan_editor, name="plan-editor"),
    path("studies/<int:pk>/plans/<str:plan>/bulk", plans.plan_bulk, name="plan-bulk"),
    path(
        "studies/<int:pk>/plans/<str:plan>/tasks/<str:task>",
        plans.plan_row_save,
        name="plan-row-save",
    ),
    path("studies/<int:pk>/plans/<str:plan>/modes", modes.plan_modes, name="plan-modes"),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/delete",
        modes.mode_map_delete,
        name="mode-map-delete",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/states/<str:mode>",
        modes.mode_edit,
        name="mode-edit",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/states/<str:mode>/delete",
        modes.mode_delete,
        name="mode-delete",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/states/<str:mode>/initial",
        modes.mode_initial,
        name="mode-initial",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/states/<str:mode>/overrides",
        modes.mode_override_pick,
        name="mode-override-pick",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/states/<str:mode>/overrides/<str:task>",
        modes.mode_override,
        name="mode-override",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/transitions/<str:transition>",
        modes.transition_edit,
        name="transition-edit",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/transitions/<str:transition>/delete",
        modes.transition_delete,
        name="transition-delete",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/modes/findings/<int:finding>",
        modes.mode_finding,
        name="mode-finding",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/simulation",
        simulation.plan_simulation,
        name="plan-simulation",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/simulation/run",
        simulation.plan_simulation_run,
        name="plan-simulation-run",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/simulation/status",
        simulation.plan_simulation_status,
        name="plan-simulation-status",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/simulation/cancel",
        simulation.plan_simulation_cancel,
        name="plan-simulation-cancel",
    ),
    path(
        "studies/<int:pk>/simulation",
        simulation.study_simulation_compare,
        name="study-simulation-compare",
    ),
    path("studies/<int:pk>/compare", compare.study_compare, name="study-compare"),
    path(
        "studies/<int:pk>/compare/weights",
        compare.study_compare_weights,
        name="study-compare-weights",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/dashboard",
        dashboards.plan_dashboard,
        name="plan-dashboard",
    ),
    path("studies/<int:pk>/assumptions", assumptions.study_assumptions, name="study-assumptions"),
    path(
        "studies/<int:pk>/assumptions/set",
        assumptions.assumption_set,
        name="study-assumption-set",
    ),
    path(
        "studies/<int:pk>/assumptions/reset",
        assumptions.assumption_reset,
        name="study-assumption-reset",
    ),
    path(
        "studies/<int:pk>/assumptions/policy",
        assumptions.risk_policy_set,
        name="study-risk-policy-set",
    ),
    path(
        "studies/<int:pk>/assumptions/policy/reset",
        assumptions.risk_policy_reset,
        name="study-risk-policy-reset",
    ),
    path("studies/<int:pk>/graph", graph.study_graph, name="study-graph"),
    path("studies/<int:pk>/graph/tasks/<str:task>", graph.graph_task, name="graph-task"),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
]
