"""Simulated days summed up: each person's daily figures, chains' missed windows, and
the full timeline of a chosen day.

Percentiles are NumPy's default (linear interpolation between order statistics,
Hyndman & Fan 1996 definition 7).

References
----------
.. [1] Hyndman, R. J., & Fan, Y. (1996). Sample quantiles in statistical packages. The
   American Statistician, 50(4), 361-365.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..registry import figure
from ..vocabulary import CHANNELS
from .engine import ChunkDraw, person_segments
from .sampling import DAY_S, in_intervals
from .tables import INITIATORS, KINDS, SimPlan
from .timeline import Sweep, bin_edges

__all__ = [
    "FIGURES",
    "FIGURE_WORDS",
    "DayTimeline",
    "Simulation",
    "SimulationChunk",
    "chunk_figures",
    "day_figures",
    "mode_seconds",
]

#: Each person's daily figures, in the order the screens and reports list them.
FIGURES = (
    "burden_s",
    "monitoring_s",
    "interactions",
    "interruptions",
    "night_interruptions",
    "failures",
    "escalations",
    "peak_occupancy",
    "overload_min",
    *(f"peak_{channel}" for channel in CHANNELS),
    *(f"overload_s_{channel}" for channel in CHANNELS),
)
#: Each daily figure in words, with its unit, for tables, pickers, axes and reports (the
#: registry's words: a simulated day's value of the figure).
FIGURE_WORDS = {name: (figure(name).label, figure(name).unit) for name in FIGURES}


def _per_day(day: np.ndarray, weights: np.ndarray, days: int) -> np.ndarray:
    return np.bincount(day, weights=weights, minlength=days)[:days].astype(float)


def person_sweep(sim: SimPlan, draw: ChunkDraw, person: int, by_stage: bool = False):
    """A person's stretches of work and their sweep: column 0 counts stretches under way
    (occupancy), then one column per VACP channel."""
    segments = person_segments(sim, draw, person, by_stage)
    occupied = np.ones(segments.start.size) if segments.weight is None else segments.weight
    weights = np.vstack([occupied, segments.demand])
    return segments, Sweep.of(segments.start, segments.end, weights)


def chunk_figures(sim: SimPlan, draw: ChunkDraw) -> dict[str, dict[str, np.ndarray]]:
    """Each person's figures for each day of a chunk (see :data:`FIGURES`)."""
    days = draw.days
    variant = draw.variant
    worked = draw.duration
    active = worked * sim.stage_share.sum(axis=1)[variant]
    edges, per_day = bin_edges(draw.first_day, days, sim.bin_s)
    day_edges = np.arange(draw.first_day, draw.first_day + days + 1) * DAY_S
    lengths = np.diff(edges)[: days * per_day].reshape(days, per_day)
    result = {}
    looks = draw.looks
    for p, human in enumerate(sim.humans):
        doing = sim.human[variant] == p
        # The monitor's checks of each occurrence, or continuous attention over its run
        # (the share of the drawn duration).
        watching = np.where(
            sim.monitor[variant] == p,
            np.where(
                sim.watch_share[variant] > 0,
                sim.watch_share[variant] * worked,
                sim.watch_s[variant],
            ),
            0.0,
        )
        seconds = np.where(doing, active + sim.supervision_s[variant], 0.0) + watching
        involved = sim.interacts[variant, p]
        interrupting = sim.interrupts[variant, p]
        night = interrupting & in_intervals(draw.start % DAY_S, sim.human_asleep[p])
        off_duty = sim.human_off_duty[p]
        if off_duty and draw.reached is not None:
            # Work reaching them off duty waits: not an interruption; at night, one that
            # reaches them on duty while asleep (methods document, #duty-hours).
            holding = sim.holder[variant] == sim.agents.index(human)
            reached = np.where(holding, draw.reached, draw.start) % DAY_S
            off = in_intervals(reached, [(low, high) for low, high, _next in off_duty])
            interrupting = interrupting & ~off
            night = interrupting & in_intervals(reached, sim.human_asleep[p])
        figures = {
            "burden_s": _per_day(draw.day, seconds, days),
            "monitoring_s": _per_day(draw.day, watching, days),
            "interactions": _per_day(draw.day, involved.astype(float), days),
            "interruptions": _per_day(draw.day, interrupting.astype(float), days),
            "night_interruptions": _per_day(draw.day, night.astype(float), days),
            "failures": _per_day(draw.day, (doing & sim.is_failure[variant]).astype(float), days),
            "escalations": _per_day(
                draw.day, (doing & sim.is_escalated[variant]).astype(float), days
            ),
        }
        if looks is not None and looks.task.size:
            # Periodic looks (interactions) and exception flags (interruptions).
            mine = looks.person == p
            day, spent = looks.day[mine], looks.seconds[mine]
            flags = looks.interrupts[mine]
            asleep = in_intervals(looks.start[mine] % DAY_S, sim.human_asleep[p])
            figures["burden_s"] += _per_day(day, spent, days)
            figures["monitoring_s"] += _per_day(day, spent, days)
            figures["interactions"] += _per_day(day, np.ones(day.size), days)
            figures["interruptions"] += _per_day(day, flags.astype(float), days)
            figures["night_interruptions"] += _per_day(day, (flags & asleep).astype(float), days)
            if looks.escalation is not None:
                later = looks.escalation[mine].astype(float)
                figures["escalations"] += _per_day(day, later, days)
        _segments, sweep = person_sweep(sim, draw, p)
        bins = np.diff(sweep.integral(0, edges))[: days * per_day].reshape(days, per_day)
        bins = bins / lengths
        figures["peak_occupancy"] = bins.max(axis=1) if per_day else np.zeros(days)
        figures["overload_min"] = (lengths * (bins > sim.occupancy_limit)).sum(axis=1) / 60.0
        for c, channel in enumerate(CHANNELS, start=1):
            figures[f"peak_{channel}"] = sweep.peaks(c, day_edges)
            figures[f"overload_s_{channel}"] = np.diff(
                sweep.above(c, sim.channel_limit, day_edges)
            )
        result[human] = figures
    return result


