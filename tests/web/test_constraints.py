"""Database constraints hold the invariants even when the services are bypassed."""

from __future__ import annotations

import pytest
from django.db import IntegrityError, transaction

from allocation import models as m


@pytest.mark.parametrize(
    ("model", "values"),
    [
        (m.Task, {"key": "X", "title": "x", "severity": 6}),
        (m.Task, {"key": "X", "title": "x", "window_s": 0}),
        (m.Task, {"key": "T1", "title": "duplicate id"}),
        (m.Agent, {"key": "robot", "name": "r", "kind": "alien"}),
        (
            m.Agent,
            {
                "key": "robot",
                "name": "r",
                "kind": "automation",
                "asleep_from": "23:00",
                "asleep_to": "07:00",
            },
        ),
        (m.Event, {"key": "e", "name": "e"}),
        (m.Event, {"key": "e", "name": "e", "per_day": 2, "every_days": 3}),
    ],
)
def test_invalid_rows_are_refused(study, model, values):
    with pytest.raises(IntegrityError), transaction.atomic():
        model.objects.create(study=study, **values)


def test_link_to_itself_is_refused(study):
    task = m.Task.objects.get(study=study, key="T1")
    with pytest.raises(IntegrityError), transaction.atomic():
        m.Link.objects.create(study=study, source=task, target=task, kind="precedes")


def test_assignment_without_agent_is_refused(study):
    plan = m.Plan.objects.get(study=study, key="manual")
    task = m.Task.objects.get(study=study, key="T1")
    m.Assignment.objects.filter(plan=plan, task=task).delete()
    with pytest.raises(IntegrityError), transaction.atomic():
        m.Assignment.objects.create(plan=plan, task=task)


def test_membership_is_unique(study, owner):
    with pytest.raises(IntegrityError), transaction.atomic():
        m.Membership.objects.create(study=study, user=owner, role="viewer")
