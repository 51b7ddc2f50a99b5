from django.contrib import admin
from django.contrib.auth.views import (
    LoginView,
    LogoutView,
    PasswordChangeDoneView,
    PasswordChangeView,
)
from django.urls import path

from allocation.views import (
    assumptions,
    compare,
    dashboards,
    exports,
    graph,
    history,
    inventory,
    methods,
    modes,
    plans,
    ratings,
    reviews,
    simulation,
    snapshots,
    spreadsheets,
    studies,
)
from allocation.web.security import SignInForm

urlpatterns = [
    path("", studies.study_list, name="study-list"),
    path("methods/", methods.methods_page, name="methods"),
    path("studies/upload", studies.study_upload, name="study-upload"),
    path("studies/<int:pk>/", studies.study_detail, name="study-detail"),
    path("studies/<int:pk>/download", studies.study_download, name="study-download"),
    path(
        "studies/<int:pk>/plans/<str:plan>/analysis.json",
        studies.plan_analysis_download,
        name="plan-analysis-download",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/export/<str:fmt>",
        exports.plan_export,
        name="plan-export",
    ),
    path("studies/<int:pk>/exports", exports.study_exports, name="study-exports"),
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
        "studies/<int:pk>/plans/<str:plan>/simulation/restart",
        simulation.plan_simulation_restart,
        name="plan-simulation-restart",
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
        "studies/<int:pk>/compare/reference",
        compare.study_compare_reference,
        name="study-compare-reference",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/dashboard",
        dashboards.plan_dashboard,
        name="plan-dashboard",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/handovers/<int:number>/steps",
        dashboards.handover_steps_page,
        name="handover-steps",
    ),
    path("studies/<int:pk>/plans/<str:plan>/ratings", ratings.plan_ratings, name="plan-ratings"),
    path(
        "studies/<int:pk>/plans/<str:plan>/ratings/record",
        ratings.plan_rating_record,
        name="plan-rating-record",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/ratings/delete",
        ratings.plan_rating_delete,
        name="plan-rating-delete",
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
    path("studies/<int:pk>/plans/<str:plan>/review", reviews.plan_review, name="plan-review"),
    path(
        "studies/<int:pk>/plans/<str:plan>/review/comment",
        reviews.review_comment,
        name="review-comment",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/review/resolve",
        reviews.review_resolve,
        name="review-resolve",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/review/decide",
        reviews.review_decide,
        name="review-decide",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/review/decision",
        reviews.review_decision_status,
        name="review-decision-status",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/workshop",
        reviews.plan_workshop,
        name="plan-workshop",
    ),
    path("studies/<int:pk>/graph", graph.study_graph, name="study-graph"),
    path("studies/<int:pk>/history", history.study_history, name="study-history"),
    path("studies/<int:pk>/history.csv", history.study_history_csv, name="study-history-csv"),
    path("studies/<int:pk>/history.json", history.study_history_json, name="study-history-json"),
    path("studies/<int:pk>/graph/tasks/<str:task>", graph.graph_task, name="graph-task"),
    path("studies/<int:pk>/snapshots", snapshots.study_snapshots, name="study-snapshots"),
    path("studies/<int:pk>/snapshots/freeze", snapshots.snapshot_create, name="snapshot-create"),
    path("studies/<int:pk>/snapshots/verify", snapshots.snapshot_verify, name="snapshot-verify"),
    path(
        "studies/<int:pk>/snapshots/restore",
        snapshots.snapshot_restore,
        name="snapshot-restore",
    ),
    path(
        "studies/<int:pk>/snapshots/differences",
        snapshots.snapshot_difference,
        name="snapshot-difference",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/import",
        spreadsheets.plan_import,
        name="plan-import",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/import/upload",
        spreadsheets.plan_import_upload,
        name="plan-import-upload",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/import/apply",
        spreadsheets.plan_import_apply,
        name="plan-import-apply",
    ),
    path(
        "studies/<int:pk>/plans/<str:plan>/import/discard",
        spreadsheets.plan_import_discard,
        name="plan-import-discard",
    ),
    # The sign-in with Baton's wording (allocation/web/security.py; django-axes limits the
    # attempts), before Django's own.
    path(
        "accounts/login/",
        LoginView.as_view(authentication_form=SignInForm),
        name="login",
    ),
    # Sign-out and password change only: no mail is configured for password resets.
    path("accounts/logout/", LogoutView.as_view(), name="logout"),
    path("accounts/password_change/", PasswordChangeView.as_view(), name="password_change"),
    path(
        "accounts/password_change/done/",
        PasswordChangeDoneView.as_view(),
        name="password_change_done",
    ),
    path("admin/", admin.site.urls),
]

# A database that went away gets its own page (the 503 page); anything else the 500 page.
handler500 = "allocation.web.errors.server_error"
