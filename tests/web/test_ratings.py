"""The workload ratings screen: recording NASA-TLX ratings by role, the scores stored
(a hand-worked check of Hart & Staveland's 1988 formula), the messages for bad input,
the audit entries, and the ratings shown beside Baton's predicted figures.

Predicted figures are checked against hand-worked values of the home-heating study
(tests/core/conftest.py): under plan "manual" the resident does T1 and T2 by hand, so the
person time per occurrence is the whole expected duration, the triangular mean
(min + typical + max) / 3 (Methods, #person-time): (2 + 5 + 30) / 3 = 12.3 s for T1,
(3 + 10 + 20) / 3 = 11 s for T2.
"""

from __future__ import annotations

import json

import pytest
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core.cautions import CAUTIONS
from allocation.core.tlx import PAIRS, SUBSCALES

HTMX = {"HTTP_HX_REQUEST": "true"}
IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}

# Worked by hand (constructed, not a published example) from the weighted score of Hart &
# Staveland (1988), sum of weight x rating / 15, and the raw score of Byers, Bittner & Hill
# (1989), the mean: ratings 70, 20, 60, 40, 65, 30 with weights 5, 0, 3, 2, 4, 1 ->
# weighted (350 + 0 + 180 + 80 + 260 + 30) / 15 = 60.0, raw 285 / 6 = 47.5.
CHECK_RATINGS = dict(zip(SUBSCALES, (70, 20, 60, 40, 65, 30), strict=True))
CHECK_TALLIES = dict(zip(SUBSCALES, (5, 0, 3, 2, 4, 1), strict=True))
# Choosing, in each pair, the subscale with the larger tally gives exactly those tallies.
CHECK_CHOICES = [max(pair, key=CHECK_TALLIES.get) for pair in PAIRS]


def page_url(study, plan="manual") -> str:
    return reverse("plan-ratings", args=[study.pk, plan])


def record_url(study, plan="manual") -> str:
    return reverse("plan-rating-record", args=[study.pk, plan])


def delete_url(study, plan="manual") -> str:
    return reverse("plan-rating-delete", args=[study.pk, plan])


def form_data(task="T2", participant="P01", weighting="pairs", **extra) -> dict[str, str]:
    data = {
        "task": task,
        "session": "Usability round 1",
        "participant": participant,
        "weighting": weighting,
        "notes": "",
        **{key: str(value) for key, value in CHECK_RATINGS.items()},
    }
    if weighting == "pairs":
        data.update({f"pair_{n}": chosen for n, chosen in enumerate(CHECK_CHOICES, start=1)})
    if weighting == "tallies":
        data.update({f"tally_{key}": str(value) for key, value in CHECK_TALLIES.items()})
    data.update(extra)
    return data


def figure(page: str, name: str) -> dict:
    return json.loads(page.split(f'id="{name}" type="application/json">')[1].split("</script>")[0])


@pytest.fixture
def as_role(client, member_of):
    def sign_in(role: str):
        client.force_login(member_of(role))
        return client

    return sign_in


def test_page_shows_predictions_a_method_note_and_the_form(as_role, study):
    page = as_role("reviewer").get(page_url(study)).content.decode()
    assert "No task has been rated under this plan yet" in page
    # Hand-worked: manual plan, person-only tasks cost their expected duration.
    assert '<tr id="compare-T1">' in page and '<tr id="compare-T2">' in page
    t2 = page.split('<tr id="compare-T2">')[1].split("</tr>")[0]
    assert "11 s" in t2 and "Resident" in t2
    # Beside it, labelled, the same at the typical duration: 10 s.
    assert "(typical 10 s)" in t2
    assert 'title="Person time per occurrence at typical durations"' in t2
    assert "Hart &amp; Staveland 1988" in page and "descriptive" in page
    assert CAUTIONS[:60] in page
    assert 'id="rating-form"' in page and "never a name" in page
    # The 15 pairs as radio pairs.
    assert page.count('type="radio" name="pair_') == 30


def test_the_tab_is_listed(as_role, study):
    page = as_role("viewer").get(reverse("study-detail", args=[study.pk])).content.decode()
    assert f'href="{page_url(study, "manual")}"' in page and "Workload ratings" in page


def test_a_viewer_sees_the_page_without_the_form_and_may_not_record(as_role, study):
    client = as_role("viewer")
    page = client.get(page_url(study)).content.decode()
    assert 'id="rating-form"' not in page
    assert "needs the reviewer role" in page
    assert client.post(record_url(study), form_data()).status_code == 403
    assert not m.WorkloadRating.objects.exists()


