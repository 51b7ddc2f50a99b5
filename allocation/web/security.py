"""Web-facing defences that Django does not provide by itself.

- :class:`ContentSecurityPolicyMiddleware` sets a ``Content-Security-Policy`` header on
  every response (Django 5.2 has none built in). Scripts come only from our own origin:
  htmx, plotly.js and our scripts are served locally, and the figure data travels as
  ``<script type="application/json">`` (data, never executed). Styles allow inline
  ``style`` attributes, which plotly.js and a few swatches use.
- Sign-in attempts are limited by django-axes (settings ``AXES_*``): its authentication
  backend refuses a locked sign-in before the password is checked, whichever form asks
  (Baton's or the admin's), and its database handler keeps the failures in the database,
  so the limit holds across gunicorn workers and machines. What a locked-out person sees
  is Baton's own sign-in page: :func:`sign_in_refused` is ``AXES_LOCKOUT_CALLABLE`` and
  shows :class:`SignInForm` with a message saying how long to wait.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Callable, Iterable

from axes.handlers.proxy import AxesProxyHandler
from axes.helpers import get_cool_off, get_failure_limit
from django.conf import settings
from django.contrib.auth.forms import AuthenticationForm
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.utils import timezone
from django.utils.http import url_has_allowed_host_and_scheme

__all__ = [
    "CONTENT_SECURITY_POLICY",
    "ContentSecurityPolicyMiddleware",
    "SignInForm",
    "sign_in_refused",
    "sign_in_wait",
]

#: The policy every page is served with (``BATON_CONTENT_SECURITY_POLICY`` overrides it).
CONTENT_SECURITY_POLICY = "; ".join(
    [
        "default-src 'self'",
        "script-src 'self'",
        # plotly.js sets inline styles on the elements it draws; swatches use style="…".
        "style-src 'self' 'unsafe-inline'",
        # plotly's "download as PNG" builds a data: image; its fonts are local.
        "img-src 'self' data: blob:",
        "font-src 'self'",
        "connect-src 'self'",
        "object-src 'none'",
        "base-uri 'self'",
        "form-action 'self'",
        "frame-ancestors 'none'",
    ]
)


class ContentSecurityPolicyMiddleware:
    """Add the content security policy to every response that has none yet."""

    def __init__(self, get_response: Callable[[HttpRequest], HttpResponse]) -> None:
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        response = self.get_response(request)
        policy = getattr(settings, "BATON_CONTENT_SECURITY_POLICY", CONTENT_SECURITY_POLICY)
        if policy and "Content-Security-Policy" not in response:
            response["Content-Security-Policy"] = policy
        return response


# -- sign-in attempts --------------------------------------------------------------------


def _minutes(seconds: float) -> str:
    minutes = max(1, math.ceil(seconds / 60))
    return "1 minute" if minutes == 1 else f"{minutes} minutes"


class SignInForm(AuthenticationForm):
    """Django's sign-in form with Baton's wording. A locked sign-in never reaches its
    password check: django-axes's backend refuses it first."""

    error_messages = {
        **AuthenticationForm.error_messages,
        "invalid_login": "Your user name and password did not match. Try again.",
        "locked": (
            "Too many failed sign-in attempts for this user name from this address. "
            "Sign-in is refused for %(wait)s; try again after that."
        ),
    }


class _RefusedSignInForm(SignInForm):
    """The sign-in form as a refused attempt shows it: the posted user name kept, the
    refusal as its error, and no authentication (which would count one more failure)."""

    def __init__(self, *args, wait: str, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.wait = wait

    def clean(self):
        raise ValidationError(
            self.error_messages["locked"], code="locked", params={"wait": self.wait}
        )


def _lock_ends(
    attempts: Iterable[tuple[dt.datetime, int]], limit: int, cool_off: dt.timedelta
) -> dt.datetime | None:
    """When the failures stop reaching the limit: django-axes counts the failures of the
    records touched within the cool-off, so the oldest records fall out one by one."""
    attempts = sorted(attempts)
    total = sum(failures for _, failures in attempts)
    ends = None
    for touched, failures in attempts:
        if total < limit:
            break
        ends = touched + cool_off
        total -= failures
    return ends


def sign_in_wait(request: HttpRequest, credentials: dict | None = None) -> dt.timedelta:
    """How long sign-in stays refused for this request's user name and address, read from
    django-axes's records in the database (the whole cool-off when none are found)."""
    cool_off = get_cool_off(request) or dt.timedelta(0)
    handler = AxesProxyHandler.get_implementation()
    if not hasattr(handler, "get_user_attempts"):  # a handler without database records
        return cool_off
    AxesProxyHandler.update_request(request)
    limit = get_failure_limit(request, credentials)
    ends = [
        _lock_ends(attempts.values_list("attempt_time", "failures_since_start"), limit, cool_off)
        for attempts in handler.get_user_attempts(request, credentials)
    ]
    ends = [end for end in ends if end is not None]
    if not ends:
        return cool_off
    return max(max(ends) - timezone.now(), dt.timedelta(0))


def sign_in_refused(
    request: HttpRequest,
    original_response: HttpResponse | None = None,
    credentials: dict | None = None,
) -> HttpResponse:
    """``AXES_LOCKOUT_CALLABLE``: Baton's sign-in page saying how long to wait, with
    ``Retry-After`` (the admin's sign-in shows the same page)."""
    seconds = sign_in_wait(request, credentials).total_seconds()
    form = _RefusedSignInForm(request, data=request.POST, wait=_minutes(seconds))
    form.is_valid()  # fills in the refusal
    next_url = request.POST.get("next") or request.GET.get("next") or ""
    if not url_has_allowed_host_and_scheme(
        next_url, allowed_hosts={request.get_host()}, require_https=request.is_secure()
    ):
        next_url = ""
    response = render(
        request,
        "registration/login.html",
        {"form": form, "next": next_url},
        status=getattr(settings, "AXES_HTTP_RESPONSE_CODE", 429),
    )
    response["Retry-After"] = str(max(1, math.ceil(seconds)))
    return response
