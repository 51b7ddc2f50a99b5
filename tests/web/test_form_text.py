"""Every text field of every form is bounded and holds only text.

Sources: RFC 3629 §3 (UTF-8 never encodes U+D800..DFFF, so a lone surrogate can be
neither stored as UTF-8 nor exported); Baton's own NOTE_LENGTH and STUDY_FILE_MAX_BYTES
(allocation/core/limits.py), checked one past the limit and at it.
"""

from __future__ import annotations

import inspect
import json

import pytest
from django import forms
from django.core.management import call_command
from django.core.management.base import CommandError

from allocation import models as m
from allocation.core import load_study
from allocation.core.limits import NOTE_LENGTH, STUDY_FILE_MAX_BYTES
from allocation.forms import history, inventory, modes, plans, ratings
from allocation.forms.base import TextForm

FORMS = [
    cls
    for module in (history, inventory, modes, plans, ratings)
    for _name, cls in inspect.getmembers(module, inspect.isclass)
    if issubclass(cls, forms.Form) and cls.__module__ == module.__name__
]


def test_every_form_is_a_text_form_with_bounded_text_fields(heating_document):
    assert len(FORMS) >= 10
    study = load_study(heating_document).study
    for cls in FORMS:
        assert issubclass(cls, TextForm), cls.__name__
        wanted = inspect.signature(cls.__init__).parameters
        given = {"study": study, "modes": [], "scale": "sv10", "agents": study.agents}
        form = cls(**{key: value for key, value in given.items() if key in wanted})
        for name, field in form.fields.items():
            if isinstance(field, forms.CharField):
                assert field.max_length is not None, f"{cls.__name__}.{name}"
                assert field.max_length <= NOTE_LENGTH, f"{cls.__name__}.{name}"


def _agent(**changes) -> dict:
    data = {"id": "nurse", "name": "Nurse", "kind": "human", "notes": "On the ward"}
    data.update(changes)
    return data


def test_a_lone_surrogate_is_refused_on_its_field():
    form = inventory.AgentForm(data=_agent(notes="ward\ud800"))
    assert not form.is_valid()
    assert form.errors["notes"] == ["contains a lone surrogate (U+D800), which is not text"]
    form = inventory.AgentForm(data=_agent(name="N\udfffurse"))
    assert not form.is_valid()
    assert "U+DFFF" in form.errors["name"][0]
    # A pair is one character (U+1F600), not a lone surrogate.
    assert inventory.AgentForm(data=_agent(notes="ward \U0001f600")).is_valid()


def test_notes_are_refused_one_past_the_limit_and_kept_at_it():
    form = inventory.AgentForm(data=_agent(notes="n" * (NOTE_LENGTH + 1)))
    assert not form.is_valid()
    # Django's MaxLengthValidator message names the limit and the measured length.
    assert (
        f"at most {NOTE_LENGTH} characters (it has {NOTE_LENGTH + 1})" in (form.errors["notes"][0])
    )
    assert inventory.AgentForm(data=_agent(notes="n" * NOTE_LENGTH)).is_valid()


@pytest.mark.django_db
def test_import_study_refuses_a_file_past_the_upload_limit_before_reading(tmp_path):
    source = tmp_path / "big.json"
    with source.open("wb") as file:
        file.truncate(STUDY_FILE_MAX_BYTES + 1)  # sparse: nothing to read
    with pytest.raises(CommandError) as refused:
        call_command("import_study", str(source))
    message = str(refused.value)
    assert f"{STUDY_FILE_MAX_BYTES + 1:,} bytes" in message
    assert "STUDY_FILE_MAX_BYTES" in message
    assert not m.Study.objects.exists()


@pytest.mark.django_db
def test_import_study_reads_a_file_at_the_limit(tmp_path, heating_document, settings):
    settings.DATA_DIR = tmp_path
    text = json.dumps(heating_document)
    source = tmp_path / "padded.json"
    source.write_text(text + " " * (STUDY_FILE_MAX_BYTES - len(text.encode())))
    assert source.stat().st_size == STUDY_FILE_MAX_BYTES
    with (tmp_path / "out.txt").open("w") as out:
        call_command("import_study", str(source), stdout=out)
    assert m.Study.objects.count() == 1
