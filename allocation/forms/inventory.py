"""Forms of the inventory: a new study, agents, events, tasks and links.

A form only parses (numbers, choices); whether the item makes sense in the study is the
core's judgement, with the same messages as an import (see ``services.edits``)."""

from __future__ import annotations

from typing import Any

from django import forms

from allocation.core import Study
from allocation.core.limits import PAGE_ROWS
from allocation.core.needs import needs_text, parse_needs
from allocation.core.vocabulary import (
    AGENT_KINDS,
    CHANNELS,
    EVENT_WHEN,
    LINK_KINDS,
    SCALES,
    SEVERITIES,
    VACP_ANCHORS,
)
from allocation.forms.base import ItemForm, TextForm, comma_words, file_number, range_fields


def _demand_field(channel: str) -> forms.ChoiceField:
    return forms.ChoiceField(required=False, choices=_anchor_choices(channel), label=channel)


class StudyForm(TextForm):
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
    awake_low, awake_typical, awake_high = range_fields("response awake (s)")
    on_duty_from = forms.CharField(
        required=False, label="on duty from", widget=forms.TimeInput(attrs={"type": "time"})
    )
    on_duty_to = forms.CharField(
        required=False, label="on duty to", widget=forms.TimeInput(attrs={"type": "time"})
    )
    sleeping_low, sleeping_typical, sleeping_high = range_fields("response asleep (s)")
    any_low, any_typical, any_high = range_fields("response (s)")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Name", "name", ("name",)),
        ("Kind", "kind", ("kind",)),
        ("Capabilities", "capabilities", ("capabilities",)),
        ("Asleep (people)", "asleep", ("asleep_from", "asleep_to")),
        ("On duty (people; blank: always)", "on_duty", ("on_duty_from", "on_duty_to")),
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
        if item.get("on_duty"):
            initial["on_duty_from"], initial["on_duty_to"] = item["on_duty"]
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
            item["capabilities"] = comma_words(data["capabilities"])
        if data["asleep_from"] or data["asleep_to"]:
            item["asleep"] = [data["asleep_from"][:5], data["asleep_to"][:5]]
        if data["on_duty_from"] or data["on_duty_to"]:
            item["on_duty"] = [data["on_duty_from"][:5], data["on_duty_to"][:5]]
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
    of = forms.ChoiceField(
        required=False,
        label="whose day",
        help_text="the person whose awake or asleep time the rate follows; needed where "
        "more than one person has an asleep window",
    )
    every_days = forms.FloatField(required=False, label="every (days)")
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Name", "name", ("name",)),
        ("Occurs", "", ("way",)),
        ("Times and jitter", "times", ("times", "jitter_s")),
        ("Rate per day, when", "per_day", ("per_day", "when")),
        ("Every N days", "every_days", ("every_days",)),
        ("Whose day", "of", ("of",)),
        ("Notes", "notes", ("notes",)),
    )

    def __init__(self, *args: Any, study: Study, **kwargs: Any):
        super().__init__(*args, **kwargs)
        self.fields["of"].choices = _whose_day_choices(study)

    @staticmethod
    def initial_for(item: dict[str, Any]) -> dict[str, Any]:
        way = next((w for w in ("times", "per_day", "every_days") if w in item), "times")
        initial = {
            key: item.get(key, "")
            for key in ("id", "name", "jitter_s", "per_day", "when", "of", "every_days", "notes")
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
        item["times"] = comma_words(data.get("times") or "")
        if data.get("jitter_s") is not None:
            item["jitter_s"] = file_number(data["jitter_s"])
    elif way == "per_day":
        item["per_day"] = file_number(data.get("per_day"))
        if data.get("when"):
            item["when"] = data["when"]
    elif way == "every_days":
        item["every_days"] = file_number(data.get("every_days"))
    if way in ("per_day", "every_days") and data.get("of"):
        item["of"] = data["of"]


def _whose_day_choices(study: Study) -> list[tuple[str, str]]:
    return [("", "—")] + [(agent.id, agent.name) for agent in study.humans]


def typed_when_long(field: forms.ChoiceField, help_text: str) -> None:
    """A choice among more items than a page lists is typed (its id), not picked from a
    list sent whole with every form; the choices still check what is typed."""
    if len(field.choices) > PAGE_ROWS:
        field.widget = forms.TextInput({"maxlength": 64})
        field.help_text = help_text


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
    of = forms.ChoiceField(
        required=False,
        label="whose day",
        help_text="the person whose awake or asleep time the rate follows; needed where "
        "more than one person has an asleep window",
    )
    every_days = forms.FloatField(required=False, label="every (days)")
    duration_low, duration_typical, duration_high = range_fields("duration (s)")
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
    needs = forms.CharField(
        required=False,
        help_text="capabilities, comma-separated; per stage as "
        "'decision: judgement; action: dosing'",
    )
    notes = forms.CharField(required=False, widget=forms.Textarea(attrs={"rows": 2}))

    groups = (
        ("Id", "id", ("id",)),
        ("Title", "title", ("title",)),
        ("Under goal", "parent", ("parent",)),
        (
            "Occurs",
            "occurs",
            (
                "way",
                "event",
                "probability",
                "times",
                "jitter_s",
                "per_day",
                "when",
                "every_days",
                "of",
            ),
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
        self.fields["of"].choices = _whose_day_choices(study)
        typed_when_long(self.fields["parent"], "The goal's id; leave empty for the top level.")
        typed_when_long(self.fields["event"], "The event's id, if an event starts the task.")

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
                for key in (
                    "event",
                    "probability",
                    "jitter_s",
                    "per_day",
                    "when",
                    "of",
                    "every_days",
                )
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
        initial["needs"] = needs_text(item.get("needs"))
        return initial

    def item(self) -> dict[str, Any]:
        data = self.cleaned_data
        item: dict[str, Any] = {"id": data["id"].strip(), "title": data["title"].strip()}
        if data["parent"]:
            item["parent"] = data["parent"]
        if data["way"] == "event":
            item["occurs"] = {"event": data["event"]}
            if data["probability"] is not None:
                item["occurs"]["probability"] = file_number(data["probability"])
        elif data["way"]:
            occurs: dict[str, Any] = {}
            _occurrence(data, occurs)
            item["occurs"] = occurs
        self._range("duration", "duration_s", item)
        if data["window_s"] is not None:
            item["window_s"] = file_number(data["window_s"])
        if data["severity"]:
            item["severity"] = int(data["severity"])
        demands = {
            c: file_number(float(data[f"demand_{c}"])) for c in CHANNELS if data[f"demand_{c}"]
        }
        if demands:
            item["demands"] = demands
        if self.existing is not None and self.existing.split is not None:
            item["split"] = dict(self.existing.split)  # kept: the editor does not show it
        try:
            needs = parse_needs(data["needs"])
        except ValueError as problem:
            self.add_error("needs", str(problem))
        else:
            if needs:
                item["needs"] = needs
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
        typed_when_long(self.fields["source"], "The id of the task the link leaves.")
        typed_when_long(self.fields["target"], "The id of the task the link reaches.")

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
            item["lag_s"] = (
                file_number(low) if low == high else [file_number(low), file_number(high)]
            )
        if data["probability"] is not None:
            item["probability"] = file_number(data["probability"])
        self._text("notes", "notes", item)
        return item
