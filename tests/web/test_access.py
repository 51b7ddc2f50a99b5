"""Who may see a study: members see it by their role, everyone else gets 404.

Every URL under ``studies/<pk>/`` is found in the URL configuration itself, so a new
screen is covered the moment it is routed. Its other arguments take sample values from
``SAMPLE_ARGUMENTS`` (the home-heating study of the fixtures).
"""

from __future__ import annotations

import pytest
from django.urls import URLPattern, URLResolver, get_resolver, reverse

from allocation import models as m

from .conftest import make_user

#: Values for the URL arguments other than the study's number.
SAMPLE_ARGUMENTS = {
    "plan": "auto",
    "task": "T2",
    "agent": "resident",
    "event": "leave",
    "mode": "hold",
    "kind": "tasks",
    "key": "T2",
    "transition": "0",
    "finding": 0,
    "number": 0,
    "fmt": "csv",
}


def study_url_names() -> list[str]:
    """The names of every routed URL that belongs to one study."""
    names = []

    def walk(patterns, prefix: str) -> None:
        for pattern in patterns:
            route = prefix + str(pattern.pattern)
            if isinstance(pattern, URLResolver):
                walk(pattern.url_patterns, route)
            elif (
                isinstance(pattern, URLPattern)
                and pattern.name
                and route.startswith("studies/<int:pk>/")
            ):
                names.append(pattern.name)

    walk(get_resolver().url_patterns, "")
    return sorted(set(names))


STUDY_URLS = study_url_names()


def study_url(name: str, pk: int) -> str:
    pattern = get_resolver().reverse_dict.getlist(name)[0]
    arguments = pattern[0][0][1]
    kwargs = {arg: pk if arg == "pk" else SAMPLE_ARGUMENTS[arg] for arg in arguments}
    if "link" in kwargs or "row" in kwargs:
        pytest.skip(f"{name} needs a row number")
    return reverse(name, kwargs=kwargs)


def fetch(client, url: str):
    """GET the URL; a POST-only URL answers 405 to GET, so POST to it instead."""
    response = client.get(url)
    if response.status_code == 405:
        response = client.post(url, {})
    return response


def test_study_urls_are_found():
    assert {"study-detail", "study-download", "plan-analysis-download"} <= set(STUDY_URLS)


@pytest.mark.parametrize("name", STUDY_URLS)
def test_non_member_gets_404_everywhere(client, study, name):
    client.force_login(make_user("stranger"))
    assert fetch(client, study_url(name, study.pk)).status_code == 404


@pytest.mark.parametrize("name", STUDY_URLS)
def test_missing_study_gets_the_same_404(client, study, name):
    client.force_login(study.memberships.get().user)
    assert fetch(client, study_url(name, study.pk + 1000)).status_code == 404


@pytest.mark.parametrize("name", STUDY_URLS)
@pytest.mark.parametrize("role", m.Role.values)
def test_every_member_reaches_every_url_by_role(client, study, member_of, name, role):
    """Members never get 404; editing screens answer 403 below the editor role."""
    client.force_login(member_of(role))
    response = client.get(study_url(name, study.pk))
    if m.Role.rank(role) >= m.Role.rank(m.Role.EDITOR):
        assert response.status_code in (200, 405)
    else:
        assert response.status_code in (200, 403, 405)


@pytest.mark.parametrize("name", STUDY_URLS)
def test_anonymous_is_sent_to_sign_in(client, study, name):
    response = fetch(client, study_url(name, study.pk))
    assert response.status_code == 302
    assert response["Location"].startswith(reverse("login"))


def test_study_list_shows_only_own_studies(client, study):
    stranger = make_user("stranger")
    client.force_login(stranger)
    page = client.get(reverse("study-list")).content.decode()
    assert "Home heating schedule" not in page
    client.force_login(study.memberships.get().user)
    page = client.get(reverse("study-list")).content.decode()
    assert "Home heating schedule" in page


def test_study_list_query_count_is_fixed(
    client, owner, heating_document, django_assert_max_num_queries
):
    """The list page costs the same queries for one study as for five."""
    from allocation import services

    client.force_login(owner)
    for index in range(5):
        heating_document["study"]["id"] = f"heating-{index}"
        services.study_import(data=heating_document, owner=owner)
    with django_assert_max_num_queries(4):
        client.get(reverse("study-list"))
