"""``python -m loadtest [--users N] [--seconds S] [--requests R] [--keep]``."""

import os
import sys

import django


def main(argv: list[str]) -> None:
    """Set up Django with the app's settings and run the load test's command."""
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "allocation.settings")
    django.setup()
    from loadtest.command import Command

    Command().run_from_argv(["python -m", "loadtest", *argv])


if __name__ == "__main__":
    main(sys.argv[1:])
