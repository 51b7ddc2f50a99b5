"""Day simulation and its distributions (methods document, ``#simulation``).

Simulates N days of a plan from a seed: when events and schedules happen, which tasks of
each chain follow, how long each takes, how long people take to respond, which mode the
device is in; per person the timeline of their involvements, the occupancy of each bin
of the day and the demand on each VACP channel. A run is cut into chunks of
:data:`CHUNK_DAYS` days, each drawn from its own stream of the seed, so the same seed
gives the same days however the chunks are spread over processes or machines.

Entry points: :func:`simulate` (a whole run in one process, with progress),
:func:`simulate_chunk` and :func:`combine` (a run spread over workers) and
:func:`day_timeline` (one day in full, for the day view).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from ..analysis.plan import analyse_plan, prepare
from ..assumptions import resolve_assumptions
from ..errors import BatonError
from ..limits import SIMULATION_CORE_MAX_DAYS, SIMULATION_MAX_BYTES
from ..model import Study
from .engine import draw_chunk
from .memory import MemoryEstimate, simulation_memory_estimate
from .results import (
    FIGURE_WORDS,
    FIGURES,
    DayTimeline,
    Simulation,
    SimulationChunk,
    chain_counts,
    chunk_figures,
    day_figures,
    mode_seconds,
)
from .tables import KINDS, SimPlan, build_sim_plan

__all__ = [
    "CHUNK_DAYS",
    "FIGURES",
    "FIGURE_WORDS",
    "KINDS",
    "DayTimeline",
    "MemoryEstimate",
    "Simulation",
    "SimulationCancelled",
    "SimulationChunk",
    "SimPlan",
    "SimulationTooLarge",
    "build_sim_plan",
    "chunk_count",
    "combine",
    "day_timeline",
    "simulate",
    "simulate_chunk",
    "sim_plan",
    "simulation_memory_estimate",
]

#: Days per chunk: the unit of progress, of cancelling and of work spread over workers.
CHUNK_DAYS = 200
#: The longest run accepted.
MAX_DAYS = SIMULATION_CORE_MAX_DAYS


class SimulationCancelled(BatonError):
    """The run was cancelled through its progress callback."""


class SimulationTooLarge(BatonError, ValueError):
    """A run whose estimated memory is over ``SIMULATION_MAX_BYTES``; ``estimate`` says
    what makes it large."""

    def __init__(self, estimate: MemoryEstimate):
        self.estimate = estimate
        super().__init__(estimate.refusal(SIMULATION_MAX_BYTES))


def _bounded(plan: SimPlan, days: int) -> SimPlan:
    """``plan`` if a ``days``-day run of it fits ``SIMULATION_MAX_BYTES``; checked before
    any day is drawn."""
    estimate = simulation_memory_estimate(plan, days=days)
    if estimate.bytes > SIMULATION_MAX_BYTES:
        raise SimulationTooLarge(estimate)
    return plan


def sim_plan(study: Study, plan_id: str) -> SimPlan:
    """The plan's simulation tables (analyses the plan once)."""
    graph = prepare(study)
    return build_sim_plan(study, analyse_plan(study, plan_id, graph=graph), graph)


def _check(days: int, seed: int) -> None:
    if not isinstance(days, int) or not 1 <= days <= MAX_DAYS:
        raise ValueError(f"days must be a whole number from 1 to {MAX_DAYS}, not {days!r}")
    if not isinstance(seed, int) or seed < 0:
        raise ValueError(f"seed must be a whole number of at least 0, not {seed!r}")


