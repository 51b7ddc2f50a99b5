"""One chunk of simulated days: happenings, chains, modes and each person's involvements.

A chunk covers consecutive days and draws from its own seeded generator, so a run split
into chunks over several machines gives the same days as one run. Within a chunk every
trigger's happenings on all its days are drawn at once and its chain is followed task by
task over all of them together (NumPy arrays of happenings), so the Python loop runs per
chain member, not per occurrence.

The rules (methods document, ``#simulation-rules``; tool assumptions marked):

- a trigger with fixed ``times`` happens at each, shifted uniformly within its jitter; one
  with ``per_day`` a Poisson number of times, evenly over its part of the day; one every
  N days on the days its random phase (drawn once per run) puts it, at an even time in
  the part of the day the assumption ``every_days_when`` names;
- a chain's root occurs with its probability; another task occurs when some predecessor
  that occurred leads on to it (each link with its probability); it becomes ready when
  all its predecessors that occurred are done plus their lags (uniform within the lag's
  range: tool assumption), and starts then, plus the receiving holder's response latency
  (triangular; asleep or awake as the moment makes it) when the work changes hands or an
  event hands it over;
- durations are triangular over the task's (or assignment's) min, typical and max;
- an occurrence counts on the day it starts (a chain started late in the evening may go
  on after midnight); a chunk also draws the chains started in the days before it, as
  many as the longest chain can last (at most :data:`MAX_LEAD_DAYS`), so that its first
  days get the work those chains carry into them;
- the mode at a chunk's first midnight is drawn from the long-run distribution at
  midnight; the mode then moves by its transition rates (the time in a mode exponential:
  a continuous-time Markov chain), at its transitions' fixed times and with the
  happenings of the events that move it (the same happenings that start their chains,
  the mode changing first), carried across midnight; an occurrence takes the assignment
  in force in the mode it becomes ready in;
- a person's active time on an occurrence (each stage's share of the duration times the
  share the automation leaves them, added up) runs from the task's start, the stages in
  order (tool assumption); supervision follows the task's end, then monitoring by the
  accountable person.

References
----------
.. [1] Ross, S. M. (2014). Introduction to Probability Models (11th ed.), ch. 5-6:
   Poisson processes; continuous-time Markov chains.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..vocabulary import CHANNELS
from .sampling import DAY_S, in_intervals, triangular, uniform_in_pieces
from .tables import KINDS, ChainPlan, SimPlan

__all__ = ["ChunkDraw", "Looks", "Segments", "draw_chunk", "run_generator"]


def run_generator(seed: int, stream: int) -> np.random.Generator:
    """The generator of one stream of a run: 0 for the run-wide draws (phases), 1 + k for
    chunk k. Independent of how chunks are spread over workers."""
    return np.random.default_rng(np.random.SeedSequence(int(seed), spawn_key=(int(stream),)))


@dataclass
class Segments:
    """A person's timeline in a chunk: one row per stretch of work (absolute seconds from
    the run's start)."""

    start: np.ndarray
    end: np.ndarray
    task: np.ndarray
    kind: np.ndarray  # index into tables.KINDS
    initiator: np.ndarray
    demand: np.ndarray  # channels x rows
    weight: np.ndarray | None = None  # share of the person in occupancy (1 but continuous)


@dataclass
class ChunkDraw:
    """What a chunk's days produced, before they are summed up."""

    first_day: int
    days: int
    # Occurrences
    task: np.ndarray
    variant: np.ndarray
    day: np.ndarray  # chunk-relative
    begin: np.ndarray  # the chain's start (absolute)
    start: np.ndarray
    finish: np.ndarray
    duration: np.ndarray
    # Chains: per chain, happenings per day and window misses
    chain_happenings: list[int]
    chain_missed: list[int]
    task_window_counts: dict[tuple[int, int], tuple[int, int]]
    # Modes: absolute change times and the mode entered
    mode_times: np.ndarray
    mode_index: np.ndarray
    # Periodic looks and exception flags: one row each (see :func:`_looks`)
    looks: Looks | None = None
    # When the work reached its holder (ready; the start adds their latency)
    reached: np.ndarray | None = None


