"""``manage.py backup FILE`` writes every study, user and record to one file;
``manage.py backup --verify FILE`` checks a file's rows against its manifest.

The file and its manifest are described in :mod:`allocation.ops.backup`. It holds password
hashes: keep it as you keep the database.
"""

from __future__ import annotations

import time
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError
from django.db import DEFAULT_DB_ALIAS

from allocation.ops import backup


class Command(BaseCommand):
    help = (
        "Back up every study with all its rows, the users, snapshots, reviews, ratings, "
        "the audit trail and simulation runs to FILE (gzipped JSON lines), or with "
        "--verify check FILE's hashes without restoring it."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("file", help="the backup file to write (or to check)")
        parser.add_argument(
            "--verify",
            action="store_true",
            help="check FILE's row counts and SHA-256 hashes against its manifest; write nothing",
        )
        parser.add_argument(
            "--database",
            default=DEFAULT_DB_ALIAS,
            help="the database to back up (default: default)",
        )

    def handle(self, *args, file: str, verify: bool, database: str, **options) -> None:
        started = time.perf_counter()
        try:
            if verify:
                manifest = backup.backup_check(file)
            else:
                manifest = backup.backup_write(file, using=database)
        except backup.BackupRefused as error:
            raise CommandError(str(error)) from None
        except OSError as error:
            raise CommandError(f"{file}: {error.strerror or error}") from None
        seconds = time.perf_counter() - started
        if options["verbosity"] > 1:
            for entry in manifest.models:
                self.stdout.write(f"  {entry.label}: {entry.count} rows, {entry.sha256[:12]}…")
        size = Path(file).stat().st_size
        what = "is intact" if verify else "written"
        if options["verbosity"] > 0:
            self.stdout.write(
                f"{file} {what}: {manifest.rows} rows of {len(manifest.models)} models, "
                f"{size:,} bytes, Baton {manifest.baton_version}, made {manifest.created_at} "
                f"({seconds:.2f} s)"
            )
