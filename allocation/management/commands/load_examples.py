"""``manage.py load_examples``: import the example studies the owner lacks."""

from __future__ import annotations

from django.core.management.base import BaseCommand

from allocation import audit, services
from allocation import models as m

from ._study import owner_from_option


class Command(BaseCommand):
    help = "Import the example studies (skipping those the owner already has)."

    def add_arguments(self, parser) -> None:
        parser.add_argument("--owner", help="user name of the owner (default: the local sign-in)")

    def handle(self, *args, owner: str | None, **options) -> None:
        user = owner_from_option(owner)
        # The owner is who the trail names: a command has no signed-in user.
        with audit.acting(user, m.AuditSource.COMMAND):
            loaded = services.examples_load(owner=user)
        for key, imported in loaded:
            state = "imported" if imported else "already there"
            self.stdout.write(f"{key}: {state}")