@dataclass
class Looks:
    """A monitor's checks that come whatever the task's occurrences, in a chunk."""

    task: np.ndarray
    person: np.ndarray
    day: np.ndarray  # chunk-relative
    start: np.ndarray  # absolute
    seconds: np.ndarray
    interrupts: np.ndarray
    #: A call that escalated to the person (asked after the first).
    escalation: np.ndarray | None = None

    @classmethod
    def none(cls) -> Looks:
        empty = np.zeros(0)
        return cls(
            empty.astype(int),
            empty.astype(int),
            empty.astype(int),
            empty,
            empty,
            empty.astype(bool),
            empty.astype(bool),
        )

    @classmethod
    def joined(cls, parts: list[Looks]) -> Looks:
        """The rows of several, in order."""
        return cls(
            **{
                name: np.concatenate(
                    [
                        getattr(part, name)
                        if getattr(part, name) is not None
                        else np.zeros(part.task.size, bool)
                        for part in parts
                    ]
                )
                for name in cls.__dataclass_fields__
            }
        )


def _awake_pieces(asleep: list[tuple[float, float]]) -> list[tuple[float, float]]:
    """The parts of the day outside the asleep intervals."""
    pieces, clock = [], 0.0
    for start, end in sorted(asleep):
        if start > clock:
            pieces.append((clock, start))
        clock = max(clock, end)
    if clock < DAY_S:
        pieces.append((clock, float(DAY_S)))
    return pieces


def _looks(sim: SimPlan, seed: int, chunk: int, first_day: int, days: int) -> Looks:
    """Each monitor's periodic looks and exception flags in the chunk's days: a Poisson
    count a day with the style's mean, each look at a uniform time of the person's awake
    day (flags over the whole day). From a stream of their own, so the rest of the draw
    does not change with them."""
    if not sim.looks:
        return Looks.none()
    rng = np.random.default_rng(np.random.SeedSequence(int(seed), spawn_key=(1 + chunk, 1)))
    parts: dict[str, list[np.ndarray]] = {key: [] for key in Looks.__dataclass_fields__}
    for task, person, per_day, seconds, interrupts in sim.looks:
        counts = rng.poisson(per_day, days)
        total = int(counts.sum())
        day = np.repeat(np.arange(days), counts)
        pieces = [(0.0, float(DAY_S))] if interrupts else _awake_pieces(sim.human_asleep[person])
        lengths = np.array([end - start for start, end in pieces])
        # A uniform point of the awake day: a piece by its length, then a place in it.
        offset = rng.random(total) * lengths.sum()
        edges = np.concatenate([[0.0], np.cumsum(lengths)])
        which = np.minimum(np.searchsorted(edges, offset, side="right") - 1, len(pieces) - 1)
        starts = np.array([start for start, _end in pieces])
        at = (first_day + day) * DAY_S + starts[which] + (offset - edges[which])
        parts["task"].append(np.full(total, task))
        parts["person"].append(np.full(total, person))
        parts["day"].append(day)
        parts["start"].append(at)
        parts["seconds"].append(np.full(total, seconds))
        parts["interrupts"].append(np.full(total, interrupts))
    joined = {key: np.concatenate(values) for key, values in parts.items() if values}
    return Looks(
        task=joined["task"].astype(int),
        person=joined["person"].astype(int),
        day=joined["day"].astype(int),
        start=joined["start"].astype(float),
        seconds=joined["seconds"].astype(float),
        interrupts=joined["interrupts"].astype(bool),
        escalation=np.zeros(joined["task"].size, bool),
    )


def _phases(sim: SimPlan, seed: int) -> list[float]:
    """Each every-N-days trigger's phase in days, drawn once per run: the chains', then
    those of the events that move the mode but start no chain."""
    rng = run_generator(seed, 0)
    rules = [chain.rule for chain in sim.chains] + list(sim.mode_event_rules.values())
    return [float(rng.random() * rule.every_days) if rule.every_days else 0.0 for rule in rules]


