"""Study files holding what is not text or not a readable number are refused with where.

Sources: RFC 8259 section 8.1 (JSON text exchanged between systems is UTF-8) and
section 8.2 (an unpaired surrogate escape such as \\ud800 names no Unicode character);
Python's documented integer string conversion limit of 4300 digits
(sys.get_int_max_str_digits, Python 3.11+).
"""

from __future__ import annotations

import json

import pytest

from allocation.core.reading import parse_json_text


def test_lone_surrogate_in_a_value_is_refused_with_its_path() -> None:
    text = '{"tasks": [{"title": "ok"}, {"title": "bad \\ud800"}]}'
    data, problems = parse_json_text(text)
    assert data is None
    assert [(p.path, p.message) for p in problems] == [
        ("$.tasks[1].title", "contains a lone surrogate (U+D800), which is not text")
    ]


def test_lone_surrogate_in_a_key_is_refused() -> None:
    data, problems = parse_json_text('{"capabilities": {"\\udc00x": 1}}')
    assert data is None
    assert problems[0].path == "$.capabilities"
    assert "U+DC00" in problems[0].message


def test_a_surrogate_pair_is_one_character_and_accepted() -> None:
    # RFC 8259 section 7: \ud83d\ude00 is the escaped UTF-16 pair of U+1F600.
    data, problems = parse_json_text('{"title": "\\ud83d\\ude00"}')
    assert problems == []
    assert data == {"title": "\U0001f600"}


def test_integer_beyond_python_conversion_limit_is_refused() -> None:
    data, problems = parse_json_text('{"n": ' + "9" * 5000 + "}")
    assert data is None
    assert "5000 digits" in problems[0].message
    assert "4300" in problems[0].message
    # 4300 digits is still within the limit.
    data, problems = parse_json_text('{"n": ' + "9" * 4300 + "}")
    assert problems == []


def test_utf16_and_utf32_files_are_refused_utf8_bom_kept() -> None:
    text = json.dumps({"title": "Pumps"})
    for encoding in ("utf-16", "utf-16-le", "utf-16-be", "utf-32", "utf-32-le"):
        data, problems = parse_json_text(text.encode(encoding))
        assert data is None, encoding
        assert "must be UTF-8" in problems[0].message, encoding
    data, problems = parse_json_text(text.encode("utf-8"))
    assert problems == [] and data == {"title": "Pumps"}


# -- every free text of a study has a length limit, refused with its JSON path ----------
# The limits are Baton's own (allocation/core/limits.py); the cases are worked by hand:
# text one character past a limit is refused at exactly the path it was put at, text at
# the limit is accepted.

from allocation.core import load_study  # noqa: E402
from allocation.core.limits import NOTE_LENGTH, WORD_LENGTH  # noqa: E402


def _mode_map(text: str) -> dict:
    return {
        "initial": "m1",
        "states": [{"id": "m1", "name": "Normal", "indication": text, "notes": text}],
        "transitions": [
            {"from": "m1", "to": "m1", "trigger": "reset", "by": "human", "notes": text}
        ],
    }


#: Where each free text sits: the steps from the file's root to it.
_STEPS = {
    "description": ("study", "description"),
    "risk note": ("study", "risk_policy", "note"),
    "agent notes": ("agents", 0, "notes"),
    "event notes": ("events", 0, "notes"),
    "task notes": ("tasks", 1, "notes"),
    "link notes": ("links", 0, "notes"),
    "plan description": ("plans", 0, "description"),
    "rationale": ("plans", 0, "assignments", "T1", "rationale"),
    "mode indication": ("plans", 0, "modes", "states", 0, "indication"),
    "mode notes": ("plans", 0, "modes", "states", 0, "notes"),
    "transition notes": ("plans", 0, "modes", "transitions", 0, "notes"),
}


def _place(document: dict, where: str, text: str) -> str:
    """Put ``text`` at ``where`` in the study; the JSON path it should be refused at."""
    steps = _STEPS[where]
    if "modes" in steps:
        document["plans"][0]["modes"] = _mode_map("ok")
    holder = document
    for step in steps[:-1]:
        holder = holder[step]
    holder[steps[-1]] = text
    return "$" + "".join(f"[{step}]" if isinstance(step, int) else f".{step}" for step in steps)


NOTE_PLACES = [
    "description",
    "risk note",
    "agent notes",
    "event notes",
    "task notes",
    "link notes",
    "plan description",
    "rationale",
    "mode indication",
    "mode notes",
    "transition notes",
]


@pytest.mark.parametrize("where", NOTE_PLACES)
def test_each_free_text_is_refused_one_past_its_limit_by_path(make_study, where) -> None:
    document = make_study()
    path = _place(document, where, "x" * (NOTE_LENGTH + 1))
    problems = [p for p in load_study(document).errors if p.path == path]
    assert [p.message for p in problems] == [
        f"is {NOTE_LENGTH + 1:,} characters long; at most {NOTE_LENGTH} are kept"
    ]
    document = make_study()
    path = _place(document, where, "x" * NOTE_LENGTH)
    assert [p for p in load_study(document).errors if p.path == path] == []


@pytest.mark.parametrize(("list_at", "index"), [("agents", 0), ("tasks", 1)])
def test_a_capability_is_refused_one_past_its_limit_by_path(make_study, list_at, index):
    document = make_study()
    key = "capabilities" if list_at == "agents" else "needs"
    document[list_at][index][key] = ["ok", "c" * (WORD_LENGTH + 1)]
    errors = load_study(document).errors
    assert f"$.{list_at}[{index}].{key}[1]" in [p.path for p in errors]
