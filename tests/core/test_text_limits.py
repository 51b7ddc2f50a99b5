"""Study files holding what is not text or not a readable number are refused with where.

Sources: RFC 8259 section 8.1 (JSON text exchanged between systems is UTF-8) and
section 8.2 (an unpaired surrogate escape such as \\ud800 names no Unicode character);
Python's documented integer string conversion limit of 4300 digits
(sys.get_int_max_str_digits, Python 3.11+).
"""

from __future__ import annotations

import json

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
