"""Studies whose chains are too large to analyse (``CHAIN_ENTRIES_MAX``) are refused on
every path that stores a study, and one stored before the limit shows the refusal
instead of analyses.

A chain of n tasks each with its own schedule holds n(n+1)/2 task-in-chain entries
(hand-worked: the trigger of the k-th task reaches the n - k tasks from it on).
"""

from __future__ import annotations

import json

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core import StudyInvalid, load_study
from allocation.core.limits import CHAIN_ENTRIES_MAX
from allocation.core.synthetic import long_chain_study

#: 450 tasks: 450 * 451 / 2 = 101,475 entries, just over the limit.
OVER = 450


def test_the_limit_sits_between_446_and_450_tasks_of_chain():
    assert 446 * 447 // 2 <= CHAIN_ENTRIES_MAX < OVER * (OVER + 1) // 2


def test_upload_of_too_large_chains_is_refused_and_stores_nothing(client, owner):
    client.force_login(owner)
    content = json.dumps(long_chain_study(OVER), separators=(",", ":")).encode()
    response = client.post(
        reverse("study-upload"),
        {"file": SimpleUploadedFile("chain.json", content, content_type="application/json")},
        headers={"HX-Request": "true"},
    )
    page = response.content.decode()
    assert "task-in-chain entries" in page and f"{CHAIN_ENTRIES_MAX:,}" in page
    assert "schedule:T0 (450 tasks)" in page
    assert not m.Study.objects.exists()


def test_a_link_that_joins_two_chains_past_the_limit_is_refused(owner):
    # Two chains of 225 tasks (2 * 225 * 226 / 2 = 50,850 entries) are accepted; the link
    # joining them makes one chain of 450 (101,475 entries).
    document = long_chain_study(OVER)
    document["links"] = [link for link in document["links"] if link["to"] != "T225"]
    study = services.study_import(data=document, owner=owner)
    links_before = m.Link.objects.filter(study=study).count()
    with pytest.raises(StudyInvalid) as caught:
        services.link_save(
            study=study, pk=None, item={"from": "T224", "to": "T225", "kind": "precedes"}
        )
    assert "at least 100,001 task-in-chain entries" in str(caught.value)
    assert "the limit is 100,000" in str(caught.value)
    assert m.Link.objects.filter(study=study).count() == links_before


def test_a_study_stored_before_the_limit_shows_the_refusal_not_analyses(client, owner):
    # Written as rows directly, as a study stored before the check existed would be.
    stored = load_study(long_chain_study(OVER)).study
    study = services.study_create(study=stored, owner=owner)
    client.force_login(owner)
    for name, args in (
        ("study-detail", [study.pk]),
        ("plan-analysis-download", [study.pk, "P"]),
        ("plan-export", [study.pk, "P", "csv"]),
        ("study-compare", [study.pk]),
        ("study-graph", [study.pk]),
    ):
        response = client.get(reverse(name, args=args))
        assert response.status_code in (200, 404), (name, response.status_code)
    page = client.get(reverse("study-detail", args=[study.pk])).content.decode()
    assert "task-in-chain entries" in page
