"""The analyses of a plan (Baton's methods document): one entry point, :func:`analyse_plan`;
:class:`PlanEvaluation` keeps a plan's analysis up to date through edits."""

from .evaluation import PlanEvaluation
from .plan import PlanAnalysis, StudyGraph, analyse_plan, prepare
from .report import analysis_json, text_report

__all__ = [
    "PlanAnalysis",
    "PlanEvaluation",
    "StudyGraph",
    "analyse_plan",
    "analysis_json",
    "prepare",
    "text_report",
]
