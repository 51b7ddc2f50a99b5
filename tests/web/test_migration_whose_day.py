"""Stored studies upgraded to study file version 2 keep their figures: a rate without
``when`` meant the awake day in version 1 and is given ``"awake"``; where several people
have an asleep window, a rate that follows someone's day names the first of them, as
version 1 took it (migration 0010)."""

from __future__ import annotations

import pytest
from django.db import connection
from django.db.migrations.executor import MigrationExecutor

pytestmark = pytest.mark.django_db(transaction=True)

BEFORE = [("allocation", "0009_simulation_progress")]
AFTER = [("allocation", "0010_rates_name_whose_day")]


def _migrate(targets):
    executor = MigrationExecutor(connection)
    executor.loader.build_graph()
    executor.migrate(targets)
    return executor.loader.project_state(targets).apps


def _study(apps, key: str, sleepers: int):
    study = apps.get_model("allocation", "Study").objects.create(key=key, title=key, scale="sv10")
    agent = apps.get_model("allocation", "Agent")
    for index, (name, window) in enumerate(
        [("partner", ("00:00", "08:00")), ("person", ("22:00", "06:00"))][:sleepers]
    ):
        agent.objects.create(
            study=study,
            key=name,
            name=name,
            kind="human",
            asleep_from=window[0],
            asleep_to=window[1],
            position=index,
        )
    event = apps.get_model("allocation", "Event")
    event.objects.create(study=study, key="rate", name="Rate", per_day=2, position=0)
    event.objects.create(study=study, key="night", name="Night", per_day=1, when="asleep")
    event.objects.create(study=study, key="fixed", name="Fixed", times=["08:00"])
    task = apps.get_model("allocation", "Task")
    task.objects.create(study=study, key="T1", title="T1", occurs={"per_day": 3}, position=0)
    task.objects.create(study=study, key="T2", title="T2", occurs={"every_days": 7})
    task.objects.create(study=study, key="T3", title="T3", occurs={"per_day": 1, "when": "any"})
    return study.pk


def test_stored_rates_are_upgraded_as_version_1_meant_them():
    try:
        apps = _migrate(BEFORE)
        two = _study(apps, "two-sleepers", 2)
        one = _study(apps, "one-sleeper", 1)
        apps = _migrate(AFTER)
        event = apps.get_model("allocation", "Event")
        task = apps.get_model("allocation", "Task")

        def events(pk):
            return {e.key: (e.when, e.of) for e in event.objects.filter(study_id=pk)}

        def occurs(pk):
            return {t.key: t.occurs for t in task.objects.filter(study_id=pk)}

        # Two sleepers: the first listed (by position) is the partner.
        assert events(two) == {
            "rate": ("awake", "partner"),
            "night": ("asleep", "partner"),
            "fixed": ("", ""),
        }
        assert occurs(two) == {
            "T1": {"per_day": 3, "when": "awake", "of": "partner"},
            "T2": {"every_days": 7, "of": "partner"},
            "T3": {"per_day": 1, "when": "any"},
        }
        # One sleeper: nothing to name; only the implicit "awake" is said.
        assert events(one) == {"rate": ("awake", ""), "night": ("asleep", ""), "fixed": ("", "")}
        assert occurs(one)["T1"] == {"per_day": 3, "when": "awake"}
        assert occurs(one)["T2"] == {"every_days": 7}
    finally:
        _migrate(executor_leaves())


def executor_leaves():
    executor = MigrationExecutor(connection)
    return executor.loader.graph.leaf_nodes()