def test_a_reviewer_records_a_weighted_rating_from_the_fifteen_pairs(as_role, study):
    client = as_role("reviewer")
    response = client.post(record_url(study), form_data())
    assert response.status_code == 302
    assert response["Location"] == page_url(study) + "#ratings-T2"
    rating = m.WorkloadRating.objects.get()
    assert rating.score == pytest.approx(60.0)  # the hand-worked check value above
    assert rating.weights == CHECK_TALLIES and rating.ratings == CHECK_RATINGS
    assert (rating.plan_key, rating.task_key, rating.participant) == ("manual", "T2", "P01")
    entry = m.AuditEntry.objects.get(action="rating.record")
    assert entry.target == "plan manual / task T2" and entry.after["score"] == 60.0
    page = client.get(response["Location"]).content.decode()
    assert "Recorded P01&#x27;s ratings of T2: Weighted TLX 60.0." in page
    t2 = page.split('<tr id="compare-T2"')[1].split("</tr>")[0]
    # The rating beside the prediction: mean 60.0, raw 47.5, predicted 11 s.
    assert "<strong>60.0</strong>" in t2 and "47.5" in t2 and "11 s" in t2
    chart = figure(page, "figure-tlx-scatter")
    assert chart["data"][0]["x"] == [pytest.approx(11.0)] and chart["data"][0]["y"] == [60.0]
    assert chart["data"][0]["text"] == ["T2"]


def test_raw_and_tally_ratings(as_role, study):
    client = as_role("reviewer")
    client.post(record_url(study), form_data(participant="P02", weighting="raw"))
    client.post(record_url(study), form_data(participant="P03", weighting="tallies"))
    scores = dict(m.WorkloadRating.objects.values_list("participant", "score"))
    assert scores == {"P02": pytest.approx(47.5), "P03": pytest.approx(60.0)}
    assert m.WorkloadRating.objects.get(participant="P02").weights is None
    page = client.get(page_url(study)).content.decode()
    t2 = page.split('<tr id="compare-T2"')[1].split("</tr>")[0]
    # Mean of 47.5 and 60.0 is 53.75; raw mean 47.5; range 48 to 60.
    assert "<strong>53.8</strong>" in t2 and "(48–60)" in t2


def test_bad_input_names_the_subscale_and_pair_and_stores_nothing(as_role, study):
    client = as_role("reviewer")
    data = form_data(mental="120", participant="", effort="")
    del data["pair_3"]
    response = client.post(record_url(study), data)
    assert response.status_code == 400
    page = response.content.decode()
    assert "Nothing was recorded" in page
    # Every problem at once: the code, each subscale, each pair.
    assert "The participant code is required." in page
    assert "Mental demand must be from 0 to 100; got 120." in page
    assert "Effort: no rating given." in page
    assert "Pair 3 (Mental demand or Performance): choose one of the two." in page
    assert not m.WorkloadRating.objects.exists()
    assert not m.AuditEntry.objects.filter(action="rating.record").exists()
    # Weighted, with no pair answered: one message for the comparisons as a whole.
    data = form_data()
    data.update({f"pair_{n}": "" for n in range(1, 16)})
    page = client.post(record_url(study), data).content.decode()
    assert "None of the 15 pairs is answered; choose in each, or score raw." in page


def test_a_choice_outside_its_pair_is_refused(as_role, study):
    data = form_data()
    data["pair_5"] = "effort"  # pair 5 is mental demand or frustration
    page = as_role("reviewer").post(record_url(study), data).content.decode()
    assert "Select a valid choice. effort is not one of the available choices." in page
    assert not m.WorkloadRating.objects.exists()


def test_impossible_tallies_are_refused(as_role, study):
    client = as_role("reviewer")
    data = form_data(weighting="tallies")
    data.update({f"tally_{key}": v for key, v in zip(SUBSCALES, "555000", strict=True)})
    page = client.post(record_url(study), data).content.decode()
    assert "No set of 15 choices gives these tallies" in page
    assert not m.WorkloadRating.objects.exists()


def test_a_value_between_the_marks_is_kept_and_flagged(as_role, study):
    client = as_role("reviewer")
    client.post(record_url(study), form_data(temporal="62"))
    assert m.WorkloadRating.objects.get().ratings["temporal"] == 62
    page = client.get(page_url(study)).content.decode()
    assert "Between the scale's marks: Temporal demand." in page


