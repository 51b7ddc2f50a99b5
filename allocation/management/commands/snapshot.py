"""``manage.py snapshot STUDY --title T [--user U]``: freeze a stored study and print its hash.

STUDY is a stored study's id or number (as for ``analyse``; a study file must be
imported first). The snapshot's author is ``--user`` (default: the local sign-in), who
must be an editor or owner of the study. The SHA-256 of the snapshot's canonical text
is printed alone on standard output, so scripts can keep it.
"""

from __future__ import annotations

from django.core.exceptions import PermissionDenied
from django.core.management.base import BaseCommand, CommandError

from allocation import audit, services
from allocation import models as m
from allocation.core import StudyInvalid

from ._study import owner_from_option, problem_lines, study_from_reference


class Command(BaseCommand):
    help = "Freeze a stored study as a snapshot and print the snapshot's SHA-256."

    def add_arguments(self, parser) -> None:
        parser.add_argument("study", help="a stored study's id or number")
        parser.add_argument("--title", required=True, help="what the snapshot is")
        parser.add_argument(
            "--user", help="the author, an editor or owner of the study (default: local sign-in)"
        )

    def handle(self, *args, study: str, title: str, user: str | None, **options) -> None:
        row = study_from_reference(study)
        author = owner_from_option(user)
        try:
            with audit.acting(author, m.AuditSource.COMMAND):
                snapshot = services.snapshot_create(study=row, title=title, user=author)
        except PermissionDenied as error:
            raise CommandError(f"{author.get_username()}: {error}") from None
        except StudyInvalid as error:
            raise CommandError(
                f"study {row.key!r} was not frozen:\n" + problem_lines(error.errors)
            ) from None
        self.stdout.write(snapshot.sha256)
        if options["verbosity"] > 1:
            self.stderr.write(f"froze {row.key} (number {row.pk}) as “{snapshot.title}”")
