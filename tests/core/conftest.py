"""Shared data for the core tests: a small valid study to mutate, one thing per test."""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

import pytest

#: The home-heating test study (invented): valid, with no errors and no warnings.
#: Paths used by the tests: tasks[0] G1 (a goal), tasks[1] T1, tasks[2] T2 (leaves);
#: agents[0] resident (human), agents[1] thermostat (automation); events[0] leave;
#: links[0] T1 -> T2; plans[0] manual, plans[1] auto with modes schedule and hold.
HOME_HEATING: dict[str, Any] = {
    "format": "baton.study",
    "version": 2,
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


@pytest.fixture(scope="session")
def make_study() -> Callable[[], dict[str, Any]]:
    """A function giving a fresh, independent copy of the valid home-heating study.

    Session-scoped (it holds no state) so that hypothesis tests may use it too.
    """

    def make() -> dict[str, Any]:
        return copy.deepcopy(HOME_HEATING)

    return make
