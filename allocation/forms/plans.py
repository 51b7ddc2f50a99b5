"""Forms of the plan editor: one row (who does a task and how), several rows at once, and
a plan's own fields."""

from __future__ import annotations

import math
from typing import Any

from django import forms

from allocation.core import Study
from allocation.core.limits import (
    ESCALATE_AFTER_MAX_S,
    ESCALATION_PEOPLE_MAX,
    MONITORING_LOOKS_MAX,
)
from allocation.core.registry import ASSIGNMENT_STATUS_WORDS, CUE_WORDS, INITIATOR_WORDS
from allocation.core.scales import EK10_LEVELS, SV10_LEVELS
from allocation.core.vocabulary import (
    STAGE_NAMES,
    STAGES,
)
from allocation.forms.base import TextForm, optional_choices

#: How an accountable person keeps watch (blank: the default for the feedback).
MONITORING_CHOICES = [
    ("", "watch: default"),
    ("each", "checks each"),
    ("periodic", "looks n a day"),
    ("exception", "on flags"),
    ("continuous", "watches a share"),
]

#: How the person learns that the automation failed (blank: no failures stated).
DETECTION_CHOICES = [
    ("", "told by: —"),
    ("alert", "told by an alert"),
    ("display", "seen on the display"),
    ("none", "not told"),
]

WHO_CHOICES = [
    ("person", "person"),
    ("device", "device"),
    ("shared", "shared"),
    ("not_applicable", "not done in this plan"),
    ("unallocated", "not allocated yet"),
]


def level_choices(scale: str) -> list[tuple[str, str]]:
    """Levels with their words, for a select."""
    if scale == "ek10":
        return [(str(n), f"{n} {name}") for n, (name, _roles) in EK10_LEVELS.items()]
    return [(str(n), f"{n} — {text}") for n, text in SV10_LEVELS.items()]


