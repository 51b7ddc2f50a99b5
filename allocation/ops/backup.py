"""Backup and restore of everything Baton stores: one gzipped JSON-lines file.

The file is gzip-compressed UTF-8 text, one JSON object per line:

- line 1, the **manifest**: ``format`` (``"baton-backup"``), ``format_version`` (1),
  ``baton_version``, ``created_at`` (ISO 8601, UTC), ``database`` (the vendor it came
  from), ``migrations`` (every applied migration of the apps backed up, as
  ``"app.name"``) and ``models``: per model its label, the field names each row carries,
  the row count and the SHA-256 over its canonical rows;
- then every row, grouped by model in the manifest's order and by primary key within a
  model: ``{"model": label, "pk": pk, "fields": {name: value}}``.

A row is written as the database gives it: keys in their own order (a row's ``model``,
``pk`` and ``fields``, the fields in the model's order, and a JSON-valued field's keys in
the order it was stored with, so a study file's demands or stage splits come back in the
order its author wrote them), no spaces, UTF-8 (``ensure_ascii`` off, but a lone
surrogate stored before text was checked is written as its JSON escape, which reads back
as the same value), one ``"\\n"`` after it. A row's **canonical text** is the same
object written with sorted keys; dates and times are ISO 8601 with their microseconds and
offset. A model's hash is the SHA-256 of its rows' canonical texts in file order, so the
hash does not depend on key order and
files written before rows kept their order (with sorted keys) check and restore alike.
Values are Django's own serialized forms (the ``python`` serializer, so a foreign key is
the primary key it points to), which is why every field a model has, now or after a
migration, is carried without this module naming any of them.

What is backed up: every model of the ``allocation`` app but the transient ones
(:data:`TRANSIENT_MODELS`) (studies with all their rows,
memberships, snapshots, comments, decisions, workload ratings, the audit trail,
simulation runs with their chunks and results) and every user (username, password hash,
names, e-mail, flags, dates). Left out: the users' Django groups and permissions
(Baton's access is the study memberships), sessions, the admin's own log, django-axes's
sign-in attempt records and access log (a restored Baton starts with no one locked out)
the task queue (a run still queued or running at backup time comes back with its
chunks so far and no queued work: request it again) and the spreadsheets waiting to be
applied (:data:`TRANSIENT_MODELS`: they live a day at most; upload them again).

Reading the database for a backup happens in one read transaction (``REPEATABLE READ``
on PostgreSQL; a deferred read transaction on SQLite, whose WAL keeps writers going), so
the file is one consistent moment even while people keep working. Restoring refuses a
database that holds any row of the models backed up, checks the whole file against its
manifest before writing, writes every row with its primary key in one transaction,
resets PostgreSQL's sequences, checks the foreign keys, then reads everything back and
compares counts and hashes with the manifest; any problem rolls the whole restore back.

References
----------
.. [1] FIPS PUB 180-4, Secure Hash Standard, §6.2 (SHA-256).
.. [2] RFC 1952, GZIP file format specification version 4.3 (members may be
   concatenated; readers join them).
.. [3] JSON Lines, https://jsonlines.org/ (one JSON value per line, UTF-8).
.. [4] RFC 8259, The JavaScript Object Notation (JSON) Data Interchange Format, §7
   (strings; an escaped code point).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import decimal
import graphlib
import gzip
import hashlib
import json
import os
import re
import shutil
import tempfile
import time
import uuid
import zlib
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from django.apps import apps
from django.contrib.auth import get_user_model
from django.core import serializers
from django.core.management.color import no_style
from django.core.serializers.base import DeserializationError
from django.db import DEFAULT_DB_ALIAS, IntegrityError, connections, models, transaction
from django.db.migrations.executor import MigrationExecutor
from django.utils import timezone

from allocation import __version__

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "TRANSIENT_MODELS",
    "BackupRefused",
    "Manifest",
    "ModelEntry",
    "Restored",
    "backed_up_models",
    "backup_check",
    "backup_write",
    "canonical_line",
    "restore",
]

FORMAT = "baton-backup"
FORMAT_VERSION = 1
#: Models of the ``allocation`` app left out of backups on purpose: work in progress that
#: expires on its own (a spreadsheet waiting for its preview to be applied). Every other
#: model of the app is backed up; a test holds the two lists to the app's models.
TRANSIENT_MODELS = frozenset({"allocation.pendingimport"})
#: Rows read from the database per query while backing up.
_CHUNK = 1000


class BackupRefused(Exception):
    """A backup file that does not check out, or a database it cannot go into.

    The message says where the problem is (the file and line, the model, the field or
    the table); nothing has been written when it is raised.
    """


@dataclass
class ModelEntry:
    """One model's line of the manifest."""

    label: str
    fields: list[str]
    count: int = 0
    sha256: str = ""

    def to_json(self) -> dict[str, Any]:
        return {
            "model": self.label,
            "fields": self.fields,
            "count": self.count,
            "sha256": self.sha256,
        }


