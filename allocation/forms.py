"""Forms: turn what a person typed into study-file items; the core checks the items.

A form only parses (numbers, choices); whether the item makes sense in the study is the
core's judgement, with the same messages as an import (see ``services.editing``).
"""

from __future__ import annotations

from typing import Any

from django import forms

from allocation.core import Study
from allocation.core.scales import EK10_LEVELS, SV10_LEVELS
from allocation.core.vocabulary import ASSIGNMENT_STATUSES, CUES, INITIATORS, STAGE_NAMES, STAGES

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


def _optional(choices: tuple[str, ...], blank: str) -> list[tuple[str, str]]:
    return [("", blank)] + [(value, value.replace("_", " ")) for value in choices]


class AssignmentForm(forms.Form):
    """One row of the plan editor: who does a leaf task and how."""

    who = forms.ChoiceField(choices=WHO_CHOICES)
    human = forms.ChoiceField(required=False)
    automation = forms.ChoiceField(required=False)
    per_stage = forms.BooleanField(required=False)
    level = forms.ChoiceField(required=False)
    accountable = forms.ChoiceField(required=False)
    feedback = forms.ChoiceField(required=False, choices=_optional(CUES, "—"))
    initiator = forms.ChoiceField(required=False, choices=_optional(INITIATORS, "—"))
    status = forms.ChoiceField(required=False, choices=_optional(ASSIGNMENT_STATUSES, "—"))
    rationale = forms.CharField(required=False, max_length=2000)

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
        return data

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
        else:
            if who in ("person", "shared") and data["human"]:
                item["human"] = data["human"]
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


class BulkForm(forms.Form):
    """Apply a level or a status to the selected rows of a plan."""

    tasks = forms.MultipleChoiceField()
    level = forms.ChoiceField(required=False)
    status = forms.ChoiceField(required=False, choices=_optional(ASSIGNMENT_STATUSES, "—"))

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


class PlanForm(forms.Form):
    """A plan's id and name (for a new plan, a copy or a rename)."""

    id = forms.CharField(max_length=64, label="Id")
    name = forms.CharField(max_length=200)
    description = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    def item(self) -> dict[str, Any]:
        item = {"id": self.cleaned_data["id"].strip(), "name": self.cleaned_data["name"].strip()}
        if self.cleaned_data["description"].strip():
            item["description"] = self.cleaned_data["description"].strip()
        return item


# -- the inventory: agents, events, tasks, links ----------------------------------------

from allocation.core.vocabulary import (  # noqa: E402 - grouped with the forms that use them
    AGENT_KINDS,
    CHANNELS,
    EVENT_WHEN,
    LINK_KINDS,
    SCALES,
    SEVERITIES,
    TRANSITION_CAUSES,
    VACP_ANCHORS,
)


def _number(value: Any) -> float | int | None:
    """A form number as the study file writes it: whole numbers without a decimal part."""
    if value is None:
        return None
    return int(value) if float(value).is_integer() else float(value)


def _words(text: str) -> list[str]:
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
            item[key] = _number(typical)
        elif None in (low, typical, high):
            self.add_error(f"{prefix}_typical", "Give min, typical and max, or only typical.")
        else:
            item[key] = [_number(low), _number(typical), _number(high)]

    def _text(self, name: str, key: str, item: dict[str, Any]) -> None:
        value = (self.cleaned_data.get(name) or "").strip()
        if value:
            item[key] = value


def _range_fields(label: str) -> tuple[forms.Field, forms.Field, forms.Field]:
    """Three number fields for a range's min, typical and max (named ``*_low`` etc.)."""
    return tuple(
        forms.FloatField(
            required=False,
            label=f"{label} {part}",
            widget=forms.NumberInput(attrs={"step": "any"}),
        )
        for part in ("low", "typical", "high")
    )


def _demand_field(channel: str) -> forms.ChoiceField:
    return forms.ChoiceField(required=False, choices=_anchor_choices(channel), label=channel)


class StudyForm(forms.Form):
    """A new study: its id, title and scale of levels of automation."""

    id = forms.CharField(max_length=64, label="Id")
    title = forms.CharField(max_length=200)
    scale = forms.ChoiceField(choices=[(key, f"{key}: {text}") for key, text in SCALES.items()])


