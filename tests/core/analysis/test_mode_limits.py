"""The bound on the mode-map check (``MODE_STATES_MAX``, ``MODE_STEPS_MAX``,
allocation/core/limits.py): the size counted from the map before any search, worked by
hand on small maps; a map over it refused by the study checks at its plan's ``modes``
and not searched by the check itself; the largest maps accepted checked within a time
and memory cap (tests/capped.py). The beliefs are sets of modes the person cannot tell
apart (methods document, #mode-check), so the bounds are modes x beliefs and beliefs x
ways.
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


def subsets(k, extra=0, idle=0):
    # Modes a1..ak that all show "x", reached by an alert from a1 to a2, so the person
    # then believes all k; 'keep j' leaves every ak but aj where it is, so it takes aj
    # out of a belief: the beliefs are the 2**k - 1 non-empty subsets. ``extra`` modes,
    # each showing its own indication, are never believed; ``idle`` changes from a1 to
    # itself with no cue add one way each.
    doc = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    plan = doc["plans"][0]
    core = [f"a{i}" for i in range(1, k + 1)]
    states = [{"id": m, "name": m, "indication": "x"} for m in core]
    states += [{"id": f"z{i}", "name": f"z{i}", "indication": f"off {i}"} for i in range(extra)]
    moves = [{"from": "a1", "to": "a2", "trigger": "tick", "by": "automation", "cue": "alert"}]
    moves += [
        {"from": m, "to": m, "trigger": f"keep {j}", "by": "human", "cue": "display"}
        for j in core for m in core if m != j
    ]
    moves += [
        {"from": "a1", "to": "a1", "trigger": f"idle {i}", "by": "automation", "cue": "none"}
        for i in range(idle)
    ]
    plan["modes"] = {"initial": "a1", "states": states, "transitions": moves}
    return doc


def beliefs(n, t, seed, idle):
    # n modes that all look alike, each with t actions of the person leading to one
    # random mode each and a change of the device shown on the display; ``idle`` changes
    # with no cue. Many beliefs, found only by the count (used to measure the cost).
    doc = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    plan = doc["plans"][0]
    leaves = list(plan["assignments"])
    rng = random.Random(seed)
    moves = []
    for i in range(n):
        for k in range(t):
            moves.append({"from": f"m{i}", "to": f"m{rng.randrange(n)}",
                          "trigger": f"press {k}", "by": "human", "cue": "display"})
        moves.append({"from": f"m{i}", "to": f"m{rng.randrange(n)}", "trigger": f"drift {i}",
                      "by": "automation", "cue": "display"})
    moves += [{"from": f"m{k % n}", "to": f"m{(k * 7 + 3) % n}", "trigger": f"idle {k}",
               "by": "automation", "cue": "none"} for k in range(idle)]
    plan["modes"] = {
        "initial": "m0",
        "states": [
            {"id": f"m{i}", "name": f"Mode {i}", "indication": "lamp",
             "overrides": {leaves[i % len(leaves)]: {"automation": "thermostat"}}
             if i % 3 == 0 else {}}
            for i in range(n)
        ],
        "transitions": moves,
    }
    return doc
"""

namespace: dict = {}
exec(MAP, namespace)
document = namespace["document"]
subsets = namespace["subsets"]


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


def test_an_action_with_two_expected_targets_gives_one_belief_of_both():
    """'press' leads from A to B or to C (a nondeterministic action): believing A, the
    person then believes "B or C" (the image of {A}). Beliefs: {A} (the start) and
    {B, C}; no mode of {B, C} accepts 'press' ('press' leads to two modes, so no mode
    accepts it without effect), and 'lost' leads to a mode the map lacks (left out, as
    the search leaves it out). Ways: 'press' twice and 'quiet' (no cue), 1 each: 3. So
    2 x 3 = 6 steps; states 3 modes x 3 (the larger of 3 modes and 2 beliefs) = 9."""
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
    size = mode_search_size(modes)
    assert (size.beliefs, size.states, size.steps) == (2, 9, 6)


