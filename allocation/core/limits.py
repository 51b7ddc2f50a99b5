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
    "NOTE_LENGTH",
    "PAGE_PROBLEMS",
    "PAGE_ROW_CHOICES",
    "PAGE_ROWS",
    "PHRASE_LENGTH",
    "SIMULATION_CORE_MAX_DAYS",
    "SIMULATION_MAX_DAYS",
    "SPREADSHEET_MAX_BYTES",
    "SPREADSHEET_MAX_COLUMNS",
    "SPREADSHEET_MAX_ROWS",
    "SPREADSHEET_MAX_UNPACKED_BYTES",
    "STUDY_FILE_MAX_BYTES",
    "REVIEW_TEXT_LENGTH",
    "WORD_LENGTH",
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

# --- Simulation ----------------------------------------------------------------------

#: The most days one request may ask for.
SIMULATION_MAX_DAYS = 20_000
#: The longest run the simulation core accepts (the database allows the same).
SIMULATION_CORE_MAX_DAYS = 100_000

# --- Pages and pending work ----------------------------------------------------------

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
)