class AgentForm(ItemForm):
    id = forms.CharField(max_length=64, label="Id")
    name = forms.CharField(max_length=200)
    kind = forms.ChoiceField(choices=[(kind, kind) for kind in AGENT_KINDS])
    capabilities = forms.CharField(required=False, help_text="comma-separated")
    asleep_from = forms.CharField(
        required=False, label="asleep from", widget=forms.TimeInput(attrs={"type": "time"})
    )
    asleep_to = forms.CharField(
        required=False, label="asleep to", widget=forms.TimeInput(attrs={"type": "time"})
    )
    awake_low, awake_typical, awake_high = _range_fields("response awake (s)")
    sleeping_low, sleeping_typical, sleeping_high = _range_fields("response asleep (s)")
    any_low, any_typical, any_high = _range_fields("response (s)")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Name", "name", ("name",)),
        ("Kind", "kind", ("kind",)),
        ("Capabilities", "capabilities", ("capabilities",)),
        ("Asleep (people)", "asleep", ("asleep_from", "asleep_to")),
        (
            "Response when awake, s (min, typical, max)",
            "response_s",
            ("awake_low", "awake_typical", "awake_high"),
        ),
        (
            "Response when asleep, s",
            "response_s",
            ("sleeping_low", "sleeping_typical", "sleeping_high"),
        ),
        (
            "Response at any time, s (automation)",
            "response_s",
            ("any_low", "any_typical", "any_high"),
        ),
        ("Notes", "notes", ("notes",)),
    )

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        initial = {key: item.get(key, "") for key in ("id", "name", "kind", "notes")}
        initial["capabilities"] = ", ".join(item.get("capabilities") or [])
        if item.get("asleep"):
            initial["asleep_from"], initial["asleep_to"] = item["asleep"]
        for key, prefix in (("awake", "awake"), ("asleep", "sleeping"), ("any", "any")):
            value = (item.get("response_s") or {}).get(key)
            if isinstance(value, list):
                initial.update(
                    {
                        f"{prefix}_low": value[0],
                        f"{prefix}_typical": value[1],
                        f"{prefix}_high": value[2],
                    }
                )
            elif value is not None:
                initial[f"{prefix}_typical"] = value
        return initial

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {
            "id": data["id"].strip(),
            "name": data["name"].strip(),
            "kind": data["kind"],
        }
        if data["capabilities"].strip():
            item["capabilities"] = _words(data["capabilities"])
        if data["asleep_from"] or data["asleep_to"]:
            item["asleep"] = [data["asleep_from"][:5], data["asleep_to"][:5]]
        response: dict[str, Any] = {}
        for key, prefix in (("awake", "awake"), ("asleep", "sleeping"), ("any", "any")):
            self._range(prefix, key, response)
        if response:
            item["response_s"] = response
        self._text("notes", "notes", item)
        return item


class EventForm(ItemForm):
    id = forms.CharField(max_length=64, label="Id")
    name = forms.CharField(max_length=200)
    way = forms.ChoiceField(
        choices=[
            ("times", "at fixed times"),
            ("per_day", "at a rate"),
            ("every_days", "every N days"),
        ]
    )
    times = forms.CharField(required=False, help_text="HH:MM, comma-separated")
    jitter_s = forms.FloatField(required=False, label="jitter (s)")
    per_day = forms.FloatField(required=False, label="per day")
    when = forms.ChoiceField(required=False, choices=[(w, w) for w in EVENT_WHEN])
    every_days = forms.FloatField(required=False, label="every (days)")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Name", "name", ("name",)),
        ("Occurs", "", ("way",)),
        ("Times and jitter", "times", ("times", "jitter_s")),
        ("Rate per day, when", "per_day", ("per_day", "when")),
        ("Every N days", "every_days", ("every_days",)),
        ("Notes", "notes", ("notes",)),
    )

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        way = next((w for w in ("times", "per_day", "every_days") if w in item), "times")
        initial = {
            key: item.get(key, "")
            for key in ("id", "name", "jitter_s", "per_day", "when", "every_days", "notes")
        }
        initial["times"] = ", ".join(item.get("times") or [])
        initial["way"] = way
        return initial

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {"id": data["id"].strip(), "name": data["name"].strip()}
        _occurrence(data, item)
        self._text("notes", "notes", item)
        return item