def test_a_goal_and_a_second_rating_of_the_same_session_are_refused(as_role, study, owner):
    client = as_role("reviewer")
    assert client.post(record_url(study), form_data()).status_code == 302
    page = client.post(record_url(study), form_data()).content.decode()
    assert "P01 has already rated T2 under this plan in session" in page
    assert m.WorkloadRating.objects.count() == 1
    with pytest.raises(services.RatingRefused) as refused:
        services.rating_record(
            study=study,
            user=owner,
            plan_key="manual",
            task_key="G1",
            session="s",
            participant="P09",
            ratings=CHECK_RATINGS,
        )
    assert refused.value.errors == {"task": ["G1 is a goal; rate one of the tasks under it."]}


def test_recording_through_htmx_answers_with_the_region(as_role, study):
    client = as_role("reviewer")
    response = client.post(record_url(study, "auto"), form_data(task="T1"), **HTMX)
    page = response.content.decode()
    assert response.status_code == 200
    assert page.startswith('<div id="ratings"') and "<html" not in page
    assert "Weighted TLX 60.0" in page
    bad = client.post(record_url(study, "auto"), form_data(physical="x"), **HTMX)
    assert bad.status_code == 200 and "Enter a number." in bad.content.decode()


def test_the_plan_picker_swaps_the_region(as_role, study):
    client = as_role("viewer")
    page = client.get(page_url(study, "auto"), **HTMX).content.decode()
    assert page.startswith('<div id="ratings"') and "<html" not in page
    assert f'hx-get="{page_url(study, "manual")}"' in page
    assert f'href="{page_url(study, "manual")}"' in page


def test_markup_in_notes_is_shown_as_text(as_role, study):
    client = as_role("reviewer")
    client.post(record_url(study), form_data(notes='<script>alert("x")</script>\n<b>bold</b>'))
    page = client.get(page_url(study)).content.decode()
    assert '<script>alert("x")</script>' not in page and "<b>bold</b>" not in page
    assert "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;<br>&lt;b&gt;bold&lt;/b&gt;" in page


def test_only_editors_delete_and_the_deletion_is_audited(client, study, member_of):
    reviewer = member_of("reviewer")
    client.force_login(reviewer)
    client.post(record_url(study), form_data())
    rating = m.WorkloadRating.objects.get()
    page = client.get(page_url(study)).content.decode()
    assert delete_url(study) not in page  # no delete button below the editor role
    assert client.post(delete_url(study), {"rating": rating.pk}).status_code == 403
    client.force_login(member_of("editor"))
    assert delete_url(study) in client.get(page_url(study)).content.decode()
    response = client.post(delete_url(study), {"rating": rating.pk}, **HTMX)
    assert response.status_code == 200
    assert "Deleted P01&#x27;s ratings of T2." in response.content.decode()
    assert not m.WorkloadRating.objects.exists()
    entry = m.AuditEntry.objects.get(action="rating.delete")
    assert entry.before["participant"] == "P01" and entry.after is None
    assert client.post(delete_url(study), {"rating": rating.pk}).status_code == 404
    assert client.post(delete_url(study), {"rating": "x"}).status_code == 404


def test_a_rating_of_another_study_cannot_be_deleted(client, study, owner, heating_document):
    heating_document["study"]["id"] = "other"
    other = services.study_import(data=heating_document, owner=owner)
    services.rating_record(
        study=other,
        user=owner,
        plan_key="manual",
        task_key="T2",
        session="s",
        participant="P01",
        ratings=CHECK_RATINGS,
    )
    client.force_login(owner)
    foreign = m.WorkloadRating.objects.get(study=other)
    assert client.post(delete_url(study), {"rating": foreign.pk}).status_code == 404
    assert m.WorkloadRating.objects.filter(pk=foreign.pk).exists()


def test_simulated_channel_peaks_from_a_finished_run(as_role, study, owner, settings):
    settings.TASKS = IMMEDIATE
    client = as_role("viewer")
    assert "No finished simulation of this plan" in client.get(page_url(study)).content.decode()
    run = services.simulation_request(study=study, plan_key="manual", days=3, seed=2, user=owner)
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE
    page = client.get(page_url(study)).content.decode()
    assert "From the simulation of 3 days with seed 2" in page
    peak = run.result["summary"]["people"]["resident"]["peak_visual"]
    # At the registry's precision for a peak demand (one decimal).
    assert f"{peak['mean']:.1f} · {peak['p95']:.1f}" in page


def test_the_service_checks_the_role_itself(study, member_of):
    """A viewer is refused by the service too, not only by the view."""
    from django.core.exceptions import PermissionDenied

    with pytest.raises(PermissionDenied, match="reviewer role"):
        services.rating_record(
            study=study,
            user=member_of("viewer"),
            plan_key="manual",
            task_key="T2",
            session="s",
            participant="P01",
            ratings=CHECK_RATINGS,
        )
    assert not m.WorkloadRating.objects.exists()