def _happenings(
    rng: np.random.Generator, chain: ChainPlan, phase: float, first_day: int, days: int
) -> np.ndarray:
    """Absolute start times of a trigger's happenings over the chunk's days."""
    rule = chain.rule
    day_numbers = np.arange(first_day, first_day + days)
    if rule.times is not None:
        times = np.array(rule.times)
        day = np.repeat(day_numbers, len(times))
        clock = np.tile(times, days)
        if rule.jitter_s:
            clock = clock + rng.uniform(-rule.jitter_s, rule.jitter_s, clock.size)
        # A jittered time past midnight belongs to the neighbouring day, as on a clock.
        return np.sort(day * DAY_S + clock)
    if rule.every_days is not None:
        k = rule.every_days
        # Occurrences at phase + n k days; day d holds those in [d, d + 1).
        counts = np.floor((day_numbers + 1 - phase) / k) - np.floor((day_numbers - phase) / k)
        counts = counts.astype(int)
    else:
        counts = rng.poisson(rule.per_day or 0.0, days)
    total = int(counts.sum())
    day = np.repeat(day_numbers, counts)
    return np.sort(day * DAY_S + uniform_in_pieces(rng, total, rule.pieces))


def _mode_path(
    sim: SimPlan,
    rng: np.random.Generator,
    first_day: int,
    days: int,
    happenings: dict[str, np.ndarray],
):
    """The path through the modes over the chunk's days: change times and modes.

    The first midnight's mode is drawn from the long-run distribution at midnight (what
    carrying the mode over from the days before gives); then the mode moves at its
    transitions' rates (exponential times in a mode), at their fixed times, and at each
    happening of an event that moves it (the same happenings that start its chain).
    """
    opens, closes = first_day * DAY_S, (first_day + days) * DAY_S
    size = len(sim.modes)
    mode = int(rng.choice(size, p=sim.at_midnight)) if size > 1 else 0
    times, modes = [opens], [mode]
    if size == 1:
        return np.array(times), np.array(modes, int)
    scheduled: list[tuple[float, np.ndarray | None]] = [
        (day * DAY_S + at, jump)
        for day in range(first_day, first_day + days)
        for at, jump in sim.mode_impulses
    ]
    for event_id, jump in sim.mode_moves.items():
        moments = happenings.get(event_id, np.zeros(0))
        scheduled += [(float(at), jump) for at in moments if opens <= at < closes]
    scheduled.sort(key=lambda item: item[0])
    scheduled.append((closes, None))
    out = sim.rates.sum(axis=1)
    clock = opens
    for when, move in scheduled:
        # Exponential times in a mode until the next fixed move (memoryless).
        while out[mode] > 0:
            wait = rng.exponential(1.0 / out[mode]) * DAY_S
            if clock + wait >= when:
                break
            clock += wait
            mode = int(rng.choice(size, p=sim.rates[mode] / out[mode]))
            times.append(clock)
            modes.append(mode)
        clock = when
        if move is not None and int(move[mode]) != mode:
            mode = int(move[mode])
            times.append(when)
            modes.append(mode)
    return np.array(times), np.array(modes, int)


