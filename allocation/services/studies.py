"""Writes: validate with the core, then persist, inside one transaction.

Import is all or nothing: a study file with any error raises
:class:`~allocation.core.StudyInvalid` before a row is written, and a failure while
writing rolls every row back.
"""

from __future__ import annotations

import secrets
from pathlib import Path
from typing import Any

from django.contrib.auth.models import AbstractBaseUser
from django.db import transaction

from allocation import models as m
from allocation.core import StudyInvalid, load_study, study_to_json
from allocation.core.model import Assignment, Study


def study_import(*, data: Any, owner: AbstractBaseUser) -> m.Study:
    """Store a study file (decoded JSON) as a new study owned by ``owner``.

    Raises
    ------
    StudyInvalid
        When the data has any error; nothing is stored then.
    """
    result = load_study(data)
    if not result.ok:
        raise StudyInvalid(result.problems)
    return study_create(study=result.study, owner=owner)


@transaction.atomic
def study_create(*, study: Study, owner: AbstractBaseUser) -> m.Study:
    """Write a checked core study as rows, with ``owner`` as its owner."""
    row = m.Study(
        key=study.id,
        title=study.title,
        description=study.description or "",
        scale=study.scale,
        bin_s=study.bin_s,
        assumptions=study.assumptions,
        risk_policy=study.risk_policy,
    )
    row.full_clean()
    row.save()
    m.Membership.objects.create(study=row, user=owner, role=m.Role.OWNER)
    agents = _bulk(
        m.Agent,
        [
            m.Agent(
                study=row,
                key=agent.id,
                name=agent.name,
                kind=agent.kind,
                capabilities=None if agent.capabilities is None else list(agent.capabilities),
                asleep_from=agent.asleep[0] if agent.asleep else "",
                asleep_to=agent.asleep[1] if agent.asleep else "",
                response_s=None
                if agent.response_s is None
                else {key: value.to_json() for key, value in agent.response_s.items()},
                notes=agent.notes or "",
                position=index,
            )
            for index, agent in enumerate(study.agents)
        ],
    )
    _bulk(
        m.Event,
        [
            m.Event(
                study=row,
                key=event.id,
                name=event.name,
                times=None if event.times is None else list(event.times),
                jitter_s=event.jitter_s,
                per_day=event.per_day,
                when=event.when or "",
                every_days=event.every_days,
                notes=event.notes or "",
                position=index,
            )
            for index, event in enumerate(study.events)
        ],
    )
    document = study_to_json(study)
    tasks = _bulk(
        m.Task,
        [
            m.Task(
                study=row,
                key=task.id,
                title=task.title,
                occurs=item.get("occurs"),
                duration_s=item.get("duration_s"),
                window_s=task.window_s,
                severity=task.severity,
                demands=task.demands,
                split=task.split,
                needs=None if task.needs is None else list(task.needs),
                notes=task.notes or "",
                position=index,
            )
            for index, (task, item) in enumerate(zip(study.tasks, document["tasks"], strict=True))
        ],
    )
    children = [tasks[task.id] for task in study.tasks if task.parent is not None]
    for child in children:
        child.parent = tasks[study.task(child.key).parent]
    m.Task.objects.bulk_update(children, ["parent"])
    _bulk(
        m.Link,
        [
            m.Link(
                study=row,
                source=tasks[link.source],
                target=tasks[link.target],
                kind=link.kind,
                lag_s=None if link.lag_s is None else link.lag_s.to_json(),
                probability=link.probability,
                notes=link.notes or "",
                position=index,
            )
            for index, link in enumerate(study.links)
        ],
    )
    for index, plan in enumerate(study.plans):
        _plan_create(study_row=row, plan=plan, position=index, agents=agents, tasks=tasks)
    return row


def _bulk(model: type, rows: list) -> dict[str, Any]:
    """Validate and insert rows; return them by their ``key`` when they have one."""
    for item in rows:
        item.full_clean(
            exclude=["study", "plan", "state", "parent", "source", "target"],
            validate_unique=False,
            validate_constraints=False,
        )
    created = model.objects.bulk_create(rows)
    return {item.key: item for item in created if hasattr(item, "key")}


def _assignment_fields(assignment: Assignment, agents: dict[str, m.Agent]) -> dict[str, Any]:
    levels = assignment.levels
    return {
        "human": agents.get(assignment.human) if assignment.human else None,
        "automation": agents.get(assignment.automation) if assignment.automation else None,
        "levels": dict(levels) if isinstance(levels, dict) else levels,
        "duration_s": None if assignment.duration_s is None else assignment.duration_s.to_json(),
        "accountable": agents.get(assignment.accountable) if assignment.accountable else None,
        "feedback": assignment.feedback or "",
        "initiator": assignment.initiator or "",
        "status": assignment.status or "",
        "rationale": assignment.rationale or "",
        "applies": assignment.is_applicable,
    }


def _plan_create(*, study_row: m.Study, plan, position: int, agents: dict, tasks: dict) -> None:
    plan_row = m.Plan(
        study=study_row,
        key=plan.id,
        name=plan.name,
        description=plan.description or "",
        initial_mode=plan.modes.initial if plan.modes else "",
        position=position,
    )
    plan_row.full_clean(exclude=["study"], validate_constraints=False)
    plan_row.save()
    m.Assignment.objects.bulk_create(
        [
            m.Assignment(
                plan=plan_row,
                task=tasks[task_id],
                position=index,
                **_assignment_fields(assignment, agents),
            )
            for index, (task_id, assignment) in enumerate(plan.assignments.items())
        ]
    )
    if plan.modes is None:
        return
    states = {}
    for index, mode in enumerate(plan.modes.states):
        state = m.ModeState.objects.create(
            plan=plan_row,
            key=mode.id,
            name=mode.name,
            indication=mode.indication or "",
            lists_overrides=mode.overrides is not None,
            notes=mode.notes or "",
            position=index,
        )
        states[mode.id] = state
        m.ModeOverride.objects.bulk_create(
            [
                m.ModeOverride(
                    state=state,
                    task=tasks[task_id],
                    position=order,
                    **_assignment_fields(assignment, agents),
                )
                for order, (task_id, assignment) in enumerate((mode.overrides or {}).items())
            ]
        )
    m.ModeTransition.objects.bulk_create(
        [
            m.ModeTransition(
                plan=plan_row,
                source=states[item.source],
                target=states[item.target],
                trigger=item.trigger,
                by=item.by,
                cue=item.cue,
                per_day=item.per_day,
                notes=item.notes or "",
                position=index,
            )
            for index, item in enumerate(plan.modes.transitions)
        ]
    )


def examples_load(*, owner: AbstractBaseUser) -> list[tuple[str, bool]]:
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


def local_user_ensure(*, data_dir: Path) -> tuple[AbstractBaseUser, str]:
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