@dataclass
class Manifest:
    """The first line of a backup file."""

    baton_version: str
    created_at: str
    database: str
    migrations: list[str]
    models: list[ModelEntry] = field(default_factory=list)

    @property
    def rows(self) -> int:
        return sum(entry.count for entry in self.models)

    def to_json(self) -> dict[str, Any]:
        return {
            "format": FORMAT,
            "format_version": FORMAT_VERSION,
            "baton_version": self.baton_version,
            "created_at": self.created_at,
            "database": self.database,
            "migrations": self.migrations,
            "models": [entry.to_json() for entry in self.models],
        }


# -- the models and their rows ----------------------------------------------------------


def backed_up_models() -> list[type[models.Model]]:
    """The user model and every model of the ``allocation`` app (with any many-to-many
    tables Django makes for it) but :data:`TRANSIENT_MODELS`, ordered so that a model
    comes after those it points to.
    """
    chosen = [get_user_model()]
    chosen += [
        model
        for model in apps.get_app_config("allocation").get_models(include_auto_created=True)
        if model._meta.label_lower not in TRANSIENT_MODELS
    ]
    order: graphlib.TopologicalSorter = graphlib.TopologicalSorter()
    for model in chosen:
        targets = {
            f.related_model
            for f in model._meta.concrete_fields
            if f.is_relation and f.related_model in chosen and f.related_model is not model
        }
        order.add(model, *targets)
    # static_order() follows insertion order among equals, so the order is stable.
    return list(order.static_order())


def _label(model: type[models.Model]) -> str:
    return model._meta.label_lower


def _field_names(model: type[models.Model]) -> list[str]:
    """Every stored column but the primary key, by field name, in declaration order."""
    return [f.name for f in model._meta.concrete_fields if not f.primary_key]


def _plain(value: Any) -> Any:
    """JSON for the values Django's python serializer leaves as objects."""
    if isinstance(value, dt.datetime | dt.date | dt.time):
        return value.isoformat()  # keeps microseconds, unlike DjangoJSONEncoder
    if isinstance(value, decimal.Decimal | uuid.UUID):
        return str(value)
    raise TypeError(f"cannot write a {type(value).__name__} into a backup")


#: A lone surrogate: a code point with no UTF-8, which a database may still hand back
#: (a JSON value on SQLite keeps it as the escape ``\ud800``).
_SURROGATE = re.compile("[\ud800-\udfff]")


def _escaped(text: str) -> str:
    """JSON text with each lone surrogate written as its JSON escape (``\\ud800``).

    A surrogate only occurs inside a JSON string, where the escape stands for exactly
    that code point (RFC 8259 §7), so reading the line gives the same value back; text
    without one (every row of a file written before) is unchanged, hashes included.
    """
    return _SURROGATE.sub(lambda match: f"\\u{ord(match[0]):04x}", text)