def _latency(
    sim: SimPlan, rng: np.random.Generator, agents: np.ndarray, moment: np.ndarray
) -> np.ndarray:
    """Response latency of each receiving agent (-1: none) at each moment."""
    needs = (agents >= 0) & sim.latency_any[agents]
    wait = np.zeros(agents.shape)
    if not needs.any():
        return wait  # automations that respond at once: nothing to draw
    rows = np.flatnonzero(needs)
    who = agents[rows]
    asleep = np.zeros(rows.size, bool)
    for a in sim.sleepers:
        mine = who == a
        if mine.any():
            asleep[mine] = in_intervals(moment[rows][mine] % DAY_S, sim.asleep[a])
    duty_wait = np.zeros(rows.size)
    for a, pieces in enumerate(sim.off_duty):
        mine = who == a
        if not pieces or not mine.any():
            continue
        # Off duty the work waits for the next duty start; on duty they answer awake
        # (methods document, #duty-hours).
        asleep[mine] = False
        clock = moment[rows][mine] % DAY_S
        waits = np.zeros(clock.size)
        for low, high, next_start in pieces:
            inside = (clock >= low) & (clock < high)
            waits[inside] = next_start - clock[inside]
        duty_wait[mine] = waits
    if np.all(who == who[0]):
        # One agent (the common case): draw awake and asleep latencies from its rows.
        low, mode, high = sim.latency_awake[who[0]]
        awake = triangular(rng, low, mode, high, rows.size)
        if asleep.any():
            low, mode, high = sim.latency_asleep[who[0]]
            awake[asleep] = triangular(rng, low, mode, high, int(asleep.sum()))
        wait[rows] = awake + duty_wait
        return wait
    table = np.where(asleep[:, None], sim.latency_asleep[who], sim.latency_awake[who])
    wait[rows] = triangular(rng, table[:, 0], table[:, 1], table[:, 2]) + duty_wait
    return wait


def _off_duty(sim: SimPlan, agent: int, moment: np.ndarray) -> np.ndarray:
    """Whether the agent is off duty at each moment."""
    pieces = sim.off_duty[agent] if sim.off_duty else []
    if not pieces:
        return np.zeros(moment.size, bool)
    return in_intervals(moment % DAY_S, [(low, high) for low, high, _next in pieces])


def _escalate(
    sim: SimPlan,
    rng: np.random.Generator,
    variant: np.ndarray,
    at: np.ndarray,
    calls: list[tuple[int, int, np.ndarray, bool]],
    task: int,
) -> tuple[np.ndarray, np.ndarray | None]:
    """People asked in turn (methods document, #escalation): the variant of whoever keeps
    each occurrence, and how long after ``at`` they start it (NaN where no one is asked).

    The j-th person is asked ``j x escalate_after_s`` after the work is ready; on duty
    they answer with their latency drawn for that moment and keep the task when it is
    within ``escalate_after_s``; the last keeps it whatever (an off-duty wait included).
    Calls not answered in time by a person on duty are added to ``calls`` as (task,
    human, moments, after the first).
    """
    asked = np.isin(variant, list(sim.escalation)) if sim.escalation else None
    if asked is None or not asked.any():
        return variant, None
    kept = variant.copy()
    wait = np.full(variant.size, np.nan)
    for v in np.unique(variant[asked]):
        people, after, keepers = sim.escalation[int(v)]
        pending = np.flatnonzero(variant == v)
        for j, agent in enumerate(people):
            moment = at[pending] + j * after
            latency = _latency(sim, rng, np.full(pending.size, agent), moment)
            if j == len(people) - 1:
                answers = np.ones(pending.size, bool)
            else:
                on = ~_off_duty(sim, int(agent), moment)
                answers = on & (latency <= after)
                missed = on & ~answers
                if missed.any():
                    human = sim.humans.index(sim.agents[int(agent)])
                    calls.append((task, human, moment[missed], j > 0))
            chosen = pending[answers]
            kept[chosen] = keepers[j]
            wait[chosen] = j * after + latency[answers]
            pending = pending[~answers]
            if not pending.size:
                break
    return kept, wait


def _calls(calls: list[tuple[int, int, np.ndarray, bool]], first_day: int, days: int) -> Looks:
    """The calls nobody answered in time, inside the chunk: an interruption each, costing
    no time (rows of :class:`Looks`)."""
    opens, closes = first_day * DAY_S, (first_day + days) * DAY_S
    rows = [
        (task, human, moment[(moment >= opens) & (moment < closes)], later)
        for task, human, moment, later in calls
    ]
    sizes = [moment.size for _t, _h, moment, _l in rows]
    if not sum(sizes):
        return Looks.none()
    start = np.concatenate([moment for _t, _h, moment, _l in rows])
    return Looks(
        task=np.repeat([task for task, _h, _m, _l in rows], sizes).astype(int),
        person=np.repeat([human for _t, human, _m, _l in rows], sizes).astype(int),
        day=(np.floor(start / DAY_S) - first_day).astype(int),
        start=start,
        seconds=np.zeros(start.size),
        interrupts=np.ones(start.size, bool),
        escalation=np.repeat([later for _t, _h, _m, later in rows], sizes).astype(bool),
    )


