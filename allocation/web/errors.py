"""The server's error page (``handler500``): a friendly page, never a stack trace."""

from __future__ import annotations

import sys

from django.http import HttpRequest, HttpResponse, HttpResponseServerError
from django.template import loader

from allocation.web.faults import DATABASE_ERRORS, unavailable_response


def server_error(request: HttpRequest) -> HttpResponse:
    """Answer an error no view handled.

    Django calls this inside its ``except`` block, so the error is still at hand: a
    database that went away (raised in a middleware, or while the response was being
    finished) gets the 503 page of :mod:`allocation.web.faults`; anything else the plain 500
    page. Neither needs the database: both are rendered without the request's context.
    """
    error = sys.exc_info()[1]
    if isinstance(error, DATABASE_ERRORS):
        return unavailable_response(request, error)
    return HttpResponseServerError(loader.get_template("500.html").render({}))
