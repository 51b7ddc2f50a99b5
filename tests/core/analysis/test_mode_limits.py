"""The bound on the mode-map check (``MODE_STATES_MAX``, ``MODE_STEPS_MAX``,
allocation/core/limits.py): the size counted from the map before any search, worked by
hand on small maps; a map over it refused by the study checks at its plan's ``modes``
and not searched by the check itself; the largest maps accepted checked within a time
and memory cap (tests/capped.py).
"""

from __future__ import annotations

from allocation.core import load_study
from allocation.core.analysis.modecheck import mode_search_size, verify_mode_map
from allocation.core.assumptions import resolve_assumptions
from allocation.core.limits import MODE_STATES_MAX, MODE_STEPS_MAX
from allocation.core.model import Mode, ModeMap, Transition
from tests.capped import run_capped

#: A map of ``n`` modes and ``t`` transitions on the home-heating example; ``kind``
#: "worst" alternates display-cued changes of the device (two ways each) with actions of
#: the person that no other mode offers (each refused wherever it is believed).
MAP = """
import json, random
from pathlib import Path

EXAMPLE = Path("allocation/examples/home-heating.json")

def document(n, t, kind="random", seed=5):
    doc = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    plan = doc["plans"][0]
    leaves = list(plan["assignments"])
    rng = random.Random(seed)

    def move(i):
        source, target = f"m{rng.randrange(n)}", f"m{rng.randrange(n)}"
        if kind == "worst":
            human = i % 2 == 1
            trigger = f"press {i}" if human else f"auto {i}"
            return {"from": source, "to": target, "trigger": trigger,
                    "by": "human" if human else "automation", "cue": "display", "per_day": 1}
        return {"from": source, "to": target, "trigger": f"change {i}",
                "by": rng.choice(("human", "automation")),
                "cue": rng.choice(("display", "alert", "none")), "per_day": 1}

    plan["modes"] = {
        "initial": "m0",
        "states": [
            {"id": f"m{i}", "name": f"Mode {i}", "indication": f"lamp {i % 7}",
             "overrides": {leaves[i % len(leaves)]: {"automation": "thermostat"}}
             if i % 3 == 0 else {}}
            for i in range(n)
        ],
        "transitions": [move(i) for i in range(t)],
    }
    return doc
"""

namespace: dict = {}
exec(MAP, namespace)
document = namespace["document"]


def modes_of(ids: str) -> tuple[Mode, ...]:
    return tuple(Mode(i, f"Mode {i}", None, None) for i in ids)


def test_the_size_of_a_small_map_worked_by_hand():
    """Three modes: A->B by the device shown on the display (noticed or missed: 2 ways),
    B->C with an alert (1), 'press' from A to B and from C to A by the person (1 each:
    no mode offers 'press' to two modes). 5 ways from each of 3 believed modes: 15 steps;
    3 x 3 states."""
    modes = ModeMap(
        "A",
        modes_of("ABC"),
        (
            Transition("A", "B", "drift", "automation", "display"),
            Transition("B", "C", "fault", "automation", "alert"),
            Transition("A", "B", "press", "human", "display"),
            Transition("C", "A", "press", "human", "display"),
        ),
    )
    size = mode_search_size(modes)
    assert (size.modes, size.transitions, size.states, size.steps) == (3, 4, 9, 15)


def test_an_action_with_two_expected_targets_counts_both_ways():
    """'press' leads from A to B or to C (a nondeterministic action): believing A, the
    person expects either, so each 'press' transition counts 2 ways; plus 'quiet' with no
    cue (1): (2 + 2 + 1) x 3 modes = 15 steps. A transition naming an unknown mode is
    left out, as the search leaves it out."""
    modes = ModeMap(
        "A",
        modes_of("ABC"),
        (
            Transition("A", "B", "press", "human", "none"),
            Transition("A", "C", "press", "human", "none"),
            Transition("B", "A", "quiet", "automation", "none"),
            Transition("B", "Z", "lost", "automation", "display"),
        ),
    )
    assert mode_search_size(modes).steps == 15


def test_the_map_that_exhausted_the_server_is_refused_quickly_within_a_small_cap():
    """200 modes and 5,000 transitions (its check took 35 s and 4.2 GB): refused by the
    study checks at the plan's modes in a child capped at 400 MiB and 20 s."""
    done = run_capped(
        MAP
        + """
from allocation.core import load_study
result = load_study(document(200, 5_000))
outcome = [(p.path, p.message) for p in result.errors]
""",
        seconds=20,
        megabytes=400,
    )
    assert len(done.outcome) == 1
    path, message = done.outcome[0]
    assert path == "$.plans[0].modes"
    assert message.startswith("the mode map has 200 modes and 5,000 transitions")
    assert "up to 40,000 states" in message and "MODE_STEPS_MAX" in message
    assert done.seconds < 5


def test_a_map_at_the_limit_is_checked_within_a_cap():
    """The "worst" map of 100 modes and 1,333 transitions takes exactly MODE_STEPS_MAX
    steps (667 device changes x 2 ways + 666 actions x 1, from each of 100 believed
    modes); it is accepted and checked in a child capped at 700 MiB and 40 s."""
    result = load_study(document(100, 1_333, "worst"))
    assert result.ok
    assert mode_search_size(result.study.plans[0].modes).steps == MODE_STEPS_MAX
    done = run_capped(
        MAP
        + """
from allocation.core import load_study
from allocation.core.analysis import analyse_plan
study = load_study(document(100, 1_333, "worst")).study
kinds = {f.kind for f in analyse_plan(study, study.plans[0].id).findings}
outcome = sorted(kinds)
""",
        seconds=40,
        megabytes=700,
    )
    assert "error_state" in done.outcome and "refused_action" in done.outcome
    assert "mode_map_unchecked" not in done.outcome


def test_one_past_the_limits_is_refused_and_at_them_accepted():
    """501 modes: 251,001 states, over MODE_STATES_MAX (250,000); 500 modes are not."""
    over = load_study(document(501, 10))
    assert [p.path for p in over.errors] == ["$.plans[0].modes"]
    assert f"limit is {MODE_STATES_MAX:,}, MODE_STATES_MAX" in over.errors[0].message
    assert "up to 251,001 states" in over.errors[0].message
    assert load_study(document(500, 10)).ok
    # One more device change shown on the display: 2 more ways from each of 100 modes.
    worst = document(100, 1_333, "worst")
    worst["plans"][0]["modes"]["transitions"].append(
        {"from": "m1", "to": "m2", "trigger": "extra", "by": "automation", "cue": "display"}
    )
    refused = load_study(worst)
    assert "take up to 200,200 steps" in refused.errors[0].message


def test_the_check_itself_does_not_search_a_map_over_the_limit():
    """A map that reaches the check without the study checks (here: read with its
    error) yields one finding naming the limits, not a search."""
    result = load_study(document(1_000, 50_000))
    study = result.study
    plan = study.plans[0]
    findings = verify_mode_map(study, plan, resolve_assumptions({}, study.scale))
    assert [f.kind for f in findings] == ["mode_map_unchecked"]
    assert "1,000 modes and 50,000 transitions" in findings[0].message
    assert "MODE_STATES_MAX" in findings[0].message and findings[0].severity == 3
