"""What every item form shares: parsing numbers, ranges and lists as the study file
writes them; the core then checks the item with an import's messages."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from django import forms

from allocation.core.registry import Term


def optional_choices(words: Mapping[str, Term], blank: str) -> list[tuple[str, str]]:
    """A select of a fixed list in the registry's words, with ``blank`` for "not given"."""
    return [("", blank)] + [(value, term.label) for value, term in words.items()]


def file_number(value: Any) -> float | int | None:
    """A form number as the study file writes it: whole numbers without a decimal part."""
    if value is None:
        return None
    return int(value) if float(value).is_integer() else float(value)


def comma_words(text: str) -> list[str]:
    return [part.strip() for part in text.replace("\n", ",").split(",") if part.strip()]


class ItemForm(forms.Form):
    """A form that builds one study-file item; ``groups`` lays its fields out by file key."""

    #: (label, file key, field names) — the file key is where the core's messages land.
    groups: tuple[tuple[str, str, tuple[str, ...]], ...] = ()

    def field_groups(self) -> list[dict[str, Any]]:
        return [
            {"label": label, "key": key, "fields": [self[name] for name in names]}
            for label, key, names in self.groups
        ]

    def _range(self, prefix: str, key: str, item: dict[str, Any]) -> None:
        """Three number fields ``prefix_low/typical/high`` as a range, or one number."""
        low, typical, high = (
            self.cleaned_data.get(f"{prefix}_{part}") for part in ("low", "typical", "high")
        )
        if low is None and typical is None and high is None:
            return
        if low is None and high is None:
            item[key] = file_number(typical)
        elif None in (low, typical, high):
            self.add_error(f"{prefix}_typical", "Give min, typical and max, or only typical.")
        else:
            item[key] = [file_number(low), file_number(typical), file_number(high)]

    def _text(self, name: str, key: str, item: dict[str, Any]) -> None:
        value = (self.cleaned_data.get(name) or "").strip()
        if value:
            item[key] = value


def range_fields(label: str) -> tuple[forms.Field, forms.Field, forms.Field]:
    """Three number fields for a range's min, typical and max (named ``*_low`` etc.)."""
    return tuple(
        forms.FloatField(
            required=False,
            label=f"{label} {part}",
            widget=forms.NumberInput(attrs={"step": "any"}),
        )
        for part in ("low", "typical", "high")
    )
