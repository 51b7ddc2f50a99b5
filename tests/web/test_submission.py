"""A review end to end: a workshop is run and frozen, and its exported table,
report and study file all name the same snapshot hash and reproduce the same figures.

The study is the home-heating test study (tests/core/conftest.py); the figures are checked
against the analysis of the snapshot's own study file, and the hash against SHA-256 of
the stored canonical text (FIPS 180-4 via hashlib).
"""

from __future__ import annotations

import hashlib
import io
import json

import pandas as pd
from django.urls import reverse
from pypdf import PdfReader

from allocation import models as m
from allocation import services
from allocation.core import read_study
from allocation.core.analysis import analyse_plan


def test_a_frozen_workshop_exports_one_hash_and_the_same_figures(client, study, owner):
    # The workshop: a comment and a decision on T2 under plan "auto", the status agreed.
    services.comment_post(
        study=study, user=owner, kind="task", key="T2", body="Is the hold cue enough?"
    )
    services.assignment_set(
        study=study,
        plan_key="auto",
        task_key="T2",
        item={**_auto_t2(study), "status": "agreed", "rationale": "Agreed at the workshop."},
    )
    decision = services.decision_save(
        study=study,
        user=owner,
        kind="assignment",
        plan_key="auto",
        key="T2",
        decision="The thermostat keeps T2 at level 7.",
        rationale="Set-back saves energy without effort.",
        status=m.DecisionStatus.AGREED,
    )
    assert decision.status == "agreed"

    # Frozen: the hash is the SHA-256 of the stored canonical text.
    snapshot = services.snapshot_create(study=study, title="Workshop 1", user=owner)
    assert snapshot.sha256 == hashlib.sha256(snapshot.canonical.encode("utf-8")).hexdigest()
    frozen = read_study(json.loads(snapshot.canonical))
    expected = analyse_plan(frozen, "auto")

    # Later edits do not touch what was frozen.
    services.assignment_set(study=study, plan_key="auto", task_key="T2", item=None)

    client.force_login(owner)
    base = reverse("plan-export", args=[study.pk, "auto", "csv"]).rsplit("/", 1)[0]
    query = f"?snapshot={snapshot.pk}"
    csv = client.get(f"{base}/csv{query}").content.decode()
    xlsx = client.get(f"{base}/xlsx{query}").content
    html = client.get(f"{base}/html{query}").content.decode()
    pdf = client.get(f"{base}/pdf{query}").content
    document = client.get(reverse("study-download", args=[study.pk]) + query).content

    # Every export names the same snapshot.
    assert f"# snapshot: {snapshot.sha256}" in csv
    about = pd.read_excel(io.BytesIO(xlsx), sheet_name="about")
    assert dict(zip(about["key"], about["value"], strict=True))["snapshot"] == snapshot.sha256
    assert snapshot.sha256 in html
    assert snapshot.sha256 in "".join(
        page.extract_text() for page in PdfReader(io.BytesIO(pdf)).pages
    ).replace("\n", "")
    assert hashlib.sha256(document).hexdigest() == snapshot.sha256

    # And the same figures: the table's T2 row is the frozen analysis, not today's study.
    table = pd.read_csv(io.StringIO(csv), comment="#")
    row = table.set_index("task").loc["T2"]
    figures = expected.tasks["T2"]
    assert row["status"] == "agreed"
    assert row["automation"] == "thermostat"
    # Two decimals more than the registry's (one for person time, two for occurrences).
    assert row["person_s_per_day"] == round(sum(figures.person_s_per_day.values()), 3)
    assert row["occurrences_per_day"] == round(figures.per_day, 4)
    sheet = pd.read_excel(io.BytesIO(xlsx), sheet_name="allocation").set_index("task")
    assert sheet.loc["T2", "person_s_per_day"] == row["person_s_per_day"]


def _auto_t2(study) -> dict:
    from allocation import selectors

    plan = next(p for p in selectors.study_document(study)["plans"] if p["id"] == "auto")
    return dict(plan["assignments"]["T2"])
