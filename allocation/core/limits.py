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
    "CHAIN_ENTRIES_MAX",
    "INTEGER_DIGITS",
    "LABEL_LENGTH",
    "LIMITS",
    "Limit",
    "MAX_PER_DAY",
    "MONITORING_LOOKS_MAX",
    "MODE_TIMES_MAX",
    "MODE_TIME_WORK_MAX",
    "ESCALATION_PEOPLE_MAX",
    "ESCALATE_AFTER_MAX_S",
    "MODE_STATES_MAX",
    "MODE_STEPS_MAX",
    "NOTE_LENGTH",
    "PAGE_PROBLEMS",
    "PAGE_ROWS",
    "PAGE_ROW_CHOICES",
    "PENDING_IMPORTS_PER_USER",
    "PENDING_IMPORT_BYTES_PER_USER",
    "PENDING_IMPORT_LIFETIME_S",
    "PHRASE_LENGTH",
    "REVIEW_TEXT_LENGTH",
    "SIMULATION_CORE_MAX_DAYS",
    "SIMULATION_MAX_BIN_S",
    "SIMULATION_MAX_BYTES",
    "SIMULATION_MAX_DAYS",
    "SIMULATION_MIN_BIN_S",
    "SIMULATION_STALLED_S",
    "SPREADSHEET_MAX_BYTES",
    "SPREADSHEET_MAX_COLUMNS",
    "SPREADSHEET_MAX_ROWS",
    "SPREADSHEET_MAX_UNPACKED_BYTES",
    "STUDY_FILE_MAX_BYTES",
    "STUDY_MAX_AGENTS",
    "STUDY_MAX_EVENTS",
    "STUDY_MAX_ITEMS",
    "STUDY_MAX_LINKS",
    "STUDY_MAX_PLANS",
    "STUDY_MAX_PLAN_TASKS",
    "STUDY_MAX_TASKS",
    "WORD_LENGTH",
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
#: The most periodic looks, or false alerts, a day at one task's work (once a minute):
#: each is drawn in the day simulation, so the bound keeps a run's memory with its
#: estimate.
MONITORING_LOOKS_MAX = 1440
#: The most times of day one mode map changes mode at (its transitions' ``times`` and the
#: fixed times of the events that move it): each cuts the day for the time-in-mode
#: computation, which solves one matrix exponential per stretch.
MODE_TIMES_MAX = 1440
#: The most work the time in each mode may take: the stretches of the day (its times of
#: day and the edges of the events' parts of the day, plus one) times the cube of the
#: modes (one matrix exponential of the modes, and one of twice as many, per stretch).
#: Measured on 2 cores: 50 modes x 1,441 stretches (1.8e8) in 7.5 s and 66 MiB; 500
#: modes x 1 stretch (1.25e8) in 10 s and 48 MiB.
MODE_TIME_WORK_MAX = 200_000_000
#: The most people one assignment asks in turn (its ``human`` as a list): each is a
#: handover and a variant of the task in the simulation. A household or a care team
#: rarely has more than a handful to call on.
ESCALATION_PEOPLE_MAX = 10
#: The longest one person asked may take before the next is asked (seconds): a day.
ESCALATE_AFTER_MAX_S = 86_400

# --- Text ----------------------------------------------------------------------------

#: The longest names and titles (of the study, agents, events, plans, modes): what a
#: stored study keeps (the database columns).
LABEL_LENGTH = 200
#: The longest task titles and triggers.
PHRASE_LENGTH = 300
#: The longest comment, decision or rationale of a review (a page of text).
REVIEW_TEXT_LENGTH = 10_000
#: The longest free text of a study: a description, notes, a rationale, a mode's
#: indication, a risk policy's note (a page of text, like a review's).
NOTE_LENGTH = 10_000
#: The longest capability (of an agent, or one a task needs).
WORD_LENGTH = 100

# --- Study size and analyses ---------------------------------------------------------

#: The most tasks (goals and leaves) in one study, as many as a spreadsheet's rows. Every
#: page of a study reads the whole study and analyses at least one plan: at 5,000 tasks,
#: 15,000 links and four plans, reading it from the database and analysing one plan takes
#: about 7 s on a cold server process and every page after that under a second; at
#: 10,000 tasks twice as long (measured with ``manage.py bench`` figures and page timings
#: in the README's Operations section).
STUDY_MAX_TASKS = 5_000
#: The most links in one study (three per task, as in the bench's studies).
STUDY_MAX_LINKS = 15_000
#: The most plan-task pairs: plans times tasks. Each plan's analysis, plan editor and
#: review cover every task, and the study page and the comparison analyse every plan: four
#: plans of 5,000 tasks (the study page in about 10 s on a cold process, then 0.1 s), or
#: a hundred plans of 200 tasks.
STUDY_MAX_PLAN_TASKS = 20_000
#: The most agents, events and plans in one study.
STUDY_MAX_AGENTS = 500
STUDY_MAX_EVENTS = 5_000
STUDY_MAX_PLANS = 100