def _occurrence(data: dict[str, Any], item: dict[str, Any]) -> None:
    """The way of occurring an event or task form describes, into ``item``."""
    way = data["way"]
    if way == "times":
        item["times"] = _words(data.get("times") or "")
        if data.get("jitter_s") is not None:
            item["jitter_s"] = _number(data["jitter_s"])
    elif way == "per_day":
        item["per_day"] = _number(data.get("per_day"))
        if data.get("when"):
            item["when"] = data["when"]
    elif way == "every_days":
        item["every_days"] = _number(data.get("every_days"))


def _anchor_choices(channel: str) -> list[tuple[str, str]]:
    return [("", "—")] + [
        (f"{value:g}", f"{value:g} — {words}") for value, words in VACP_ANCHORS[channel]
    ]


class TaskForm(ItemForm):
    id = forms.CharField(max_length=64, label="Id")
    title = forms.CharField(max_length=300)
    parent = forms.ChoiceField(required=False)
    way = forms.ChoiceField(
        choices=[
            ("", "only in a chain"),
            ("event", "on an event"),
            ("times", "at fixed times"),
            ("per_day", "at a rate"),
            ("every_days", "every N days"),
        ],
        required=False,
        label="occurs",
    )
    event = forms.ChoiceField(required=False)
    probability = forms.FloatField(
        required=False, help_text="share of the event's happenings, 0-1"
    )
    times = forms.CharField(required=False, help_text="HH:MM, comma-separated")
    jitter_s = forms.FloatField(required=False, label="jitter (s)")
    per_day = forms.FloatField(required=False, label="per day")
    when = forms.ChoiceField(required=False, choices=[(w, w) for w in EVENT_WHEN])
    every_days = forms.FloatField(required=False, label="every (days)")
    duration_low, duration_typical, duration_high = _range_fields("duration (s)")
    window_s = forms.FloatField(required=False, label="window (s)")
    severity = forms.ChoiceField(
        required=False,
        choices=[("", "—")]
        + [(str(n), f"{n} {name} — {text}") for n, (name, text) in SEVERITIES.items()],
    )
    demand_visual = _demand_field("visual")
    demand_auditory = _demand_field("auditory")
    demand_cognitive = _demand_field("cognitive")
    demand_psychomotor = _demand_field("psychomotor")
    needs = forms.CharField(required=False, help_text="capabilities, comma-separated")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Title", "title", ("title",)),
        ("Under goal", "parent", ("parent",)),
        (
            "Occurs",
            "occurs",
            ("way", "event", "probability", "times", "jitter_s", "per_day", "when", "every_days"),
        ),
        (
            "Duration, s (min, typical, max)",
            "duration_s",
            ("duration_low", "duration_typical", "duration_high"),
        ),
        ("Window (s)", "window_s", ("window_s",)),
        ("Severity", "severity", ("severity",)),
        (
            "VACP demands (McCracken & Aldrich 1984)",
            "demands",
            tuple(f"demand_{c}" for c in CHANNELS),
        ),
        ("Needs", "needs", ("needs",)),
        ("Notes", "notes", ("notes",)),
    )

    def __init__(self, *args: Any, study: Study, task_id: str | None = None, **kwargs: Any):
        super().__init__(*args, **kwargs)
        self.existing = study.tasks_by_id.get(task_id) if task_id else None
        self.fields["parent"].choices = [("", "— (top level)")] + [
            (task.id, f"{task.id} {task.title}") for task in study.tasks if task.id != task_id
        ]
        self.fields["event"].choices = [("", "—")] + [(e.id, e.name) for e in study.events]

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        occurs = item.get("occurs") or {}
        way = next((w for w in ("event", "times", "per_day", "every_days") if w in occurs), "")
        initial = {
            key: item.get(key, "")
            for key in ("id", "title", "parent", "window_s", "severity", "notes")
        }
        initial.update(
            {
                key: occurs.get(key, "")
                for key in ("event", "probability", "jitter_s", "per_day", "when", "every_days")
            }
        )
        initial["times"] = ", ".join(occurs.get("times") or [])
        initial["way"] = way
        duration = item.get("duration_s")
        if isinstance(duration, list):
            initial.update(
                duration_low=duration[0], duration_typical=duration[1], duration_high=duration[2]
            )
        elif duration is not None:
            initial["duration_typical"] = duration
        for channel, value in (item.get("demands") or {}).items():
            initial[f"demand_{channel}"] = f"{value:g}"
        initial["needs"] = ", ".join(item.get("needs") or [])
        return initial

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {"id": data["id"].strip(), "title": data["title"].strip()}
        if data["parent"]:
            item["parent"] = data["parent"]
        if data["way"] == "event":
            item["occurs"] = {"event": data["event"]}
            if data["probability"] is not None:
                item["occurs"]["probability"] = _number(data["probability"])
        elif data["way"]:
            occurs: dict[str, Any] = {}
            _occurrence(data, occurs)
            item["occurs"] = occurs
        self._range("duration", "duration_s", item)
        if data["window_s"] is not None:
            item["window_s"] = _number(data["window_s"])
        if data["severity"]:
            item["severity"] = int(data["severity"])
        demands = {c: _number(float(data[f"demand_{c}"])) for c in CHANNELS if data[f"demand_{c}"]}
        if demands:
            item["demands"] = demands
        if self.existing is not None and self.existing.split is not None:
            item["split"] = dict(self.existing.split)  # kept: the editor does not show it
        if data["needs"].strip():
            item["needs"] = _words(data["needs"])
        self._text("notes", "notes", item)
        return item


