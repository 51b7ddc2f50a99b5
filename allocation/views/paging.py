"""Pages of rows: every list of a study's tasks, links, findings or handovers is shown a
bounded page at a time, so that an answer's size follows the page, not the study.

A page is asked for in the query string (``?page=3``, or a list's own name such as
``?links_page=2`` where one screen shows several lists). Whatever is asked, the answer
is a page that exists: a number that is not one, below one or past the last page (even
``?page=`` followed by a hundred digits) shows the first or the last page, never an
error. The links to the other pages keep every other parameter of the query string (the
goal shown, a filter, another list's page).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar
from urllib.parse import urlsplit

from django.http import HttpRequest, QueryDict

from allocation.core.limits import PAGE_ROWS

__all__ = ["PAGE_ROWS", "RowPage", "page_number", "page_of", "shown_query"]

Row = TypeVar("Row")

#: Digits of a page number read as a number; any longer number is past the last page.
_DIGITS = 9


def page_number(asked: Any, pages: int) -> int:
    """The page to show, from 1 to ``pages``, for what the query string asked."""
    text = str(asked or "").strip()
    if not text.isascii() or not text.isdecimal():
        return 1
    if len(text.lstrip("0")) > _DIGITS:
        return max(pages, 1)
    return min(max(int(text), 1), max(pages, 1))


@dataclass
class PageLink:
    """One link of the page navigation."""

    label: str
    url: str
    number: int
    current: bool = False
    rel: str = ""


@dataclass
class RowPage(Generic[Row]):
    """One page of a list of rows and the way to the others."""

    rows: list[Row]
    number: int
    pages: int
    total: int
    size: int
    param: str
    target: str
    links: list[PageLink] = field(default_factory=list)

    @property
    def first_row(self) -> int:
        """The place of the page's first row in the whole list, from 1 (0: none)."""
        return 0 if not self.total else (self.number - 1) * self.size + 1

    @property
    def last_row(self) -> int:
        return self.first_row + len(self.rows) - 1 if self.rows else 0

    @property
    def paged(self) -> bool:
        """Whether the list needs more than one page (only then is a navigation shown)."""
        return self.pages > 1


def _url(path: str, query: QueryDict, param: str, number: int) -> str:
    query = query.copy()
    if number <= 1:
        query.pop(param, None)
    else:
        query[param] = str(number)
    text = query.urlencode()
    return f"{path}?{text}" if text else path


def shown_query(request: HttpRequest) -> tuple[str, QueryDict]:
    """The address and query string of the page the user is looking at: the request's
    own, or for an htmx request that changes something (a POST), the page it came from
    (``HX-Current-URL``), so that a list redrawn after a change stays on its page."""
    current = getattr(getattr(request, "htmx", None), "current_url", None)
    if request.method != "GET" and current:
        parts = urlsplit(current)
        return parts.path, QueryDict(parts.query)
    return request.path, request.GET


def page_of(
    request: HttpRequest,
    rows: Sequence[Row],
    *,
    param: str = "page",
    target: str = "",
    size: int = PAGE_ROWS,
    path: str | None = None,
) -> RowPage[Row]:
    """The page of ``rows`` the query string's ``param`` asks for.

    Parameters
    ----------
    request : HttpRequest
        The request, whose query string names the page and whose other parameters the
        links keep.
    rows : Sequence
        The whole list (a list, or a queryset: only the page's rows are then fetched).
    param : str
        The query-string parameter of this list's page.
    target : str
        The id of the element holding the list: the navigation's links replace it in
        place (htmx, ``hx-select``) and, without scripts, jump to it.
    size : int
        Rows per page.
    path : str, optional
        The address the links lead to (default: the page the user is looking at, see
        :func:`shown_query`).
    """
    shown_path, query = shown_query(request)
    total = len(rows)
    pages = max(1, -(-total // size))
    number = page_number(query.get(param), pages)
    start = (number - 1) * size
    shown = list(rows[start : start + size])
    page = RowPage(shown, number, pages, total, size, param, target)
    if pages > 1:
        page.links = _links(path or shown_path, query, param, number, pages)
    return page


def _links(path: str, query: QueryDict, param: str, number: int, pages: int) -> list[PageLink]:
    """First, previous, a few pages around the current one, next and last."""
    links: list[PageLink] = []
    if number > 1:
        links.append(
            PageLink("← Previous", _url(path, query, param, number - 1), number - 1, rel="prev")
        )
    around = sorted({1, pages, *range(max(1, number - 2), min(pages, number + 2) + 1)})
    for index, shown in enumerate(around):
        if index and shown - around[index - 1] > 1:
            links.append(PageLink("…", "", 0))
        links.append(
            PageLink(str(shown), _url(path, query, param, shown), shown, current=shown == number)
        )
    if number < pages:
        links.append(
            PageLink("Next →", _url(path, query, param, number + 1), number + 1, rel="next")
        )
    return links
