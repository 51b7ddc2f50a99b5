"""``manage.py load_examples``: import the example studies the owner lacks."""

from __future__ import annotations

from pathlib import Path

from django.conf import settings
from django.contrib.auth import get_user_model
from django.core.management.base import BaseCommand, CommandError

from allocation import services


class Command(BaseCommand):
    help = "Import the example studies (skipping those the owner already has)."

    def add_arguments(self, parser) -> None:
        parser.add_argument("--owner", help="user name of the owner (default: the local sign-in)")

    def handle(self, *args, owner: str | None, **options) -> None:
        if owner:
            user = get_user_model().objects.filter(username=owner).first()
            if user is None:
                raise CommandError(f"no user named {owner!r}")
        else:
            user, _password = services.local_user_ensure(data_dir=Path(settings.DATA_DIR))
        for key, imported in services.examples_load(owner=user):
            state = "imported" if imported else "already there"
            self.stdout.write(f"{key}: {state}")
