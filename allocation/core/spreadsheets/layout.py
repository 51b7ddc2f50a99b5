"""The spreadsheet layout Baton writes and reads back: the sheets of a plan's workbook
and the columns of the sheets the import reads (the allocation table, tasks, links).

One module, so that the exports (``allocation.exports``) and the spreadsheet import
(``allocation.core.spreadsheets.reading``) cannot drift apart.
"""

from __future__ import annotations

__all__ = ["ALLOCATION_COLUMNS", "LINK_COLUMNS", "PASS_THROUGH_WORDS", "SHEETS", "TASK_COLUMNS"]

#: The sheets of a plan's workbook, in order.
SHEETS = (
    "about",
    "allocation",
    "tasks",
    "links",
    "handovers",
    "findings",
    "workload",
    "assumptions",
    "methods",
    "cautions",
)

#: The allocation table: one row per leaf task (also the CSV export).
ALLOCATION_COLUMNS = (
    "task",
    "goal",
    "title",
    "category",
    "human",
    "automation",
    "levels",
    "level_words",
    "degree_acquisition",
    "degree_analysis",
    "degree_decision",
    "degree_action",
    "accountable",
    "feedback",
    "initiator",
    "monitoring",
    "reliability",
    "escalate_after_s",
    "rationale",
    "status",
    "applies",
    "occurrences_per_day",
    "person_s_per_day",
    "awareness",
    "handovers",
    "findings",
)

#: The tasks sheet; JSON cells hold the study file's own form of the value.
TASK_COLUMNS = (
    "id",
    "parent",
    "title",
    "occurs",
    "duration_s",
    "window_s",
    "severity",
    "demands",
    "split",
    "needs",
    "notes",
)

#: The links sheet.
LINK_COLUMNS = ("from", "to", "kind", "lag_s", "probability", "notes")

#: The allocation table's applies cell of a task not done whose chain goes on.
PASS_THROUGH_WORDS = "no, chain goes on"