#: The most task-in-chain entries a study's chains may hold: the sum over its triggers of
#: the tasks each can reach by ``precedes`` links. Chain analysis times every task of
#: every chain, so its cost grows with this sum, which can grow with the square of the
#: study's size (a long chain whose tasks each have their own schedule).
CHAIN_ENTRIES_MAX = 100_000

# --- Mode maps -----------------------------------------------------------------------

#: The most states the mode-map check may have to search: modes x beliefs, each pair of
#: the mode the device is in and what the person believes (a set of modes they cannot
#: tell apart; the beliefs are counted from the map before the search, and the count
#: stops past this limit); at least modes x modes, so at most 500 modes. The pairs of
#: modes are also what the check compares for shared indications.
MODE_STATES_MAX = 250_000
#: The most steps the mode-map check may have to take: for every belief, every
#: transition with each way it can go (noticed or missed). Each step can yield a
#: finding with its witness, so time and memory grow with this count (measured at the
#: limit on a map of 23 look-alike modes and 1,357 beliefs: the check about 4 s, its
#: plan's whole analysis 6.5 s, 210 MiB at peak).
MODE_STEPS_MAX = 200_000

# --- Simulation ----------------------------------------------------------------------

#: The most days one request may ask for.
SIMULATION_MAX_DAYS = 20_000
#: The longest run the simulation core accepts (the database allows the same).
SIMULATION_CORE_MAX_DAYS = 100_000
#: The finest workload bin (``study.bin_s``, seconds). A tool assumption: the time line
#: reports occupancy per bin, and bins finer than a minute add nothing to it (a task's
#: duration and a person's response are themselves given to within seconds to minutes)
#: while the simulation's arrays grow as the day is cut finer (days x bins per day x
#: people), so a one-second bin costs sixty times a one-minute bin.
SIMULATION_MIN_BIN_S = 60
#: The widest workload bin (seconds): one day, the span the time line is drawn over.
SIMULATION_MAX_BIN_S = 86_400
#: The most memory one simulation may be estimated to need (bytes): the working set of
#: one chunk plus the combining of the run's daily figures
#: (:func:`allocation.core.simulation.simulation_memory_estimate`). A tool assumption:
#: a gibibyte is what one worker of a team server can give one run.
SIMULATION_MAX_BYTES = 1024**3
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

#: How long an uploaded spreadsheet waits for its preview to be applied (seconds): a
#: working day; after it the file is deleted and must be uploaded again.
PENDING_IMPORT_LIFETIME_S = 24 * 3600
#: The most spreadsheets one user may have waiting at once (one per study); a new upload
#: past it drops that user's oldest.
PENDING_IMPORTS_PER_USER = 5
#: The most bytes of spreadsheets one user may have waiting at once (four of the largest
#: files read); a new upload past it drops that user's oldest.
PENDING_IMPORT_BYTES_PER_USER = 4 * SPREADSHEET_MAX_BYTES

#: The most rows one page lists (tasks, assignments, links, events, agents, findings,
#: handovers, review items, differences): an answer's size follows the page, not the
#: study; the other rows are a page link away.
PAGE_ROWS = 100
#: The most choices a row of the plan editor offers in a list (its person, device and
#: accountable agent): past this many agents, each row's agent is typed by its id and the
#: agents are listed once a page as suggestions, so that a row's size stays bounded.
PAGE_ROW_CHOICES = 20
#: The most problems the study's checks list on a page (the rest are counted; the
#: command ``python -m allocation.core.validate`` lists every one).
PAGE_PROBLEMS = 100

#: The most items of each list of a study file, by its key.
STUDY_MAX_ITEMS = {
    "agents": STUDY_MAX_AGENTS,
    "events": STUDY_MAX_EVENTS,
    "tasks": STUDY_MAX_TASKS,
    "links": STUDY_MAX_LINKS,
    "plans": STUDY_MAX_PLANS,
}

