"""What every item form shares: parsing numbers, ranges and lists as the study file
writes them; the core then checks the item with an import's messages."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from django import forms
from django.core import validators

from allocation.core.limits import NOTE_LENGTH
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


def lone_surrogate(text: str) -> str | None:
    """The first lone surrogate in ``text`` as ``U+D800``, or None (it has no UTF-8)."""
    for char in text:
        if "\ud800" <= char <= "\udfff":
            return f"U+{ord(char):04X}"
    return None


class TextForm(forms.Form):
    """A form whose every text field is bounded and holds only text.

    A text field without its own ``max_length`` gets :data:`NOTE_LENGTH`; a value holding
    a lone surrogate (no UTF-8 for it: it could be stored but never exported nor backed
    up) is refused on its field.
    """

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        for field in self.fields.values():
            if isinstance(field, forms.CharField) and field.max_length is None:
                field.max_length = NOTE_LENGTH
                field.validators.append(validators.MaxLengthValidator(NOTE_LENGTH))
                field.widget.attrs.setdefault("maxlength", str(NOTE_LENGTH))

    def clean(self) -> dict[str, Any]:
        cleaned = super().clean()
        for name, value in list((cleaned or {}).items()):
            texts = value if isinstance(value, (list, tuple)) else [value]
            for text in texts:
                code = lone_surrogate(text) if isinstance(text, str) else None
                if code:
                    self.add_error(
                        name if name in self.fields else None,
                        f"contains a lone surrogate ({code}), which is not text",
                    )
                    break
        return cleaned


class ItemForm(TextForm):
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
