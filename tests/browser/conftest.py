"""Browser tests: Playwright driving Debian's Chromium against a live test server.

The browser is the system's (``/usr/bin/chromium``); no browser is downloaded. Without it
these tests skip locally, but under CI (``CI`` set) a missing browser is a failure.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

CHROMIUM = Path(os.environ.get("BATON_CHROMIUM", "/usr/bin/chromium"))


@pytest.fixture(scope="session")
def browser():
    if not CHROMIUM.exists():
        if os.environ.get("CI"):
            pytest.fail(f"{CHROMIUM} is missing: .ci/run installs Debian's chromium")
        pytest.skip(f"{CHROMIUM} is not installed")
    from playwright.sync_api import sync_playwright

    # Playwright's sync API runs an event loop in this thread; the ORM calls the tests
    # make themselves (fixtures) are still synchronous and safe here.
    os.environ["DJANGO_ALLOW_ASYNC_UNSAFE"] = "true"
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(
            executable_path=str(CHROMIUM),
            args=[
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
            ],
        )
        yield browser
        browser.close()
    del os.environ["DJANGO_ALLOW_ASYNC_UNSAFE"]


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1400, "height": 1000})
    page = context.new_page()
    errors: list[str] = []
    page.on("pageerror", lambda error: errors.append(str(error)))
    page.javascript_errors = errors
    yield page
    context.close()


@pytest.fixture
def signed_in(page, live_server, django_user_model):
    """A page signed in as a fresh user (who owns nothing yet)."""
    django_user_model.objects.create_user("walker", password="a long test password 7")
    page.goto(f"{live_server.url}/accounts/login/")
    page.fill("input[name=username]", "walker")
    page.fill("input[name=password]", "a long test password 7")
    page.click("button[type=submit]")
    page.wait_for_url(f"{live_server.url}/")
    page.base = live_server.url
    return page
