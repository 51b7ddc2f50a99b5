"""``manage.py export_study STUDY [-o FILE]``: write a study as a study file."""

from __future__ import annotations

import json
from pathlib import Path

from django.core.management.base import BaseCommand

from allocation import selectors

from ._study import study_from_reference


class Command(BaseCommand):
    help = "Export a study (by id or number) as a study file (JSON, format version 1)."

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="the study's id, or its number")
        parser.add_argument("-o", "--output", type=Path, help="file to write (default: stdout)")

    def handle(self, *args, study: str, output: Path | None, **options) -> None:
        row = study_from_reference(study)
        text = json.dumps(selectors.study_document(row), indent=2, ensure_ascii=False) + "\n"
        if output is None:
            self.stdout.write(text, ending="")
        else:
            output.write_text(text, encoding="utf-8")
            self.stderr.write(f"Wrote {output}.")
