"""``manage.py analyse STUDY [--plan PLAN] [--json]``: a plan's figures, readable or as JSON.

STUDY is a stored study's id or number, or the path of a study file (``.json``), which
is analysed without storing it.
"""

from __future__ import annotations

import json
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from allocation.core import UnknownReference
from allocation.core.analysis import analyse_plan, prepare, text_report

from ._study import valid_study_from_reference


class Command(BaseCommand):
    help = "Analyse a study's plans: a readable report, or the analysis file (--json)."

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="a stored study's id or number, or a study file")
        parser.add_argument("--plan", help="the plan's id (default: every plan)")
        parser.add_argument("--json", action="store_true", help="write the analysis file")
        parser.add_argument("-o", "--output", type=Path, help="file to write (default: stdout)")

    def handle(
        self, *args, study: str, plan: str | None, json: bool, output: Path | None, **options
    ) -> None:
        core_study = valid_study_from_reference(study)
        plans = [plan] if plan else [item.id for item in core_study.plans]
        if not plans:
            raise CommandError(f"study {core_study.id!r} has no plans to analyse")
        graph = prepare(core_study)
        analyses = []
        for plan_id in plans:
            try:
                analyses.append(analyse_plan(core_study, plan_id, graph=graph))
            except UnknownReference:
                known = ", ".join(item.id for item in core_study.plans)
                raise CommandError(
                    f"study {core_study.id!r} has no plan {plan_id!r} (plans: {known})"
                ) from None
        if json:
            documents = [analysis.to_json() for analysis in analyses]
            payload = documents[0] if plan else documents
            text = _dumps(payload)
        else:
            text = "\n".join(analysis_text for analysis_text in map(text_report, analyses))
        if output is None:
            self.stdout.write(text, ending="")
        else:
            output.write_text(text, encoding="utf-8")
            self.stderr.write(f"Wrote {output}.")


def _dumps(payload: object) -> str:
    return json.dumps(payload, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
