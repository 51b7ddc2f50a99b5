"""Baton's pages under its own content security policy (script-src 'self', no
unsafe-eval; allocation/web/security.py) in Chromium: no page asks the browser to
evaluate a string, whatever a person opens, clicks or submits, and the plan editor's
selection boxes select without saving.

The oracle is the browser itself: Chromium reports every refused script as a
``securitypolicyviolation`` event and an ``EvalError`` on the console (W3C Content
Security Policy Level 3, the "unsafe-eval" keyword). The policy is the production one:
the middleware sets it on every response whatever DEBUG says, and pytest-django runs the
live server with DEBUG off, as in production.
"""

from __future__ import annotations

import json

import pytest
from django.urls import get_resolver

from allocation import services
from allocation.examples import example_paths
from allocation.models import Assignment, AuditEntry, Study
from allocation.web.security import CONTENT_SECURITY_POLICY
from tests.browser.sweep import DOWNLOAD_NAMES, Sweep

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}

# Addresses of each URL name opened per study by the crawl (the first found, so the
# sample is the same every run); the htmx interactions of each name are triggered once
# per study.
PER_NAME = 2

# URL names that take a study and that the sweep does not open, with the reason.
NOT_SWEPT = dict.fromkeys(DOWNLOAD_NAMES, "a file download: no page, no script")


# What the writing flows store, as the audit trail names it (allocation/services).
WRITES = {
    "assignment.bulk_set",
    "assignment.set",
    "plan.copy",
    "link.delete",
    "override.set",
    "mode.initial",
    "transition.delete",
    "mode.delete",
    "modes.delete",
    "rating.record",
    "rating.delete",
    "assumption.set",
    "assumption.reset",
    "risk_policy.set",
    "risk_policy.reset",
    "comment.post",
    "comment.reply",
    "comment.resolve",
    "decision.save",
    "decision.status",
    "snapshot.create",
    "snapshot.restore",
    "spreadsheet.import",
}


def _study_names() -> set[str]:
    """Every URL name whose address holds a study (``studies/<int:pk>/...``)."""
    names = set()
    for pattern in get_resolver().url_patterns:
        route = str(getattr(pattern, "pattern", ""))
        if getattr(pattern, "name", None) and "<int:pk>" in route and route.startswith("studies/"):
            names.add(pattern.name)
    return names


def _example(owner, name: str, key: str | None = None):
    path = next(p for p in example_paths() if p.name == name)
    data = json.loads(path.read_text())
    if key:
        data["study"]["id"] = key
    return services.study_import(data=data, owner=owner)


def _first_with_modes(study) -> str:
    return study.plans.exclude(initial_mode="").values_list("key", flat=True).first()


def test_every_page_and_interaction_runs_no_refused_script(signed_in, django_user_model, settings):
    """Breadth first from each example study over its links and its htmx interactions,
    then every writing flow on a throwaway copy; any console error, page error, refused
    script or answer of 500 or more fails."""
    page = signed_in
    owner = django_user_model.objects.get(username="walker")
    assert settings.DEBUG is False
    assert not hasattr(settings, "BATON_CONTENT_SECURITY_POLICY")  # the production policy
    assert "unsafe-eval" not in CONTENT_SECURITY_POLICY
    studies = [_example(owner, p.name) for p in example_paths()]
    # Something to look at on the simulation, snapshot and difference pages.
    queued = settings.TASKS  # the database backend: a run waits for a worker
    settings.TASKS = IMMEDIATE
    for study in studies:
        plan = _first_with_modes(study) or study.plans.first().key
        services.simulation_request(study=study, plan_key=plan, days=5, seed=1, user=owner)
        services.snapshot_create(study=study, title="Before the sweep", user=owner)
    settings.TASKS = queued
    copy = _example(owner, "home-heating.json", key="throwaway-copy")
    # The crawl stays in the examples; the copy is only for the writing flows.
    sweep = Sweep(page, page.base, {s.pk for s in studies})

    starts = []
    for study in studies:
        plan = _first_with_modes(study)
        starts += [
            f"/studies/{study.pk}/",
            f"/studies/{study.pk}/plans/{plan}/modes",
            f"/studies/{study.pk}/plans/{plan}/simulation?days=5&seed=1",
            # All the handovers: a failure's or an escalation's step-by-step page is linked
            # from its row, which may be past the top ones.
            f"/studies/{study.pk}/plans/{plan}/dashboard?handovers=all",
        ]
    sweep.crawl(starts, per_name=PER_NAME)
    read_only = len(sweep.pages), sweep.interactions
    sweep.studies.add(copy.pk)
    _write_flows(sweep, copy, settings)

    swept = set(sweep.answered)
    missing = _study_names() - swept - set(NOT_SWEPT)
    print(
        f"\nsweep: {len(sweep.pages)} pages opened and {sweep.interactions} interactions "
        f"({read_only[0]} pages and {read_only[1]} interactions reading the examples); "
        f"{len(swept)} URL names answered; {sum(sweep.answered.values())} requests"
    )
    # One line per distinct problem (a refused script repeats on every page that has it).
    distinct = list(dict.fromkeys(sweep.problems))
    assert not distinct, f"{len(distinct)} distinct problems:\n" + "\n".join(distinct[:60])
    assert not missing, f"URL names never opened by the sweep: {sorted(missing)}"
    assert {"study-list", "methods"} <= swept
    # Each writing flow went through: the audit trail has what each one stores.
    done = set(
        AuditEntry.objects.filter(study_key__in=[copy.key, "restored-copy"]).values_list(
            "action", flat=True
        )
    )
    assert done >= WRITES, f"flows that stored nothing: {sorted(WRITES - done)}"


