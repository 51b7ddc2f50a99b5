"""How much memory a simulation will need, estimated before any day is drawn.

A chunk's working set grows with what it draws and sums up (methods document,
``#simulation``):

- **occurrences**: every happening of every trigger over the chunk's days and the lead
  days before it, times the tasks of its chain (each may occur), each a row of the
  draw's arrays and then of a person's stretches of work and their sweep; and each
  periodic look or flag of a monitor;
- **bins**: the chunk's days times the bins of a day (``study.bin_s``), each an edge,
  a length, an integral and an occupancy (the people are summed up one after another);
- **mode changes**: per day at most the fastest way out of any mode (the expected time
  in a mode of a continuous-time Markov chain is one over its total rate out, Ross
  2014, ch. 6), each held in Python lists while the day's path is drawn;
- **daily figures**: days times people times :data:`~.results.FIGURES`, per chunk in
  its stored JSON form, and for the whole run while the chunks are read back, joined
  and written as the result.

The bytes per item are measured (Python's ``tracemalloc``, which NumPy reports to, on
studies of one to a hundred people) and rounded up: about 360 bytes per occurrence of a
one-person study (about 410 since each stretch carries its weight), 33 per bin, 61 per
daily figure in a chunk's JSON, 95 per daily figure combined. The estimate is the
work's own memory, not the interpreter's.

References
----------
.. [1] Ross, S. M. (2014). Introduction to Probability Models (11th ed.), ch. 5-6:
   Poisson processes; continuous-time Markov chains.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..limits import SIMULATION_MAX_BYTES
from ..model import Study
from .results import FIGURES
from .sampling import DAY_S
from .tables import SimPlan

__all__ = ["MemoryEstimate", "simulation_memory_estimate"]

#: Bytes per item (measured, rounded up; see the module docstring).
OCCURRENCE_BYTES = 440
BIN_BYTES = 48
MODE_CHANGE_BYTES = 64
CHUNK_FIGURE_BYTES = 64
COMBINED_FIGURE_BYTES = 128


@dataclass(frozen=True)
class MemoryEstimate:
    """The estimated memory of a ``days``-day run, with what it is made of."""

    days: int
    chunk_days: int
    occurrences: float  # per chunk, lead days included
    bins: int  # per chunk
    mode_changes: float  # per chunk
    figures: int  # daily figures of the whole run
    chunk_bytes: float
    combine_bytes: float

    @property
    def bytes(self) -> float:
        """The chunk's working set plus the combining (a worker may do both)."""
        return self.chunk_bytes + self.combine_bytes

    def refusal(self, limit: int = SIMULATION_MAX_BYTES) -> str:
        """Why a run of this size is refused: the estimate, its parts and the limit."""
        return (
            f"simulating {self.days:,} days would need about {_size(self.bytes)} of memory: "
            f"{_size(self.chunk_bytes)} for each {self.chunk_days}-day part "
            f"({self.occurrences:,.0f} task occurrences, {self.bins:,} workload bins, "
            f"{self.mode_changes:,.0f} mode changes) and {_size(self.combine_bytes)} to "
            f"combine {self.figures:,} daily figures; the limit is {_size(limit)} "
            "(SIMULATION_MAX_BYTES). Ask for fewer days, or lower the rates, chains, "
            "mode changes or people that make it large, or widen study.bin_s"
        )


def _size(value: float) -> str:
    for unit, scale in (("GiB", 1024**3), ("MiB", 1024**2), ("KiB", 1024)):
        if value >= scale:
            return f"{value / scale:,.1f} {unit}"
    return f"{value:,.0f} bytes"


def _rate(rule) -> float:
    """A trigger's happenings a day."""
    if rule.times is not None:
        return float(len(rule.times))
    if rule.every_days:
        return 1.0 / rule.every_days
    return float(rule.per_day or 0.0)


def _per_day(plan: SimPlan) -> float:
    """Expected task occurrences a day: each trigger's happenings times its chain."""
    total = 0.0
    for chain in plan.chains:
        total += _rate(chain.rule) * len(chain.members)
    # Periodic looks and flags are drawn as rows of their own.
    return total + sum(per_day for _task, _person, per_day, _s, _flag in plan.looks)


def simulation_memory_estimate(
    study: Study | SimPlan, plan_id: str | None = None, *, days: int
) -> MemoryEstimate:
    """The memory a ``days``-day run of a plan will need, before drawing anything.

    Parameters
    ----------
    study : Study or SimPlan
        A study without errors (with ``plan_id``), or a plan's simulation tables.
    plan_id : str, optional
        The plan, when ``study`` is a study.
    days : int
        The run's length.

    Returns
    -------
    MemoryEstimate
        Its ``bytes`` is compared with ``SIMULATION_MAX_BYTES``.
    """
    from . import CHUNK_DAYS, sim_plan  # the package imports this module

    plan = study if isinstance(study, SimPlan) else sim_plan(study, str(plan_id))
    chunk_days = max(1, min(int(days), CHUNK_DAYS))
    drawn_days = chunk_days + plan.lead_days
    occurrences = _per_day(plan) * drawn_days
    bins = chunk_days * int(np.ceil(DAY_S / plan.bin_s))
    fastest = float(plan.rates.sum(axis=1).max()) if plan.rates.size else 0.0
    # Fixed-time moves, and the happenings of the events that move the mode.
    rules = [chain.rule for chain in plan.chains if chain.trigger_id in plan.mode_moves]
    rules += list(plan.mode_event_rules.values())
    moved = len(plan.mode_impulses) + sum(_rate(rule) for rule in rules)
    mode_changes = (fastest + moved + 1.0) * drawn_days
    people = len(plan.humans)
    figures = int(days) * people * len(FIGURES)
    chunk_bytes = (
        occurrences * OCCURRENCE_BYTES
        + bins * BIN_BYTES
        + mode_changes * MODE_CHANGE_BYTES
        + chunk_days * people * len(FIGURES) * CHUNK_FIGURE_BYTES
    )
    return MemoryEstimate(
        days=int(days),
        chunk_days=chunk_days,
        occurrences=occurrences,
        bins=bins,
        mode_changes=mode_changes,
        figures=figures,
        chunk_bytes=chunk_bytes,
        combine_bytes=float(figures * COMBINED_FIGURE_BYTES),
    )
