"""Mode-awareness risk of a task: an index in [0, 1] with its factors (methods document,
``#awareness-index``).

For every task a human is involved in or accountable for::

    index = sum over factors of weight_f * factor_f

with the factors, each in [0, 1]:

- ``automation``: mean degree of automation of the decision and action stages
  (out-of-the-loop effects; Endsley & Kiris 1995; Onnasch et al. 2014);
- ``feedback``: weakness of the feedback the person gets when automation is involved
  (``cue_weakness``; none counts as none);
- ``initiation``: how far the occurrences are started by someone other than the person
  (``initiation_weight``; Sarter & Woods 1995);
- ``mode_change``: the weakest cue among the mode transitions that change the task's
  holder (0 when no transition changes it); 1 when the task's holder is in question in
  an error state of the mode map, where the person can believe a mode in which someone
  else holds it (Degani & Heymann 2002; :mod:`.modecheck`);
- ``rarity``: how rarely the person does the task hands-on,
  ``1 - min(1, hands-on occurrences per day / practice_per_day)``.

The weights are the assumption ``awareness_weights`` (tool assumption; they add up to 1).

References
----------
.. [1] Endsley, M. R., & Kiris, E. O. (1995). The out-of-the-loop performance problem and
   level of control in automation. Human Factors, 37(2), 381-394.
.. [2] Onnasch, L., Wickens, C. D., Li, H., & Manzey, D. (2014). Human performance
   consequences of stages and levels of automation. Human Factors, 56(3), 476-488.
.. [3] Sarter, N. B., & Woods, D. D. (1995). How in the world did we ever get into that
   mode? Mode error and awareness in supervisory control. Human Factors, 37(1), 5-19.
.. [4] Degani, A., & Heymann, M. (2002). Formal verification of human-automation
   interaction. Human Factors, 44(1), 28-43.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..model import Study
from .involvement import Involvement

__all__ = ["Awareness", "awareness"]


@dataclass(frozen=True)
class Awareness:
    """A task's mode-awareness index with each factor and its weighted contribution."""

    task_id: str
    index: float
    factors: dict[str, float]
    contributions: dict[str, float]


def awareness(
    study: Study,
    involved: Involvement,
    initiator: str,
    per_day: float,
    mode_cue: str | None,
    assumptions: dict[str, Any],
    in_error_state: bool = False,
) -> Awareness | None:
    """The awareness index of one task, or ``None`` when no human is involved in it or
    accountable for it.

    Parameters
    ----------
    study : Study
    involved : Involvement
        The task under its assignment in force.
    initiator : str
        Who starts its occurrences (resolved: ``human``, ``automation``, ``event``,
        ``schedule``).
    per_day : float
        Its occurrences per day.
    mode_cue : str or None
        The weakest cue among the mode transitions that change its holder, if any.
    assumptions : dict
        The resolved assumptions.
    in_error_state : bool, optional
        Whether the task's holder is in question in an error state of the mode map; the
        ``mode_change`` factor is then 1, its highest.
    """
    accountable = study.agents_by_id.get(involved.accountable or "")
    human_accountable = accountable is not None and accountable.is_human
    assignment = involved.assignment
    if (
        assignment is None
        or not involved.applies
        or (involved.human is None and not human_accountable)
    ):
        return None
    weakness = assumptions["cue_weakness"]
    degrees = involved.degrees
    automated = involved.automation is not None
    feedback = (assignment.feedback or "none") if automated else None
    hands_on = per_day * (1 - involved.automated_share) if involved.human else 0.0
    practice = float(assumptions["practice_per_day"])
    factors = {
        "automation": (degrees["decision"] + degrees["action"]) / 2,
        "feedback": float(weakness[feedback]) if feedback else 0.0,
        "initiation": float(assumptions["initiation_weight"].get(initiator, 0.0)),
        "mode_change": 1.0 if in_error_state else (float(weakness[mode_cue]) if mode_cue else 0.0),
        "rarity": 1 - min(1.0, hands_on / practice),
    }
    weights = assumptions["awareness_weights"]
    contributions = {name: float(weights[name]) * value for name, value in factors.items()}
    return Awareness(
        involved.task_id, min(1.0, sum(contributions.values())), factors, contributions
    )
