"""What a request answers when the database goes away under it.

Every service writes inside one ``transaction.atomic``, so a database error raised halfway
through a write rolls the whole write back: nothing is half-stored. What is left is to
tell the person so, instead of a bare "Server Error": :class:`DatabaseUnavailableMiddleware`
turns a ``django.db.OperationalError`` or ``InterfaceError`` raised by a view into a 503
page saying that the database could not be reached, that nothing was saved and that they
may try again; :func:`allocation.web.errors.server_error` (``handler500``) does the same
for one raised outside the views (in a middleware, or while a response is finished).

The pages never show a stack trace or the error's text (which may name the database's
address); the error goes to the log with its traceback for the operator.
"""

from __future__ import annotations

import contextlib
import logging
from collections.abc import Callable

from django.contrib import messages
from django.db import InterfaceError, OperationalError
from django.http import HttpRequest, HttpResponse
from django.template import loader
from django_htmx.http import HttpResponseClientRefresh

__all__ = [
    "DATABASE_ERRORS",
    "UNAVAILABLE_MESSAGE",
    "DatabaseUnavailableMiddleware",
    "unavailable_response",
]

logger = logging.getLogger("allocation.web.faults")

#: The errors that mean "the database could not be reached or gave up", as opposed to a
#: refused value (``IntegrityError``, ``DataError``), which is a fault in the code.
DATABASE_ERRORS = (OperationalError, InterfaceError)

UNAVAILABLE_MESSAGE = "The database could not be reached; nothing was saved; try again."

#: Seconds a client may wait before trying again (the ``Retry-After`` header).
RETRY_AFTER_S = 30


def unavailable_response(request: HttpRequest | None, error: BaseException) -> HttpResponse:
    """The 503 answer to a request whose database went away.

    The page is rendered without the request's context: the context processors would
    ask the database (the signed-in user, the session) and fail again. An htmx request
    gets the same page and an instruction to reload the whole page, since htmx swaps
    nothing from an error status; the message travels in the message cookie, so the
    reloaded page says what happened even when the database is back by then.
    """
    logger.error(
        "database unavailable during %s %s",
        getattr(request, "method", "?"),
        getattr(request, "path", "?"),
        exc_info=(type(error), error, error.__traceback__),
    )
    content = loader.get_template("503.html").render({"message": UNAVAILABLE_MESSAGE})
    htmx = getattr(request, "htmx", None)
    if request is not None and htmx:
        response: HttpResponse = HttpResponseClientRefresh()
        response.content = content.encode()
        response["Content-Type"] = "text/html; charset=utf-8"
        _add_message(request)
    else:
        response = HttpResponse(content)
    response.status_code = 503
    response["Retry-After"] = str(RETRY_AFTER_S)
    # Never keep an answer that only holds while the database is away.
    response["Cache-Control"] = "no-store"
    return response


def _add_message(request: HttpRequest) -> None:
    # Without the message middleware (a bare request) the page alone has to say it.
    with contextlib.suppress(messages.MessageFailure):
        messages.error(request, UNAVAILABLE_MESSAGE)


class DatabaseUnavailableMiddleware:
    """Answer a database error raised in a view with the 503 page (see the module)."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        return self.get_response(request)

    def process_exception(self, request: HttpRequest, exception: Exception) -> HttpResponse | None:
        if isinstance(exception, DATABASE_ERRORS):
            return unavailable_response(request, exception)
        return None
