"""Needs per stage: a capability finding only for a stage the agent actually does.

The cases are worked by hand on the sv10 scale, where a stage at level L has the degree
of automation d = (L - 1) / 9 (Parasuraman, Sheridan & Wickens 2000, levels read as even
steps): at level 1 the person does the stage alone (d = 0), at level 10 the device does
it alone (d = 1), in between both take part.
"""

from __future__ import annotations

import pytest

from allocation.core.analysis.plan import analyse_plan
from allocation.core.fileformat import load_study
from allocation.core.needs import needs_text, parse_needs
from allocation.core.writing import study_to_json


def _study(needs, levels) -> dict:
    return {
        "format": "baton.study",
        "version": 2,
        "study": {"id": "cycler", "title": "Overnight cycler", "scale": "sv10"},
        "agents": [
            {"id": "nurse", "name": "Nurse", "kind": "human", "capabilities": ["judgement"]},
            {"id": "cycler", "name": "Cycler", "kind": "automation", "capabilities": ["pumping"]},
        ],
        "events": [],
        "tasks": [
            {
                "id": "T1",
                "title": "Adjust the fill volume",
                "occurs": {"per_day": 1},
                "duration_s": 60,
                "severity": 3,
                "needs": needs,
            }
        ],
        "links": [],
        "plans": [
            {
                "id": "p",
                "name": "Shared",
                "assignments": {
                    "T1": {"human": "nurse", "automation": "cycler", "levels": levels}
                },
            }
        ],
    }


def _missing(needs, levels) -> dict[str, str]:
    result = load_study(_study(needs, levels))
    assert result.errors == [], result.errors
    found = [f for f in analyse_plan(result.study, "p").findings if f.kind == "capability"]
    return {finding.agents[0]: finding.message for finding in found}


# The nurse decides (level 1), the cycler senses, analyses and acts (level 10).
SPLIT = {"acquisition": 10, "analysis": 10, "decision": 1, "action": 10}


def test_needs_per_stage_ask_each_agent_only_for_the_stages_it_does():
    needs = {"decision": ["judgement"], "action": ["pumping"]}
    assert _missing(needs, SPLIT) == {}


def test_a_plain_list_applies_to_every_stage_each_agent_does():
    found = _missing(["judgement", "pumping"], SPLIT)
    assert set(found) == {"nurse", "cycler"}
    assert "lacks pumping" in found["nurse"]
    assert "lacks judgement" in found["cycler"]


def test_a_shared_stage_asks_both():
    # Decision at level 5: d = 4/9, so both the nurse and the cycler take part in it.
    found = _missing({"decision": ["judgement"]}, {**SPLIT, "decision": 5})
    assert list(found) == ["cycler"]
    assert "lacks judgement for decision" in found["cycler"]


def test_needs_per_stage_round_trip_and_unknown_stages_are_refused():
    needs = {"decision": ["judgement"], "action": ["pumping"]}
    result = load_study(_study(needs, SPLIT))
    assert study_to_json(result.study)["tasks"][0]["needs"] == needs
    bad = load_study(_study({"deciding": ["judgement"]}, SPLIT))
    assert [p.path for p in bad.errors] == ["$.tasks[0].needs.deciding"]


@pytest.mark.parametrize(
    ("text", "needs"),
    [
        ("judgement, pumping", ["judgement", "pumping"]),
        (
            "decision: judgement; action: pumping, lifting",
            {"decision": ["judgement"], "action": ["pumping", "lifting"]},
        ),
        ("  ", None),
    ],
)
def test_the_one_line_text_of_needs_reads_back(text, needs):
    assert parse_needs(text) == needs
    if needs:
        assert parse_needs(needs_text(needs)) == needs


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("deciding: judgement", "'deciding' is not a stage"),
        ("decision: a; decision: b", "gives the stage decision twice"),
        ("decision: ", "gives no capability for the stage decision"),
        ("a,,b", "has an empty name between commas"),
        ("decision: a; b", "'b' names no stage"),
    ],
)
def test_bad_text_says_what_is_wrong(text, message):
    with pytest.raises(ValueError, match=message):
        parse_needs(text)
