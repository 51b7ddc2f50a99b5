"""A study's history: the audit trail of its changes, filtered, paged and exported.

Every change to a study is recorded with who made it, when, from which entry point
(a screen, an import, a command, the admin) and its values before and after, in the
study file's form (:mod:`allocation.audit`). The filters travel in the query string,
so a filtered history is a link to share, and the exports take the same filters.
"""

from __future__ import annotations

import csv
import io
import json
from dataclasses import dataclass
from typing import Any
from urllib.parse import urlencode

from django.contrib.auth.decorators import login_required
from django.core.paginator import Paginator
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.urls import reverse
from django.utils import timezone
from django.utils.text import slugify
from django.views.decorators.http import require_GET

from allocation import __version__
from allocation import models as m
from allocation.core.cautions import CAUTIONS
from allocation.forms.history import HistoryForm
from allocation.selectors import history as trail
from allocation.views.common import study_page

#: Entries per page.
PER_PAGE = 25
#: Field-by-field lines shown per entry; the exports hold them all.
MAX_CHANGES = 200
#: Longest before/after JSON text shown on the page; longer values are in the exports.
MAX_JSON_CHARS = 20_000


def _filtered(request: HttpRequest, study: m.Study):
    """The entries the query string asks for, with the form that read it."""
    form = HistoryForm(request.GET)
    form.is_valid()
    chosen = form.chosen()
    entries = trail.history(study, chosen)
    entry = form.cleaned_data.get("entry") if "entry" not in form.errors else None
    if entry:
        entries = entries.filter(pk=entry)
    return form, chosen, entries


def _json_text(value: Any, indent: int | None = 2) -> str:
    return json.dumps(value, indent=indent, ensure_ascii=False, allow_nan=False)


def _cell(value: Any) -> str:
    if value is trail.MISSING:
        return "—"
    return _json_text(value, indent=None)


@dataclass
class EntryView:
    """One entry as the page shows it."""

    entry: m.AuditEntry
    lines: list[dict[str, str]]
    more_lines: int
    before_text: str
    after_text: str
    too_long: bool
    summary: str


def _summary(value: Any) -> str:
    """What a whole study file holds, in a few words (for imports and creations)."""
    if not isinstance(value, dict) or "tasks" not in value:
        return ""
    parts = [
        f"{len(value.get(section) or [])} {section}"
        for section in ("agents", "events", "tasks", "links", "plans")
    ]
    return "the whole study file: " + ", ".join(parts)


def _entry_view(entry: m.AuditEntry) -> EntryView:
    whole = entry.before is None or entry.after is None
    lines = [] if whole else trail.changes(entry.before, entry.after)
    before_text = "" if entry.before is None else _json_text(entry.before)
    after_text = "" if entry.after is None else _json_text(entry.after)
    too_long = max(len(before_text), len(after_text)) > MAX_JSON_CHARS
    return EntryView(
        entry=entry,
        lines=[
            {"path": line.path, "before": _cell(line.before), "after": _cell(line.after)}
            for line in lines[:MAX_CHANGES]
        ],
        more_lines=max(0, len(lines) - MAX_CHANGES),
        before_text="" if too_long else before_text,
        after_text="" if too_long else after_text,
        too_long=too_long,
        summary=_summary(entry.after if entry.before is None else entry.before) if whole else "",
    )


def _query(form: HistoryForm, **extra: Any) -> str:
    pairs = [(name, form.data.get(name, "")) for name in form.fields]
    pairs += list(extra.items())
    return urlencode([(name, value) for name, value in pairs if value not in ("", None)])


