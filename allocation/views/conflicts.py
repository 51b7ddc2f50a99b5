"""What a screen shows when a save meets a newer version (optimistic versioning).

The services refuse a stale save with :class:`~allocation.services.conflicts.EditConflict`
carrying the row's current values; :func:`conflict_context` puts them beside the values
submitted, field by field, for ``templates/htmx/edit_conflict.html``. The form is then
shown again with the submitted values and the stored version: saving it again ("Use
mine") overwrites theirs knowingly; "Keep theirs" reloads the form from the database.
"""

from __future__ import annotations

from typing import Any

from allocation.services.conflicts import EditConflict, conflict_fields


def conflict_context(error: EditConflict, mine: dict[str, Any] | None) -> dict[str, Any]:
    """The conflict as the template shows it: message, who and when, the fields."""
    return {
        "message": error.message,
        "who": error.who,
        "at": error.at,
        "deleted": error.current is None,
        "version": error.version,
        "fields": conflict_fields(error.current, mine),
    }


def posted_version(data: Any, name: str = "version") -> int | None:
    """The version a form was rendered from, or ``None`` when it sent none (a script, an
    older page): then the save is not checked, as before versioning."""
    text = str(data.get(name, "")).strip()
    return int(text) if text.isdigit() else None