def _write_flows(sweep: Sweep, study, settings) -> None:
    """Each writing flow once, on a copy nobody needs."""
    page = sweep.page
    base = f"/studies/{study.pk}"

    # The plan editor: ticking selects and never saves; Apply saves both; a row saves.
    sweep.open(f"{base}/plans/auto/edit")
    posts = len(sweep.posts)
    boxes = page.locator("input[name=tasks]")
    sweep.act("tick two selection boxes", lambda: (boxes.nth(0).check(), boxes.nth(1).check()))
    if len(sweep.posts) != posts:
        sweep._problem(f"ticking a selection box sent {sweep.posts[posts:]}")
    sweep.act(
        "apply to the selected rows",
        lambda: (
            page.select_option("#bulk-form select[name=status]", index=2),
            page.click("#bulk-form button[type=submit]"),
        ),
    )
    row = page.locator("tr.assignment").first
    sweep.act("change a row", lambda: row.locator("select[name=status]").select_option(index=1))
    sweep.act(
        "start a plan from a copy",
        lambda: (
            page.click("details.plan-actions summary"),
            page.fill("details.plan-actions input[name=id]", "sweep-plan"),
            page.fill("details.plan-actions input[name=name]", "Sweep plan"),
            page.click("details.plan-actions button[type=submit]"),
        ),
    )

    # The inventory: edit then cancel, edit and save, delete a link.
    sweep.open(f"{base}/inventory")
    sweep.act(
        "edit an agent, then cancel",
        lambda: (
            page.click("#section-agents a:text-is('edit')"),
            page.click("#editor-agents a:text-is('Cancel')"),
        ),
    )
    sweep.act(
        "edit an agent and save it unchanged",
        lambda: (
            page.click("#section-agents a:text-is('edit')"),
            page.click("#editor-agents button[type=submit]"),
        ),
    )
    sweep.act(
        "delete a link",
        lambda: (
            page.click("#section-links a:text-is('delete')"),
            page.click("#editor-links button[type=submit]"),
        ),
    )

    # The mode map: edit a mode, hold a task differently, then take the map apart.
    sweep.open(f"{base}/plans/auto/modes")
    sweep.act(
        "edit a mode, then cancel",
        lambda: (
            page.click("#mode-states a:text-is('Edit')"),
            page.click("#mode-form-panel a:text-is('Cancel')"),
        ),
    )
    sweep.act(
        "edit a mode and save it",
        lambda: (
            page.click("#mode-states a:text-is('Edit')"),
            page.click("#mode-form-panel button[type=submit]"),
        ),
    )
    sweep.act(
        "hold a task differently in a mode",
        lambda: (
            page.locator("form.inline-pick button").first.click(),
            page.click("#mode-form-panel button[type=submit]:text-is('Save')"),
        ),
    )
    sweep.accept_dialogs = True
    sweep.act(
        "start in another mode", lambda: page.locator("button:text-is('Start here')").first.click()
    )
    sweep.act(
        "delete a transition",
        lambda: page.locator("#mode-transitions button.danger:text-is('Delete')").first.click(),
    )
    sweep.act(
        "delete a mode",
        lambda: page.locator("#mode-states button.danger:text-is('Delete')").last.click(),
    )
    sweep.act("remove the mode map", lambda: page.click("button:text-is('Remove the mode map')"))
    sweep.accept_dialogs = False

    # Simulation: a queued run polls, is cancelled; another is restarted; one finishes.
    sweep.open(f"{base}/plans/manual/simulation?days=3&seed=7")
    sweep.act("simulate (queued)", lambda: page.click("button:text-is('Simulate')"))

    def watch():
        with page.expect_response(lambda r: "/simulation/status" in r.url):
            pass  # the page asks for the run's progress every second by itself

    sweep.act("watch the run", watch)
    sweep.act("cancel the run", lambda: page.click("button:text-is('Cancel the run')"))
    sweep.act(
        "simulate again (queued)",
        lambda: (page.fill("input[name=seed]", "8"), page.click("button:text-is('Simulate')")),
    )
    sweep.act("restart the run", lambda: page.click("button:text-is('Restart the run')"))
    settings.TASKS = IMMEDIATE
    sweep.act(
        "simulate (finishes)",
        lambda: (page.fill("input[name=seed]", "9"), page.click("button:text-is('Simulate')")),
    )
    sweep.act("the worst day", lambda: page.click("a:text-is('Worst day')"))

    # Compare two plans, then weigh the objectives.
    sweep.open(f"{base}/compare")

    def two_plans():
        boxes = page.locator("form.compare-picker input[name=plan]")
        for i in range(boxes.count()):
            boxes.nth(i).set_checked(i < 2)
        page.click("form.compare-picker button[type=submit]")

    sweep.act("compare two plans", two_plans)
    sweep.act(
        "weigh the objectives",
        lambda: page.locator("form.weight-form button[type=submit]").first.click(),
    )
    sweep.act(
        "place the objective's reference points",
        lambda: (
            page.fill("form.reference-form input[name=poor_findings]", "9"),
            page.click(
                "form.reference-form button:text-is('Save reference points and score again')"
            ),
        ),
    )

    # Ratings: record one, then delete it.
    sweep.open(f"{base}/plans/auto/ratings")

    def rate():
        form = page.locator("form.rating-form")
        form.locator("[name=session]").fill("Sweep session")
        form.locator("[name=participant]").fill("P01")
        for field in form.locator("fieldset.group input[type=number]").all():
            field.fill("50")
        for number in range(1, 16):
            form.locator(f"input[name=pair_{number}]").first.check()
        form.locator("button[type=submit]").click()

    sweep.act("record a rating", rate)
    sweep.accept_dialogs = True
    sweep.act(
        "delete the rating",
        lambda: page.locator("#ratings button:text-is('Delete')").first.click(),
    )
    sweep.accept_dialogs = False

    # Assumptions: edit, cancel, save, reset; the risk policy the same.
    sweep.open(f"{base}/assumptions")
    sweep.act(
        "edit an assumption, then cancel",
        lambda: (
            page.locator("tr.assumption a:text-is('Edit')").first.click(),
            page.locator("tr.assumption.editing a:text-is('Cancel')").click(),
        ),
    )
    sweep.act(
        "save an assumption",
        lambda: (
            page.locator("tr.assumption a:text-is('Edit')").first.click(),
            page.locator("tr.assumption.editing button[type=submit]").click(),
        ),
    )
    sweep.act(
        "reset an assumption",
        lambda: page.locator("button:text-is('Reset to default')").first.click(),
    )
    sweep.act(
        "save the risk policy",
        lambda: (
            page.click("a:text-is('Edit the policy')"),
            page.click("form.policy-form button[type=submit]"),
        ),
    )
    reset = page.locator("#risk-policy form.inline button")
    if reset.count():
        sweep.act("reset the risk policy", lambda: reset.first.click())

    # Review: comment, reply, resolve, decide, change the decision; the workshop.
    sweep.open(f"{base}/plans/auto/review")
    sweep.act(
        "post a general comment",
        lambda: (
            page.fill("form.review-general textarea[name=body]", "A general remark."),
            page.click("form.review-general button[type=submit]"),
        ),
    )
    item = lambda: page.locator("article.review-item").first  # noqa: E731
    sweep.act(
        "comment on an item",
        lambda: (
            item().locator("form.comment-form textarea").fill("Why this way?"),
            item().locator("form.comment-form button").click(),
        ),
    )
    sweep.act(
        "reply",
        lambda: (
            item().locator("form.reply-form textarea").first.fill("Because."),
            item().locator("form.reply-form button").first.click(),
        ),
    )
    sweep.act(
        "resolve the thread", lambda: item().locator("button:text-is('Resolve')").first.click()
    )
    sweep.act(
        "record a decision",
        lambda: (
            item().locator("form.decision-form textarea[name=decision]").fill("Keep it."),
            item().locator("form.decision-form button").click(),
        ),
    )
    sweep.act(
        "change the decision",
        lambda: (
            item().locator("form.inline-form select[name=status]").first.select_option(index=1),
            item().locator("form.inline-form button:text-is('Change')").first.click(),
        ),
    )
    sweep.open(f"{base}/plans/auto/workshop?show=all")
    sweep.act(
        "decide in the workshop",
        lambda: (
            page.fill(
                "#workshop-item form.decision-form textarea[name=decision]", "Agreed in the room."
            ),
            page.click("#workshop-item form.decision-form button.secondary"),
        ),
    )
    sweep.act(
        "agree in the workshop",
        lambda: page.locator("#workshop-item form.quick button.agree").first.click(),
    )
    sweep.act("next item by key", lambda: page.keyboard.press("ArrowRight"))

    # Snapshots: freeze, verify, restore as a new study.
    sweep.open(f"{base}/snapshots")
    sweep.act(
        "freeze",
        lambda: (page.fill("#snapshot-title", "Swept"), page.click("form.snapshot-form button")),
    )
    sweep.act("verify", lambda: page.locator("td.snapshot-verify a").first.click())
    sweep.act(
        "restore as a new study",
        lambda: (
            page.locator("details.snapshot-restore summary").first.click(),
            page.locator("details.snapshot-restore input[name=key]").first.fill("restored-copy"),
            page.locator("details.snapshot-restore button").first.click(),
        ),
    )

    # A spreadsheet: plan auto's table into plan manual; discard, then apply.
    table = page.request.get(f"{sweep.base}{base}/plans/auto/export/csv").body()
    upload = {"name": "auto.csv", "mimeType": "text/csv", "buffer": table}
    sweep.open(f"{base}/plans/manual/import")
    sweep.act(
        "preview a spreadsheet",
        lambda: (
            page.set_input_files("#import-upload input[type=file]", upload),
            page.click("#import-upload button[type=submit]"),
        ),
    )
    sweep.act("discard it", lambda: page.click("button:text-is('Discard the file')"))
    sweep.act(
        "preview it again and apply",
        lambda: (
            page.set_input_files("#import-upload input[type=file]", upload),
            page.click("#import-upload button[type=submit]"),
            page.locator("button:has-text('Apply to plan')").click(),
        ),
    )


