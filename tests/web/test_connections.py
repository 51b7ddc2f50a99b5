"""Kept database connections after a database restart: each is checked before its first
use in a request, so a connection the server dropped is replaced and the request
succeeds; a database that cannot be reached at all still gets the 503 page.

On PostgreSQL only (CI runs tests/web on it): the server itself ends the connection
(``pg_terminate_backend``, as a restart or an administrator does), and requests go
through Django's WSGI handler (``request_started`` resets the per-request check, as
under gunicorn; the test client skips that signal). The reference is the server's own
process id of the connection, before and after (``pg_backend_pid``).
"""

from __future__ import annotations

import io
import sys
from wsgiref.util import setup_testing_defaults

import pytest
from django.core.handlers.wsgi import WSGIHandler
from django.db import OperationalError, connection, connections
from django.test import Client
from django.urls import reverse

from allocation import services
from allocation.web import faults
from tests.web.conftest import make_user

pytestmark = pytest.mark.django_db(transaction=True)


@pytest.fixture(autouse=True)
def _postgresql():
    if connection.vendor != "postgresql":
        pytest.skip("the server ends the connection: needs PostgreSQL (DATABASE_URL)")


def wsgi_get(path: str, cookie: str) -> tuple[int, str]:
    """GET ``path`` through Django's WSGI handler, as gunicorn calls it."""
    environ = {
        "PATH_INFO": path,
        "REQUEST_METHOD": "GET",
        "HTTP_HOST": "testserver",
        "HTTP_COOKIE": cookie,
        "wsgi.input": io.BytesIO(),
        "wsgi.errors": sys.stderr,
    }
    setup_testing_defaults(environ)
    answer: list[str] = []
    body = WSGIHandler()(environ, lambda status, headers: answer.append(status))
    text = b"".join(body).decode()
    body.close()
    return int(answer[0].split()[0]), text


def backend_pid() -> int:
    with connection.cursor() as cursor:
        cursor.execute("SELECT pg_backend_pid()")
        return cursor.fetchone()[0]


def end_backend(pid: int) -> None:
    """End server process ``pid`` from a second connection, as a restart would."""
    other = connections.create_connection("default")
    try:
        with other.cursor() as cursor:
            cursor.execute("SELECT pg_terminate_backend(%s)", [pid])
            assert cursor.fetchone()[0] is True
    finally:
        other.close()


@pytest.fixture
def signed_in(heating_document):
    """A study page and the session cookie of its owner."""
    owner = make_user("olive")
    study = services.study_import(data=heating_document, owner=owner)
    client = Client()
    client.force_login(owner)
    cookie = f"sessionid={client.cookies['sessionid'].value}"
    return reverse("study-detail", args=[study.pk]), cookie


def test_a_connection_the_server_ended_is_replaced_before_the_request(signed_in):
    page, cookie = signed_in
    assert wsgi_get(page, cookie)[0] == 200
    before = backend_pid()  # the kept connection the request used
    end_backend(before)
    status, _ = wsgi_get(page, cookie)
    assert status == 200
    assert backend_pid() != before


def test_without_the_check_the_same_request_gets_the_503_page(signed_in):
    """What the check prevents: the first request on the dropped connection fails."""
    page, cookie = signed_in
    assert wsgi_get(page, cookie)[0] == 200
    connection.health_check_enabled = False
    try:
        end_backend(backend_pid())
        status, text = wsgi_get(page, cookie)
    finally:
        connection.health_check_enabled = True
    assert status == 503 and faults.UNAVAILABLE_MESSAGE in text
    # The broken connection is closed at the end of that request; the next one works.
    assert wsgi_get(page, cookie)[0] == 200


def test_a_database_that_cannot_be_reached_still_gets_the_503_page(signed_in, monkeypatch):
    page, cookie = signed_in
    assert wsgi_get(page, cookie)[0] == 200
    end_backend(backend_pid())

    def refused(*args, **kwargs):
        raise OperationalError('connection to server at "127.0.0.1" failed: Connection refused')

    monkeypatch.setattr(connection, "get_new_connection", refused)
    status, text = wsgi_get(page, cookie)
    assert status == 503 and faults.UNAVAILABLE_MESSAGE in text
    monkeypatch.undo()
    assert wsgi_get(page, cookie)[0] == 200
