"""The review of a plan: its open items with their threads and decisions, and the
workshop view that walks them one at a time on a projector."""

from __future__ import annotations

from urllib.parse import urlencode

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST
from django_htmx.http import HttpResponseClientRedirect

from allocation import models as m
from allocation import services
from allocation.core.methods import methods_document
from allocation.selectors.reviews import ReviewItem, review_items, review_summary
from allocation.services.conflicts import EditConflict
from allocation.services.reviews import PLAN_KINDS
from allocation.views.common import StudyPage, study_page
from allocation.views.conflicts import posted_version
from allocation.views.paging import PAGE_ROWS, page_of

#: The sections of the methods document behind the figures the review shows beside each
#: item.
REVIEW_METHODS = (
    "levels-of-automation",
    "person-time",
    "monitoring",
    "finding-capability",
    "awareness-index",
    "handovers",
    "mode-check",
)


def _methods() -> list[dict[str, str]]:
    """Each section's title, summary and anchor."""
    document = methods_document()
    return [
        {"anchor": anchor, "title": section.title, "summary": section.summary}
        for anchor in REVIEW_METHODS
        for section in [document.section(anchor)]
    ]


def _rank(page: StudyPage, role: str) -> bool:
    return m.Role.rank(page.role) >= m.Role.rank(role)


def _items(page: StudyPage, plan_id: str, show_all: bool) -> list[ReviewItem]:
    analysis = page.analysis(plan_id) if page.result.ok else None
    return review_items(page.row, page.study, plan_id, analysis, show_all=show_all)


def _review_context(page: StudyPage, active: str, plan_id: str, **extra: object) -> dict:
    return page.context(
        active,
        plan=page.study.plans_by_id[plan_id],
        plan_links=[
            {
                "plan": item,
                "url": reverse(active, args=[page.row.pk, item.id]),
                "active": item.id == plan_id,
            }
            for item in page.study.plans
        ],
        can_comment=_rank(page, m.Role.REVIEWER),
        can_decide=_rank(page, m.Role.EDITOR),
        statuses=m.DecisionStatus.choices,
        methods=_methods(),
        **extra,
    )


