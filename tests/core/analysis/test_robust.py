"""Any valid study analyses: no exception, finite JSON, every index within its bounds.

The studies come from the round-trip property's strategy (tests/core/test_roundtrip.py),
which builds valid study files of every shape the format allows.
"""

from __future__ import annotations

import json
import math

from hypothesis import HealthCheck, given, settings

from allocation.core import read_study
from allocation.core.analysis import analyse_plan, prepare
from tests.core.test_roundtrip import study_files


def assert_analyses_are_sound(data: dict) -> None:
    study = read_study(data)
    graph = prepare(study)
    for plan in study.plans:
        result = analyse_plan(study, plan.id, graph=graph)
        document = result.to_json()
        json.dumps(document, allow_nan=False)
        for person in document["people"].values():
            assert all(value >= 0 for value in person.values())
        for task in document["tasks"].values():
            assert task["occurrences_per_day"] >= 0 and task["person_s"] >= 0
            assert task["awareness"] is None or 0 <= task["awareness"] <= 1
            assert all(0 <= degree <= 1 for degree in task["degrees"].values())
        for handover in document["handovers"]:
            assert 0 <= handover["likelihood"] <= 1
            assert 1 <= handover["risk"] <= 25
            assert handover["band"] in {"acceptable", "review", "unacceptable"}
        share = sum(result.mode_share.values())
        assert not result.mode_share or math.isclose(share, 1.0, rel_tol=1e-6)
        assert 0 <= document["coherence"]["cut_ratio"] <= 1
        assert -0.5 <= document["coherence"]["modularity"] <= 1


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(study_files("sv10"))
def test_any_valid_sv10_study_analyses_soundly(data):
    assert_analyses_are_sound(data)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(study_files("ek10"))
def test_any_valid_ek10_study_analyses_soundly(data):
    assert_analyses_are_sound(data)
