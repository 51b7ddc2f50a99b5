"""``manage.py housekeeping``: delete the work in progress that has expired.

Nothing needs it to run: expired spreadsheets waiting to be applied are also deleted when
their user next looks and on every upload. A server left without uploads for a while may
run it from its scheduler to give the space back sooner.
"""

from __future__ import annotations

from django.core.management.base import BaseCommand

from allocation import services
from allocation.core.limits import PENDING_IMPORT_LIFETIME_S


class Command(BaseCommand):
    help = (
        "Delete the spreadsheets uploaded for an import and left waiting longer than "
        f"{PENDING_IMPORT_LIFETIME_S // 3600} hours."
    )

    def handle(self, *args, **options) -> None:
        deleted = services.pending_imports_expire()
        self.stdout.write(f"{deleted} expired spreadsheet(s) waiting to be imported deleted.")