def draw_chunk(sim: SimPlan, seed: int, chunk: int, first_day: int, days: int) -> ChunkDraw:
    """Simulate days ``first_day .. first_day + days - 1`` as chunk ``chunk`` of a run."""
    rng = run_generator(seed, 1 + chunk)
    phases = _phases(sim, seed)
    # Chains started in the days before the chunk that reach into it are drawn too (from
    # the chunk's own stream), so that its first days carry their share of them.
    lead = sim.lead_days
    opens, closes = first_day * DAY_S, (first_day + days) * DAY_S
    # Every trigger's happenings first: an event that moves the mode moves it with the
    # same happenings that start its chain.
    begins = [
        _happenings(rng, chain, phases[c], first_day - lead, days + lead)
        for c, chain in enumerate(sim.chains)
    ]
    happenings = {
        chain.trigger_id: begins[c] for c, chain in enumerate(sim.chains) if chain.from_event
    }
    for k, (event_id, rule) in enumerate(sim.mode_event_rules.items()):
        alone = ChainPlan(event_id, event_id, True, rule, [], {}, {}, [])
        phase = phases[len(sim.chains) + k]
        happenings[event_id] = _happenings(rng, alone, phase, first_day - lead, days + lead)
    mode_times, mode_index = _mode_path(sim, rng, first_day - lead, days + lead, happenings)
    parts: dict[str, list[np.ndarray]] = {
        key: [] for key in ("task", "variant", "begin", "reached", "start", "finish", "duration")
    }
    happenings_count, missed_count = [], []
    window_counts: dict[tuple[int, int], tuple[int, int]] = {}
    calls: list[tuple[int, int, np.ndarray, bool]] = []
    for c, chain in enumerate(sim.chains):
        begin = begins[c]
        count = begin.size
        # The chain's own figures count the happenings that start in the chunk.
        counted = begin >= opens
        happenings_count.append(int(counted.sum()))
        if count == 0 or not chain.members:
            missed_count.append(0)
            continue
        # Per member over all happenings: whether it occurred (None: in every one), when
        # it finished (-inf where it did not occur) and who held it.
        occurred: dict[int, np.ndarray | None] = {}
        finish: dict[int, np.ndarray] = {}
        holder: dict[int, np.ndarray] = {}
        any_missed = np.zeros(count, bool)
        for k, task in enumerate(chain.members):
            arrivals: list[tuple[np.ndarray, np.ndarray]] = []
            if k in chain.root_probability:
                chance = chain.root_probability[k]
                here = None if chance >= 1 else rng.random(count) < chance
                ready = begin
            else:
                here = np.zeros(count, bool)
                ready = np.full(count, -np.inf)
                for source, probability, lag_low, lag_high in chain.predecessors.get(k, ()):
                    if source not in occurred:
                        continue
                    came = occurred[source]
                    if probability < 1:
                        drawn = rng.random(count) < probability
                        came = drawn if came is None else came & drawn
                    here = None if came is None or here is None else here | came
                    lag = rng.uniform(lag_low, lag_high, count) if lag_high > lag_low else lag_low
                    arrival = finish[source] + lag
                    arrivals.append((arrival, holder[source]))
                    ready = np.maximum(ready, arrival)
                if here is not None and here.all():
                    here = None
            if here is not None and not here.any():
                continue
            rows = slice(None) if here is None else np.flatnonzero(here)
            at = ready[rows]
            size = at.size
            if len(sim.modes) == 1:
                variant = np.full(size, sim.variant_of[task, 0])
            else:
                mode = mode_index[np.searchsorted(mode_times, at, side="right") - 1]
                variant = sim.variant_of[task, mode]
            failed = None
            if sim.fail_chance.size and sim.fail_chance[variant].any():
                # A failure hands the whole occurrence to the fallback person (drawn only
                # where the automation can fail, so other plans keep their draws).
                failed = rng.random(size) < sim.fail_chance[variant]
                variant = np.where(failed, sim.fail_variant[variant], variant)
            variant, called = _escalate(sim, rng, variant, at, calls, task)
            receiver = sim.holder[variant]
            if not arrivals:
                # An event hands the work to its holder; a schedule's holder starts it;
                # a failure hands it to the fallback.
                if chain.from_event:
                    start = at + _latency(sim, rng, receiver, at)
                elif failed is not None and failed.any():
                    start = at.copy()
                    start[failed] += _latency(sim, rng, receiver[failed], at[failed])
                else:
                    start = at
            else:
                # Each predecessor's work arrives, plus the receiver's latency where the
                # work changes hands (drawn only there).
                changes = [
                    (given_by[rows] != receiver) & (receiver >= 0)
                    for _arrival, given_by in arrivals
                ]
                handed = np.logical_or.reduce(changes) if len(changes) > 1 else changes[0]
                if failed is not None:
                    changes = [changed | failed for changed in changes]
                    handed = handed | failed
                wait = np.zeros(size)
                if handed.any():
                    wait[handed] = _latency(sim, rng, receiver[handed], at[handed])
                start = np.full(size, -np.inf)
                for (arrival, _given_by), changed in zip(arrivals, changes, strict=True):
                    start = np.maximum(start, arrival[rows] + wait * changed)
            if called is not None:
                # Whoever kept the task starts it when they answered.
                start = np.where(np.isnan(called), start, at + called)
            if np.all(variant == variant[0]):
                low, typical, high = sim.duration[variant[0]]
            else:
                low, typical, high = sim.duration[variant].T
            took = triangular(rng, low, typical, high, size)
            done = start + took
            occurred[k] = here
            if here is None:
                finish[k], holder[k] = done, receiver
            else:
                finish[k] = np.full(count, -np.inf)
                finish[k][rows] = done
                holder[k] = np.full(count, -2)
                holder[k][rows] = receiver
            if k in chain.windowed:
                late = (done - begin[rows]) > sim.window_s[task]
                any_missed[rows] |= late
                mine = counted[rows]
                window_counts[(c, k)] = (int(mine.sum()), int((late & mine).sum()))
            parts["task"].append(np.full(size, task))
            parts["variant"].append(variant)
            parts["begin"].append(begin[rows])
            parts["reached"].append(at)
            parts["start"].append(start)
            parts["finish"].append(done)
            parts["duration"].append(took)
        missed_count.append(int((any_missed & counted).sum()))
    joined = {
        key: (np.concatenate(values) if values else np.zeros(0)) for key, values in parts.items()
    }
    # An occurrence belongs to the day it starts on; those starting outside the chunk
    # belong to another chunk's days.
    inside = (joined["start"] >= opens) & (joined["start"] < closes)
    joined = {key: values[inside] for key, values in joined.items()}
    tasks = joined["task"].astype(int)
    variant = joined["variant"].astype(int)
    return ChunkDraw(
        first_day=first_day,
        days=days,
        task=tasks,
        variant=variant,
        day=(np.floor(joined["start"] / DAY_S) - first_day).astype(int),
        begin=joined["begin"],
        reached=joined["reached"],
        start=joined["start"],
        finish=joined["finish"],
        duration=joined["duration"],
        chain_happenings=happenings_count,
        chain_missed=missed_count,
        task_window_counts=window_counts,
        mode_times=mode_times,
        mode_index=mode_index,
        looks=Looks.joined(
            [_looks(sim, seed, chunk, first_day, days), _calls(calls, first_day, days)]
        ),
    )


