"""The analyses of a plan (Baton's methods document): one entry point, :func:`analyse_plan`."""

from .plan import PlanAnalysis, StudyGraph, analyse_plan, prepare
from .report import analysis_json, text_report

__all__ = ["PlanAnalysis", "StudyGraph", "analyse_plan", "analysis_json", "prepare", "text_report"]
