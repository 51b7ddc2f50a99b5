"""The ek10 supervision defaults, keyed as Endsley & Kaber's table is.

The roles below are typed from Endsley & Kaber (1999) (level names checked via Beer,
Fisk & Rogers 2014, Table 3; the role matrix from memory, matching a public reproduction
cell for cell), not read from Baton's code: Monitoring, Generating, Selecting,
Implementing; H human, C computer, H/C both.
"""

from __future__ import annotations

from itertools import combinations

from allocation.core.assumptions import resolve_assumptions

ROLES = {
    1: ("H", "H", "H", "H"),
    2: ("H/C", "H", "H", "H/C"),
    3: ("H/C", "H", "H", "C"),
    4: ("H/C", "H/C", "H", "H/C"),
    5: ("H/C", "H/C", "H", "C"),
    6: ("H/C", "H/C", "H/C", "C"),
    7: ("H/C", "C", "H", "C"),
    8: ("H/C", "H/C", "C", "C"),
    9: ("H/C", "C", "C", "C"),
    10: ("C", "C", "C", "C"),
}


def test_levels_with_the_same_supervising_roles_cost_the_same():
    """Generating is not supervised: levels alike in Monitoring, Selecting and
    Implementing cost the same (3, 5 and 7; 2 and 4; 8 and 9)."""
    table = resolve_assumptions({}, "ek10")["supervision_s"]
    for a, b in combinations(ROLES, 2):
        ra, rb = ROLES[a], ROLES[b]
        if (ra[0], ra[2], ra[3]) == (rb[0], rb[2], rb[3]):
            assert table[str(a)] == table[str(b)], (a, b)


def test_the_defaults_by_role_worked_by_hand():
    """Where the computer implements: the person selects, an approval (5 s); both, a veto
    window (8 s); the computer, a notice (3 s). The person implementing, or the computer
    alone monitoring, costs none."""
    table = resolve_assumptions({}, "ek10")["supervision_s"]
    assert table == {
        "1": 0,
        "2": 0,
        "3": 5,
        "4": 0,
        "5": 5,
        "6": 8,
        "7": 5,
        "8": 3,
        "9": 3,
        "10": 0,
    }
