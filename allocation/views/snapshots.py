"""Snapshots: freeze the study, verify a snapshot against its hash, restore one as a new
study, and read the differences between two versions.

Which snapshot an action is about travels in the query string or the form
(``?snapshot=12``, ``?from=12&to=now``), so every page answers for any member even
before the study has a snapshot.
"""

from __future__ import annotations

import json
from typing import Any
from urllib.parse import urlencode

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.core.exceptions import PermissionDenied
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST

from allocation import audit, services
from allocation import models as m
from allocation.core import StudyInvalid
from allocation.core.difference import KINDS, Change, Difference
from allocation.core.limits import PAGE_ROWS
from allocation.core.registry import FIGURES, Figure, figure_number
from allocation.selectors import snapshots as reads
from allocation.views.common import StudyPage, study_page
from allocation.views.paging import page_of

NOW = "now"


def _short(sha256: str | None) -> str:
    return sha256[:12] if sha256 else ""


def _rows(page: StudyPage, verified: dict[int, bool] | None = None) -> list[dict[str, Any]]:
    base = reverse("snapshot-difference", args=[page.row.pk])
    verify = reverse("snapshot-verify", args=[page.row.pk])
    return [
        {
            "snapshot": snapshot,
            "short": _short(snapshot.sha256),
            "verified": (verified or {}).get(snapshot.pk),
            "verify_url": f"{verify}?{urlencode({'snapshot': snapshot.pk})}",
            "difference_url": f"{base}?{urlencode({'from': snapshot.pk, 'to': NOW})}",
        }
        for snapshot in reads.snapshots_for_study(study=page.row)
    ]


def _list_context(
    page: StudyPage,
    *,
    verified: dict[int, bool] | None = None,
    title: str = "",
    title_error: str = "",
    restore_error: tuple[int, str] | None = None,
) -> dict[str, Any]:
    now = reads.study_now(page.row)
    rows = _rows(page, verified)
    return page.context(
        "study-snapshots",
        rows=rows,
        now_sha=now.sha256,
        now_short=_short(now.sha256),
        now_frozen=next((row for row in rows if row["snapshot"].sha256 == now.sha256), None),
        title=title,
        title_error=title_error,
        restore_error=restore_error,
        ok=page.result.ok,
        verify_all_url=reverse("snapshot-verify", args=[page.row.pk]),
    )


def _list(request: HttpRequest, page: StudyPage, status: int = 200, **extra: Any) -> HttpResponse:
    """The snapshot list: the whole page, or to htmx the region that holds it."""
    context = _list_context(page, **extra)
    if request.htmx and not (request.htmx.boosted or request.htmx.history_restore_request):
        return render(request, "snapshots/list.html#region", context)
    return render(request, "snapshots/list.html", context, status=status)


@require_GET
@login_required
def study_snapshots(request: HttpRequest, pk: int) -> HttpResponse:
    """The study's snapshots, newest first, and (for editors) the form to freeze it."""
    return _list(request, study_page(request, pk))


@require_POST
@login_required
def snapshot_create(request: HttpRequest, pk: int) -> HttpResponse:
    """Freeze the study (editors and owners). A bad title comes back beside its field."""
    page = study_page(request, pk, m.Role.EDITOR)
    title = request.POST.get("title", "")
    try:
        with audit.acting(request.user, m.AuditSource.SCREEN):
            snapshot = services.snapshot_create(study=page.row, title=title, user=request.user)
    except StudyInvalid as error:
        message = "; ".join(
            f"Title {problem.message}" if problem.path == "title" else str(problem)
            for problem in error.errors
        )
        return _list(request, page, status=400, title=title, title_error=message)
    messages.success(request, f"Frozen as {snapshot.sha256[:12]}: “{snapshot.title}”.")
    if not request.htmx:
        return redirect("study-snapshots", pk=pk)
    return _list(request, study_page(request, pk))


@require_GET
@login_required
def snapshot_verify(request: HttpRequest, pk: int) -> HttpResponse:
    """Check snapshots against their hashes: ``?snapshot=N`` one (to htmx, just its
    cell), without it every snapshot of the study."""
    page = study_page(request, pk)
    asked = request.GET.get("snapshot")
    if asked:
        snapshot = reads.snapshot_for_study(study=page.row, pk=asked)
        if snapshot is None:
            raise Http404("This study has no such snapshot.")
        verified = {snapshot.pk: services.snapshot_verify(snapshot)}
        if request.htmx and not request.htmx.boosted:
            row = {"snapshot": snapshot, "verified": verified[snapshot.pk]}
            return render(request, "snapshots/list.html#verified", page.context("", row=row))
    else:
        verified = {
            snapshot.pk: services.snapshot_verify(snapshot)
            for snapshot in page.row.snapshots.all()
        }
    return _list(request, page, verified=verified)


@require_POST
@login_required
def snapshot_restore(request: HttpRequest, pk: int) -> HttpResponse:
    """Restore a snapshot as a new study the user owns (editors and owners), then open it.

    ``key`` gives the new study another id; left empty it keeps the snapshot's id (and so
    its hash). Any problem comes back beside the snapshot's row, with nothing stored.
    """
    page = study_page(request, pk, m.Role.EDITOR)
    snapshot = reads.snapshot_for_study(study=page.row, pk=request.POST.get("snapshot"))
    if snapshot is None:
        error = (0, "There is no such snapshot of this study.")
        return _list(request, page, status=400, restore_error=error)
    key = request.POST.get("key", "").strip() or None
    try:
        with audit.acting(request.user, m.AuditSource.SCREEN):
            study = services.snapshot_restore(snapshot=snapshot, user=request.user, key=key)
    except services.SnapshotDamaged as error:
        return _list(request, page, status=400, restore_error=(snapshot.pk, str(error)))
    except StudyInvalid as error:
        text = "; ".join(
            f"the id {problem.message}" if problem.path == "$.study.id" else str(problem)
            for problem in error.errors
        )
        return _list(
            request, page, status=400, restore_error=(snapshot.pk, f"Not restored: {text}.")
        )
    except PermissionDenied as error:
        return _list(request, page, status=403, restore_error=(snapshot.pk, str(error)))
    messages.success(
        request,
        f"Restored snapshot {snapshot.sha256[:12]} (“{snapshot.title}”) as this new study.",
    )
    return redirect("study-detail", pk=study.pk)


