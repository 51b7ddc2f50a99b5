"""``manage.py start``: set up the local database and serve Baton on 127.0.0.1:8000."""

from __future__ import annotations

from pathlib import Path

from django.conf import settings
from django.core.management import call_command
from django.core.management.base import BaseCommand

from allocation import models as m
from allocation import services


class Command(BaseCommand):
    help = (
        "Migrate, load the example studies into an empty database, make sure the local "
        "sign-in exists, print it, and serve on 127.0.0.1."
    )

    def add_arguments(self, parser) -> None:
        parser.add_argument("--port", default="8000")
        parser.add_argument("--no-serve", action="store_true", help="set everything up, then stop")

    def handle(self, *args, port: str, no_serve: bool, **options) -> None:
        Path(settings.DATA_DIR).mkdir(parents=True, exist_ok=True)
        call_command("migrate", verbosity=0, interactive=False)
        user, password = services.local_user_ensure(data_dir=Path(settings.DATA_DIR))
        if not m.Study.objects.exists():
            for key, _imported in services.examples_load(owner=user):
                self.stdout.write(f"Loaded the example study {key!r}.")
        address = f"http://127.0.0.1:{port}/"
        self.stdout.write(
            self.style.SUCCESS(f"\nBaton is ready at {address}\n")
            + f"Sign in as {user.get_username()!r} with the password {password!r}\n"
            + f"(kept in {Path(settings.DATA_DIR) / 'local-sign-in.txt'}).\n"
        )
        if not no_serve:
            call_command("runserver", f"127.0.0.1:{port}", use_reloader=False)
