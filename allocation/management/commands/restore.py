"""``manage.py restore FILE``: put a backup back into an empty, migrated database.

Checks the whole file against its manifest first, refuses a database holding any row of
the models backed up, writes everything in one transaction keeping primary keys, then
reads it all back and compares counts and hashes; on any problem nothing is written.
See :mod:`allocation.ops.backup`.
"""

from __future__ import annotations

from django.core.management.base import BaseCommand, CommandError
from django.db import DEFAULT_DB_ALIAS

from allocation.ops import backup


class Command(BaseCommand):
    help = "Restore a backup FILE (from `manage.py backup`) into an empty, migrated database."

    def add_arguments(self, parser) -> None:
        parser.add_argument("file", help="a backup file written by `manage.py backup`")
        parser.add_argument(
            "--database", default=DEFAULT_DB_ALIAS, help="the database to restore into"
        )

    def handle(self, *args, file: str, database: str, **options) -> None:
        try:
            restored = backup.restore(file, using=database)
        except backup.BackupRefused as error:
            raise CommandError(f"{error}\nNothing was restored.") from None
        manifest = restored.manifest
        if options["verbosity"] > 1:
            for entry in manifest.models:
                self.stdout.write(f"  {entry.label}: {entry.count} rows, {entry.sha256[:12]}…")
        if options["verbosity"] > 0:
            self.stdout.write(
                f"restored {manifest.rows} rows of {len(manifest.models)} models from {file} "
                f"(Baton {manifest.baton_version}, made {manifest.created_at}); read back and "
                f"verified against the manifest ({restored.seconds:.2f} s)"
            )
