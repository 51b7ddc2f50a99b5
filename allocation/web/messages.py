"""Messages for htmx: one slot on every page, updated out of band.

``base.html`` has one messages region, ``<div id="messages">`` (a polite live region),
defined as the partial ``base.html#messages``. A full page shows the request's messages
there. An htmx response replaces only a part of the page, so
:class:`HtmxMessagesMiddleware` appends the same partial with ``hx-swap-oob`` to it: htmx
puts it into the slot wherever the main swap goes. Views therefore say what happened
with ``django.contrib.messages`` alone, whether the request came from htmx or not.

An action (any method but GET, HEAD or OPTIONS) always replaces the slot, emptied when
the action said nothing, so it never shows what an earlier action said; a read (a
filter, a picker, a poll) fills it only when it has messages, so polling does not wipe a
message before it is read.

Left alone: responses that send the browser elsewhere (``HX-Redirect``,
``HX-Location``, ``HX-Refresh``), since the next page shows the messages; error
statuses and 204, which htmx does not swap, so the messages wait for the next page;
responses whose template already showed the messages (a whole page), and anything not
HTML.
"""

from __future__ import annotations

from collections.abc import Callable

from django.contrib import messages
from django.http import HttpRequest, HttpResponse
from django.template import loader

__all__ = ["SLOT", "HtmxMessagesMiddleware", "messages_oob"]

#: The partial that is the messages slot (``id="messages"``).
SLOT = "base.html#messages"

#: Headers with which an htmx response sends the browser to another page.
_ELSEWHERE = ("HX-Redirect", "HX-Location", "HX-Refresh")

_READS = frozenset({"GET", "HEAD", "OPTIONS"})


def messages_oob(request: HttpRequest) -> str:
    """The slot with the request's messages, marked for an out-of-band swap (the
    messages are then used: they are not shown again)."""
    return loader.render_to_string(SLOT, {"messages": messages.get_messages(request), "oob": True})


def _carries_messages(request: HttpRequest, response: HttpResponse) -> bool:
    htmx = getattr(request, "htmx", None)
    if not htmx or htmx.boosted or htmx.history_restore_request:
        return False  # not htmx, or a whole page: base.html shows the messages itself
    if response.streaming or not 200 <= response.status_code < 300:
        return False
    if response.status_code == 204 or any(h in response for h in _ELSEWHERE):
        return False
    if not response.get("Content-Type", "").startswith("text/html"):
        return False
    storage = getattr(request, "_messages", None)  # set by Django's MessageMiddleware
    if storage is None or storage.used:
        return False  # the response's template has shown them already
    return request.method not in _READS or len(storage) > 0


class HtmxMessagesMiddleware:
    """Append the messages slot, out of band, to an htmx response (see the module)."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        response = self.get_response(request)
        if _carries_messages(request, response):
            response.content = response.content + messages_oob(request).encode(response.charset)
            if response.has_header("Content-Length"):
                response["Content-Length"] = str(len(response.content))
        return response
