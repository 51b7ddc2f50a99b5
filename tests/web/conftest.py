"""Fixtures for the web and database tests: users, roles, a small study."""

from __future__ import annotations

import copy

import pytest
from django.contrib.auth import get_user_model

from allocation import models as m
from allocation import services

HEATING = {
    "format": "baton.study",
    "version": 1,
    "study": {
        "id": "home-heating",
        "title": "Home heating schedule",
        "scale": "sv10",
        "bin_s": 900,
        "assumptions": {},
        "risk_policy": {},
    },
    "agents": [
        {
            "id": "resident",
            "name": "Resident",
            "kind": "human",
            "capabilities": ["judgement"],
            "asleep": ["23:00", "07:00"],
            "response_s": {"awake": [20, 60, 300], "asleep": [300, 900, 3600]},
        },
        {
            "id": "thermostat",
            "name": "Thermostat",
            "kind": "automation",
            "capabilities": ["sensing", "scheduling"],
            "response_s": {"any": [1, 1, 2]},
        },
    ],
    "events": [{"id": "leave", "name": "Leave home", "times": ["08:15"], "jitter_s": 900}],
    "tasks": [
        {"id": "G1", "title": "Keep the home comfortable"},
        {
            "id": "T1",
            "parent": "G1",
            "title": "Notice the home is empty",
            "occurs": {"event": "leave"},
            "duration_s": [2, 5, 30],
            "window_s": 1800,
            "severity": 1,
            "demands": {"visual": 1.0, "auditory": 0, "cognitive": 1.2, "psychomotor": 0},
            "split": {"acquisition": 0.5, "analysis": 0.3, "decision": 0.1, "action": 0.1},
            "needs": ["sensing"],
        },
        {
            "id": "T2",
            "parent": "G1",
            "title": "Lower the set point",
            "duration_s": [3, 10, 20],
            "severity": 2,
            "demands": {"visual": 4.0, "auditory": 0, "cognitive": 1.2, "psychomotor": 2.2},
        },
    ],
    "links": [{"from": "T1", "to": "T2", "kind": "precedes", "lag_s": [0, 60]}],
    "plans": [
        {
            "id": "manual",
            "name": "Resident does it",
            "assignments": {"T1": {"human": "resident"}, "T2": {"human": "resident"}},
        },
        {
            "id": "auto",
            "name": "Thermostat does it, resident informed",
            "assignments": {
                "T1": {"automation": "thermostat"},
                "T2": {
                    "human": "resident",
                    "automation": "thermostat",
                    "levels": 7,
                    "accountable": "resident",
                    "feedback": "display",
                    "initiator": "automation",
                    "status": "proposed",
                    "rationale": "Set-back saves energy without effort.",
                },
            },
            "modes": {
                "initial": "schedule",
                "states": [
                    {
                        "id": "schedule",
                        "name": "Following the schedule",
                        "indication": "clock symbol",
                    },
                    {
                        "id": "hold",
                        "name": "Holding a set point",
                        "indication": "clock symbol",
                        "overrides": {"T2": {"human": "resident"}},
                    },
                ],
                "transitions": [
                    {
                        "from": "schedule",
                        "to": "hold",
                        "trigger": "dial turned",
                        "by": "human",
                        "cue": "none",
                    },
                    {
                        "from": "hold",
                        "to": "schedule",
                        "trigger": "next period",
                        "by": "automation",
                        "cue": "none",
                        "per_day": 1,
                    },
                ],
            },
        },
    ],
}


@pytest.fixture
def heating_document() -> dict:
    """The design's home-heating study file (DESIGN §5), a fresh copy per test."""
    return copy.deepcopy(HEATING)


def make_user(name: str):
    return get_user_model().objects.create_user(name, password="correct horse battery")


@pytest.fixture
def owner(db):
    return make_user("olive")


@pytest.fixture
def study(owner, heating_document) -> m.Study:
    return services.study_import(data=heating_document, owner=owner)


@pytest.fixture
def member_of(study):
    """Make a user with a role in ``study``: ``member_of("viewer")``."""

    def make(role: str, name: str | None = None):
        user = make_user(name or f"{role}-user")
        m.Membership.objects.create(study=study, user=user, role=role)
        return user

    return make
