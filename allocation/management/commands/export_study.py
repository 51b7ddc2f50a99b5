"""``manage.py export_study STUDY [--format F] [--plan PLAN] [--snapshot HASH] [-o FILE]``.

``json`` (the default) writes the study file; from a snapshot, its canonical text byte
for byte. ``csv`` and ``xlsx`` write a plan's allocation table, ``html`` and ``pdf`` its
printable report; these need ``--plan``, and ``xlsx`` and ``pdf`` need ``-o``.
"""

from __future__ import annotations

import json
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from allocation import exports, selectors
from allocation.core.objective_file import with_objective

from ._study import study_from_reference

FORMATS = ("json", *exports.FORMATS)
BINARY = ("xlsx", "pdf")


class Command(BaseCommand):
    help = (
        "Export a study (by id or number): the study file (json), or one plan's "
        "allocation table (csv, xlsx) or printable report (html, pdf)."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="the study's id, or its number")
        parser.add_argument("--format", choices=FORMATS, default="json", help="default json")
        parser.add_argument("--plan", help="the plan to export (csv, xlsx, html, pdf)")
        parser.add_argument(
            "--snapshot", help="export a snapshot of the study: the start of its SHA-256 hash"
        )
        parser.add_argument("-o", "--output", type=Path, help="file to write (default: stdout)")

    def handle(
        self,
        *args,
        study: str,
        format: str,
        plan: str | None,
        snapshot: str | None,
        output: Path | None,
        **options,
    ) -> None:
        row = study_from_reference(study)
        frozen = None
        if snapshot:
            try:
                frozen = exports.snapshot_by_prefix(row, snapshot)
            except LookupError as error:
                raise CommandError(str(error)) from None
        if format == "json":
            if frozen is not None:
                data = frozen.canonical.encode("utf-8")
            else:
                document = with_objective(selectors.study_document(row))
                data = (json.dumps(document, indent=2, ensure_ascii=False) + "\n").encode()
        else:
            data = self.plan_export(row, format, plan, frozen, output)
        if output is None:
            self.stdout.write(data.decode("utf-8"), ending="")
        else:
            output.write_bytes(data)
            stamp = frozen.sha256 if frozen is not None else exports.NOT_FROZEN
            self.stderr.write(f"Wrote {output} (snapshot: {stamp}).")

    def plan_export(self, row, format: str, plan: str | None, frozen, output) -> bytes:
        if not plan:
            raise CommandError(f"--format {format} exports one plan: name it with --plan")
        if format in BINARY and output is None:
            raise CommandError(f"--format {format} writes a binary file: name it with -o")
        from django.http import Http404

        try:
            source = exports.export_source(row, plan, snapshot=frozen)
        except Http404:
            known = ", ".join(p.id for p in selectors.study_load(row).study.plans)
            where = "the snapshot" if frozen is not None else "the study"
            raise CommandError(
                f"{where} has no plan {plan!r} to analyse (plans: {known}), "
                "or it has errors to fix first"
            ) from None
        return exports.export_bytes(source, format)
