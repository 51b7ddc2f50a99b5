"""Who changes things during a request: the signed-in user, through a screen or the admin.

Every change a request makes is recorded in the audit trail under this actor
(:mod:`allocation.audit`); the source is ``admin`` under the admin's address and
``screen`` everywhere else.
"""

from __future__ import annotations

from collections.abc import Callable

from django.http import HttpRequest, HttpResponse
from django.urls import reverse

from allocation import audit
from allocation import models as m


def _admin_prefix() -> str:
    # Resolved per request (cheap): the admin's address is whatever urls.py routes.
    return reverse("admin:index")


class AuditActorMiddleware:
    """Wrap each request in :func:`allocation.audit.acting` (after authentication)."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        admin = request.path.startswith(_admin_prefix())
        source = m.AuditSource.ADMIN if admin else m.AuditSource.SCREEN
        with audit.acting(getattr(request, "user", None), source):
            return self.get_response(request)
