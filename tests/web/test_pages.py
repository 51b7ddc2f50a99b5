"""The pages as a person sees them: full pages and the htmx upload fragment."""

from __future__ import annotations

import json

from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from allocation import models as m
from allocation.core.cautions import CAUTIONS


def upload(name: str, content: bytes) -> SimpleUploadedFile:
    return SimpleUploadedFile(name, content, content_type="application/json")


def test_sign_in_page_shows_cautions(client, db):
    page = client.get(reverse("login")).content.decode()
    assert "Sign in" in page and CAUTIONS[:60] in page


def test_study_page_lists_everything(client, study, owner):
    client.force_login(owner)
    page = client.get(reverse("study-detail", args=[study.pk])).content.decode()
    for text in (
        "Resident",
        "Thermostat",
        "Keep the home comfortable",
        "Lower the set point",
        "on Leave home",
        "in a chain",
        "1 negligible",
        "2 minor",
        "Leave home",
        "Thermostat does it, resident informed",
        "2 modes, 2 transitions",
        CAUTIONS[:60],
    ):
        assert text in page, text


def test_download_is_the_study_file(client, study, owner, heating_document):
    client.force_login(owner)
    response = client.get(reverse("study-download", args=[study.pk]))
    assert response["Content-Disposition"] == 'attachment; filename="home-heating.baton.json"'
    assert json.loads(response.content) == heating_document


def test_upload_creates_study_and_redirects(client, owner, heating_document):
    client.force_login(owner)
    content = json.dumps(heating_document).encode()
    response = client.post(reverse("study-upload"), {"file": upload("h.json", content)})
    study = m.Study.objects.get()
    assert response.status_code == 302
    assert response["Location"] == reverse("study-detail", args=[study.pk])
    assert m.Membership.objects.get(study=study).user == owner


def test_upload_by_htmx_redirects_the_client(client, owner, heating_document):
    client.force_login(owner)
    content = json.dumps(heating_document).encode()
    response = client.post(
        reverse("study-upload"),
        {"file": upload("h.json", content)},
        headers={"HX-Request": "true"},
    )
    assert response.status_code == 200
    assert response["HX-Redirect"].startswith("/studies/")


def test_bad_upload_by_htmx_shows_errors_beside_the_form(client, owner, heating_document):
    client.force_login(owner)
    heating_document["tasks"][1]["duration_s"] = [30, 5, 2]
    content = json.dumps(heating_document).encode()
    response = client.post(
        reverse("study-upload"),
        {"file": upload("bad.json", content)},
        headers={"HX-Request": "true"},
    )
    fragment = response.content.decode()
    assert fragment.startswith('<form id="upload-form"')
    assert "$.tasks[1].duration_s" in fragment and "min &lt;= typical &lt;= max" in fragment
    assert "<html" not in fragment
    assert not m.Study.objects.exists()


def test_bad_upload_without_htmx_is_a_full_page(client, owner):
    client.force_login(owner)
    response = client.post(reverse("study-upload"), {"file": upload("x.json", b"{not json")})
    page = response.content.decode()
    assert response.status_code == 400
    assert "<html" in page and "not valid JSON" in page and "line 1, column 2" in page
    assert not m.Study.objects.exists()


def test_upload_without_file_says_so(client, owner):
    client.force_login(owner)
    response = client.post(reverse("study-upload"), {})
    assert "choose a study file" in response.content.decode()


def test_oversized_upload_is_refused_before_parsing(client, owner, settings):
    settings.BATON_MAX_UPLOAD_BYTES = 100
    client.force_login(owner)
    response = client.post(reverse("study-upload"), {"file": upload("big.json", b" " * 500)})
    assert "larger than" in response.content.decode()


def test_markup_in_titles_shows_as_text(client, owner, heating_document):
    from allocation import services

    heating_document["study"]["title"] = "<script>alert(1)</script>"
    study = services.study_import(data=heating_document, owner=owner)
    client.force_login(owner)
    page = client.get(reverse("study-detail", args=[study.pk])).content.decode()
    assert "<script>alert(1)</script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page


def test_htmx_is_served_locally_not_from_a_cdn(client, db):
    page = client.get(reverse("login")).content.decode()
    assert "django_htmx" in page or "htmx" in page
    assert "unpkg" not in page and "cdn" not in page.lower()


def test_study_page_shows_each_plans_headline_figures(client, study, owner):
    client.force_login(owner)
    page = client.get(reverse("study-detail", args=[study.pk])).content.decode()
    # The registry's label with the column's unit.
    assert 'Person time <span class="unit">a day</span>' in page and "analysis file" in page
    assert reverse("plan-analysis-download", args=[study.pk, "auto"]) in page


def test_plan_analysis_download_is_the_analysis_file(client, study, owner):
    client.force_login(owner)
    response = client.get(reverse("plan-analysis-download", args=[study.pk, "auto"]))
    document = json.loads(response.content)
    assert response["Content-Disposition"].endswith('auto.analysis.json"')
    assert (document["format"], document["study"], document["plan"]) == (
        "baton.analysis",
        "home-heating",
        "auto",
    )
    assert document["cautions"] == CAUTIONS


def test_analysis_of_unknown_plan_is_404(client, study, owner):
    client.force_login(owner)
    response = client.get(reverse("plan-analysis-download", args=[study.pk, "nope"]))
    assert response.status_code == 404


def test_an_upload_with_a_lone_surrogate_or_a_huge_integer_is_refused_by_path(
    client, owner, heating_document
):
    """RFC 8259 §8.2: a lone surrogate is no Unicode text; Python refuses to convert
    integers of more than 4300 digits. Either is a message beside the form, never a 500,
    and nothing is stored."""
    client.force_login(owner)
    text = json.dumps(heating_document).replace(
        json.dumps(heating_document["tasks"][1]["title"]), '"\\ud800"', 1
    )
    response = client.post(reverse("study-upload"), {"file": upload("s.json", text.encode())})
    assert response.status_code == 400
    assert "$.tasks[1].title" in response.content.decode()
    assert "lone surrogate" in response.content.decode()
    huge = json.dumps(heating_document).replace(
        '"duration_s": ', '"duration_s": 9' + "9" * 4999 + ', "x": ', 1
    )
    response = client.post(reverse("study-upload"), {"file": upload("n.json", huge.encode())})
    assert response.status_code == 400
    assert "4300 digits" in response.content.decode()
    assert not m.Study.objects.exists()
