"""The workload rating form: a task, who and when, the six NASA-TLX ratings and, for the
weighted score, the 15 pairwise choices (or their tallies, when only those were noted).

The form only parses; the core (:mod:`allocation.core.tlx`) judges the values, through
``services.rating_record``, with messages naming the subscale or pair.
"""

from __future__ import annotations

from typing import Any

from django import forms

from allocation.core import Study
from allocation.core.limits import PAGE_ROWS
from allocation.core.tlx import PAIRS, SUBSCALE_NAMES, SUBSCALE_QUESTIONS, SUBSCALES
from allocation.forms.base import TextForm

__all__ = ["WEIGHTING_CHOICES", "RatingForm"]

WEIGHTING_CHOICES = [
    ("pairs", "Weighted: the 15 pairwise choices"),
    ("tallies", "Weighted: only the tallies were noted"),
    ("raw", "Raw: no pairwise comparisons"),
]


class RatingForm(TextForm):
    """One participant's ratings of one task."""

    task = forms.ChoiceField()
    # Required fields are checked by the service, so one answer lists every problem.
    session = forms.CharField(
        required=False,
        max_length=200,
        help_text="Which review or usability session, e.g. “Usability round 2, 12 May”.",
    )
    participant = forms.CharField(
        required=False,
        max_length=64,
        label="Participant code",
        help_text="A code such as P07 — never a name. Keep the key to the codes outside Baton.",
    )
    weighting = forms.ChoiceField(
        choices=WEIGHTING_CHOICES, initial="pairs", widget=forms.RadioSelect
    )
    notes = forms.CharField(required=False, max_length=4000, widget=forms.Textarea({"rows": 3}))

    def __init__(self, *args: Any, study: Study, **kwargs: Any):
        super().__init__(*args, **kwargs)
        self.fields["task"].choices = [
            (task.id, f"{task.id} — {task.title}") for task in study.leaves
        ]
        if len(study.leaves) > PAGE_ROWS:
            # A list of more tasks than a page shows is not sent: the task is typed by
            # its id (each task's "rate" link fills it in); the choices still check it.
            self.fields["task"].widget = forms.TextInput({"maxlength": 64})
            self.fields["task"].help_text = "The task's id, e.g. T12."
        for key in SUBSCALES:
            question, low, high = SUBSCALE_QUESTIONS[key]
            self.fields[key] = forms.FloatField(
                required=False,
                label=SUBSCALE_NAMES[key],
                help_text=f"{question} 0 = {low}, 100 = {high}.",
                widget=forms.NumberInput({"min": 0, "max": 100, "step": "any"}),
            )
        for number, pair in enumerate(PAIRS, start=1):
            self.fields[f"pair_{number}"] = forms.ChoiceField(
                required=False,
                label=f"Pair {number}",
                choices=[(key, SUBSCALE_NAMES[key]) for key in pair],
                widget=forms.RadioSelect,
            )
        for key in SUBSCALES:
            self.fields[f"tally_{key}"] = forms.IntegerField(
                required=False,
                label=SUBSCALE_NAMES[key],
                widget=forms.NumberInput({"min": 0, "max": 5, "step": 1}),
            )

    def rating_fields(self) -> list[forms.BoundField]:
        return [self[key] for key in SUBSCALES]

    def pair_fields(self) -> list[forms.BoundField]:
        return [self[f"pair_{number}"] for number in range(1, len(PAIRS) + 1)]

    def tally_fields(self) -> list[forms.BoundField]:
        return [self[f"tally_{key}"] for key in SUBSCALES]

    def arguments(self) -> dict[str, Any]:
        """The cleaned values as ``services.rating_record`` takes them."""
        data = self.cleaned_data
        weighting = data["weighting"]
        return {
            "task_key": data["task"],
            "session": data["session"],
            "participant": data["participant"],
            "notes": data["notes"],
            "ratings": {key: data[key] for key in SUBSCALES if data[key] is not None},
            "choices": (
                [data[f"pair_{n}"] or None for n in range(1, len(PAIRS) + 1)]
                if weighting == "pairs"
                else None
            ),
            "tallies": (
                {
                    key: data[f"tally_{key}"]
                    for key in SUBSCALES
                    if data[f"tally_{key}"] is not None
                }
                if weighting == "tallies"
                else None
            ),
        }