# -- the plan editor's selection boxes, with the database as the oracle ---------------

# Added before any page script runs (through the DevTools protocol, outside the policy).
LISTEN = """
window.__violations = [];
document.addEventListener("securitypolicyviolation", (event) => {
  window.__violations.push(event.violatedDirective + " " + event.blockedURI);
});
"""


def _study(django_user_model):
    owner = django_user_model.objects.get(username="walker")
    path = next(p for p in example_paths() if p.name == "home-heating.json")
    return services.study_import(data=json.loads(path.read_text()), owner=owner)


def _watch(page):
    page.add_init_script(LISTEN)
    console: list[str] = []
    page.on(
        "console",
        lambda message: (
            console.append(f"{message.type}: {message.text}") if message.type == "error" else None
        ),
    )
    return console


def _visit(page, url, console):
    response = page.goto(url)
    assert response.ok, url
    assert "script-src 'self'" in response.headers["content-security-policy"], url
    assert "unsafe-eval" not in response.headers["content-security-policy"], url
    page.wait_for_load_state("networkidle")
    assert page.evaluate("window.__violations") == [], url
    assert console == [], url
    assert page.javascript_errors == [], url
    # base.html's htmx-config meta tag: htmx evaluates no strings at all.
    assert page.evaluate("window.htmx.config.allowEval") is False, url