def canonical_line(row: dict[str, Any]) -> str:
    """A row's canonical text: sorted keys, no spaces, UTF-8, one newline after it."""
    return (
        _escaped(
            json.dumps(
                row, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=_plain
            )
        )
        + "\n"
    )


def _stored_line(row: dict[str, Any]) -> str:
    """A row as the file holds it: its keys in their own order (see the module text)."""
    return (
        _escaped(json.dumps(row, separators=(",", ":"), ensure_ascii=False, default=_plain)) + "\n"
    )


def _chunks(items: Iterable[Any], size: int) -> Iterator[list[Any]]:
    batch: list[Any] = []
    for item in items:
        batch.append(item)
        if len(batch) == size:
            yield batch
            batch = []
    if batch:
        yield batch


def _rows(model: type[models.Model], names: list[str], using: str) -> Iterator[dict[str, Any]]:
    """A model's rows from the database, by primary key, as the python serializer gives
    them (a JSON-valued field keeps the key order the database returns)."""
    serializer = serializers.get_serializer("python")()
    objects = model._base_manager.using(using).order_by("pk").iterator(chunk_size=_CHUNK)
    for batch in _chunks(objects, _CHUNK):
        for row in serializer.serialize(batch, fields=names):
            # Only the named fields: a model's many-to-many lists (the user's groups and
            # permissions) are not part of the row.
            yield {
                "model": row["model"],
                "pk": row["pk"],
                "fields": {name: row["fields"][name] for name in names},
            }


@contextlib.contextmanager
def _consistent_reads(using: str) -> Iterator[None]:
    """Every read inside sees the database at one moment, without holding up writers."""
    connection = connections[using]
    if connection.in_atomic_block:
        yield  # already inside a transaction (a test): its reads are consistent
        return
    if connection.vendor == "sqlite":
        # Baton's SQLite transactions start IMMEDIATE (a write lock); a plain deferred
        # BEGIN is a read transaction that WAL serves from one snapshot.
        connection.ensure_connection()
        with connection.cursor() as cursor:
            cursor.execute("BEGIN DEFERRED")
            try:
                yield
            finally:
                cursor.execute("COMMIT")
        return
    with transaction.atomic(using=using):
        if connection.vendor == "postgresql":
            with connection.cursor() as cursor:
                cursor.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ, READ ONLY")
        yield


def _applied_migrations(using: str, app_labels: set[str]) -> list[str]:
    executor = MigrationExecutor(connections[using])
    return sorted(
        f"{app}.{name}" for app, name in executor.loader.applied_migrations if app in app_labels
    )


# -- writing ----------------------------------------------------------------------------


