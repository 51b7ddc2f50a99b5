"""Study size: a study past its limits is refused on every path that stores one (upload,
``import_study``, the edit API, spreadsheet import), by a message naming the limit, the
count and the place; a study at the limits gets pages whose size follows the page.

The counts in the messages are hand-worked from the files the tests build.
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError
from django.urls import reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core import StudyInvalid
from allocation.core.limits import (
    STUDY_MAX_AGENTS,
    STUDY_MAX_LINKS,
    STUDY_MAX_PLAN_TASKS,
    STUDY_MAX_TASKS,
)
from allocation.core.synthetic import synthetic_study
from tests.capped import run_capped

#: The most bytes a page of a study at the limits may take (tool assumption: about ten
#: times what a page of the example studies takes, far below what a browser handles
#: with ease). Measured at the limits: the plan editor 0.6 MB, the others 0.2 MB.
EDITOR_MAX_BYTES = 1_000_000
PAGE_MAX_BYTES = 500_000


def tasks_only(count: int) -> dict:
    """A study file of ``count`` leaf tasks and nothing else (hand-built)."""
    return {
        "format": "baton.study",
        "version": 2,
        "study": {"id": "many", "title": "Many tasks", "scale": "sv10"},
        "agents": [],
        "events": [],
        "tasks": [{"id": f"T{index}", "title": f"Task {index}"} for index in range(count)],
        "links": [],
        "plans": [],
    }


def with_empty_plans(tasks: int, plans: int) -> dict:
    """``tasks`` tasks and ``plans`` plans that allocate nothing (hand-built)."""
    document = tasks_only(tasks)
    document["plans"] = [
        {"id": f"p{index}", "name": f"Plan {index}", "assignments": {}} for index in range(plans)
    ]
    return document


def test_an_upload_past_the_task_limit_is_refused_naming_the_limit(client, owner):
    client.force_login(owner)
    data = json.dumps(tasks_only(STUDY_MAX_TASKS + 1)).encode()
    upload = io.BytesIO(data)
    upload.name = "many.json"
    response = client.post(reverse("study-upload"), {"file": upload})
    page = response.content.decode()
    assert response.status_code == 400
    assert "$.tasks" in page
    assert f"{STUDY_MAX_TASKS + 1:,} tasks" in page and f"at most {STUDY_MAX_TASKS:,}" in page
    assert "STUDY_MAX_TASKS" in page
    assert not m.Study.objects.exists()


def test_import_study_refuses_too_many_plan_task_pairs(tmp_path, db):
    # 1,000 tasks and 21 plans: 21,000 plan-task pairs, 1,000 past the limit of 20,000.
    assert STUDY_MAX_PLAN_TASKS == 20_000
    source = tmp_path / "plans.json"
    source.write_text(json.dumps(with_empty_plans(1000, 21)))
    with pytest.raises(CommandError) as caught:
        call_command("import_study", str(source), stdout=io.StringIO(), stderr=io.StringIO())
    message = str(caught.value)
    assert "$.plans" in message and "21 plans" in message and "1,000 tasks" in message
    assert "21,000 plan-task pairs" in message and "STUDY_MAX_PLAN_TASKS" in message
    assert not m.Study.objects.exists()


def test_an_edit_past_the_plan_task_limit_is_refused_and_stores_nothing(owner):
    # 1,000 tasks and 20 plans: exactly 20,000 pairs, accepted; one more task or plan
    # would make 20,020 or 21,000.
    study = services.study_import(data=with_empty_plans(1000, 20), owner=owner)
    version = m.Study.objects.get(pk=study.pk).version
    with pytest.raises(StudyInvalid) as caught:
        services.task_save(study=study, key=None, item={"id": "T1000", "title": "One more"})
    [problem] = caught.value.errors
    assert problem.path == "$.plans" and "20,020 plan-task pairs" in problem.message
    with pytest.raises(StudyInvalid) as caught:
        services.plan_copy(study=study, key="p0", new_key="p20", new_name="Plan 20")
    [problem] = caught.value.errors
    assert problem.path == "$.plans" and "21,000 plan-task pairs" in problem.message
    # Nothing stored: the same tasks, plans and version.
    assert m.Task.objects.filter(study=study).count() == 1000
    assert m.Plan.objects.filter(study=study).count() == 20
    assert m.Study.objects.get(pk=study.pk).version == version


def test_a_spreadsheet_past_the_limit_is_refused_and_stores_nothing(
    client, study, member_of, monkeypatch
):
    from tests.web.test_spreadsheets import good_workbook, page_url, upload

    # The home-heating study: 3 tasks and 2 plans (6 pairs). With the limit lowered to 6
    # here, the workbook's new task T3 makes 8.
    monkeypatch.setattr("allocation.core.reading.STUDY_MAX_PLAN_TASKS", 6)
    client.force_login(member_of("editor"))
    before = selectors.study_document(study)
    upload(client, study, good_workbook(), "heating.xlsx")
    page = client.get(page_url(study)).content.decode()
    assert "8 plan-task pairs" in page and "STUDY_MAX_PLAN_TASKS" in page
    client.post(page_url(study, action="apply"), {"version": "0", "sha256": "x"})
    assert selectors.study_document(study) == before


def test_the_pages_of_a_study_at_the_limits_stay_small_within_a_cap():
    # A study of STUDY_MAX_TASKS tasks, STUDY_MAX_LINKS links and STUDY_MAX_AGENTS agents
    # with the longest names, in a child process capped in time and memory: the plan
    # editor, the inventory and the study page stay under their byte bounds.
    report = run_capped(
        f"""
        from django.db import connection
        from django.test import Client
        from django.test.utils import setup_test_environment
        from django.contrib.auth import get_user_model
        from allocation import services
        from allocation.core.synthetic import synthetic_study
        import time

        setup_test_environment()
        connection.creation.create_test_db(verbosity=0, autoclobber=True)
        document = synthetic_study(
            tasks={STUDY_MAX_TASKS}, links={STUDY_MAX_LINKS}, events=20, plans=1, seed=5
        )
        for index in range({STUDY_MAX_AGENTS} - len(document["agents"])):
            document["agents"].append(
                {{"id": f"agent-{{index}}", "name": "N" * 200,
                  "kind": "human" if index % 2 else "automation"}}
            )
        user = get_user_model().objects.create_user("size")
        study = services.study_import(data=document, owner=user)
        client = Client()
        client.force_login(user)
        pk = study.pk
        outcome = {{"links": len(document["links"])}}
        for name, url in (
            ("editor", f"/studies/{{pk}}/plans/plan-0/edit?goal=all&page=7"),
            ("inventory", f"/studies/{{pk}}/inventory?tasks_page=9&links_page=40"),
            ("study", f"/studies/{{pk}}/?tasks_page=50"),
        ):
            started = time.perf_counter()
            response = client.get(url)
            assert response.status_code == 200, (name, response.status_code)
            outcome[name] = [len(response.content), time.perf_counter() - started]
        """,
        seconds=180,
        megabytes=2048,
        django=True,
    )
    sizes = report.outcome
    assert sizes["links"] > STUDY_MAX_LINKS * 0.9  # the study is at the limit, near enough
    assert sizes["editor"][0] <= EDITOR_MAX_BYTES
    assert sizes["inventory"][0] <= PAGE_MAX_BYTES
    assert sizes["study"][0] <= PAGE_MAX_BYTES
    print(
        f"\nat the limits: editor {sizes['editor'][0]:,} B in {sizes['editor'][1]:.1f} s, "
        f"inventory {sizes['inventory'][0]:,} B, study page {sizes['study'][0]:,} B; "
        f"{report.seconds:.1f} s, peak {report.peak_mb:.0f} MiB"
    )


def test_a_study_at_the_limits_is_accepted():
    # The largest shape the limits allow reads without a size refusal (core only).
    from allocation.core import load_study

    plans = STUDY_MAX_PLAN_TASKS // STUDY_MAX_TASKS
    document = synthetic_study(
        tasks=STUDY_MAX_TASKS, links=STUDY_MAX_LINKS, events=20, plans=plans, seed=6
    )
    assert len(document["tasks"]) == STUDY_MAX_TASKS
    result = load_study(document)
    assert result.errors == []


def test_an_upload_with_thousands_of_problems_lists_the_first(client, owner):
    # 3,000 tasks, each with an unknown key: 3,000 problems, of which PAGE_PROBLEMS shown.
    from allocation.core.limits import PAGE_PROBLEMS

    document = tasks_only(3000)
    for task in document["tasks"]:
        task["colour"] = "red"
    upload = io.BytesIO(json.dumps(document).encode())
    upload.name = "odd.json"
    client.force_login(owner)
    page = client.post(reverse("study-upload"), {"file": upload}).content.decode()
    assert page.count("is not a known key here") == PAGE_PROBLEMS
    assert f"The first {PAGE_PROBLEMS} of 3000 are listed" in page
