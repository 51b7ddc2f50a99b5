"""``manage.py limits``: every bound on the work an input can start, as a table."""

from __future__ import annotations

from django.core.management.base import BaseCommand

from allocation.core.limits import LIMITS


class Command(BaseCommand):
    help = "List every limit on uploads, texts, studies, mode maps and simulation runs."

    def handle(self, *args, **options) -> None:
        for limit in LIMITS:
            value = f"{limit.value:,}" if isinstance(limit.value, int) else f"{limit.value:g}"
            self.stdout.write(
                f"{limit.name:<34} {value:>14} {limit.unit:<12} {limit.bounds} "
                f"(checked: {limit.checked})"
            )
