"""Levels of automation: the two scales as data, and degrees of automation per stage.

Every assignment resolves to a degree of automation d in [0, 1] for each of the four
information-processing stages (Parasuraman, Sheridan & Wickens 2000). The category shown
everywhere derives from the degrees: all 0 is *person*, all 1 is *device*, otherwise
*shared*.

References
----------
.. [1] Parasuraman, R., Sheridan, T. B., & Wickens, C. D. (2000). A model for types and
   levels of human interaction with automation. IEEE Transactions on Systems, Man, and
   Cybernetics - Part A, 30(3), 286-297. Table I, after Sheridan & Verplank (1978).
.. [2] Endsley, M. R., & Kaber, D. B. (1999). Level of automation effects on performance,
   situation awareness and workload in a dynamic control task. Ergonomics, 42(3),
   462-492. Level names via Beer, Fisk & Rogers (2014), Table 3.
.. [3] Onnasch, L., Wickens, C. D., Li, H., & Manzey, D. (2014). Human performance
   consequences of stages and levels of automation: an integrated meta-analysis.
   Human Factors, 56(3), 476-488.
"""

from __future__ import annotations

from .model import Assignment
from .vocabulary import STAGES

__all__ = [
    "DOA_STAGE_WEIGHTS",
    "EK10_LEVELS",
    "EK10_ROLE_DEGREE",
    "SV10_LEVELS",
    "category_of",
    "degree_of_automation",
    "level_text",
    "shared_levels",
    "single_level",
    "stage_degrees",
    "stage_levels",
    "weighted_degree",
]

#: Sheridan & Verplank's ten levels as tabulated in Parasuraman et al. (2000), Table I.
#: Published (checked against secondary reproductions). "The computer …"
SV10_LEVELS = {
    1: "offers no assistance: human must take all decisions and actions",
    2: "offers a complete set of decision/action alternatives",
    3: "narrows the selection down to a few",
    4: "suggests one alternative",
    5: "executes that suggestion if the human approves",
    6: "allows the human a restricted time to veto before automatic execution",
    7: "executes automatically, then necessarily informs the human",
    8: "informs the human only if asked",
    9: "informs the human only if it, the computer, decides to",
    10: "decides everything, acts autonomously, ignoring the human",
}

#: Endsley & Kaber's ten levels: name and roles for Monitoring, Generating, Selecting,
#: Implementing (H human, C computer, H/C both). Names published (via Beer, Fisk & Rogers
#: 2014, Table 3); the role matrix is from memory and matches a public reproduction cell
#: for cell.
EK10_LEVELS: dict[int, tuple[str, tuple[str, str, str, str]]] = {
    1: ("Manual Control", ("H", "H", "H", "H")),
    2: ("Action Support", ("H/C", "H", "H", "H/C")),
    3: ("Batch Processing", ("H/C", "H", "H", "C")),
    4: ("Shared Control", ("H/C", "H/C", "H", "H/C")),
    5: ("Decision Support", ("H/C", "H/C", "H", "C")),
    6: ("Blended Decision Making", ("H/C", "H/C", "H/C", "C")),
    7: ("Rigid System", ("H/C", "C", "H", "C")),
    8: ("Automated Decision Making", ("H/C", "H/C", "C", "C")),
    9: ("Supervisory Control", ("H/C", "C", "C", "C")),
    10: ("Full Automation", ("C", "C", "C", "C")),
}

#: Degree of automation of an Endsley & Kaber role (methods document,
#: ``#levels-of-automation``): human 0, both 0.5, computer 1. The roles Monitoring,
#: Generating, Selecting, Implementing map in order to the stages acquisition, analysis,
#: decision, action.
EK10_ROLE_DEGREE = {"H": 0.0, "H/C": 0.5, "C": 1.0}

#: Stage weights of the overall degree of automation. Tool assumption following the
#: ordering of Onnasch et al. (2014): later stages weigh more (1 : 2 : 3 : 4), so both a
#: later stage and a higher level raise the overall degree.
DOA_STAGE_WEIGHTS = {"acquisition": 0.1, "analysis": 0.2, "decision": 0.3, "action": 0.4}


def level_text(scale: str, level: int) -> str:
    """The words of a level on a scale: ``level_text("sv10", 5)``."""
    if scale == "ek10":
        return EK10_LEVELS[level][0]
    return SV10_LEVELS[level]


def stage_levels(assignment: Assignment) -> dict[str, int] | None:
    """The level of each stage of a shared assignment, or ``None`` when it has none."""
    levels = assignment.levels
    if levels is None:
        return None
    if isinstance(levels, dict):
        return {stage: int(levels[stage]) for stage in STAGES}
    return dict.fromkeys(STAGES, int(levels))


def single_level(assignment: Assignment) -> int:
    """The one level of a shared assignment on ``ek10``, whose levels are not per stage.

    The checks require it (a study with errors is not analysed); a missing or per-stage
    level raises ``TypeError``.
    """
    levels = assignment.levels
    if levels is None or isinstance(levels, dict):
        raise TypeError(f"an ek10 assignment needs one level, not {levels!r}")
    return int(levels)


def shared_levels(assignment: Assignment) -> dict[str, int]:
    """The level of each stage of a shared assignment, which the checks require it to have.

    A shared assignment without levels raises ``TypeError``.
    """
    levels = stage_levels(assignment)
    if levels is None:
        raise TypeError("a shared assignment needs levels")
    return levels


def stage_degrees(assignment: Assignment, scale: str) -> dict[str, float]:
    """The degree of automation of each stage, in [0, 1].

    A human-only assignment is all 0, an automation-only one all 1. A shared one follows
    its levels: on ``sv10``, d = (L - 1) / 9 per stage [1]_; on ``ek10``, the level's
    role matrix [2]_ with H = 0, H/C = 0.5, C = 1. An assignment that does not apply has
    no work to automate and is all 0.
    """
    if not assignment.is_applicable or assignment.automation is None:
        return dict.fromkeys(STAGES, 0.0)
    if assignment.human is None:
        return dict.fromkeys(STAGES, 1.0)
    if scale == "ek10":
        roles = EK10_LEVELS[single_level(assignment)][1]
        return {stage: EK10_ROLE_DEGREE[role] for stage, role in zip(STAGES, roles, strict=True)}
    levels = shared_levels(assignment)
    return {stage: (levels[stage] - 1) / 9 for stage in STAGES}


def degree_of_automation(degrees: dict[str, float]) -> float:
    """The overall degree of automation: stage degrees weighted 1 : 2 : 3 : 4 [3]_."""
    return sum(DOA_STAGE_WEIGHTS[stage] * degrees[stage] for stage in STAGES)


def weighted_degree(degrees: dict[str, float], split: dict[str, float]) -> float:
    """The share of a task's work the automation does: sum of split x degree."""
    return sum(split[stage] * degrees[stage] for stage in STAGES)


def category_of(degrees: dict[str, float]) -> str:
    """``"person"`` when every degree is 0, ``"device"`` when every one is 1, else
    ``"shared"``."""
    values = [degrees[stage] for stage in STAGES]
    if all(value == 0 for value in values):
        return "person"
    if all(value == 1 for value in values):
        return "device"
    return "shared"