# -- differences ----------------------------------------------------------------------------


def _value_text(value: Any) -> str:
    if value is None:
        return "—"
    if isinstance(value, str):
        return value
    return json.dumps(value, ensure_ascii=False, separators=(", ", ": "))


def _spec(key: str) -> Figure:
    """The registry's figure of a headline key; a key a snapshot kept from a figure the
    registry no longer has is shown under its own name, to three decimals."""
    return FIGURES.get(key) or Figure(key, key, "", 3, "lower", "")


def _change_rows(changes: list[Change]) -> list[dict[str, Any]]:
    return [
        {
            "change": change,
            "key_changed": index == 0 or changes[index - 1].key != change.key,
            "before": _value_text(change.before),
            "after": _value_text(change.after),
        }
        for index, change in enumerate(changes)
    ]


def _headline_groups(difference: Difference) -> list[dict[str, Any]]:
    groups: dict[str, list[dict[str, Any]]] = {}
    for row in difference.headlines:
        spec = _spec(row.figure)
        change = row.change
        groups.setdefault(row.plan, []).append(
            {
                "label": spec.label,
                "unit": spec.unit,
                "before": figure_number(spec, row.before),
                "after": figure_number(spec, row.after),
                "change": "" if change is None else _signed(spec, change),
                # A plan present in one version only has nothing to compare with.
                "verdict": "absent" if change is None else _verdict(spec, change),
            }
        )
    return [
        {
            "plan": plan,
            "rows": [row for row in rows if row["verdict"] != "same"],
            "unchanged": [row for row in rows if row["verdict"] == "same"],
        }
        for plan, rows in groups.items()
    ]


def _signed(spec: Figure, value: float) -> str:
    """A change at the figure's precision; one that rounds to nothing reads ``±0``."""
    if round(value, spec.decimals) == 0:
        return "±0"
    return figure_number(spec, value, signed=True)


def _verdict(spec: Figure, change: float) -> str:
    if _signed(spec, change) == "±0":
        return "same"
    return "better" if (change < 0) == spec.lower_is_better else "worse"


def _version(page: StudyPage, asked: str) -> reads.Version | None:
    if asked == NOW:
        return reads.study_now(page.row)
    snapshot = reads.snapshot_for_study(study=page.row, pk=asked)
    return None if snapshot is None else reads.snapshot_version(snapshot)


def _difference_context(
    page: StudyPage, query, request: HttpRequest | None = None
) -> dict[str, Any]:
    snapshots = list(reads.snapshots_for_study(study=page.row))
    default_from = str(snapshots[0].pk) if snapshots else ""
    asked_from = query.get("from", "") or default_from
    asked_to = query.get("to", "") or NOW
    context: dict[str, Any] = {
        "snapshots": snapshots,
        "asked_from": asked_from,
        "asked_to": asked_to,
        "difference_url": reverse("snapshot-difference", args=[page.row.pk]),
        "notes": [],
        "difference": None,
    }
    if not snapshots:
        return context
    before, after = _version(page, asked_from), _version(page, asked_to)
    for asked, version in ((asked_from, before), (asked_to, after)):
        if version is None:
            context["notes"].append(
                f"This study has no snapshot “{asked}”; pick one from the list."
            )
    if before is None or after is None:
        return context
    difference = reads.version_difference(before, after)
    groups = difference.by_kind()
    counts = difference.counts()
    context.update(
        difference=difference,
        before=before,
        after=after,
        before_short=_short(before.sha256),
        after_short=_short(after.sha256),
        same_hash=before.sha256 is not None and before.sha256 == after.sha256,
        summary=[{"kind": kind, "label": KINDS[kind], **counts[kind]} for kind in groups],
        groups=[_group(request, kind, items) for kind, items in groups.items()],
        headline_groups=_headline_groups(difference),
    )
    return context


def _group(request: HttpRequest | None, kind: str, items: list) -> dict[str, Any]:
    """One kind's changes, a page at a time (``{kind}_page``)."""
    shown = (
        page_of(request, items, param=f"{kind}_page", target=f"difference-{kind}")
        if request is not None
        else None
    )
    rows = items[:PAGE_ROWS] if shown is None else shown.rows
    return {"kind": kind, "label": KINDS[kind], "rows": _change_rows(rows), "page": shown}


@require_GET
@login_required
def snapshot_difference(request: HttpRequest, pk: int) -> HttpResponse:
    """What changed between two snapshots, or a snapshot and now (``?from=N&to=M|now``);
    to htmx (the picker) only the differences."""
    page = study_page(request, pk)
    context = page.context("study-snapshots", **_difference_context(page, request.GET, request))
    if request.htmx and not (request.htmx.boosted or request.htmx.history_restore_request):
        return render(request, "snapshots/difference.html#region", context)
    return render(request, "snapshots/difference.html", context)
