"""What the study commands share: finding a study and reporting problems."""

from __future__ import annotations

from pathlib import Path

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import AbstractBaseUser
from django.core.management.base import CommandError

from allocation import models as m
from allocation import selectors, services
from allocation.core import LoadResult, Problem, Study, load_study_text
from allocation.core.limits import STUDY_FILE_MAX_BYTES


def study_from_reference(reference: str) -> m.Study:
    """The one study a command names by id or number; a clear error otherwise."""
    matches = selectors.studies_by_reference(reference=reference)
    if not matches:
        raise CommandError(f"no study with the id or number {reference!r}")
    if len(matches) > 1:
        numbers = ", ".join(str(study.pk) for study in matches)
        raise CommandError(
            f"{len(matches)} studies have the id {reference!r} (numbers {numbers}); "
            "name one by its number"
        )
    return matches[0]


def study_file_bytes(path: Path) -> bytes:
    """A study file's bytes, refused before reading when it is larger than an upload may be
    (:data:`~allocation.core.limits.STUDY_FILE_MAX_BYTES`)."""
    try:
        size = path.stat().st_size
        if size > STUDY_FILE_MAX_BYTES:
            raise CommandError(
                f"{path} is {size:,} bytes; a study file may be at most "
                f"{STUDY_FILE_MAX_BYTES:,} bytes (limit STUDY_FILE_MAX_BYTES)"
            )
        with path.open("rb") as file:
            # Read one byte past the limit: a file growing meanwhile is refused too.
            data = file.read(STUDY_FILE_MAX_BYTES + 1)
    except OSError as error:
        raise CommandError(f"cannot read {path}: {error.strerror}") from None
    if len(data) > STUDY_FILE_MAX_BYTES:
        raise CommandError(
            f"{path} is more than {STUDY_FILE_MAX_BYTES:,} bytes; a study file may be at "
            f"most {STUDY_FILE_MAX_BYTES:,} bytes (limit STUDY_FILE_MAX_BYTES)"
        )
    return data


def study_result_from_reference(reference: str) -> LoadResult:
    """A study a command names by stored id or number, or by the path of a study file
    (read, not stored), as the core loaded it."""
    path = Path(reference)
    if reference.endswith(".json") or path.is_file():
        return load_study_text(study_file_bytes(path))
    return selectors.study_load(study_from_reference(reference))


def valid_study_from_reference(reference: str) -> Study:
    """The core study a command names (as :func:`study_result_from_reference`), refused
    with its errors listed when it has any."""
    result = study_result_from_reference(reference)
    if not result.ok:
        raise CommandError(
            f"the study has {len(result.errors)} error(s); fix them first:\n"
            + problem_lines(result.errors)
        )
    return result.study


def problem_lines(problems: list[Problem]) -> str:
    return "\n".join(f"  {problem.level}: {problem}" for problem in problems)


def owner_from_option(username: str | None) -> AbstractBaseUser:
    """The user a command's ``--owner`` names, or the local sign-in when it names none."""
    if not username:
        user, _password = services.local_user_ensure(data_dir=Path(settings.DATA_DIR))
        return user
    user = get_user_model().objects.filter(username=username).first()
    if user is None:
        raise CommandError(f"no user named {username!r}")
    return user
