"""Web-facing defences that Django does not provide by itself.

- :class:`ContentSecurityPolicyMiddleware` sets a ``Content-Security-Policy`` header on
  every response (Django 5.2 has none built in). Scripts come only from our own origin:
  htmx, plotly.js and our scripts are served locally, and the figure data travels as
  ``<script type="application/json">`` (data, never executed). Styles allow inline
  ``style`` attributes, which plotly.js and a few swatches use.
- Sign-in throttling: after ``BATON_SIGN_IN_LIMIT`` failed attempts for one user name, or
  from one client address, within ``BATON_SIGN_IN_WINDOW_S`` seconds, further attempts
  are refused for ``BATON_SIGN_IN_LOCKOUT_S`` seconds. Counts live in Django's default
  cache (per process with the local-memory cache; share a cache between workers to make
  the limit global). :class:`SignInForm` refuses a locked sign-in with a clear message
  before checking the password; the ``user_login_failed`` signal counts every failure
  (the admin's sign-in too) and :class:`ThrottledModelBackend` refuses authentication
  while locked, whichever form asks.
"""

from __future__ import annotations

import hashlib
import math
import time
from collections.abc import Callable

from django.conf import settings
from django.contrib.auth import user_logged_in, user_login_failed
from django.contrib.auth.backends import ModelBackend
from django.contrib.auth.forms import AuthenticationForm
from django.core.cache import cache
from django.core.exceptions import ValidationError
from django.dispatch import receiver
from django.http import HttpRequest, HttpResponse

__all__ = [
    "CONTENT_SECURITY_POLICY",
    "ContentSecurityPolicyMiddleware",
    "SignInForm",
    "ThrottledModelBackend",
    "sign_in_failed",
    "sign_in_locked",
    "sign_in_succeeded",
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


# -- sign-in throttling ------------------------------------------------------------------


def _limit() -> int:
    return getattr(settings, "BATON_SIGN_IN_LIMIT", 5)


def _window_s() -> int:
    return getattr(settings, "BATON_SIGN_IN_WINDOW_S", 15 * 60)


def _lockout_s() -> int:
    return getattr(settings, "BATON_SIGN_IN_LOCKOUT_S", 15 * 60)


def _keys(username: str | None, address: str | None) -> list[str]:
    # Hashed so that any user name (spaces, long, unicode) makes a valid cache key.
    keys = []
    if username:
        digest = hashlib.sha256(username.strip().casefold().encode()).hexdigest()
        keys.append(f"baton:sign-in:user:{digest}")
    if address:
        keys.append(f"baton:sign-in:addr:{hashlib.sha256(address.encode()).hexdigest()}")
    return keys


def client_address(request: HttpRequest | None) -> str | None:
    """The address the request came from: ``REMOTE_ADDR``, or behind ``BATON_PROXY_HOPS``
    trusted proxies the entry of ``X-Forwarded-For`` the outermost of them added (the
    entries before it are whatever the client sent, so they are never trusted)."""
    if request is None:
        return None
    hops = getattr(settings, "BATON_PROXY_HOPS", 0)
    forwarded = [part.strip() for part in request.META.get("HTTP_X_FORWARDED_FOR", "").split(",")]
    forwarded = [part for part in forwarded if part]
    if hops and len(forwarded) >= hops:
        return forwarded[-hops]
    return request.META.get("REMOTE_ADDR") or None


def sign_in_locked(username: str | None, address: str | None) -> int:
    """Seconds until sign-in for this user name or from this address is allowed again
    (0 when it is allowed now)."""
    now = time.time()
    until = [cache.get(f"{key}:locked") for key in _keys(username, address)]
    left = max([u - now for u in until if u is not None], default=0)
    return math.ceil(left) if left > 0 else 0


def sign_in_failed(username: str | None, address: str | None) -> None:
    """Count one failed attempt; the attempt that reaches the limit starts the lockout."""
    for key in _keys(username, address):
        cache.add(f"{key}:failures", 0, timeout=_window_s())
        try:
            failures = cache.incr(f"{key}:failures")
        except ValueError:  # expired between add and incr: this is the first of a new window
            cache.set(f"{key}:failures", 1, timeout=_window_s())
            failures = 1
        if failures >= _limit():
            cache.set(f"{key}:locked", time.time() + _lockout_s(), timeout=_lockout_s())
            cache.delete(f"{key}:failures")


def sign_in_succeeded(username: str | None) -> None:
    """Forget the user name's failures. The address's count is kept: otherwise one client
    could try names without end by signing in to its own account between guesses."""
    for key in _keys(username, None):
        cache.delete_many([f"{key}:failures", f"{key}:locked"])


def _minutes(seconds: int) -> str:
    minutes = max(1, math.ceil(seconds / 60))
    return "1 minute" if minutes == 1 else f"{minutes} minutes"


class SignInForm(AuthenticationForm):
    """Django's sign-in form, refusing at once (password unchecked) while locked out."""

    error_messages = {
        **AuthenticationForm.error_messages,
        "invalid_login": "Your user name and password did not match. Try again.",
        "locked": (
            "Too many failed sign-in attempts for this user name or from this address. "
            "Sign-in is refused for %(wait)s; try again after that."
        ),
    }

    def clean(self):
        username = self.cleaned_data.get("username")
        wait = sign_in_locked(username, client_address(self.request))
        if wait:
            raise ValidationError(
                self.error_messages["locked"], code="locked", params={"wait": _minutes(wait)}
            )
        return super().clean()


class ThrottledModelBackend(ModelBackend):
    """The model backend, refusing every sign-in while the name or address is locked."""

    def authenticate(self, request, username=None, password=None, **kwargs):
        if username is None:
            username = kwargs.get(self.user_model_username_field())
        if sign_in_locked(username, client_address(request)):
            return None
        return super().authenticate(request, username=username, password=password, **kwargs)

    @staticmethod
    def user_model_username_field() -> str:
        from django.contrib.auth import get_user_model

        return get_user_model().USERNAME_FIELD


@receiver(user_login_failed, dispatch_uid="baton-sign-in-failed")
def _count_failure(sender, credentials, request=None, **kwargs) -> None:
    from django.contrib.auth import get_user_model

    username = credentials.get(get_user_model().USERNAME_FIELD) or credentials.get("username")
    sign_in_failed(username, client_address(request))


@receiver(user_logged_in, dispatch_uid="baton-sign-in-succeeded")
def _reset_failures(sender, request, user, **kwargs) -> None:
    sign_in_succeeded(user.get_username())
