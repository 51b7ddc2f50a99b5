"""Downloads of a plan's exports, and the page that lists them per plan and snapshot."""

from __future__ import annotations

from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils.text import slugify
from django.views.decorators.http import require_GET

from allocation import exports
from allocation import models as m
from allocation.views.common import study_page


def _snapshot(request: HttpRequest, row: m.Study) -> m.Snapshot | None:
    """The snapshot ``?snapshot=<number>`` names (of this study), or ``None``."""
    value = request.GET.get("snapshot", "").strip()
    if not value:
        return None
    # isdigit alone lets through digits int() refuses ("²") and numbers of any length.
    if not (value.isascii() and value.isdigit() and len(value) <= 18):
        raise Http404("The snapshot is named by its number.")
    return exports.snapshot_of_study(row, int(value))


@require_GET
@login_required
def plan_export(request: HttpRequest, pk: int, plan: str, fmt: str) -> HttpResponse:
    """One plan's allocation table (csv, xlsx) or report (html, pdf), as a download."""
    page = study_page(request, pk)
    if fmt not in exports.FORMATS:
        raise Http404(f"No export format {fmt!r}; the formats are csv, xlsx, html and pdf.")
    snapshot = _snapshot(request, page.row)
    source = exports.export_source(page.row, plan, snapshot=snapshot)
    export = exports.FORMATS[fmt]
    response = HttpResponse(exports.export_bytes(source, fmt), content_type=export.content_type)
    filename = exports.export_filename(page.row.key, plan, fmt, source.snapshot)
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    return response


@require_GET
@login_required
def study_exports(request: HttpRequest, pk: int) -> HttpResponse:
    """Every export of the study: per plan and format, now and from each snapshot."""
    page = study_page(request, pk)
    snapshots = m.Snapshot.objects.filter(study=page.row).only(
        "pk", "title", "author_name", "created_at", "sha256", "headlines"
    )
    study = page.study
    # Exports need the analyses, which a study with errors does not have.
    analysable = study is not None and page.result.ok
    context = page.context(
        "study-exports",
        plan_ids=[plan.id for plan in study.plans] if analysable else [],
        analysable=analysable,
        snapshots=snapshots,
        not_frozen=exports.NOT_FROZEN,
    )
    return render(request, "exports/exports.html", context)


def snapshot_study_download(request: HttpRequest, row: m.Study) -> HttpResponse:
    """A snapshot's study file: its canonical text byte for byte, so that the file's
    SHA-256 is the snapshot's hash; the hash is also in the file name and a header."""
    snapshot = _snapshot(request, row)
    if snapshot is None:
        raise Http404("The snapshot is named by its number.")
    response = HttpResponse(
        snapshot.canonical.encode("utf-8"), content_type="application/json; charset=utf-8"
    )
    filename = f"{slugify(row.key) or 'study'}.{snapshot.sha256[:12]}.baton.json"
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    response["X-Baton-Snapshot"] = snapshot.sha256
    return response