def chunk_count(days: int) -> int:
    """How many chunks an N-day run has."""
    return -(-days // CHUNK_DAYS)


def _chunk(sim: SimPlan, seed: int, chunk: int, days: int) -> SimulationChunk:
    first = chunk * CHUNK_DAYS
    length = min(CHUNK_DAYS, days - first)
    draw = draw_chunk(sim, seed, chunk, first, length)
    return SimulationChunk(
        chunk,
        first,
        length,
        chunk_figures(sim, draw),
        chain_counts(sim, draw),
        mode_seconds(sim, draw),
    )


def simulate_chunk(
    study: Study, plan_id: str, *, seed: int, chunk: int, days: int, plan: SimPlan | None = None
) -> SimulationChunk:
    """Chunk ``chunk`` of a ``days``-day run of a plan from ``seed``.

    Parameters
    ----------
    study : Study
        A study without errors.
    plan_id : str
    seed : int
        The run's seed (at least 0).
    chunk : int
        Which chunk: days ``chunk * CHUNK_DAYS`` up to the run's end or the next chunk.
    days : int
        The run's length in days.
    plan : SimPlan, optional
        From :func:`sim_plan`, to share between chunks.

    Returns
    -------
    SimulationChunk
    """
    _check(days, seed)
    if not 0 <= chunk < chunk_count(days):
        raise ValueError(f"a {days}-day run has chunks 0 to {chunk_count(days) - 1}, not {chunk}")
    return _chunk(_bounded(plan or sim_plan(study, plan_id), days), seed, chunk, days)


def combine(
    study: Study, plan_id: str, *, seed: int, days: int, chunks: list[SimulationChunk]
) -> Simulation:
    """A whole run from its chunks, in any order (each chunk exactly once)."""
    _check(days, seed)
    ordered = sorted(chunks, key=lambda part: part.chunk)
    if [part.chunk for part in ordered] != list(range(chunk_count(days))):
        raise ValueError(f"a {days}-day run needs chunks 0 to {chunk_count(days) - 1} once each")
    humans = [agent.id for agent in study.humans]
    figures = {
        human: {
            name: np.concatenate([part.figures[human][name] for part in ordered])
            for name in FIGURES
        }
        for human in humans
    }
    chains: dict[str, dict] = {}
    for part in ordered:
        for chain in part.chains:
            total = chains.setdefault(
                chain["trigger"],
                {
                    **chain,
                    "happenings": 0,
                    "missed": 0,
                    "tasks": {t: [0, 0] for t in chain["tasks"]},
                },
            )
            total["happenings"] += chain["happenings"]
            total["missed"] += chain["missed"]
            for task_id, (occurred, missed) in chain["tasks"].items():
                total["tasks"][task_id][0] += occurred
                total["tasks"][task_id][1] += missed
    assumptions = resolve_assumptions(study.assumptions, study.scale)
    modes = {
        mode: np.concatenate([part.modes.get(mode, np.zeros(part.days)) for part in ordered])
        for mode in (ordered[0].modes if ordered else {})
    }
    return Simulation(
        plan_id=plan_id,
        days=days,
        seed=seed,
        humans=humans,
        figures=figures,
        chains=list(chains.values()),
        bin_s=float(study.bin_seconds),
        limits={
            "occupancy": float(assumptions["occupancy_limit"]),
            "channel": float(assumptions["channel_limit"]),
        },
        modes=modes,
    )


def simulate(
    study: Study,
    plan_id: str,
    *,
    days: int,
    seed: int,
    progress: Callable[[int, int], bool | None] | None = None,
) -> Simulation:
    """Simulate ``days`` days of a plan from ``seed`` in this process.

    Parameters
    ----------
    study : Study
        A study without errors.
    plan_id : str
    days : int
        1 to :data:`MAX_DAYS`.
    seed : int
        At least 0; the same seed gives the same result.
    progress : callable, optional
        Called after each chunk with (days done, days); returning ``False`` cancels.

    Returns
    -------
    Simulation

    Raises
    ------
    SimulationCancelled
        When ``progress`` returned ``False``.
    SimulationTooLarge
        Before any day is drawn, when the run's estimated memory is over
        ``SIMULATION_MAX_BYTES`` (:func:`simulation_memory_estimate`).
    """
    _check(days, seed)
    plan = _bounded(sim_plan(study, plan_id), days)
    chunks = []
    for chunk in range(chunk_count(days)):
        chunks.append(_chunk(plan, seed, chunk, days))
        if progress is not None:
            done = min((chunk + 1) * CHUNK_DAYS, days)
            if progress(done, days) is False:
                raise SimulationCancelled(f"cancelled after {done} of {days} days")
    return combine(study, plan_id, seed=seed, days=days, chunks=chunks)


def day_timeline(
    study: Study, plan_id: str, *, seed: int, day: int, days: int, plan: SimPlan | None = None
) -> DayTimeline:
    """Day ``day`` of a ``days``-day run in full (its chunk drawn again)."""
    _check(days, seed)
    if not 0 <= day < days:
        raise ValueError(f"a {days}-day run has days 0 to {days - 1}, not {day}")
    plan = _bounded(plan or sim_plan(study, plan_id), days)
    chunk = day // CHUNK_DAYS
    first = chunk * CHUNK_DAYS
    draw = draw_chunk(plan, seed, chunk, first, min(CHUNK_DAYS, days - first))
    return day_figures(plan, draw, day, seed)
