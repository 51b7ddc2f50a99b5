"""The History page's filters, read from the query string."""

from __future__ import annotations

from typing import Any

from django import forms

from allocation import models as m
from allocation.forms.base import TextForm
from allocation.selectors import history as trail


class HistoryForm(TextForm):
    """The filters, as typed in the query string; each one is optional."""

    who = forms.CharField(required=False, max_length=150)
    action = forms.CharField(required=False, max_length=64)
    source = forms.ChoiceField(
        required=False, choices=[("", "any source"), *m.AuditSource.choices]
    )
    since = forms.DateField(
        required=False,
        label="From",
        error_messages={"invalid": "is not a date; write it as YYYY-MM-DD"},
    )
    until = forms.DateField(
        required=False,
        label="To",
        error_messages={"invalid": "is not a date; write it as YYYY-MM-DD"},
    )
    text = forms.CharField(required=False, max_length=300, label="Target contains")
    entry = forms.IntegerField(required=False, min_value=1, widget=forms.HiddenInput)

    def clean(self) -> dict[str, Any]:
        data = super().clean()
        since, until = data.get("since"), data.get("until")
        if since and until and since > until:
            self.add_error("until", "is before the From date")
        return data

    def chosen(self) -> trail.HistoryFilter:
        """The filter the valid fields describe (a field in error does not filter)."""
        self.is_valid()
        valid = {name: v for name, v in self.cleaned_data.items() if name not in self.errors}
        return trail.HistoryFilter(
            who=(valid.get("who") or "").strip(),
            action=(valid.get("action") or "").strip(),
            source=valid.get("source") or "",
            since=valid.get("since"),
            until=valid.get("until"),
            text=(valid.get("text") or "").strip(),
        )

    def problems(self) -> list[str]:
        """Each error as "field: message", for the page and for the exports."""
        return [
            f"{self.fields[name].label or name.capitalize()}: {' '.join(messages)}"
            for name, messages in self.errors.items()
        ]
