"""Small study files for the analysis tests, built in code and read through the format.

Every study goes through :func:`allocation.core.read_study`, so the analyses see what a
real file gives them. The default cast: ``pat`` (a person, awake all day, responding in
[10, 20, 60] s), ``sam`` (a second person) and ``pump`` (an automation, responding in
[1, 1, 1] s).
"""

from __future__ import annotations

from typing import Any

from allocation.core import Study, read_study
from allocation.core.analysis import PlanAnalysis, analyse_plan

PAT = {
    "id": "pat",
    "name": "Pat",
    "kind": "human",
    "response_s": {"awake": [10, 20, 60]},
}
SAM = {"id": "sam", "name": "Sam", "kind": "human"}
PUMP = {"id": "pump", "name": "Pump", "kind": "automation", "response_s": {"any": [1, 1, 1]}}


def leaf(task_id: str, **extra: Any) -> dict[str, Any]:
    """A leaf task with a duration and a severity (so it draws no warnings)."""
    return {"id": task_id, "title": f"Task {task_id}", "duration_s": 10, "severity": 1, **extra}


def study_data(
    tasks: list[dict[str, Any]],
    assignments: dict[str, dict[str, Any]] | None = None,
    *,
    agents: list[dict[str, Any]] | None = None,
    events: list[dict[str, Any]] | None = None,
    links: list[dict[str, Any]] | None = None,
    plans: list[dict[str, Any]] | None = None,
    scale: str = "sv10",
    assumptions: dict[str, Any] | None = None,
) -> dict[str, Any]:
    """A study file; with ``assignments`` alone it has one plan, ``p``.

    Tasks left out of ``assignments`` are done by ``pat`` alone.
    """
    if plans is None:
        given = assignments or {}
        plans = [
            {
                "id": "p",
                "name": "Plan",
                "assignments": {
                    task["id"]: given.get(task["id"], {"human": "pat"}) for task in tasks
                },
            }
        ]
    return {
        "format": "baton.study",
        "version": 2,
        "study": {
            "id": "s",
            "title": "Test study",
            "scale": scale,
            "assumptions": assumptions or {},
        },
        "agents": agents if agents is not None else [PAT, SAM, PUMP],
        "events": events or [],
        "tasks": tasks,
        "links": links or [],
        "plans": plans,
    }


def build(*args: Any, **kwargs: Any) -> Study:
    """The study of :func:`study_data`, read through the file format."""
    return read_study(study_data(*args, **kwargs))


def analyse(*args: Any, plan: str = "p", **kwargs: Any) -> PlanAnalysis:
    """Analyse one plan of the study of :func:`study_data`."""
    return analyse_plan(build(*args, **kwargs), plan)
