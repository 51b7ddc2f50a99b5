"""The Methods page: Baton's methods document, every section under its own anchor, with
a list of contents. Any signed-in user may read it; it needs no study."""

from __future__ import annotations

from functools import cache
from typing import Any

from django.contrib.auth.decorators import login_required
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils.safestring import mark_safe
from django.views.decorators.http import require_GET

from allocation.core.methods import methods_document, plain_text, section_html


@cache
def _document() -> dict[str, Any]:
    """The document as the page shows it: the title, the contents and the HTML (the
    document is shipped with the package, so it is read and rendered once)."""
    document = methods_document()
    sections = list(document.sections.values())
    contents: list[dict[str, Any]] = []
    for section in sections[1:]:
        entry = {"anchor": section.anchor, "title": plain_text(section.title), "children": []}
        if section.level <= 2 or not contents:
            contents.append(entry)
        else:
            contents[-1]["children"].append(entry)
    # markdown-it escapes any HTML in the document (html=False), so the result is safe.
    return {
        "title": plain_text(sections[0].title),
        "contents": contents,
        "opening": mark_safe(section_html(sections[0])),  # noqa: S308
        "html": mark_safe("".join(section_html(section) for section in sections[1:])),  # noqa: S308
    }


@require_GET
@login_required
def methods_page(request: HttpRequest) -> HttpResponse:
    """Baton's methods document, one section per anchor, with its contents."""
    return render(request, "methods/page.html", {"methods": _document()})