def test_ticking_selects_without_saving_and_apply_changes_both(signed_in, django_user_model):
    page = signed_in
    console = _watch(page)
    study = _study(django_user_model)
    _visit(page, f"{page.base}/studies/{study.pk}/plans/auto/edit", console)
    rows = lambda: list(  # noqa: E731
        Assignment.objects.filter(plan__study=study, plan__key="auto").order_by("pk").values()
    )
    before_rows, before_version = rows(), Study.objects.get(pk=study.pk).version
    boxes = page.locator("input[name=tasks]")
    assert boxes.count() >= 2
    first, second = (boxes.nth(i).get_attribute("value") for i in (0, 1))
    boxes.nth(0).check()
    boxes.nth(1).check()
    page.wait_for_timeout(500)
    page.wait_for_load_state("networkidle")
    assert Study.objects.get(pk=study.pk).version == before_version
    assert rows() == before_rows

    # A status neither row has: the bulk form applies it to both.
    statuses = page.locator("#bulk-form select[name=status] option").evaluate_all(
        "options => options.map(o => o.value).filter(v => v)"
    )
    current = {r["status"] for r in before_rows}
    status = next(s for s in statuses if s not in current)
    page.select_option("#bulk-form select[name=status]", status)
    with page.expect_response(lambda r: "/bulk" in r.url) as answer:
        page.click("#bulk-form button[type=submit]")
    page.wait_for_load_state("networkidle")
    assert answer.value.ok
    said = page.locator("#messages").inner_text()
    now = {
        a.task.key: a.status
        for a in Assignment.objects.filter(plan__study=study, plan__key="auto").select_related(
            "task"
        )
    }
    assert now[first] == status and now[second] == status, said
    assert page.evaluate("window.__violations") == []
    assert console == []
