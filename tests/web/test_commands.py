"""The management commands: start, import_study, export_study, load_examples."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from io import StringIO
from pathlib import Path

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from allocation import models as m
from tests.core.analysis.test_plan import TOP_KEYS

REPO = Path(__file__).resolve().parents[2]


def run(*args: str) -> str:
    out = StringIO()
    call_command(*args, stdout=out, stderr=StringIO())
    return out.getvalue()


def test_import_then_export_round_trips(tmp_path, heating_document, db, settings):
    settings.DATA_DIR = tmp_path
    source = tmp_path / "in.json"
    source.write_text(json.dumps(heating_document))
    output = run("import_study", str(source))
    assert "Imported 'home-heating'" in output
    target = tmp_path / "out.json"
    run("export_study", "home-heating", "-o", str(target))
    assert json.loads(target.read_text()) == heating_document


def test_import_of_bad_file_lists_errors_and_stores_nothing(
    tmp_path, heating_document, db, settings
):
    settings.DATA_DIR = tmp_path
    heating_document["links"][0]["to"] = "T9"
    heating_document["agents"][0]["asleep"] = ["23:00", "7am"]
    source = tmp_path / "bad.json"
    source.write_text(json.dumps(heating_document))
    with pytest.raises(CommandError) as caught:
        run("import_study", str(source))
    message = str(caught.value)
    assert "$.links[0].to" in message and "'T9'" in message
    assert "$.agents[0].asleep[1]" in message
    assert not m.Study.objects.exists()


def test_import_of_missing_file_says_so(tmp_path, db):
    with pytest.raises(CommandError, match="cannot read"):
        run("import_study", str(tmp_path / "nowhere.json"))


def test_export_of_unknown_study_says_so(db):
    with pytest.raises(CommandError, match="no study with the id"):
        run("export_study", "nothing-here")


def test_export_of_ambiguous_id_asks_for_number(study, owner, heating_document):
    from allocation import services

    services.study_import(data=heating_document, owner=owner)
    with pytest.raises(CommandError, match="name one by its number"):
        run("export_study", "home-heating")
    assert json.loads(run("export_study", str(study.pk))) == heating_document


def test_load_examples_is_idempotent(tmp_path, db, settings):
    settings.DATA_DIR = tmp_path
    first = run("load_examples")
    second = run("load_examples")
    assert first.count("imported") == 3
    assert second.count("already there") == 3
    assert m.Study.objects.count() == 3


def test_start_sets_up_and_prints_the_sign_in(tmp_path, db, settings):
    settings.DATA_DIR = tmp_path
    output = run("start", "--no-serve")
    password = (tmp_path / "local-sign-in.txt").read_text().strip()
    assert f"Sign in as 'baton' with the password '{password}'" in output
    assert m.Study.objects.filter(memberships__user__username="baton").count() == 3
    assert "http://127.0.0.1:8000/" in output


def _manage(*args: str, env: dict[str, str]) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "manage.py", *args],
        cwd=REPO,
        # The browser tests allow Django's ORM under Playwright's event loop; a deployment
        # never does, and the deploy check says so.
        env={k: v for k, v in {**os.environ, **env}.items() if k != "DJANGO_ALLOW_ASYNC_UNSAFE"},
        capture_output=True,
        text=True,
        timeout=120,
    )


def test_production_settings_pass_the_deploy_check(tmp_path):
    env = {
        "BATON_DEBUG": "0",
        "BATON_SECRET_KEY": "x" * 40 + "-production-secret-for-the-deploy-check-0123456789",
        "BATON_ALLOWED_HOSTS": "baton.example.org",
        "BATON_DATA_DIR": str(tmp_path),
    }
    result = _manage("check", "--deploy", "--fail-level", "WARNING", env=env)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "no issues" in result.stdout


def test_production_without_secret_key_refuses_to_start(tmp_path):
    env = {"BATON_DEBUG": "0", "BATON_SECRET_KEY": "", "BATON_DATA_DIR": str(tmp_path)}
    result = _manage("check", env=env)
    assert result.returncode != 0
    assert "BATON_SECRET_KEY must be set" in result.stderr


def test_analyse_a_study_file_prints_a_report_for_every_plan(heating_document, tmp_path):
    source = tmp_path / "heating.json"
    source.write_text(json.dumps(heating_document))
    output = run("analyse", str(source))
    assert "plan manual: Resident does it" in output and "plan auto:" in output
    assert "Cautions: Baton supports human-factors analysis" in output


def test_analyse_stored_study_as_json_has_the_design_keys(study):
    document = json.loads(run("analyse", "home-heating", "--plan", "auto", "--json"))
    assert set(document) >= TOP_KEYS
    assert set(document["people"]["resident"]) >= {
        "burden_s_per_day",
        "interactions_per_day",
        "interruptions_per_day",
        "night_interruptions_per_day",
        "monitoring_s_per_day",
    }


def test_analyse_unknown_plan_names_the_plans(study):
    with pytest.raises(CommandError, match=r"no plan 'nope' \(plans: manual, auto\)"):
        run("analyse", "home-heating", "--plan", "nope")


def test_analyse_a_file_with_errors_lists_them(heating_document, tmp_path):
    heating_document["tasks"][1]["severity"] = 9
    source = tmp_path / "bad.json"
    source.write_text(json.dumps(heating_document))
    with pytest.raises(CommandError, match=r"\$\.tasks\[1\]\.severity"):
        run("analyse", str(source))


def test_bench_prints_the_ratios_against_the_targets(db):
    output = run("bench", "--large", "2000", "--memory-tasks", "1500", "--repeats", "1")
    assert "analysis / floor at 1,000 tasks" in output
    assert "2,000 / 1,000 tasks" in output
    assert "save one row (check it, write, update the analysis)" in output
    assert "mode-map verification of plan-1" in output
    # Opening the editor again and saving a row, with the collector paused and running.
    assert output.count("x trivial (target <= 10") == 4
    assert output.count("one incremental edit of plan-1") == 2
    assert output.count("edit / analysis") == 2
    assert "of a 1,500-task study" in output and "peak" in output
