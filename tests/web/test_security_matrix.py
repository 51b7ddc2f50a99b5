"""Who may do what: every routed URL x role x method against one table of expectations,
and CSRF on every form.

The URLs are found in the URL configuration itself (as ``test_access.py`` does), so a
new route fails here until its line is added to the table. The expectations follow the
access rules of DEVELOPERS.md ("Access"): anonymous visitors are sent to sign in,
non-members get 404 (as for a study that does not exist), members below the role a URL
needs get 403, and a method a URL does not take answers 405 before anything else.
Django's own account and admin pages follow Django's documented behaviour.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import pytest
from django.contrib.auth import get_user_model
from django.test import Client
from django.urls import URLPattern, URLResolver, get_resolver, reverse

from allocation import models as m
from allocation import services
from tests.core.conftest import HOME_HEATING

from .test_access import SAMPLE_ARGUMENTS

REPO = Path(__file__).resolve().parents[2]
ROLES = ("anonymous", "non-member", "viewer", "reviewer", "editor", "owner")
METHODS = ("GET", "POST")
V, R, E = m.Role.VIEWER, m.Role.REVIEWER, m.Role.EDITOR

#: Every study URL: the lowest role that may GET it and that may POST to it (None: the
#: URL does not take the method, 405). Simulation runs are computations on the stored
#: study, not changes to it, so any member may ask for one.
STUDY_RULES: dict[str, tuple[str | None, str | None]] = {
    "study-detail": (V, None),
    "study-download": (V, None),
    "plan-analysis-download": (V, None),
    "plan-export": (V, None),
    "study-exports": (V, None),
    "study-inventory": (V, None),
    "inventory-item": (E, E),
    "inventory-delete": (E, E),
    "plan-new": (None, E),
    "plan-editor": (V, None),
    "plan-bulk": (None, E),
    "plan-row-save": (V, E),  # GET: the row as stored (after a conflict)
    "plan-modes": (V, None),
    "mode-map-delete": (None, E),
    "mode-edit": (E, E),
    "mode-delete": (None, E),
    "mode-initial": (None, E),
    "mode-override-pick": (E, None),
    "mode-override": (E, E),
    "transition-edit": (E, E),
    "transition-delete": (None, E),
    "mode-finding": (V, None),
    "handover-steps": (V, None),
    "plan-simulation": (V, None),
    "plan-simulation-run": (None, V),
    "plan-simulation-status": (V, None),
    "plan-simulation-cancel": (None, V),
    "plan-simulation-restart": (None, V),
    "study-simulation-compare": (V, None),
    "study-compare": (V, None),
    "study-compare-weights": (None, E),
    "study-compare-reference": (None, E),
    "plan-dashboard": (V, None),
    "plan-ratings": (V, None),
    "plan-rating-record": (None, R),
    "plan-rating-delete": (None, E),
    "study-assumptions": (V, None),
    "study-assumption-set": (None, E),
    "study-assumption-reset": (None, E),
    "study-risk-policy-set": (None, E),
    "study-risk-policy-reset": (None, E),
    "plan-review": (V, None),
    "review-comment": (None, R),
    "review-resolve": (None, R),
    "review-decide": (None, E),
    "review-decision-status": (None, E),
    "plan-workshop": (V, None),
    "study-graph": (V, None),
    "graph-task": (V, None),
    "study-history": (V, None),
    "study-history-csv": (V, None),
    "study-history-json": (V, None),
    "study-snapshots": (V, None),
    "snapshot-create": (None, E),
    "snapshot-verify": (V, None),
    "snapshot-restore": (None, E),
    "snapshot-difference": (V, None),
    "plan-import": (E, None),
    "plan-import-upload": (None, E),
    "plan-import-apply": (None, E),
    "plan-import-discard": (None, E),
}

LOGIN = "login"  # a 302 to the sign-in page
ADMIN_LOGIN = "admin-login"  # a 302 to the admin's sign-in page
OK = "ok"  # accepted: not 403, 404, 405 nor a server error

#: URLs outside a study: (GET, POST) for anonymous visitors and for anyone signed in.
#: Only staff may use the admin, and no study role makes anyone staff.
OTHER_RULES: dict[str, dict[str, tuple[object, object]]] = {
    "study-list": {"anonymous": (LOGIN, 405), "signed-in": (200, 405)},
    "methods": {"anonymous": (LOGIN, 405), "signed-in": (200, 405)},
    "study-upload": {"anonymous": (405, LOGIN), "signed-in": (405, OK)},
    "study-new": {"anonymous": (405, LOGIN), "signed-in": (405, OK)},
    "login": {"anonymous": (200, 200), "signed-in": (200, 200)},
    "logout": {"anonymous": (405, 302), "signed-in": (405, 302)},
    "password_change": {"anonymous": (LOGIN, LOGIN), "signed-in": (200, 200)},
    "password_change_done": {"anonymous": (LOGIN, LOGIN), "signed-in": (200, 405)},
    "admin:login": {"anonymous": (200, 200), "signed-in": (200, 200)},
    # The admin sends someone who is not staff from its sign-out back to its index.
    "admin:logout": {"anonymous": (302, 302), "signed-in": (302, 302)},
}
ADMIN_DEFAULT = {"anonymous": (ADMIN_LOGIN, ADMIN_LOGIN), "signed-in": (ADMIN_LOGIN, ADMIN_LOGIN)}

#: Sample values for the arguments of Django's own URLs (the admin's and the accounts').
OTHER_ARGUMENTS = {
    "uidb64": "MQ",
    "token": "set-password",
    "object_id": "1",
    "id": "1",
    "content_type_id": "1",
    "app_label": "allocation",
}


def routed_urls() -> dict[str, str]:
    """Every named, routed URL (namespaced as ``admin:…``) with its route."""
    found: dict[str, str] = {}

    def walk(patterns, prefix: str, namespace: str) -> None:
        for pattern in patterns:
            route = prefix + str(pattern.pattern)
            if isinstance(pattern, URLResolver):
                inner = pattern.namespace or ""
                walk(pattern.url_patterns, route, f"{namespace}{inner}:" if inner else namespace)
            elif isinstance(pattern, URLPattern) and pattern.name:
                found.setdefault(namespace + pattern.name, route)

    walk(get_resolver().url_patterns, "", "")
    return found


ROUTES = routed_urls()
STUDY_NAMES = sorted(
    name for name, route in ROUTES.items() if route.startswith("studies/<int:pk>/")
)
OTHER_NAMES = sorted(set(ROUTES) - set(STUDY_NAMES))


def url_for(name: str, pk: int) -> str:
    arguments = re.findall(r"<(?:\w+:)?(\w+)>|\(\?P<(\w+)>", ROUTES[name])
    kwargs = {}
    for plain, regex in arguments:
        arg = plain or regex
        if arg == "pk":
            kwargs[arg] = pk
        else:
            kwargs[arg] = SAMPLE_ARGUMENTS.get(arg, OTHER_ARGUMENTS.get(arg))
    return reverse(name, kwargs=kwargs)


def expected(name: str, role: str, method: str) -> object:
    """The status (or LOGIN / ADMIN_LOGIN / OK) the table allows."""
    index = METHODS.index(method)
    if name in STUDY_RULES:
        needed = STUDY_RULES[name][index]
        if needed is None:
            return 405
        if role == "anonymous":
            return LOGIN
        if role == "non-member":
            return 404
        if m.Role.rank(role) < m.Role.rank(needed):
            return 403
        return 200 if method == "GET" else OK
    rules = OTHER_RULES.get(name, ADMIN_DEFAULT if name.startswith("admin:") else None)
    assert rules is not None, f"{name} is routed but has no line in OTHER_RULES"
    return rules["anonymous" if role == "anonymous" else "signed-in"][index]


@dataclass
class World:
    """One small study and one user per role, made once for the whole module; each test
    runs in a transaction that is rolled back, so whatever a POST changes is undone."""

    pk: int
    users: dict[str, object]
    rating: int


@pytest.fixture(scope="module")
def world(django_db_setup, django_db_blocker):
    import copy

    with django_db_blocker.unblock():
        users_model = get_user_model()
        made = {role: users_model.objects.create_user(f"matrix-{role}") for role in ROLES[1:]}
        study = services.study_import(data=copy.deepcopy(HOME_HEATING), owner=made["owner"])
        for role in ("viewer", "reviewer", "editor"):
            m.Membership.objects.create(study=study, user=made[role], role=role)
        rating = services.rating_record(
            study=study,
            user=made["reviewer"],
            plan_key="auto",
            task_key="T2",
            session="matrix",
            participant="P1",
            ratings={
                "mental": 50,
                "physical": 10,
                "temporal": 30,
                "performance": 20,
                "effort": 40,
                "frustration": 10,
            },  # fmt: skip
        )
    yield World(study.pk, {"anonymous": None, **made}, rating.pk)
    with django_db_blocker.unblock():
        m.Study.objects.filter(pk=study.pk).delete()
        m.AuditEntry.objects.filter(study_key=study.key).delete()
        users_model.objects.filter(pk__in=[user.pk for user in made.values()]).delete()


#: Bodies for POSTs that name an existing object (else the answer is a fair 404).
POST_BODIES = {"plan-rating-delete": lambda world: {"rating": world.rating}}


def test_every_route_has_a_line_in_the_table():
    assert set(STUDY_NAMES) == set(STUDY_RULES), "add new study URLs to STUDY_RULES"
    assert not set(OTHER_RULES) - set(OTHER_NAMES), "OTHER_RULES names a URL that is gone"


CASES = [
    (name, role, method)
    for name in sorted(ROUTES)
    for role in ROLES
    for method in METHODS
    if name in STUDY_RULES or not ROUTES[name].startswith("studies/<int:pk>/")
]


@pytest.mark.parametrize(("name", "role", "method"), CASES)
def test_matrix(db, world, name, role, method):
    client = Client()
    user = world.users[role]
    if user is not None:
        client.force_login(user)
    url = url_for(name, world.pk)
    body = POST_BODIES.get(name, lambda world: {})(world)
    response = client.get(url) if method == "GET" else client.post(url, body)
    want = expected(name, role, method)
    status = response.status_code
    where = f"{method} {url} as {role}"
    if want == LOGIN:
        assert status == 302, where
        assert response["Location"].startswith(reverse("login")), where
    elif want == ADMIN_LOGIN:
        assert status == 302, where
        assert response["Location"].startswith(reverse("admin:login")), where
    elif want == OK:
        assert status < 500 and status not in (403, 404, 405), f"{where}: {status}"
    else:
        assert status == want, f"{where}: {status}, expected {want}"


def test_the_matrix_covers_every_role_and_method():
    """The count quoted in the report: routed URLs x six roles x two methods."""
    assert len(CASES) == len(ROUTES) * len(ROLES) * len(METHODS)


# -- CSRF ------------------------------------------------------------------------------


POST_NAMES = sorted(
    [name for name, (_get, post) in STUDY_RULES.items() if post is not None]
    + [name for name in OTHER_NAMES if expected(name, "owner", "POST") != 405]
)


@pytest.mark.parametrize("name", POST_NAMES)
def test_post_without_csrf_token_is_refused(db, world, name):
    """With CSRF checks on, a POST without the token is refused (403) for every URL that
    takes POSTs, by the owner who may otherwise do everything."""
    client = Client(enforce_csrf_checks=True)
    client.force_login(world.users["owner"])
    before = m.AuditEntry.objects.count()
    response = client.post(url_for(name, world.pk), POST_BODIES.get(name, lambda w: {})(world))
    assert response.status_code == 403, name
    assert m.AuditEntry.objects.count() == before  # nothing was done


def test_post_with_the_csrf_token_is_accepted(db, world):
    """The converse: the same client sending the token from the page gets through."""
    client = Client(enforce_csrf_checks=True)
    client.force_login(world.users["owner"])
    client.get(reverse("study-detail", args=[world.pk]))
    token = client.cookies["csrftoken"].value
    url = reverse("snapshot-create", args=[world.pk])
    response = client.post(url, {"title": "with token"}, headers={"X-CSRFToken": token})
    assert response.status_code not in (403, 404, 405) and response.status_code < 500


FORM = re.compile(r"<form\b[^>]*>.*?</form>", re.S | re.I)


def test_every_post_form_carries_the_csrf_token():
    """Every <form method="post"> in the templates has {% csrf_token %}; htmx requests
    send the token in the X-CSRFToken header set on <body> in base.html."""
    templates = sorted((REPO / "templates").rglob("*.html"))
    missing = []
    forms = 0
    for path in templates:
        for form in FORM.findall(path.read_text()):
            opening = form.split(">", 1)[0]
            if re.search(r"method=[\"']?post", opening, re.I):
                forms += 1
                if "{% csrf_token %}" not in form:
                    missing.append(f"{path.relative_to(REPO)}: {opening[:80]}")
    assert forms >= 30 and not missing, missing
    base = (REPO / "templates" / "base.html").read_text()
    assert """hx-headers='{"X-CSRFToken": "{{ csrf_token }}"}'""" in base