class LinkForm(ItemForm):
    source = forms.ChoiceField(label="from")
    target = forms.ChoiceField(label="to")
    kind = forms.ChoiceField(choices=[(kind, kind) for kind in LINK_KINDS])
    lag_low = forms.FloatField(required=False, label="lag min (s)")
    lag_high = forms.FloatField(required=False, label="lag max (s)")
    probability = forms.FloatField(required=False, help_text="0-1, precedes only")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("From", "from", ("source",)),
        ("Kind", "kind", ("kind",)),
        ("To", "to", ("target",)),
        ("Lag, s (min, max)", "lag_s", ("lag_low", "lag_high")),
        ("Probability", "probability", ("probability",)),
        ("Notes", "notes", ("notes",)),
    )

    def __init__(self, *args: Any, study: Study, **kwargs: Any):
        super().__init__(*args, **kwargs)
        leaves = [(task.id, f"{task.id} {task.title}") for task in study.leaves]
        self.fields["source"].choices = leaves
        self.fields["target"].choices = leaves

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        initial = {
            "source": item["from"],
            "target": item["to"],
            "kind": item["kind"],
            "probability": item.get("probability", ""),
            "notes": item.get("notes", ""),
        }
        lag = item.get("lag_s")
        if isinstance(lag, list):
            initial.update(lag_low=lag[0], lag_high=lag[1])
        elif lag is not None:
            initial.update(lag_low=lag, lag_high=lag)
        return initial

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {"from": data["source"], "to": data["target"], "kind": data["kind"]}
        low, high = data["lag_low"], data["lag_high"]
        if low is not None or high is not None:
            low = high if low is None else low
            high = low if high is None else high
            item["lag_s"] = _number(low) if low == high else [_number(low), _number(high)]
        if data["probability"] is not None:
            item["probability"] = _number(data["probability"])
        self._text("notes", "notes", item)
        return item


# -- mode maps: modes and transitions ----------------------------------------------------


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
        choices=[(cue, cue.replace("_", " ")) for cue in CUES],
        help_text="how the person learns of the change",
    )
    per_day = forms.FloatField(
        required=False,
        label="rate per day",
        help_text="while in the 'from' mode; blank: not counted in the day's mode shares",
        widget=forms.NumberInput(attrs={"step": "any"}),
    )
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("From", "from", ("source",)),
        ("To", "to", ("target",)),
        ("Trigger", "trigger", ("trigger",)),
        ("Caused by", "by", ("by",)),
        ("Cue", "cue", ("cue",)),
        ("Rate per day", "per_day", ("per_day",)),
        ("Notes", "notes", ("notes",)),
    )

    def __init__(self, *args: Any, modes: list[tuple[str, str]], **kwargs: Any):
        super().__init__(*args, **kwargs)
        self.fields["source"].choices = modes
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
            "notes": item.get("notes", ""),
        }

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
            item["per_day"] = _number(data["per_day"])
        self._text("notes", "notes", item)
        return item