class AssignmentForm(TextForm):
    """One row of the plan editor: who does a leaf task and how."""

    who = forms.ChoiceField(choices=WHO_CHOICES)
    human = forms.ChoiceField(required=False)
    automation = forms.ChoiceField(required=False)
    per_stage = forms.BooleanField(required=False)
    level = forms.ChoiceField(required=False)
    accountable = forms.ChoiceField(required=False)
    feedback = forms.ChoiceField(required=False, choices=optional_choices(CUE_WORDS, "—"))
    initiator = forms.ChoiceField(required=False, choices=optional_choices(INITIATOR_WORDS, "—"))
    status = forms.ChoiceField(
        required=False, choices=optional_choices(ASSIGNMENT_STATUS_WORDS, "—")
    )
    rationale = forms.CharField(required=False, max_length=2000)
    pass_through = forms.BooleanField(required=False)
    monitoring = forms.ChoiceField(required=False, choices=MONITORING_CHOICES)
    monitoring_amount = forms.CharField(required=False, max_length=32)
    fails_per_1000 = forms.CharField(required=False, max_length=32)
    detected_by = forms.ChoiceField(required=False, choices=DETECTION_CHOICES)
    fallback = forms.ChoiceField(required=False)
    false_alerts_per_day = forms.CharField(required=False, max_length=32)
    escalate_to = forms.CharField(required=False, max_length=700)
    escalate_after_s = forms.CharField(required=False, max_length=32)

    def __init__(
        self, *args: Any, study: Study, existing: dict[str, Any] | None = None, **kwargs: Any
    ):
        super().__init__(*args, **kwargs)
        self.study = study
        self.existing = existing or {}
        humans = [("", "—")] + [(a.id, a.name) for a in study.agents if a.is_human]
        machines = [("", "—")] + [(a.id, a.name) for a in study.agents if not a.is_human]
        self.fields["human"].choices = humans
        self.fields["automation"].choices = machines
        self.fields["fallback"].choices = [("", "takes over: default")] + humans[1:]
        self.fields["accountable"].choices = [("", "default (the person doing it)")] + [
            (a.id, a.name) for a in study.agents
        ]
        levels = [("", "—")] + level_choices(study.scale)
        self.fields["level"].choices = levels
        if study.scale == "sv10":
            for stage in STAGES:
                self.fields[f"level_{stage}"] = forms.ChoiceField(
                    required=False, choices=levels, label=STAGE_NAMES[stage]
                )

    @staticmethod
    def initial_for(item: dict[str, Any] | None) -> dict[str, Any]:
        """The form's initial values for a study-file assignment (or none)."""
        if item is None:
            return {"who": "unallocated"}
        if item.get("applies") is False:
            who = "not_applicable"
        elif "human" in item and "automation" in item:
            who = "shared"
        else:
            who = "person" if "human" in item else "device"
        initial: dict[str, Any] = {
            "who": who,
            **{
                key: item.get(key, "")
                for key in (
                    "human",
                    "automation",
                    "accountable",
                    "feedback",
                    "initiator",
                    "status",
                    "rationale",
                )
            },
        }
        if item.get("pass_through"):
            initial["pass_through"] = True
        people = item.get("human")
        if isinstance(people, list) and people:
            initial["human"] = people[0]
            initial["escalate_to"] = ", ".join(people[1:])
            after = item.get("escalate_after_s")
            initial["escalate_after_s"] = "" if after is None else f"{after:g}"
        monitoring = item.get("monitoring")
        if isinstance(monitoring, str):
            initial["monitoring"] = monitoring
        elif isinstance(monitoring, dict):
            initial["monitoring"] = monitoring.get("style", "")
            amount = monitoring.get("per_day", monitoring.get("share"))
            initial["monitoring_amount"] = "" if amount is None else f"{amount:g}"
        reliability = item.get("reliability")
        if isinstance(reliability, dict):
            for key in ("fails_per_1000", "false_alerts_per_day"):
                value = reliability.get(key)
                initial[key] = "" if value is None else f"{value:g}"
            initial["detected_by"] = reliability.get("detected_by", "")
            initial["fallback"] = reliability.get("fallback", "")
        levels = item.get("levels")
        if isinstance(levels, dict):
            initial["per_stage"] = True
            initial.update({f"level_{stage}": str(levels[stage]) for stage in STAGES})
            initial["level"] = str(levels["decision"])
        elif levels is not None:
            initial["level"] = str(levels)
        return initial

    def clean(self) -> dict[str, Any]:
        data = super().clean()
        who = data.get("who")
        if who in ("person", "shared") and not data.get("human"):
            self.add_error("human", "Choose the person who does it.")
        if who in ("device", "shared") and not data.get("automation"):
            self.add_error("automation", "Choose the device that does it.")
        if who != "not_applicable":
            # The box shows only on a row not done; a row just moved to someone still
            # posts it, and a task that is done has no chain to let go on.
            data["pass_through"] = False
        self._clean_monitoring(data)
        self._clean_reliability(data)
        self._clean_escalation(data)
        return data

    def _clean_escalation(self, data: dict[str, Any]) -> None:
        """The people asked after the person, in order (ids separated by commas, each a
        person of the study, at most ESCALATION_PEOPLE_MAX in all), and the seconds each
        has to answer; a row without a person drops them (the fields show on every row)."""
        data["escalation_value"] = None
        if data.get("who") not in ("person", "shared") or not data.get("human"):
            return
        text = (data.get("escalate_to") or "").strip()
        after_text = (data.get("escalate_after_s") or "").strip()
        if not text:
            if after_text:
                self.add_error("escalate_to", "Name who is asked next, or leave the time empty.")
            return
        humans = {agent.id for agent in self.study.agents if agent.is_human}
        people = [part.strip() for part in text.split(",") if part.strip()]
        unknown = [person for person in people if person not in humans]
        if unknown:
            self.add_error(
                "escalate_to", f"{', '.join(unknown)}: not a person of this study (give ids)."
            )
            return
        asked = [data["human"], *people]
        if len(set(asked)) < len(asked):
            self.add_error("escalate_to", "Name each person once (the first one included).")
            return
        if len(asked) > ESCALATION_PEOPLE_MAX:
            self.add_error(
                "escalate_to", f"At most {ESCALATION_PEOPLE_MAX} people in all are asked in turn."
            )
            return
        try:
            after = float(after_text)
        except ValueError:
            self.add_error("escalate_after_s", "Give the seconds each has to answer, like 300.")
            return
        if not (math.isfinite(after) and 0 < after <= ESCALATE_AFTER_MAX_S):
            self.add_error(
                "escalate_after_s",
                f"Give the seconds each has to answer (more than 0, at most "
                f"{ESCALATE_AFTER_MAX_S:,}).",
            )
            return
        data["escalation_value"] = (asked, int(after) if after.is_integer() else after)

    def _clean_reliability(self, data: dict[str, Any]) -> None:
        """Failures in 1,000 occurrences (0 to 1,000), how the person is told, who takes
        over, false alerts a day (0 to MONITORING_LOOKS_MAX); only a device's work can
        fail, so a row without a device drops them (the fields show on every row)."""
        data["reliability_value"] = None
        if data.get("who") not in ("device", "shared"):
            return
        numbers: dict[str, float] = {}
        for key, top, words in (
            ("fails_per_1000", 1000, "failures in 1,000 occurrences, like 5"),
            ("false_alerts_per_day", MONITORING_LOOKS_MAX, "false alerts a day, like 0.5"),
        ):
            text = (data.get(key) or "").strip()
            if not text:
                continue
            try:
                number = float(text)
            except ValueError:
                self.add_error(key, f"Give {words}.")
                continue
            if not (math.isfinite(number) and 0 <= number <= top):
                self.add_error(key, f"Give {words} (from 0 to {top:g}).")
                continue
            numbers[key] = int(number) if number.is_integer() else number
        detected, fallback = data.get("detected_by") or "", data.get("fallback") or ""
        if "fails_per_1000" not in numbers:
            if (detected or fallback or numbers) and "fails_per_1000" not in self.errors:
                self.add_error(
                    "fails_per_1000",
                    "Give the failures in 1,000 occurrences (0 for none) first.",
                )
            return
        if numbers["fails_per_1000"] > 0 and not detected:
            self.add_error(
                "detected_by", "Say how the person learns of a failure: alert, display or none."
            )
            return
        value: dict[str, Any] = {"fails_per_1000": numbers["fails_per_1000"]}
        if detected:
            value["detected_by"] = detected
        if fallback:
            value["fallback"] = fallback
        if "false_alerts_per_day" in numbers:
            value["false_alerts_per_day"] = numbers["false_alerts_per_day"]
        data["reliability_value"] = value

    def _clean_monitoring(self, data: dict[str, Any]) -> None:
        """The style with its amount: looks a day for periodic (more than 0, at most
        MONITORING_LOOKS_MAX), a share of attention for continuous (more than 0, at most
        1); the other styles take none."""
        style, text = data.get("monitoring") or "", (data.get("monitoring_amount") or "").strip()
        data["monitoring_value"] = None
        if not style:
            if text:
                self.add_error("monitoring_amount", "Choose a style of monitoring first.")
            return
        if style in ("each", "exception"):
            if text:
                self.add_error("monitoring_amount", f"The style {style} takes no amount.")
            data["monitoring_value"] = style
            return
        key, top, words = (
            ("per_day", MONITORING_LOOKS_MAX, "looks a day, like 2")
            if style == "periodic"
            else ("share", 1, "a share of attention from 0 to 1, like 0.25")
        )
        try:
            amount = float(text)
        except ValueError:
            self.add_error("monitoring_amount", f"Give {words}.")
            return
        if not (math.isfinite(amount) and 0 < amount <= top):
            self.add_error("monitoring_amount", f"Give {words} (more than 0, at most {top:g}).")
            return
        number = int(amount) if amount.is_integer() else amount
        data["monitoring_value"] = {"style": style, key: number}

    def item(self) -> dict[str, Any] | None:
        """The study-file assignment the form describes (``None``: not allocated).

        Keys the editor does not show (a duration override) are kept from before.
        """
        data = self.cleaned_data
        who = data["who"]
        if who == "unallocated":
            return None
        item: dict[str, Any] = {}
        if who == "not_applicable":
            item["applies"] = False
            if data.get("pass_through"):
                item["pass_through"] = True
        else:
            if who in ("person", "shared") and data["human"]:
                item["human"] = data["human"]
                if data.get("escalation_value") is not None:
                    item["human"], item["escalate_after_s"] = data["escalation_value"]
            if who in ("device", "shared") and data["automation"]:
                item["automation"] = data["automation"]
            levels = self._levels() if who == "shared" else None
            if levels is not None:
                item["levels"] = levels
            if "duration_s" in self.existing:
                item["duration_s"] = self.existing["duration_s"]
            for key in ("accountable", "feedback", "initiator"):
                if data[key]:
                    item[key] = data[key]
            if data.get("monitoring_value") is not None:
                item["monitoring"] = data["monitoring_value"]
            if data.get("reliability_value") is not None:
                item["reliability"] = data["reliability_value"]
        for key in ("status", "rationale"):
            if data[key].strip():
                item[key] = data[key].strip()
        return item

    def _levels(self) -> Any:
        data = self.cleaned_data
        if self.study.scale == "sv10" and data.get("per_stage"):
            stages = {stage: data.get(f"level_{stage}") or data["level"] for stage in STAGES}
            if all(stages.values()):
                return {stage: int(value) for stage, value in stages.items()}
        # A missing level stays missing: the core then says the task needs levels.
        return int(data["level"]) if data["level"] else None


