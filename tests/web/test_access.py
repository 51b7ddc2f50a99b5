"""Who may see a study: members see it by their role, everyone else gets 404."""

from __future__ import annotations

import pytest
from django.urls import reverse

from allocation import models as m

from .conftest import make_user

#: Every URL that belongs to one study, with its arguments after the study's number.
#: Add each new study URL here.
STUDY_URLS = {
    "study-detail": [],
    "study-download": [],
    "plan-analysis-download": ["auto"],
}


def study_url(name: str, pk: int) -> str:
    return reverse(name, args=[pk, *STUDY_URLS[name]])


@pytest.mark.parametrize("name", STUDY_URLS)
def test_non_member_gets_404_everywhere(client, study, name):
    client.force_login(make_user("stranger"))
    assert client.get(study_url(name, study.pk)).status_code == 404


@pytest.mark.parametrize("name", STUDY_URLS)
def test_missing_study_gets_the_same_404(client, study, name):
    client.force_login(study.memberships.get().user)
    assert client.get(study_url(name, study.pk + 1000)).status_code == 404


@pytest.mark.parametrize("name", STUDY_URLS)
@pytest.mark.parametrize("role", m.Role.values)
def test_every_role_can_read(client, study, member_of, name, role):
    client.force_login(member_of(role))
    assert client.get(study_url(name, study.pk)).status_code == 200


@pytest.mark.parametrize("name", STUDY_URLS)
def test_anonymous_is_sent_to_sign_in(client, study, name):
    response = client.get(study_url(name, study.pk))
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
