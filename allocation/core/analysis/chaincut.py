"""Tasks a plan cuts off by marking a task not applicable (methods document,
``#finding-chain-cut``).

A task the plan does not do takes away the tasks only it starts: per chain, the tasks
reached only through it lose those occurrences. The analysis counts occurrences twice,
as the plan has them and as if every task not done let its chain go on
(``"pass_through": true``); a task that occurs less often under the plan is cut, and the
work lost is its lost occurrences a day times its expected person time per occurrence
under the plan (not that of the task not done). Each task not done names the cut tasks
it reaches along ``precedes`` links; where two of them reach the same task, both name it.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

from ..describe import seconds_text
from ..model import Study
from .findings import Finding

__all__ = ["chain_cut_findings"]

#: Occurrences a day below which a difference is rounding, not a cut.
NEGLIGIBLE_PER_DAY = 1e-9


def chain_cut_findings(
    study: Study,
    stopped: Sequence[str],
    per_day: Mapping[str, float],
    through: Mapping[str, float],
    successors: Mapping[str, Sequence[tuple[str, float]]],
    person_s: Callable[[str], float],
    tolerance: Mapping[str, float] | None = None,
) -> list[Finding]:
    """One ``chain_cut`` finding per task not done whose chain stops with it.

    Parameters
    ----------
    study : Study
    stopped : sequence of str
        The tasks the plan marks not applicable without ``pass_through``.
    per_day : mapping
        Occurrences a day of each task under the plan.
    through : mapping
        The same as if every task in ``stopped`` let its chain go on.
    successors : mapping
        Task id to its ``precedes`` successors as ``(task id, link probability)``.
    person_s : callable
        A task's expected person time per occurrence under the plan (all people).
    tolerance : mapping, optional
        Per task, a difference in occurrences a day too small to call a cut: where a
        chain's chances are Monte Carlo estimates, 4 standard errors of the two counts.

    Returns
    -------
    list of Finding
    """
    tolerance = tolerance or {}
    lost = {
        task_id: through[task_id] - per_day.get(task_id, 0.0)
        for task_id in through
        if through[task_id] - per_day.get(task_id, 0.0)
        > max(NEGLIGIBLE_PER_DAY, tolerance.get(task_id, 0.0))
    }
    found = []
    for task_id in stopped:
        cut = [t for t in _downstream(task_id, successors) if t in lost and t not in stopped]
        if not cut:
            continue
        work = sum(lost[t] * person_s(t) for t in cut)
        severity = max((study.task(t).severity or 1) for t in cut)
        names = ", ".join(f"{t} ({lost[t]:.3g} a day fewer)" for t in cut[:8])
        more = f" and {len(cut) - 8} more" if len(cut) > 8 else ""
        title = study.task(task_id).title
        found.append(
            Finding(
                "chain_cut",
                severity,
                f"{task_id} ({title}) is not done in this plan, so the tasks only it starts "
                f"happen less often: {names}{more}; about {seconds_text(work)} a day of "
                "person time goes with them. If they still happen without it, mark it "
                "'chain goes on' (pass_through).",
                (task_id, *cut),
            )
        )
    return found


def _downstream(task_id: str, successors: Mapping[str, Sequence[tuple[str, float]]]) -> list[str]:
    """The tasks reachable from ``task_id`` along ``precedes`` links, nearest first."""
    seen: dict[str, None] = {}
    frontier = [task_id]
    while frontier:
        following = []
        for source in frontier:
            for target, _p in successors.get(source, ()):
                if target not in seen and target != task_id:
                    seen[target] = None
                    following.append(target)
        frontier = following
    return list(seen)