class BulkForm(TextForm):
    """Apply a level or a status to the selected rows of a plan."""

    tasks = forms.MultipleChoiceField()
    level = forms.ChoiceField(required=False)
    status = forms.ChoiceField(
        required=False, choices=optional_choices(ASSIGNMENT_STATUS_WORDS, "—")
    )

    def __init__(self, *args: Any, study: Study, **kwargs: Any):
        super().__init__(*args, **kwargs)
        self.fields["tasks"].choices = [(task.id, task.id) for task in study.leaves]
        self.fields["level"].choices = [("", "—")] + level_choices(study.scale)

    def changes(self) -> dict[str, Any]:
        data = self.cleaned_data
        changes: dict[str, Any] = {}
        if data["level"]:
            changes["levels"] = int(data["level"])
        if data["status"]:
            changes["status"] = data["status"]
        return changes

    def clean(self) -> dict[str, Any]:
        data = super().clean()
        if not (data.get("level") or data.get("status")):
            raise forms.ValidationError("Choose a level or a status to apply.")
        return data


class PlanForm(TextForm):
    """A plan's id and name (for a new plan, a copy or a rename)."""

    id = forms.CharField(max_length=64, label="Id")
    name = forms.CharField(max_length=200)
    description = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    def item(self) -> dict[str, Any]:
        item = {"id": self.cleaned_data["id"].strip(), "name": self.cleaned_data["name"].strip()}
        if self.cleaned_data["description"].strip():
            item["description"] = self.cleaned_data["description"].strip()
        return item
