"""Spreadsheet import: upload a CSV or XLSX for a plan, preview every row problem and
what would change, then apply it (editors and owners).

The uploaded file waits in the database between the preview and the apply, for the
user who uploaded it alone, under the study and plan it was uploaded for (the session
holds nothing of it); it is never served back. The bounds on what waits are the
services' (:mod:`allocation.services.spreadsheets`).
"""

from __future__ import annotations

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_POST
from django_htmx.http import HttpResponseClientRedirect

from allocation import models as m
from allocation import services
from allocation.core.limits import (
    PENDING_IMPORT_BYTES_PER_USER,
    PENDING_IMPORT_LIFETIME_S,
    PENDING_IMPORTS_PER_USER,
)
from allocation.core.spreadsheets import reading as spreadsheets
from allocation.core.spreadsheets.reading import SpreadsheetInvalid, Upload
from allocation.views.common import StudyPage, study_page
from allocation.web.uploads import upload_refusal


def _version(page: StudyPage) -> str:
    row = m.Study.objects.filter(pk=page.row.pk).values_list("updated_at", flat=True).first()
    return row.isoformat() if row else ""


def _pending(
    request: HttpRequest, page: StudyPage, plan: str
) -> tuple[Upload, m.PendingImport] | None:
    """The file this user has waiting for this study and plan, if any (and intact)."""
    # Files kept in the session by earlier versions go the first time the user looks.
    for key in [key for key, _ in request.session.items() if key.startswith("baton.spread")]:
        del request.session[key]
    pending = services.pending_import(user=request.user, study=page.row, plan_key=plan)
    if pending is None:
        return None
    return Upload(pending.name, pending.data), pending


def _mib(size: int) -> str:
    return f"{size / (1024 * 1024):.1f} MiB"


def _dropped_message(kept: services.PendingKept) -> str:
    """Which older files an upload dropped, naming the bounds and what the user had."""
    files = "; ".join(
        f"{item['name']} (plan {item['plan_key']} of {item['study_title']}, {_mib(item['size'])})"
        for item in kept.dropped
    )
    return (
        f"You had {kept.files} spreadsheet(s) waiting to be imported ({_mib(kept.bytes)}); "
        f"at most {PENDING_IMPORTS_PER_USER} files and "
        f"{_mib(PENDING_IMPORT_BYTES_PER_USER)} wait per person, so the oldest, not "
        f"imported, were dropped: {files}. Upload one again to import it."
    )


def _context(page: StudyPage, plan: str, pending, upload_problems=None) -> dict:
    preview = None
    if pending is not None:
        preview = services.spreadsheet_preview(study=page.row, plan_key=plan, upload=pending[0])
    return page.context(
        "study-inventory",
        plan=page.plan_or_404(plan),
        plans=page.study.plans,
        pending=pending[1] if pending else None,
        filename=pending[0].name if pending else "",
        preview=preview,
        version=_version(page),
        upload_problems=upload_problems or [],
        max_bytes=spreadsheets.MAX_BYTES // (1024 * 1024),
        max_rows=spreadsheets.MAX_ROWS,
        task_columns=spreadsheets.TASK_COLUMNS,
        link_columns=spreadsheets.LINK_COLUMNS,
        assignment_columns=spreadsheets.ASSIGNMENT_COLUMNS,
    )


def _render(request: HttpRequest, context: dict, status: int = 200) -> HttpResponse:
    fragment = request.htmx and not request.htmx.boosted
    template = "spreadsheets/page.html#region" if fragment else "spreadsheets/page.html"
    return render(request, template, context, status=status)


def _page_url(pk: int, plan: str) -> str:
    return reverse("plan-import", args=[pk, plan])


def _done(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    url = _page_url(pk, plan)
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)


_NOTHING_WAITING = (
    "No file is waiting to be imported (a file waits "
    f"{PENDING_IMPORT_LIFETIME_S // 3600} hours, until it is applied or discarded); "
    "upload it again."
)


@require_GET
@login_required
def plan_import(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """The upload form, and the preview of the file waiting for this plan."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    return _render(request, _context(page, plan, _pending(request, page, plan)))


@require_POST
@login_required
def plan_import_upload(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Keep the uploaded file for the preview; a file too large is refused before it is
    read."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    # The size is judged from the declared length before request.FILES is read: 413
    # (Content Too Large) then; a file found too large once read is a 400 like the rest.
    problem = upload_refusal(request, spreadsheets.MAX_BYTES, "the spreadsheet")
    status = 413
    upload = None if problem else request.FILES.get("file")
    if problem is None:
        if upload is None:
            problem, status = "choose a CSV or XLSX file to upload", 400
        elif upload.size > spreadsheets.MAX_BYTES:
            limit = spreadsheets.MAX_BYTES // (1024 * 1024)
            problem = f"{upload.name} is larger than {limit} MiB; the import reads smaller files"
            status = 400
        elif upload.size == 0:
            problem, status = f"{upload.name} is empty", 400
    if problem is not None:
        context = _context(page, plan, _pending(request, page, plan), [problem])
        return _render(request, context, status=200 if request.htmx else status)
    data = upload.read(spreadsheets.MAX_BYTES + 1)
    # One file waits per study: a file uploaded for another plan is forgotten.
    kept = services.pending_import_keep(
        user=request.user, study=page.row, plan_key=plan, upload=Upload(upload.name, data)
    )
    if kept.dropped:
        messages.warning(request, _dropped_message(kept))
    if request.htmx:
        return _render(request, _context(page, plan, _pending(request, page, plan)))
    return redirect(_page_url(pk, plan))


@require_POST
@login_required
def plan_import_apply(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Apply the previewed file: everything in it, or nothing."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    pending = _pending(request, page, plan)
    if pending is None:
        messages.error(request, _NOTHING_WAITING)
        return _done(request, pk, plan)
    upload, stored = pending
    seen = (request.POST.get("version"), request.POST.get("sha256"))
    if seen != (_version(page), stored.sha256):
        # The preview the user saw is not what would be applied now: show it again.
        messages.warning(
            request,
            "The study or the file changed since that preview was made. Nothing was "
            "imported; check the preview below again, then apply.",
        )
        return _done(request, pk, plan)
    try:
        preview = services.spreadsheet_apply_pending(pending=stored, user=request.user)
    except SpreadsheetInvalid as error:
        count = sum(1 for problem in error.problems if problem.is_error)
        messages.error(
            request,
            f"{upload.name} was not imported: it has {count} error(s), listed below. "
            "Nothing was stored.",
        )
        return _done(request, pk, plan)
    if preview is None:  # applied or discarded from another tab meanwhile
        messages.error(request, _NOTHING_WAITING)
        return _done(request, pk, plan)
    if preview.changes is None or preview.changes.empty:
        messages.info(request, f"{upload.name} changes nothing in the study; nothing was stored.")
    else:
        messages.success(request, f"Imported {upload.name}: {preview.changes.sentence()}.")
    return _done(request, pk, plan)


@require_POST
@login_required
def plan_import_discard(request: HttpRequest, pk: int, plan: str) -> HttpResponse:
    """Forget the file waiting for this plan."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    page.plan_or_404(plan)
    if services.pending_import_discard(user=request.user, study=page.row, plan_key=plan):
        messages.info(request, "The uploaded file was discarded; nothing was imported.")
    return _done(request, pk, plan)
