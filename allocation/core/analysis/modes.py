"""The mode map in the analyses: the matrix exponential, the assignment in force in each
mode, and the occupancy of one day started in the initial mode.

The analyses use the long-run time in each mode (:mod:`.modetime`); the one-day
occupancy below is what revision 1 reported, kept to give the figures before and after
(methods document, ``#revision-2-time``). Transitions that give a rate (``per_day``,
read as the rate while the machine is in the transition's source mode) make a
continuous-time Markov chain; its occupancy averaged over one day from the initial mode:

    occupancy = (1/T) * integral from 0 to T of e_initial . exp(Q t) dt,   T = 1 day

computed with the block-matrix identity for the integral of a matrix exponential (Van
Loan 1978). Transitions without a rate happen only when someone makes them; they do not
move the occupancy (tool assumption).

References
----------
.. [1] Van Loan, C. F. (1978). Computing integrals involving the matrix exponential.
   IEEE Transactions on Automatic Control, 23(3), 395-404.
"""

from __future__ import annotations

import numpy as np

from ..model import Assignment, ModeMap, Plan

__all__ = ["assignment_in_mode", "expm", "mode_occupancy"]


def expm(matrix: np.ndarray) -> np.ndarray:
    """The matrix exponential by scaling and squaring of a Taylor series.

    Enough for the small, well-scaled generator matrices of mode maps; tested against
    ``scipy.linalg.expm``.
    """
    norm = np.linalg.norm(matrix, ord=1)
    squarings = max(0, int(np.ceil(np.log2(norm))) + 1) if norm > 0.5 else 0
    scaled = matrix / (2**squarings)
    result = np.eye(len(matrix))
    term = np.eye(len(matrix))
    for order in range(1, 20):
        term = term @ scaled / order
        result = result + term
    for _ in range(squarings):
        result = result @ result
    return result


def mode_occupancy(modes: ModeMap, horizon_days: float = 1.0) -> dict[str, float]:
    """The share of the day the machine spends in each mode, starting in the initial one."""
    ids = [mode.id for mode in modes.states]
    if modes.initial not in ids:
        return {}
    index = {mode_id: i for i, mode_id in enumerate(ids)}
    size = len(ids)
    generator = np.zeros((size, size))
    for transition in modes.expanded:
        if transition.per_day and transition.source != transition.target:
            source, target = index[transition.source], index[transition.target]
            generator[source, target] += float(transition.per_day)
            generator[source, source] -= float(transition.per_day)
    # Van Loan: exp([[Q, I], [0, 0]] T) holds the integral of exp(Q t) over [0, T] in its
    # top-right block.
    block = np.zeros((2 * size, 2 * size))
    block[:size, :size] = generator * horizon_days
    block[:size, size:] = np.eye(size) * horizon_days
    integral = expm(block)[:size, size:] / horizon_days
    shares = np.clip(integral[index[modes.initial]], 0.0, None)
    shares = shares / shares.sum()
    return {mode_id: float(shares[index[mode_id]]) for mode_id in ids}


def assignment_in_mode(plan: Plan, mode_id: str | None, task_id: str) -> Assignment | None:
    """The assignment in force for a task in a mode: the mode's override, else the plan's."""
    if mode_id is not None and plan.modes is not None:
        mode = plan.modes.by_id.get(mode_id)
        if mode is not None and mode.overrides and task_id in mode.overrides:
            return mode.overrides[task_id]
    return plan.assignments.get(task_id)