@require_GET
@login_required
def study_history(request: HttpRequest, pk: int) -> HttpResponse:
    """The history page (viewers and above); an htmx request gets the entries region."""
    page = study_page(request, pk)
    form, chosen, entries = _filtered(request, page.row)
    paginator = Paginator(entries, PER_PAGE)
    shown = paginator.get_page(request.GET.get("page"))
    url = reverse("study-history", args=[pk])
    query = _query(form)
    pages = {
        "previous": f"{url}?{_query(form, page=shown.previous_page_number())}"
        if shown.has_previous()
        else "",
        "next": f"{url}?{_query(form, page=shown.next_page_number())}" if shown.has_next() else "",
    }
    context = page.context(
        "study-history",
        form=form,
        filter_problems=form.problems(),
        filtered=bool(chosen.as_pairs()) or bool(form.data.get("entry")),
        choices=trail.history_choices(page.row),
        sources=m.AuditSource.choices,
        shown=shown,
        views=[_entry_view(entry) for entry in shown.object_list],
        pages=pages,
        history_url=url,
        csv_url=reverse("study-history-csv", args=[pk]) + (f"?{query}" if query else ""),
        json_url=reverse("study-history-json", args=[pk]) + (f"?{query}" if query else ""),
        nobody=trail.NOBODY,
    )
    if request.htmx and not request.htmx.boosted:
        return render(request, "history/page.html#region", context)
    return render(request, "history/page.html", context)


def _export_header(page, form: HistoryForm, chosen: trail.HistoryFilter) -> dict[str, Any]:
    filters = dict(chosen.as_pairs())
    if form.data.get("entry") and "entry" not in form.errors:
        filters["entry"] = str(form.cleaned_data["entry"])
    return {
        "study_id": page.row.key,
        "study_title": page.row.title,
        "study_number": page.row.pk,
        "exported_at": timezone.now().replace(microsecond=0).isoformat(),
        "baton_version": __version__,
        "filters": filters,
        "filter_problems": form.problems(),
        "cautions": CAUTIONS,
    }


def _attachment(text: str, content_type: str, filename: str) -> HttpResponse:
    response = HttpResponse(text, content_type=content_type)
    response["Content-Disposition"] = f'attachment; filename="{filename}"'
    return response


#: A cell a spreadsheet would run as a formula starts with one of these.
_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _safe_cell(text: str) -> str:
    return "'" + text if text.startswith(_FORMULA_STARTS) else text


@require_GET
@login_required
def study_history_csv(request: HttpRequest, pk: int) -> HttpResponse:
    """The (filtered) history as CSV: header lines starting with ``#``, then a table
    with the values before and after as JSON text."""
    page = study_page(request, pk)
    form, chosen, entries = _filtered(request, page.row)
    header = _export_header(page, form, chosen)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    filters = "; ".join(f"{name}={value}" for name, value in header["filters"].items())
    for line in (
        "Baton audit trail",
        f"study: {header['study_id']} ({header['study_title']}), number {header['study_number']}",
        f"exported: {header['exported_at']}",
        f"Baton version: {header['baton_version']}",
        f"filters: {filters or 'none (every entry)'}",
        *[f"filter not applied: {problem}" for problem in header["filter_problems"]],
        "cells that would start a spreadsheet formula begin with an apostrophe",
        f"cautions: {CAUTIONS}",
    ):
        writer.writerow([_safe_cell(f"# {line}")])
    writer.writerow(["id", "at", "who", "source", "action", "target", "before", "after"])
    for entry in entries.iterator():
        row = trail.entry_json(entry)
        writer.writerow(
            [
                row["id"],
                row["at"],
                _safe_cell(row["who"]),
                row["source"],
                _safe_cell(row["action"]),
                _safe_cell(row["target"]),
                "" if row["before"] is None else _safe_cell(_json_text(row["before"], None)),
                "" if row["after"] is None else _safe_cell(_json_text(row["after"], None)),
            ]
        )
    filename = f"{slugify(page.row.key) or 'study'}.history.csv"
    return _attachment(out.getvalue(), "text/csv; charset=utf-8", filename)


@require_GET
@login_required
def study_history_json(request: HttpRequest, pk: int) -> HttpResponse:
    """The (filtered) history as JSON: the export's header, then the entries."""
    page = study_page(request, pk)
    form, chosen, entries = _filtered(request, page.row)
    payload = {
        "format": "baton-audit-trail",
        **_export_header(page, form, chosen),
        "entries": [trail.entry_json(entry) for entry in entries.iterator()],
    }
    filename = f"{slugify(page.row.key) or 'study'}.history.json"
    return _attachment(_json_text(payload) + "\n", "application/json; charset=utf-8", filename)
