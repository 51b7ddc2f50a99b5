"""Every bound on the work an upload, an edit or a request can start, in one place.

Each limit is checked before the work it bounds starts, and a refusal names the limit and
the measured quantity. :data:`LIMITS` lists them for the README's Operations section and
for the ``limits`` management command; a test keeps the two in step.

The values are tool assumptions: sized so that the largest input accepted is analysed
within the time and memory a team server gives one request (measured figures are in the
README's Operations section), and far above any study seen in practice.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "INTEGER_DIGITS",
    "LABEL_LENGTH",
    "LIMITS",
    "Limit",
    "MAX_PER_DAY",
    "PHRASE_LENGTH",
    "SIMULATION_CORE_MAX_DAYS",
    "SIMULATION_MAX_DAYS",
    "SIMULATION_STALLED_S",
    "SPREADSHEET_MAX_BYTES",
    "SPREADSHEET_MAX_COLUMNS",
    "SPREADSHEET_MAX_ROWS",
    "SPREADSHEET_MAX_UNPACKED_BYTES",
    "STUDY_FILE_MAX_BYTES",
    "REVIEW_TEXT_LENGTH",
    "WORKER_DATABASE_RETRY_FIRST_S",
    "WORKER_DATABASE_RETRY_MAX_S",
    "WORKER_TASK_ATTEMPTS",
]


@dataclass(frozen=True)
class Limit:
    """One bound: its name, value and unit, what it bounds and where it is checked."""

    name: str
    value: int | float
    unit: str
    bounds: str
    checked: str


# --- Files -------------------------------------------------------------------------

#: The largest study file read (bytes); the web server also refuses a request declaring
#: more before its body is read.
STUDY_FILE_MAX_BYTES = 5 * 1024 * 1024
#: The largest spreadsheet read (bytes): a study of a few thousand tasks exports to well
#: under a megabyte.
SPREADSHEET_MAX_BYTES = 2 * 1024 * 1024
#: The most bytes the members of an XLSX (a zip archive) may unpack to.
SPREADSHEET_MAX_UNPACKED_BYTES = 40 * 1024 * 1024
#: The most data rows in one sheet.
SPREADSHEET_MAX_ROWS = 5000
#: The most columns in one sheet (the widest sheet Baton writes has 23).
SPREADSHEET_MAX_COLUMNS = 60

# --- Values --------------------------------------------------------------------------

#: Python's own limit on converting digits to an int (``sys.get_int_max_str_digits()``).
INTEGER_DIGITS = 4300
#: The most often anything may happen: a million times a day (about twelve a second).
MAX_PER_DAY = 1_000_000

# --- Text ----------------------------------------------------------------------------

#: The longest names and titles (of the study, agents, events, plans, modes): what a
#: stored study keeps (the database columns).
LABEL_LENGTH = 200
#: The longest task titles and triggers.
PHRASE_LENGTH = 300
#: The longest comment, decision or rationale of a review (a page of text).
REVIEW_TEXT_LENGTH = 10_000

# --- Study size and analyses ---------------------------------------------------------

# --- Mode maps -----------------------------------------------------------------------

# --- Simulation ----------------------------------------------------------------------

#: The most days one request may ask for.
SIMULATION_MAX_DAYS = 20_000
#: The longest run the simulation core accepts (the database allows the same).
SIMULATION_CORE_MAX_DAYS = 100_000
#: Seconds a running simulation may go without progress (a worker taking or storing one
#: of its chunks) before it is marked failed as stalled: its worker died. A chunk of the
#: largest studies takes seconds and combining a run well under a minute, so this is
#: far above any live worker's gap; a stalled run can be restarted, keeping its chunks.
SIMULATION_STALLED_S = 600
#: The background worker's first wait (seconds) after the database could not be
#: reached; each failed attempt doubles it, up to the next limit.
WORKER_DATABASE_RETRY_FIRST_S = 1
#: The longest wait (seconds) between the worker's attempts to reach the database: once
#: the database is back, the worker resumes within this time.
WORKER_DATABASE_RETRY_MAX_S = 30
#: The most times a task is taken from the queue when the database goes away while it
#: runs; it is put back after each outage and recorded as failed after the last.
WORKER_TASK_ATTEMPTS = 5

# --- Pages and pending work ----------------------------------------------------------


#: Every limit, for the README's Operations section and ``manage.py limits``.
LIMITS: tuple[Limit, ...] = (
    Limit(
        "STUDY_FILE_MAX_BYTES",
        STUDY_FILE_MAX_BYTES,
        "bytes",
        "a study file",
        "upload, before the file is read",
    ),
    Limit(
        "SPREADSHEET_MAX_BYTES",
        SPREADSHEET_MAX_BYTES,
        "bytes",
        "a spreadsheet (CSV or XLSX)",
        "upload, before the file is read",
    ),
    Limit(
        "SPREADSHEET_MAX_UNPACKED_BYTES",
        SPREADSHEET_MAX_UNPACKED_BYTES,
        "bytes",
        "an XLSX unpacked",
        "spreadsheet reader, from the archive's directory",
    ),
    Limit(
        "SPREADSHEET_MAX_ROWS",
        SPREADSHEET_MAX_ROWS,
        "rows",
        "one sheet",
        "spreadsheet reader",
    ),
    Limit(
        "SPREADSHEET_MAX_COLUMNS",
        SPREADSHEET_MAX_COLUMNS,
        "columns",
        "one sheet",
        "spreadsheet reader",
    ),
    Limit(
        "INTEGER_DIGITS",
        INTEGER_DIGITS,
        "digits",
        "an integer in a file",
        "study reader, while parsing",
    ),
    Limit(
        "MAX_PER_DAY",
        MAX_PER_DAY,
        "per day",
        "any rate (events, schedules)",
        "study reader, forms",
    ),
    Limit(
        "LABEL_LENGTH",
        LABEL_LENGTH,
        "characters",
        "names and titles",
        "study reader, forms, spreadsheet reader",
    ),
    Limit(
        "PHRASE_LENGTH",
        PHRASE_LENGTH,
        "characters",
        "task titles and triggers",
        "study reader, forms, spreadsheet reader",
    ),
    Limit(
        "REVIEW_TEXT_LENGTH",
        REVIEW_TEXT_LENGTH,
        "characters",
        "a review comment, decision or rationale",
        "review forms",
    ),
    Limit(
        "SIMULATION_MAX_DAYS",
        SIMULATION_MAX_DAYS,
        "days",
        "one simulation request",
        "simulation form, before a run is stored",
    ),
    Limit(
        "SIMULATION_CORE_MAX_DAYS",
        SIMULATION_CORE_MAX_DAYS,
        "days",
        "one simulation run",
        "simulation core and database",
    ),
    Limit(
        "SIMULATION_STALLED_S",
        SIMULATION_STALLED_S,
        "seconds",
        "a running simulation without progress (then marked failed, restartable)",
        "simulation pages and status poll, a new request, the worker (every 60 s)",
    ),
    Limit(
        "WORKER_DATABASE_RETRY_FIRST_S",
        WORKER_DATABASE_RETRY_FIRST_S,
        "seconds",
        "the worker's first wait for a database it cannot reach (doubled each time)",
        "background worker (manage.py worker)",
    ),
    Limit(
        "WORKER_DATABASE_RETRY_MAX_S",
        WORKER_DATABASE_RETRY_MAX_S,
        "seconds",
        "the worker's longest wait between attempts to reach the database",
        "background worker (manage.py worker)",
    ),
    Limit(
        "WORKER_TASK_ATTEMPTS",
        WORKER_TASK_ATTEMPTS,
        "attempts",
        "times one task is taken again after the database went away while it ran",
        "background worker (manage.py worker)",
    ),
)