@require_GET
@login_required
def plan_review(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The plan's open items (``?show=all``: every item) with their threads and forms."""
    page = study_page(request, pk)
    page.plan_or_404(plan)
    show_all = request.GET.get("show") == "all"
    items = _items(page, plan, show_all)
    shown = page_of(request, items, target="review-items")
    context = _review_context(
        page,
        "plan-review",
        plan,
        items=shown.rows,
        items_page=shown,
        summary=review_summary(items),
        show_all=show_all,
        view="review",
        targets=_targets(page),
    )
    if request.htmx and not request.htmx.boosted:
        return render(request, "reviews/plan.html#region", context)
    return render(request, "reviews/plan.html", context)


def _targets(page: StudyPage) -> list[tuple[str, str]]:
    """What the page's general comment form may be about: the plan, the study, a task.
    A study of more tasks than a page lists offers "a task" with a field for its id."""
    tasks = page.study.tasks
    if len(tasks) > PAGE_ROWS:
        return [("plan:", "this plan"), ("study:", "the study as a whole"), ("task:", "a task")]
    return [
        ("plan:", "this plan"),
        ("study:", "the study as a whole"),
        *((f"task:{task.id}", f"task {task.id} {task.title}") for task in tasks),
    ]


def _number(value: str | None, default: int = 1) -> int:
    try:
        return int(value or default)
    except ValueError:
        return default


@require_GET
@login_required
def plan_workshop(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The plan's open items one at a time (``?item=3``), large, for a projector."""
    page = study_page(request, pk)
    page.plan_or_404(plan)
    show_all = request.GET.get("show") == "all"
    items = _items(page, plan, show_all)
    context = _workshop_context(page, plan, items, _number(request.GET.get("item")), show_all)
    if request.htmx and not request.htmx.boosted:
        return render(request, "reviews/workshop.html#item", context)
    return render(request, "reviews/workshop.html", context)


def _workshop_url(pk: int, plan: str, number: int, show_all: bool) -> str:
    query = f"?item={number}" + ("&show=all" if show_all else "")
    return reverse("plan-workshop", args=[pk, plan]) + query


def _workshop_context(
    page: StudyPage,
    plan: str,
    items: list[ReviewItem],
    number: int,
    show_all: bool,
    **extra: object,
) -> dict:
    total = len(items)
    number = min(max(number, 1), total) if total else 0
    item = items[number - 1] if total else None
    pk = page.row.pk
    return _review_context(
        page,
        "plan-workshop",
        plan,
        item=item,
        number=number,
        total=total,
        show_all=show_all,
        view="workshop",
        summary=review_summary(items),
        previous_url=_workshop_url(pk, plan, number - 1, show_all) if number > 1 else None,
        next_url=_workshop_url(pk, plan, number + 1, show_all) if number < total else None,
        review_url=reverse("plan-review", args=[pk, plan]),
        **extra,
    )


def _target_from_post(request: HttpRequest) -> tuple[str, str]:
    """``kind`` and ``key`` from the form; the general form sends them as one
    ``about`` value (``task:T2``)."""
    about = request.POST.get("about")
    if about is not None:
        kind, _, key = about.partition(":")
        if kind == "task" and not key:  # "a task", named in its own field
            key = request.POST.get("task", "").strip()
        return kind, key
    return request.POST.get("kind", ""), request.POST.get("key", "")


def _answer(
    request: HttpRequest,
    pk: int,
    plan: str,
    target: tuple[str, str, str],
    *,
    done: str = "",
    error: str = "",
) -> HttpResponse:
    """The answer to a review form: the item again (htmx), or back to the page it was
    sent from, with what happened said."""
    view = request.POST.get("view", "review")
    show_all = request.POST.get("show") == "all"
    if error:
        messages.error(request, error)
    elif done:
        messages.success(request, done)
    page = study_page(request, pk)
    kind, plan_key, key = target
    if view == "workshop":
        items = _items(page, plan, show_all)
        asked = _number(request.POST.get("item"))
        # The item stays in view while it is open; once it is not (its last thread
        # resolved), the same number shows the next one.
        number = next(
            (
                index
                for index, item in enumerate(items, start=1)
                if (item.kind, item.plan_key, item.key) == (kind, plan_key, key)
            ),
            asked,
        )
        if not request.htmx:
            return redirect(_workshop_url(pk, plan, number, show_all))
        context = _workshop_context(page, plan, items, number, show_all, swapped=True)
        return render(request, "reviews/workshop.html#item", context)
    all_items = _items(page, plan, show_all=True)
    item = next(
        (i for i in all_items if (i.kind, i.plan_key, i.key) == (kind, plan_key, key)), None
    )
    if item is None and request.htmx:
        # Nothing to show again (the thing asked about does not exist): the page says it.
        return HttpResponseClientRedirect(reverse("plan-review", args=[pk, plan]))
    if not request.htmx or item is None:
        anchor = f"#{item.anchor}" if item is not None else ""
        return redirect(
            reverse("plan-review", args=[pk, plan]) + _place(page, plan, show_all, item) + anchor
        )
    context = _review_context(
        page, "plan-review", plan, item=item, view="review", show_all=show_all
    )
    return render(request, "reviews/plan.html#item", context)


@require_POST
@login_required
def review_comment(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Post a comment on an item of the plan, or a reply (``parent``); reviewers and up."""
    page = study_page(request, pk, role=m.Role.REVIEWER)
    page.plan_or_404(plan)
    kind, key = _target_from_post(request)
    parent = request.POST.get("parent") or None
    plan_key = plan if kind in PLAN_KINDS else ""
    target = (kind, plan_key, key)
    try:
        comment = services.comment_post(
            study=page.row,
            user=request.user,
            kind=kind,
            key=key,
            plan_key=plan,
            body=request.POST.get("body", ""),
            parent=parent,
        )
    except services.ReviewRefused as refused:
        if parent:
            target = _parent_target(page, parent) or target
        return _answer(request, pk, plan, target, error=f"Not posted: {refused}")
    target = (comment.target_kind, comment.plan_key, comment.target_key)
    return _answer(request, pk, plan, target, done="Comment posted.")


def _place(page: StudyPage, plan: str, show_all: bool, item: ReviewItem | None) -> str:
    """The review page's query string that shows ``item``: the filter and its page."""
    query: dict[str, object] = {"show": "all"} if show_all else {}
    if item is not None:
        keys = [(i.kind, i.plan_key, i.key) for i in _items(page, plan, show_all)]
        where = (item.kind, item.plan_key, item.key)
        if where in keys and keys.index(where) >= PAGE_ROWS:
            query["page"] = keys.index(where) // PAGE_ROWS + 1
    return f"?{urlencode(query)}" if query else ""


def _refused(request: HttpRequest, pk: int, plan: str, error: str) -> HttpResponse:
    """Back to the review page with the refusal said (the thing asked about is not
    there to show again)."""
    messages.error(request, error)
    url = reverse("plan-review", args=[pk, plan])
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


def _parent_target(page: StudyPage, parent: str) -> tuple[str, str, str] | None:
    row = m.Comment.objects.filter(study=page.row, pk=_number(parent, 0)).first()
    return None if row is None else (row.target_kind, row.plan_key, row.target_key)


@require_POST
@login_required
def review_resolve(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Resolve a thread (``resolved=1``) or reopen it; its author, or editors and up."""
    page = study_page(request, pk, role=m.Role.REVIEWER)
    page.plan_or_404(plan)
    resolved = request.POST.get("resolved") == "1"
    try:
        comment = services.comment_resolve(
            study=page.row,
            user=request.user,
            comment=request.POST.get("comment", ""),
            resolved=resolved,
        )
    except services.ReviewRefused as refused:
        return _refused(request, pk, plan, str(refused))
    target = (comment.target_kind, comment.plan_key, comment.target_key)
    done = "Thread resolved." if resolved else "Thread reopened."
    return _answer(request, pk, plan, target, done=done)


@require_POST
@login_required
def review_decide(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Record a decision about an item of the plan; editors and up."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    kind, key = _target_from_post(request)
    plan_key = plan if kind in PLAN_KINDS else ""
    try:
        decision = services.decision_save(
            study=page.row,
            user=request.user,
            kind=kind,
            key=key,
            plan_key=plan,
            decision=request.POST.get("decision", ""),
            rationale=request.POST.get("rationale", ""),
            status=request.POST.get("status", m.DecisionStatus.OPEN),
        )
    except services.ReviewRefused as refused:
        return _answer(request, pk, plan, (kind, plan_key, key), error=f"Not recorded: {refused}")
    target = (decision.target_kind, decision.plan_key, decision.target_key)
    return _answer(
        request, pk, plan, target, done=f"Decision recorded ({decision.get_status_display()})."
    )


@require_POST
@login_required
def review_decision_status(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Change a decision's status; editors and up."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    try:
        decision = services.decision_status_set(
            study=page.row,
            user=request.user,
            decision=request.POST.get("decision", ""),
            status=request.POST.get("status", ""),
            expected_version=posted_version(request.POST),
        )
    except EditConflict as conflict:
        # The page comes back with their status (and version): choosing again applies
        # yours knowingly.
        theirs = (conflict.current or {}).get("status", "deleted")
        return _refused(
            request,
            pk,
            plan,
            f"{conflict.message}: theirs is {theirs}, yours was "
            f"{request.POST.get('status', '')}. Nothing was changed; the page shows theirs "
            "now, choose again to apply yours.",
        )
    except services.ReviewRefused as refused:
        return _refused(request, pk, plan, str(refused))
    target = (decision.target_kind, decision.plan_key, decision.target_key)
    return _answer(
        request, pk, plan, target, done=f"Decision now {decision.get_status_display().lower()}."
    )