def mode_seconds(sim: SimPlan, draw: ChunkDraw) -> dict[str, np.ndarray]:
    """Seconds of each of the chunk's days spent in each mode (none without modes)."""
    if len(sim.modes) < 2:
        return {}
    opens = draw.first_day * DAY_S
    closes = opens + draw.days * DAY_S
    # Each stretch in one mode, clipped to the chunk's days.
    starts = np.clip(draw.mode_times, opens, closes)
    ends = np.clip(np.append(draw.mode_times[1:], closes), opens, closes)
    edges = opens + np.arange(draw.days + 1) * DAY_S
    # The stretch each day's edge falls in (the last that starts at or before it).
    at = np.maximum(np.searchsorted(starts, edges, side="right") - 1, 0)
    result = {}
    for m, mode in enumerate(sim.modes):
        inside = draw.mode_index == m
        # Time in the mode before each stretch, then up to each edge.
        before = np.concatenate([[0.0], np.cumsum(np.where(inside, ends - starts, 0.0))])
        upto = before[at] + np.where(inside[at], np.minimum(edges, ends[at]) - starts[at], 0.0)
        result[mode] = np.diff(upto)
    return result


@dataclass
class SimulationChunk:
    """One chunk's results: daily figures per person, the chains' counts and the seconds
    of each day in each mode."""

    chunk: int
    first_day: int
    days: int
    figures: dict[str, dict[str, np.ndarray]]
    chains: list[dict[str, Any]]
    modes: dict[str, np.ndarray] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return {
            "chunk": self.chunk,
            "first_day": self.first_day,
            "days": self.days,
            "figures": {
                human: {name: values.tolist() for name, values in figures.items()}
                for human, figures in self.figures.items()
            },
            "chains": self.chains,
            "modes": {mode: values.tolist() for mode, values in self.modes.items()},
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> SimulationChunk:
        return cls(
            chunk=int(data["chunk"]),
            first_day=int(data["first_day"]),
            days=int(data["days"]),
            figures={
                human: {name: np.asarray(values, float) for name, values in figures.items()}
                for human, figures in data["figures"].items()
            },
            chains=data["chains"],
            modes={
                mode: np.asarray(values, float) for mode, values in data.get("modes", {}).items()
            },
        )


def chain_counts(sim: SimPlan, draw: ChunkDraw) -> list[dict[str, Any]]:
    """Per chain with a windowed task: happenings, those with a missed window, per task."""
    result = []
    for c, chain in enumerate(sim.chains):
        if not chain.windowed:
            continue
        tasks = {}
        for k in chain.windowed:
            occurred, missed = draw.task_window_counts.get((c, k), (0, 0))
            tasks[sim.task_ids[chain.members[k]]] = [occurred, missed]
        result.append(
            {
                "trigger": chain.trigger_id,
                "name": chain.name,
                "happenings": draw.chain_happenings[c],
                "missed": draw.chain_missed[c],
                "tasks": tasks,
            }
        )
    return result


def _statistics(values: np.ndarray) -> dict[str, float]:
    if values.size == 0:
        return {"mean": 0.0, "p50": 0.0, "p95": 0.0}
    return {
        "mean": float(values.mean()),
        "p50": float(np.percentile(values, 50)),
        "p95": float(np.percentile(values, 95)),
    }


@dataclass
class Simulation:
    """A whole run: ``days`` simulated days of one plan from ``seed``.

    ``figures[human][figure]`` holds one value per day, in day order.
    """

    plan_id: str
    days: int
    seed: int
    humans: list[str]
    figures: dict[str, dict[str, np.ndarray]]
    chains: list[dict[str, Any]]
    bin_s: float
    limits: dict[str, float] = field(default_factory=dict)
    #: Seconds of each day in each mode (none without modes).
    modes: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def total_burden(self) -> np.ndarray:
        """Every person's time on each day, added up."""
        total = np.zeros(self.days)
        for human in self.humans:
            total += self.figures[human]["burden_s"]
        return total

    @property
    def worst_day(self) -> int:
        """The day with the most person time (all people together; the first such)."""
        return int(np.argmax(self.total_burden)) if self.days else 0

    @property
    def typical_day(self) -> int:
        """The day whose person time is nearest the median day's (the first such)."""
        total = self.total_burden
        if not self.days:
            return 0
        return int(np.argmin(np.abs(total - np.median(total))))

    def summary(self) -> dict[str, Any]:
        """Mean, P50 and P95 of each figure per person; chains' missed-window shares."""
        return {
            "plan": self.plan_id,
            "days": self.days,
            "seed": self.seed,
            "typical_day": self.typical_day,
            "worst_day": self.worst_day,
            "limits": self.limits,
            "time_in_mode": {
                mode: float(values.mean() / DAY_S) if values.size else 0.0
                for mode, values in self.modes.items()
            },
            "people": {
                human: {name: _statistics(values) for name, values in figures.items()}
                for human, figures in self.figures.items()
            },
            "chains": [
                {
                    "trigger": chain["trigger"],
                    "name": chain["name"],
                    "happenings": chain["happenings"],
                    "missed_share": chain["missed"] / chain["happenings"]
                    if chain["happenings"]
                    else 0.0,
                    "tasks": [
                        {
                            "task": task_id,
                            "occurrences": counts[0],
                            "missed_share": counts[1] / counts[0] if counts[0] else 0.0,
                        }
                        for task_id, counts in chain["tasks"].items()
                    ],
                }
                for chain in self.chains
            ],
        }

    def to_json(self) -> dict[str, Any]:
        return {
            "plan": self.plan_id,
            "days": self.days,
            "seed": self.seed,
            "humans": self.humans,
            "bin_s": self.bin_s,
            "limits": self.limits,
            "figures": {
                human: {name: values.tolist() for name, values in figures.items()}
                for human, figures in self.figures.items()
            },
            "chains": self.chains,
            "modes": {mode: values.tolist() for mode, values in self.modes.items()},
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> Simulation:
        return cls(
            plan_id=data["plan"],
            days=int(data["days"]),
            seed=int(data["seed"]),
            humans=list(data["humans"]),
            figures={
                human: {name: np.asarray(values, float) for name, values in figures.items()}
                for human, figures in data["figures"].items()
            },
            chains=data["chains"],
            bin_s=float(data["bin_s"]),
            limits=dict(data.get("limits", {})),
            modes={
                mode: np.asarray(values, float) for mode, values in data.get("modes", {}).items()
            },
        )


@dataclass
class DayTimeline:
    """One simulated day in full: per person the stretches of work, the occupancy of
    each bin and the demand on each channel over the day; the modes the device was in."""

    plan_id: str
    day: int
    seed: int
    bin_s: float
    limits: dict[str, float]
    people: dict[str, dict[str, Any]]
    modes: list[tuple[float, str]]

    def to_json(self) -> dict[str, Any]:
        return {
            "plan": self.plan_id,
            "day": self.day,
            "seed": self.seed,
            "bin_s": self.bin_s,
            "limits": self.limits,
            "people": self.people,
            "modes": [[t, mode] for t, mode in self.modes],
        }


def day_figures(sim: SimPlan, draw: ChunkDraw, day: int, seed: int) -> DayTimeline:
    """The timeline of one day of a drawn chunk, in seconds from that day's midnight."""
    midnight = day * DAY_S
    edges, _per_day = bin_edges(day, 1, sim.bin_s)
    people = {}
    for p, human in enumerate(sim.humans):
        segments, sweep = person_sweep(sim, draw, p, by_stage=True)
        shown = (segments.end > midnight) & (segments.start < midnight + DAY_S)
        rows = np.flatnonzero(shown)
        order = rows[np.argsort(segments.start[rows], kind="stable")]
        inside = (sweep.time >= midnight) & (sweep.time < midnight + DAY_S)
        # The level at midnight, then every change during the day.
        before = np.searchsorted(sweep.time, midnight, side="right") - 1
        channels = {}
        for c, channel in enumerate(CHANNELS, start=1):
            start_level = float(sweep.level[c, before]) if before >= 0 else 0.0
            channels[channel] = [[0.0, start_level]] + [
                [float(t - midnight), float(level)]
                for t, level in zip(sweep.time[inside], sweep.level[c, inside], strict=True)
            ]
        people[human] = {
            "segments": [
                {
                    "task": sim.task_ids[segments.task[i]],
                    "start": float(segments.start[i] - midnight),
                    "end": float(segments.end[i] - midnight),
                    "kind": KINDS[segments.kind[i]],
                    "initiator": INITIATORS[segments.initiator[i]],
                }
                for i in order
            ],
            "occupancy": (np.diff(sweep.integral(0, edges)) / np.diff(edges)).tolist(),
            "channels": channels,
            "asleep": [list(piece) for piece in sim.human_asleep[p]],
        }
    # The mode at midnight (carried from the day before), then each change in the day.
    at_midnight = max(int(np.searchsorted(draw.mode_times, midnight, side="right")) - 1, 0)
    in_day = (draw.mode_times > midnight) & (draw.mode_times < midnight + DAY_S)
    modes = [(0.0, sim.modes[int(draw.mode_index[at_midnight])])] + [
        (float(t - midnight), sim.modes[m])
        for t, m in zip(draw.mode_times[in_day], draw.mode_index[in_day], strict=True)
    ]
    return DayTimeline(
        plan_id=sim.plan_id,
        day=day,
        seed=seed,
        bin_s=sim.bin_s,
        limits={"occupancy": sim.occupancy_limit, "channel": sim.channel_limit},
        people=people,
        modes=modes if sim.modes != [""] else [],
    )