def test_look_alike_modes_give_every_subset_as_a_belief():
    """The subsets map (see ``subsets``) with k = 4: beliefs 2**4 - 1 = 15, counted by
    hand from the rules (an alert into a look-alike mode gives all four; each 'keep j'
    takes a_j out); ways: 4 x 3 actions + 1 alert = 13, steps 15 x 13 = 195, states
    4 modes x 15 = 60. The search reaches exactly those 60 states: from the alert on,
    the device stays in a2 while the person drops modes one by one, and before it in a1
    believing {a1} or any subset reached by 'keep' from it (only {a1}) - so 1 + 15 = 16
    reachable states. Counted with networkx on the product graph below."""
    import networkx as nx

    from allocation.core import read_study
    from allocation.core.analysis.modecheck import explore

    modes = read_study(subsets(4)).plans[0].modes
    size = mode_search_size(modes)
    assert (size.beliefs, size.steps, size.states) == (15, 195, 60)
    # The product graph by hand: (a1, {a1}) -tick-> (a2, A); (a2, B) -keep j-> (a2,
    # B - {aj}) for aj in B with B - {aj} non-empty (a2 accepts every 'keep' but its own,
    # which leaves the device in a2 too: refused, no move).
    core = frozenset({"a1", "a2", "a3", "a4"})
    graph = nx.DiGraph()
    graph.add_edge(("a1", frozenset({"a1"})), ("a2", core))
    frontier = [core]
    while frontier:
        belief = frontier.pop()
        for mode_id in belief:
            rest = belief - {mode_id}
            if rest and mode_id != "a2" and ("a2", rest) not in graph:
                frontier.append(rest)
            if rest and mode_id != "a2":
                graph.add_edge(("a2", belief), ("a2", rest))
    start = ("a1", frozenset({"a1"}))
    expected = nx.descendants(graph, start) | {start}
    assert set(explore(modes).states) == expected


def test_the_map_that_exhausted_the_server_is_refused_quickly_within_a_small_cap():
    """200 modes and 5,000 transitions (its check took 35 s and 4.2 GB): refused by the
    study checks at the plan's modes in a child capped at 400 MiB and 20 s; the count
    of beliefs stops past the limit (so "at least")."""
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
    assert "states (modes x beliefs" in message and "MODE_STEPS_MAX" in message
    assert "at least" in message
    assert done.seconds < 5


def test_a_map_at_the_limit_is_checked_within_a_cap():
    """23 look-alike modes with random actions (seed 3) give 1,357 beliefs, found by the
    count; 55 changes with no cue bring the steps to 199,479, just under MODE_STEPS_MAX
    (one more would add 1,357). Accepted, and checked in a child capped at 700 MiB and
    40 s (measured: the mode check alone about 4 s, the plan's whole analysis 6.5 s,
    210 MiB at peak)."""
    result = load_study(namespace["beliefs"](23, 2, 3, 55))
    assert result.ok
    size = mode_search_size(result.study.plans[0].modes)
    assert size.steps <= MODE_STEPS_MAX < size.steps + size.beliefs
    assert not load_study(namespace["beliefs"](23, 2, 3, 56)).ok
    done = run_capped(
        MAP
        + """
from allocation.core import load_study
from allocation.core.analysis import analyse_plan
study = load_study(beliefs(23, 2, 3, 55)).study
kinds = {f.kind for f in analyse_plan(study, study.plans[0].id).findings}
outcome = sorted(kinds)
""",
        seconds=40,
        megabytes=700,
    )
    assert "error_state" in done.outcome and "mode_map_unchecked" not in done.outcome


def test_one_past_the_limits_is_refused_and_at_them_accepted():
    """States count modes x the larger of modes and beliefs. The subsets map with k = 9:
    2**9 - 1 = 511 beliefs (by hand, see
    ``test_look_alike_modes_give_every_subset_as_a_belief``); 489 modes (480 never
    believed, each with its own indication) x 511 = 249,879, under MODE_STATES_MAX
    (250,000); 490 modes give 250,390, over. 501 modes of one belief each still give
    501 x 501 = 251,001, over, as before. Steps with k = 8 (255 beliefs): 8 x 7 actions
    + 1 alert = 57 ways; 727 idle changes make 784 ways, 255 x 784 = 199,920 steps,
    under MODE_STEPS_MAX (200,000); 728 make 200,175, over."""
    assert load_study(subsets(9, extra=480)).ok
    over = load_study(subsets(9, extra=481))
    assert [p.path for p in over.errors] == ["$.plans[0].modes"]
    assert f"limit is {MODE_STATES_MAX:,}, MODE_STATES_MAX" in over.errors[0].message
    # The count of beliefs stops once past a limit, so the message says "at least".
    assert "250,390 states" in over.errors[0].message
    assert "511 different beliefs" in over.errors[0].message
    assert "251,001 states" in load_study(document(501, 10)).errors[0].message
    assert load_study(document(500, 10)).ok
    assert load_study(subsets(8, idle=727)).ok
    refused = load_study(subsets(8, idle=728))
    assert "200,175 steps" in refused.errors[0].message


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