def person_segments(
    sim: SimPlan, draw: ChunkDraw, person: int, by_stage: bool = False
) -> Segments:
    """One person's stretches of work in a chunk: active work, supervision, monitoring.

    The person's active time on an occurrence is taken as one stretch from the task's
    start, the stages in order without gaps (tool assumption); ``by_stage`` cuts it into
    one stretch per stage (for the day view; the sums and overlaps are the same).
    Supervision follows the task's end, then the accountable person's monitoring.
    """
    variant = draw.variant
    scale = draw.duration
    mine = sim.human[variant] == person
    # Each variant's share first, then per occurrence: one gather, not one per stage.
    total = sim.stage_share.sum(axis=1)[variant]
    # Each piece: rows of the draw, begins, ends, kind, and "sup"/"mon" for the extras.
    pieces: list[tuple[np.ndarray, np.ndarray, np.ndarray, int, str | None]] = []
    if by_stage:
        shares = sim.stage_share[variant]
        before = np.cumsum(shares, axis=1) - shares
        for s in range(shares.shape[1]):
            rows = np.flatnonzero(mine & (shares[:, s] > 0) & (scale > 0))
            begin = draw.start[rows] + scale[rows] * before[rows, s]
            pieces.append((rows, begin, begin + scale[rows] * shares[rows, s], s, None))
    else:
        rows = np.flatnonzero(mine & (total > 0) & (scale > 0))
        begin = draw.start[rows]
        pieces.append((rows, begin, begin + scale[rows] * total[rows], 0, None))
    supervision = sim.supervision_s[variant]
    rows = np.flatnonzero(mine & (supervision > 0))
    after = draw.finish[rows]
    pieces.append((rows, after, after + supervision[rows], KINDS.index("supervision"), "sup"))
    monitor = sim.monitor[variant] == person
    share = sim.watch_share[variant]
    # A check of each occurrence after its end (and the person's own supervision).
    rows = np.flatnonzero(monitor & (share == 0) & (sim.watch_s[variant] > 0))
    after = draw.finish[rows] + np.where(mine[rows], supervision[rows], 0.0)
    pieces.append(
        (rows, after, after + sim.watch_s[variant[rows]], KINDS.index("monitoring"), "mon")
    )
    # Continuous attention: a share of the person over the task's whole run.
    rows = np.flatnonzero(monitor & (share > 0) & (scale > 0))
    watch = (rows, draw.start[rows], draw.finish[rows], KINDS.index("monitoring"), "mon")
    pieces.append(watch)
    starts, ends, tasks, kinds, extras, weights = [], [], [], [], [], []
    for rows, begin, end, kind, extra in pieces:
        starts.append(begin)
        ends.append(end)
        tasks.append(draw.task[rows])
        kinds.append(np.full(rows.size, kind))
        extras.append(extra)
        weights.append(share[rows] if extra == "mon" and rows is watch[0] else np.ones(rows.size))
    looks = draw.looks
    if looks is not None and looks.task.size:
        # Periodic looks and exception flags, each a check of monitoring_s.
        at = np.flatnonzero((looks.person == person) & (looks.seconds > 0))
        starts.append(looks.start[at])
        ends.append(looks.start[at] + looks.seconds[at])
        tasks.append(looks.task[at])
        kinds.append(np.full(at.size, KINDS.index("monitoring")))
        extras.append("mon")
        weights.append(np.ones(at.size))
    task = np.concatenate(tasks).astype(int)
    # Demands by channel (one row each): the task's own while working on it, the
    # assumed small ones while supervising or monitoring.
    weight = np.concatenate(weights)
    demand = np.empty((len(CHANNELS), task.size))
    for c in range(len(CHANNELS)):
        parts = []
        for piece_task, extra in zip(tasks, extras, strict=True):
            if extra == "sup":
                parts.append(np.full(piece_task.size, sim.supervision_demand[c]))
            elif extra == "mon":
                parts.append(np.full(piece_task.size, sim.monitoring_demand[c]))
            else:
                parts.append(sim.demands_by_channel[c][piece_task])
        np.concatenate(parts, out=demand[c])
    # Continuous attention weighs its share in occupancy and in every channel's demand.
    demand *= weight
    return Segments(
        start=np.concatenate(starts),
        end=np.concatenate(ends),
        task=task,
        kind=np.concatenate(kinds).astype(int),
        initiator=sim.initiator[task],
        demand=demand,
        weight=weight,
    )