def backup_write(path: str | os.PathLike, *, using: str = DEFAULT_DB_ALIAS) -> Manifest:
    """Write every backed-up row of the database ``using`` to ``path``.

    The file appears only once complete (written beside it, then renamed), readable by
    its owner alone, since it holds password hashes.

    Returns
    -------
    Manifest
        What the file's first line says.
    """
    target = Path(path)
    folder = target.resolve().parent
    chosen = backed_up_models()
    manifest = Manifest(
        baton_version=__version__,
        created_at=timezone.now().isoformat(),
        database=connections[using].vendor,
        migrations=_applied_migrations(using, {m._meta.app_label for m in chosen}),
    )
    body_fd, body_name = tempfile.mkstemp(prefix=".baton-backup-", dir=folder)
    final_fd, final_name = tempfile.mkstemp(prefix=".baton-backup-", dir=folder)
    try:
        with (
            os.fdopen(body_fd, "wb") as raw,
            gzip.GzipFile(fileobj=raw, mode="wb") as body,
            _consistent_reads(using),
        ):
            for model in chosen:
                entry = ModelEntry(_label(model), _field_names(model))
                digest = hashlib.sha256()
                for row in _rows(model, entry.fields, using):
                    digest.update(canonical_line(row).encode("utf-8"))
                    body.write(_stored_line(row).encode("utf-8"))
                    entry.count += 1
                entry.sha256 = digest.hexdigest()
                manifest.models.append(entry)
        # The manifest goes first as its own gzip member; the rows follow as a second
        # member (RFC 1952 readers join members), so the rows are not compressed twice.
        with os.fdopen(final_fd, "wb") as raw:
            with gzip.GzipFile(fileobj=raw, mode="wb") as head:
                head.write(canonical_line(manifest.to_json()).encode("utf-8"))
            with open(body_name, "rb") as body_in:
                shutil.copyfileobj(body_in, raw)
            raw.flush()
            os.fsync(raw.fileno())
        os.replace(final_name, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(final_name)
        raise
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(body_name)
    return manifest


# -- reading and checking ---------------------------------------------------------------


def _lines(path: Path) -> Iterator[tuple[int, dict[str, Any]]]:
    """The file's JSON objects with their line numbers; a clear refusal for anything else."""
    name = path.name
    try:
        with gzip.open(path, "rb") as stream:
            for number, raw in enumerate(stream, start=1):
                if not raw.endswith(b"\n"):
                    raise BackupRefused(
                        f"{name} line {number}: the file ends mid-line (cut short)"
                    )
                try:
                    value = json.loads(raw.decode("utf-8"))
                except (UnicodeDecodeError, ValueError) as error:
                    raise BackupRefused(f"{name} line {number}: not JSON ({error})") from None
                if not isinstance(value, dict):
                    raise BackupRefused(f"{name} line {number}: not a JSON object")
                yield number, value
    except FileNotFoundError:
        raise BackupRefused(f"{path}: no such file") from None
    except IsADirectoryError:
        raise BackupRefused(f"{path}: is a folder, not a backup file") from None
    except PermissionError:
        raise BackupRefused(f"{path}: not allowed to read it") from None
    except gzip.BadGzipFile:
        raise BackupRefused(f"{name}: not a Baton backup (not a gzip file)") from None
    except EOFError:
        raise BackupRefused(
            f"{name}: the file is cut short (its compressed data ends early)"
        ) from None
    except zlib.error as error:
        raise BackupRefused(f"{name}: the compressed data is damaged ({error})") from None


def _manifest(name: str, value: dict[str, Any]) -> Manifest:
    where = f"{name} line 1 (the manifest)"
    if value.get("format") != FORMAT:
        raise BackupRefused(f"{where}: not a Baton backup (format {value.get('format')!r})")
    if value.get("format_version") != FORMAT_VERSION:
        raise BackupRefused(
            f"{where}: format version {value.get('format_version')!r}; this Baton reads "
            f"version {FORMAT_VERSION} (a newer Baton wrote it?)"
        )
    try:
        entries = [
            ModelEntry(
                label=item["model"],
                fields=list(item["fields"]),
                count=item["count"],
                sha256=item["sha256"],
            )
            for item in value["models"]
        ]
        manifest = Manifest(
            baton_version=str(value["baton_version"]),
            created_at=str(value["created_at"]),
            database=str(value["database"]),
            migrations=list(value["migrations"]),
            models=entries,
        )
    except (KeyError, TypeError) as error:
        raise BackupRefused(
            f"{where}: incomplete ({error!s} missing or of the wrong kind)"
        ) from None
    labels = [entry.label for entry in entries]
    for entry in entries:
        if not isinstance(entry.label, str) or labels.count(entry.label) > 1:
            raise BackupRefused(f"{where}: model {entry.label!r} is listed more than once")
        if not all(isinstance(name, str) for name in entry.fields):
            raise BackupRefused(f"{where}: model {entry.label}: field names must be text")
        if not isinstance(entry.count, int) or isinstance(entry.count, bool) or entry.count < 0:
            raise BackupRefused(f"{where}: model {entry.label}: count {entry.count!r}")
        if not isinstance(entry.sha256, str) or len(entry.sha256) != 64:
            raise BackupRefused(f"{where}: model {entry.label}: sha256 {entry.sha256!r}")
    return manifest


def _read(path: Path) -> tuple[Manifest, Iterator[tuple[int, ModelEntry, dict[str, Any]]]]:
    """The file's manifest, and its rows (shape-checked, in file order) to iterate."""
    lines = _lines(path)
    first = next(lines, None)
    if first is None:
        raise BackupRefused(f"{path.name}: empty, not a Baton backup")
    manifest = _manifest(path.name, first[1])
    return manifest, _checked_rows(path.name, manifest, lines)


def _checked_rows(
    name: str, manifest: Manifest, lines: Iterator[tuple[int, dict[str, Any]]]
) -> Iterator[tuple[int, ModelEntry, dict[str, Any]]]:
    position = 0
    seen: set[str] = set()
    for number, row in lines:
        where = f"{name} line {number}"
        label = row.get("model")
        # Rows come grouped by model in the manifest's order; move on to the row's model.
        while position < len(manifest.models) and manifest.models[position].label != label:
            position += 1
            seen = set()
        if position == len(manifest.models):
            raise BackupRefused(
                f"{where}: a row of {label!r}, which the manifest does not list here "
                "(rows out of order or of an unknown model)"
            )
        entry = manifest.models[position]
        if set(row) != {"model", "pk", "fields"} or not isinstance(row["fields"], dict):
            raise BackupRefused(f"{where}: a row must have exactly model, pk and fields")
        if set(row["fields"]) != set(entry.fields):
            missing = sorted(set(entry.fields) - set(row["fields"]))
            extra = sorted(set(row["fields"]) - set(entry.fields))
            raise BackupRefused(
                f"{where}: {label} row {row['pk']!r} has fields other than the manifest's "
                f"(missing {missing}, extra {extra})"
            )
        key = json.dumps(row["pk"], sort_keys=True)
        if key in seen:
            raise BackupRefused(f"{where}: {label} row {row['pk']!r} appears twice")
        seen.add(key)
        yield number, entry, row


def backup_check(path: str | os.PathLike) -> Manifest:
    """Read a whole backup file and check every model's row count and SHA-256.

    Raises
    ------
    BackupRefused
        For a file that is not a backup, is damaged or cut short, or whose rows do not
        match its manifest; the message names the line or the model.
    """
    path = Path(path)
    manifest, rows = _read(path)
    digests = {entry.label: hashlib.sha256() for entry in manifest.models}
    counts = dict.fromkeys(digests, 0)
    for _number, entry, row in rows:
        digests[entry.label].update(canonical_line(row).encode("utf-8"))
        counts[entry.label] += 1
    _compare(manifest, counts, digests, f"{path.name}:", "the file was changed or damaged")
    return manifest


def _compare(manifest: Manifest, counts, digests, where: str, cause: str) -> None:
    for entry in manifest.models:
        if counts[entry.label] != entry.count:
            raise BackupRefused(
                f"{where} {entry.label} has {counts[entry.label]} rows but the manifest "
                f"says {entry.count}; {cause}"
            )
        found = digests[entry.label].hexdigest()
        if found != entry.sha256:
            raise BackupRefused(
                f"{where} the rows of {entry.label} hash to {found[:12]}… but the "
                f"manifest says {entry.sha256[:12]}…; {cause}"
            )


# -- restoring --------------------------------------------------------------------------


def _schema_check(manifest: Manifest, using: str) -> dict[str, type[models.Model]]:
    """The models of the file in this database; a refusal naming what does not fit."""
    connection = connections[using]
    executor = MigrationExecutor(connection)
    pending = executor.migration_plan(executor.loader.graph.leaf_nodes())
    if pending:
        names = ", ".join(f"{m.app_label}.{m.name}" for m, _backwards in pending[:5])
        raise BackupRefused(
            f"the database is not migrated ({names} …); run `manage.py migrate` first"
        )
    applied = {f"{app}.{name}" for app, name in executor.loader.applied_migrations}
    unknown = [name for name in manifest.migrations if name not in applied]
    if unknown:
        raise BackupRefused(
            f"the backup was made by a newer Baton: migrations {', '.join(unknown)} are not "
            "in this database; install that Baton version (or newer) and migrate first"
        )
    found: dict[str, type[models.Model]] = {}
    for entry in manifest.models:
        try:
            model = apps.get_model(entry.label)
        except (LookupError, ValueError):
            raise BackupRefused(f"the backup holds rows of {entry.label}, unknown here") from None
        known = set(_field_names(model))
        strange = [name for name in entry.fields if name not in known]
        if strange:
            raise BackupRefused(
                f"{entry.label}: the backup's fields {', '.join(strange)} are unknown here"
            )
        found[entry.label] = model
    return found


def _refuse_unless_empty(chosen: Iterable[type[models.Model]], using: str) -> None:
    full = [
        f"{_label(model)} ({count} rows)"
        for model in chosen
        if (count := model._base_manager.using(using).count())
    ]
    if full:
        raise BackupRefused(
            "the database is not empty: "
            + ", ".join(full)
            + "; restore into a new, migrated database"
        )


@dataclass
class Restored:
    """What a restore wrote."""

    manifest: Manifest
    seconds: float


def restore(path: str | os.PathLike, *, using: str = DEFAULT_DB_ALIAS) -> Restored:
    """Restore a backup file into an empty, migrated database; all or nothing.

    Raises
    ------
    BackupRefused
        When the file does not check out (see :func:`backup_check`), does not fit this
        database's models, the database holds rows already, a row is refused by the
        database, or the rows read back differ from the manifest. Nothing is written.
    """
    started = time.perf_counter()
    path = Path(path)
    manifest = backup_check(path)
    found = _schema_check(manifest, using)
    _refuse_unless_empty(dict.fromkeys([*found.values(), *backed_up_models()]), using)
    connection = connections[using]
    try:
        with transaction.atomic(using=using):
            _manifest_again, rows = _read(path)
            for number, entry, row in rows:
                try:
                    for item in serializers.deserialize("python", [row], using=using):
                        item.save(using=using, force_insert=True)
                except (DeserializationError, IntegrityError, ValueError) as error:
                    raise BackupRefused(
                        f"{path.name} line {number}: {entry.label} row {row['pk']!r} was "
                        f"refused by the database ({error})"
                    ) from None
            tables = [model._meta.db_table for model in found.values()]
            try:
                # Foreign keys are checked at commit; check them now, for a clear message.
                connection.check_constraints(table_names=tables)
            except IntegrityError as error:
                raise BackupRefused(f"a row points to a row the backup lacks: {error}") from None
            statements = connection.ops.sequence_reset_sql(no_style(), list(found.values()))
            if statements:
                with connection.cursor() as cursor:
                    for statement in statements:
                        cursor.execute(statement)
            _verify_stored(manifest, found, using)
    except IntegrityError as error:
        raise BackupRefused(f"the database refused the restore: {error}") from None
    return Restored(manifest, time.perf_counter() - started)


def _verify_stored(manifest: Manifest, found: dict[str, type[models.Model]], using: str) -> None:
    """Read every restored row back and compare counts and hashes with the manifest."""
    digests = {}
    counts = {}
    for entry in manifest.models:
        digest = hashlib.sha256()
        count = 0
        for row in _rows(found[entry.label], entry.fields, using):
            digest.update(canonical_line(row).encode("utf-8"))
            count += 1
        digests[entry.label], counts[entry.label] = digest, count
    _compare(
        manifest,
        counts,
        digests,
        "read back after restoring,",
        "the database stored something else; nothing was restored",
    )
