"""``manage.py import_study FILE``: store a study file as a new study."""

from __future__ import annotations

from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from allocation import audit, services
from allocation import models as m
from allocation.core import StudyInvalid, load_study_text

from ._study import owner_from_option, problem_lines, study_file_bytes


class Command(BaseCommand):
    help = "Import a study file (JSON, format version 2, or 1 upgraded) as a new study."

    def add_arguments(self, parser) -> None:
        parser.add_argument("file", type=Path)
        parser.add_argument("--owner", help="user name of the owner (default: the local sign-in)")

    def handle(self, *args, file: Path, owner: str | None, **options) -> None:
        text = study_file_bytes(file)
        result = load_study_text(text)
        if not result.ok:
            raise CommandError(
                f"{file} was not imported; {len(result.errors)} error(s):\n"
                + problem_lines(result.problems)
            )
        user = owner_from_option(owner)
        try:
            # The owner is who the trail names: a command has no signed-in user.
            with audit.acting(user, m.AuditSource.COMMAND):
                study = services.study_create(
                    study=result.study, owner=user, action="study.import"
                )
        except StudyInvalid as error:  # pragma: no cover - checked above
            raise CommandError(problem_lines(error.problems)) from None
        if result.warnings:
            self.stdout.write(problem_lines(result.warnings))
        self.stdout.write(
            f"Imported {study.key!r} as study {study.pk}, owned by {user.get_username()}."
        )
