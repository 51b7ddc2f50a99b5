"""Writes: validate with the core, then persist, inside one transaction.

Import is all or nothing: a study file with any error raises
:class:`~allocation.core.StudyInvalid` before a row is written, and a failure while
writing rolls every row back.
"""

from __future__ import annotations

import secrets
from pathlib import Path
from typing import Any, TypeVar

from django.contrib.auth.models import User
from django.db import models, transaction

from allocation import audit
from allocation import models as m
from allocation.core import load_study, study_to_json
from allocation.core.model import Study

from . import rows


def study_import(*, data: Any, owner: User) -> m.Study:
    """Store a study file (decoded JSON) as a new study owned by ``owner``.

    Raises
    ------
    StudyInvalid
        When the data has any error; nothing is stored then.
    """
    return study_create(study=load_study(data).require_valid(), owner=owner, action="study.import")


@transaction.atomic
def study_create(*, study: Study, owner: User, action: str = "study.create") -> m.Study:
    """Write a checked core study as rows, with ``owner`` as its owner.

    The audit trail records ``action`` (``study.import`` for a study file) with the
    whole study file as its "after".
    """
    document = study_to_json(study)
    row = m.Study(**rows.header_values(document["study"]))
    row.full_clean()
    row.save()
    m.Membership.objects.create(study=row, user=owner, role=m.Role.OWNER)
    agents = _bulk(
        m.Agent,
        [
            m.Agent(study=row, position=index, **rows.agent_values(item))
            for index, item in enumerate(document["agents"])
        ],
    )
    _bulk(
        m.Event,
        [
            m.Event(study=row, position=index, **rows.event_values(item))
            for index, item in enumerate(document["events"])
        ],
    )
    tasks = _bulk(
        m.Task,
        [
            m.Task(study=row, position=index, **rows.task_values(item))
            for index, item in enumerate(document["tasks"])
        ],
    )
    children = [tasks[item["id"]] for item in document["tasks"] if "parent" in item]
    parents = {item["id"]: item["parent"] for item in document["tasks"] if "parent" in item}
    for child in children:
        child.parent = tasks[parents[child.key]]
    m.Task.objects.bulk_update(children, ["parent"])
    _bulk(
        m.Link,
        [
            m.Link(study=row, position=index, **rows.link_values(item, tasks))
            for index, item in enumerate(document["links"])
        ],
    )
    for index, item in enumerate(document["plans"]):
        plan_create(study_row=row, item=item, position=index, agents=agents, tasks=tasks)
    audit.record(study=row, action=action, target=f"study {row.key}", after=document)
    return row


_Row = TypeVar("_Row", bound=models.Model)


def _bulk(model: type[_Row], items: list[_Row]) -> dict[str, _Row]:
    """Validate and insert rows; return them by their ``key`` when they have one."""
    for item in items:
        item.full_clean(
            exclude=["study", "plan", "state", "parent", "source", "target"],
            validate_unique=False,
            validate_constraints=False,
        )
    created = model._default_manager.bulk_create(items)
    return {item.key: item for item in created if hasattr(item, "key")}


def plan_create(
    *,
    study_row: m.Study,
    item: dict[str, Any],
    position: int,
    agents: dict[str, m.Agent],
    tasks: dict[str, m.Task],
) -> m.Plan:
    """Write one plan (study-file item) with its assignments and mode map as rows."""
    plan_row = m.Plan(study=study_row, position=position, **rows.plan_values(item))
    plan_row.full_clean(exclude=["study"], validate_constraints=False)
    plan_row.save()
    m.Assignment.objects.bulk_create(
        [
            m.Assignment(
                plan=plan_row,
                task=tasks[task_id],
                position=index,
                **rows.assignment_values(assignment, agents),
            )
            for index, (task_id, assignment) in enumerate(item["assignments"].items())
        ]
    )
    if item.get("modes"):
        modes_create(plan_row=plan_row, modes=item["modes"], agents=agents, tasks=tasks)
    return plan_row


def modes_create(
    *,
    plan_row: m.Plan,
    modes: dict[str, Any],
    agents: dict[str, m.Agent],
    tasks: dict[str, m.Task],
) -> None:
    """Write a plan's mode map (study-file item) as rows: modes, overrides, transitions."""
    states = {}
    for index, mode in enumerate(modes["states"]):
        state = m.ModeState.objects.create(plan=plan_row, position=index, **rows.mode_values(mode))
        states[state.key] = state
        m.ModeOverride.objects.bulk_create(
            [
                m.ModeOverride(
                    state=state,
                    task=tasks[task_id],
                    position=order,
                    **rows.assignment_values(assignment, agents),
                )
                for order, (task_id, assignment) in enumerate(mode.get("overrides", {}).items())
            ]
        )
    events = (
        {event.key: event for event in plan_row.study.events.all()}
        if any("event" in transition for transition in modes["transitions"])
        else {}
    )
    m.ModeTransition.objects.bulk_create(
        [
            m.ModeTransition(
                plan=plan_row,
                position=index,
                **rows.transition_values(transition, states, events),
            )
            for index, transition in enumerate(modes["transitions"])
        ]
    )


def examples_load(*, owner: User) -> list[tuple[str, bool]]:
    """Import each example study that ``owner`` does not have yet.

    Returns ``(study id, imported)`` pairs; an example the owner already has (by its
    study id) is left as it is.
    """
    from allocation.examples import example_documents

    outcome = []
    for document in example_documents():
        key = document["study"]["id"]
        exists = m.Study.objects.filter(key=key, memberships__user=owner).exists()
        if not exists:
            study_import(data=document, owner=owner)
        outcome.append((key, not exists))
    return outcome


LOCAL_USERNAME = "baton"


def local_user_ensure(*, data_dir: Path) -> tuple[User, str]:
    """Make sure the local sign-in exists; return it with its password.

    The password is generated once and kept in ``data_dir/local-sign-in.txt`` (a
    git-ignored folder); if that file is gone, a new password is set and written.
    """
    from django.contrib.auth import get_user_model

    users = get_user_model()
    secret_file = data_dir / "local-sign-in.txt"
    user = users.objects.filter(username=LOCAL_USERNAME).first()
    password = secret_file.read_text().strip() if secret_file.exists() else ""
    if user is not None and password and user.check_password(password):
        return user, password
    password = secrets.token_urlsafe(12)
    with transaction.atomic():
        if user is None:
            user = users.objects.create_user(LOCAL_USERNAME, password=password)
        else:
            user.set_password(password)
            user.save(update_fields=["password"])
    data_dir.mkdir(parents=True, exist_ok=True)
    secret_file.write_text(password + "\n")
    secret_file.chmod(0o600)
    return user, password