#: Every limit, for the README's Operations section and ``manage.py limits``.
LIMITS: tuple[Limit, ...] = (
    Limit(
        "CHAIN_ENTRIES_MAX",
        CHAIN_ENTRIES_MAX,
        "task-in-chain entries",
        "the sum over a study's triggers of the tasks each chain reaches",
        "study checks (every read, import and edit), before any analysis",
    ),
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
        "study reader, while parsing; spreadsheet reader, per cell",
    ),
    Limit(
        "MAX_PER_DAY",
        MAX_PER_DAY,
        "per day",
        "any rate (events, schedules)",
        "study reader, forms",
    ),
    Limit(
        "MONITORING_LOOKS_MAX",
        MONITORING_LOOKS_MAX,
        "per day",
        "periodic looks at, or false alerts of, one task's work (an assignment's monitoring "
        "per_day, its reliability's false_alerts_per_day)",
        "study reader, forms",
    ),
    Limit(
        "MODE_TIMES_MAX",
        MODE_TIMES_MAX,
        "times",
        "times of day one mode map changes mode at (transitions' times, events' times)",
        "study reader, checks, forms",
    ),
    Limit(
        "MODE_TIME_WORK_MAX",
        MODE_TIME_WORK_MAX,
        "stretches x modes³",
        "the work of the time in each mode (the day's stretches times the cube of the modes)",
        "checks",
    ),
    Limit(
        "ESCALATION_PEOPLE_MAX",
        ESCALATION_PEOPLE_MAX,
        "people",
        "people one assignment asks in turn (its human as a list)",
        "study reader, forms",
    ),
    Limit(
        "ESCALATE_AFTER_MAX_S",
        ESCALATE_AFTER_MAX_S,
        "s",
        "how long one person asked may take before the next is asked (escalate_after_s)",
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
        "NOTE_LENGTH",
        NOTE_LENGTH,
        "characters",
        "descriptions, notes, rationales, mode indications, a risk policy's note",
        "study reader, forms, spreadsheet reader",
    ),
    Limit(
        "WORD_LENGTH",
        WORD_LENGTH,
        "characters",
        "a capability (of an agent, or needed by a task)",
        "study reader, forms, spreadsheet reader",
    ),
    Limit(
        "MODE_STATES_MAX",
        MODE_STATES_MAX,
        "states (modes x beliefs)",
        "the states a plan's mode-map check may search",
        "study checks (every read, import and edit), and the mode-map check itself",
    ),
    Limit(
        "MODE_STEPS_MAX",
        MODE_STEPS_MAX,
        "steps (beliefs x transitions' ways)",
        "the steps a plan's mode-map check may take",
        "study checks (every read, import and edit), and the mode-map check itself",
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
        "PAGE_ROWS",
        PAGE_ROWS,
        "rows",
        "one page of a list (plan editor, inventory, overview, dashboard, review, "
        "compare, graph, differences)",
        "every paged view, from the page asked for (any page number is shown as a page)",
    ),
    Limit(
        "PAGE_ROW_CHOICES",
        PAGE_ROW_CHOICES,
        "agents",
        "the agents a plan-editor row offers in its lists (more are typed by id)",
        "plan editor",
    ),
    Limit(
        "PAGE_PROBLEMS",
        PAGE_PROBLEMS,
        "problems",
        "the study's problems listed on one page",
        "every study page",
    ),
    Limit(
        "STUDY_MAX_TASKS",
        STUDY_MAX_TASKS,
        "tasks",
        "tasks of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "STUDY_MAX_PLAN_TASKS",
        STUDY_MAX_PLAN_TASKS,
        "plan-task pairs",
        "plans times tasks of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "STUDY_MAX_LINKS",
        STUDY_MAX_LINKS,
        "links",
        "links of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "STUDY_MAX_AGENTS",
        STUDY_MAX_AGENTS,
        "agents",
        "agents of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "STUDY_MAX_EVENTS",
        STUDY_MAX_EVENTS,
        "events",
        "events of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "STUDY_MAX_PLANS",
        STUDY_MAX_PLANS,
        "plans",
        "plans of one study",
        "study reader (every read, import and edit), before the items are read",
    ),
    Limit(
        "SIMULATION_MIN_BIN_S",
        SIMULATION_MIN_BIN_S,
        "seconds",
        "the finest workload bin (study.bin_s)",
        "study reader (every read, import and edit of the study header)",
    ),
    Limit(
        "SIMULATION_MAX_BIN_S",
        SIMULATION_MAX_BIN_S,
        "seconds",
        "the widest workload bin (study.bin_s)",
        "study reader (every read, import and edit of the study header)",
    ),
    Limit(
        "SIMULATION_MAX_BYTES",
        SIMULATION_MAX_BYTES,
        "bytes",
        "the estimated memory of one simulation (a chunk's working set and the combining)",
        "simulation request, before a run is stored; simulation core, before drawing",
    ),
    Limit(
        "PENDING_IMPORT_LIFETIME_S",
        PENDING_IMPORT_LIFETIME_S,
        "seconds",
        "a spreadsheet waiting to be applied",
        "import page, on each upload, manage.py housekeeping",
    ),
    Limit(
        "PENDING_IMPORTS_PER_USER",
        PENDING_IMPORTS_PER_USER,
        "files",
        "spreadsheets one user has waiting (past it the oldest is dropped)",
        "spreadsheet upload, before the file is kept",
    ),
    Limit(
        "PENDING_IMPORT_BYTES_PER_USER",
        PENDING_IMPORT_BYTES_PER_USER,
        "bytes",
        "spreadsheets one user has waiting (past it the oldest are dropped)",
        "spreadsheet upload, before the file is kept",
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
