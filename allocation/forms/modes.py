"""Forms of a plan's mode map: one mode, one transition."""

from __future__ import annotations

from typing import Any

from django import forms

from allocation.core.model import ANY_MODE
from allocation.core.registry import CUE_WORDS
from allocation.core.vocabulary import (
    CUES,
    TRANSITION_CAUSES,
)
from allocation.forms.base import ItemForm, file_number


class ModeForm(ItemForm):
    """One mode of a plan's mode map."""

    id = forms.CharField(max_length=64)
    name = forms.CharField(max_length=200)
    indication = forms.CharField(
        required=False,
        max_length=500,
        help_text="what the person sees in this mode; modes that look the same are flagged",
    )
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Name", "name", ("name",)),
        ("Indication", "indication", ("indication",)),
        ("Notes", "notes", ("notes",)),
    )

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        return {key: item.get(key, "") for key in ("id", "name", "indication", "notes")}

    def item(self) -> dict[str, Any]:
        item = {"id": self.cleaned_data["id"].strip(), "name": self.cleaned_data["name"].strip()}
        self._text("indication", "indication", item)
        self._text("notes", "notes", item)
        return item


class TransitionForm(ItemForm):
    """One transition of a plan's mode map."""

    source = forms.ChoiceField(label="from")
    target = forms.ChoiceField(label="to")
    trigger = forms.CharField(max_length=300, help_text="the event, in the study's words")
    by = forms.ChoiceField(
        label="caused by", choices=[(cause, cause) for cause in TRANSITION_CAUSES]
    )
    cue = forms.ChoiceField(
        choices=[(cue, CUE_WORDS[cue].label) for cue in CUES],
        help_text="how the person learns of the change",
    )
    per_day = forms.FloatField(
        required=False,
        label="rate per day",
        help_text="while in the 'from' mode",
        widget=forms.NumberInput(attrs={"step": "any"}),
    )
    event = forms.ChoiceField(
        required=False,
        label="with the event",
        help_text="each time the event happens (the work it starts follows in the new mode)",
    )
    times = forms.CharField(
        required=False,
        max_length=2000,
        label="at times of day",
        help_text='"HH:MM", separated by commas, like 22:00, 07:00',
    )
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("From", "from", ("source",)),
        ("To", "to", ("target",)),
        ("Trigger", "trigger", ("trigger",)),
        ("Caused by", "by", ("by",)),
        ("Cue", "cue", ("cue",)),
        ("Rate per day", "per_day", ("per_day",)),
        ("With the event", "event", ("event",)),
        ("At times of day", "times", ("times",)),
        ("Notes", "notes", ("notes",)),
    )

    def __init__(
        self,
        *args: Any,
        modes: list[tuple[str, str]],
        events: list[tuple[str, str]] | None = None,
        **kwargs: Any,
    ):
        super().__init__(*args, **kwargs)
        self.fields["event"].choices = [("", "—"), *(events or [])]
        # "from" may also be every mode: a mode's own transition with the same trigger
        # overrides it there.
        self.fields["source"].choices = [(ANY_MODE, "any mode (*)"), *modes]
        self.fields["target"].choices = modes

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        return {
            "source": item["from"],
            "target": item["to"],
            "trigger": item["trigger"],
            "by": item["by"],
            "cue": item["cue"],
            "per_day": item.get("per_day", ""),
            "event": item.get("event", ""),
            "times": ", ".join(item.get("times") or ()),
            "notes": item.get("notes", ""),
        }

    def clean(self) -> dict[str, Any]:
        data = super().clean()
        given = [
            label
            for key, label in (("per_day", "a rate"), ("event", "an event"), ("times", "times"))
            if data.get(key) not in (None, "")
        ]
        if len(given) > 1:
            self.add_error(
                "per_day", f"A change happens in one way: give {' or '.join(given)}, not both."
            )
        return data

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {
            "from": data["source"],
            "to": data["target"],
            "trigger": data["trigger"].strip(),
            "by": data["by"],
            "cue": data["cue"],
        }
        if data["per_day"] is not None:
            item["per_day"] = file_number(data["per_day"])
        if data.get("event"):
            item["event"] = data["event"]
        times = [part.strip() for part in (data.get("times") or "").split(",") if part.strip()]
        if times:
            # The study reader judges each time, with its path.
            item["times"] = times
        self._text("notes", "notes", item)
        return item
