"""The canonical text of a study file and its SHA-256 (allocation.core.canonical).

References: RFC 8785 (JSON Canonicalization Scheme) §3.2.2 and §3.2.3, with its number
examples (Appendix B, from memory) re-checked against ``JSON.stringify`` of Node.js 20,
which implements the ECMAScript Number::toString that RFC 8785 adopts; FIPS 180-2
Appendix B.1 for the SHA-256 of "abc".
"""

from __future__ import annotations

import copy
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from allocation.core import load_study, read_study, study_to_json
from allocation.core.canonical import (
    CanonicalError,
    canonical_json,
    canonical_text,
    digest,
    is_canonical,
    study_digest,
    verify,
)

from .conftest import HOME_HEATING

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (0.0, "0"),
        (-0.0, "0"),
        (2.0, "2"),
        (4.5, "4.5"),
        (0.1, "0.1"),
        (1e-6, "0.000001"),
        (1e-7, "1e-7"),
        (1e21, "1e+21"),
        (1e20, "100000000000000000000"),
        (1e23, "1e+23"),
        (333333333.33333329, "333333333.3333333"),
        (5e-324, "5e-324"),
        (-1.7976931348623157e308, "-1.7976931348623157e+308"),
        (9007199254740992.0, "9007199254740992"),
        (295147905179352830000.0, "295147905179352830000"),
    ],
)
def test_numbers_are_written_as_ecmascript_writes_them(value, text):
    """RFC 8785 §3.2.2.3; each value checked against Node.js 20 ``JSON.stringify``."""
    assert canonical_json(value) == text


def test_integers_keep_every_digit():
    """Where Baton differs from RFC 8785: an integer is not first rounded to a double."""
    assert canonical_json(2**60 + 1) == "1152921504606846977"


def test_keys_sort_by_utf16_code_units():
    """The sorting example of RFC 8785 §3.2.3: U+1F600 (a surrogate pair, D83D DE00)
    sorts before U+FB33, though its code point is larger."""
    keys = ["\u20ac", "\r", "\ufb33", "1", "\U0001f600", "\u0080", "\u00f6"]
    text = canonical_json({key: index for index, key in enumerate(keys)})
    order = list(json.loads(text, object_pairs_hook=lambda pairs: [k for k, _ in pairs]))
    assert order == ["\r", "1", "\u0080", "\u00f6", "\u20ac", "\U0001f600", "\ufb33"]


def test_strings_escape_only_what_json_stringify_escapes():
    """RFC 8785 §3.2.2.2: quote, backslash and controls escaped (short forms where they
    exist, lower-case \\u00xx otherwise); everything else as UTF-8, U+007F included."""
    value = 'é\n\t\x0f"\\\x7f/€'
    assert canonical_json(value) == '"é\\n\\t\\u000f\\"\\\\\x7f/€"'


def test_no_whitespace_and_nested_order():
    assert canonical_json({"b": [1, {"d": None, "c": True}], "a": False}) == (
        '{"a":false,"b":[1,{"c":true,"d":null}]}'
    )


@pytest.mark.parametrize(
    ("value", "path"),
    [
        ({"title": "bad \ud800"}, '$["title"]'),
        ({"x": [1, float("nan")]}, '$["x"][1]'),
        ({"x": float("inf")}, '$["x"]'),
        ({1: "a"}, "$"),
        ({"x": {1, 2}}, '$["x"]'),
    ],
)
def test_values_without_a_canonical_text_are_refused_with_their_path(value, path):
    with pytest.raises(CanonicalError) as caught:
        canonical_json(value)
    assert caught.value.path == path


def test_sha256_matches_the_fips_check_value():
    """FIPS 180-2, Appendix B.1: SHA-256("abc")."""
    assert digest("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_study_text_is_the_canonical_json_of_its_study_file():
    study = read_study(copy.deepcopy(HOME_HEATING))
    text = canonical_text(study)
    # The design's example file is written back unchanged by the core (DESIGN §5), so
    # its canonical text can be made from the file directly.
    assert text == canonical_json(HOME_HEATING)
    assert json.loads(text) == study_to_json(study)
    assert study_digest(study) == digest(text)


def test_the_same_study_written_differently_gives_the_same_hash():
    """Key order, spacing, 2.0 for 2 and escaped characters do not change the hash."""
    document = copy.deepcopy(HOME_HEATING)
    reordered = json.loads(json.dumps(document, sort_keys=True))
    reordered["study"] = dict(reversed(list(reordered["study"].items())))
    reordered["tasks"][1]["duration_s"] = [float(v) for v in reordered["tasks"][1]["duration_s"]]
    text = json.dumps(reordered, indent=4, ensure_ascii=True)
    again = load_study(json.loads(text))
    assert again.ok
    assert study_digest(again.study) == study_digest(read_study(document))


def test_the_canonical_text_reads_back_to_the_same_text():
    text = canonical_text(read_study(copy.deepcopy(HOME_HEATING)))
    assert canonical_text(read_study(json.loads(text))) == text
    assert is_canonical(text)


def test_a_changed_study_changes_the_hash():
    document = copy.deepcopy(HOME_HEATING)
    before = study_digest(read_study(document))
    document["tasks"][1]["title"] += "!"
    assert study_digest(read_study(document)) != before


def test_hash_is_stable_across_processes():
    """Two fresh interpreters, with different string-hash seeds, agree with this one."""
    code = (
        "import json,sys;from allocation.core import read_study;"
        "from allocation.core.canonical import study_digest;"
        "print(study_digest(read_study(json.load(sys.stdin))))"
    )
    expected = study_digest(read_study(copy.deepcopy(HOME_HEATING)))
    for seed in ("1", "2"):
        env = {**os.environ, "PYTHONHASHSEED": seed}
        out = subprocess.run(
            [sys.executable, "-c", code],
            input=json.dumps(HOME_HEATING),
            capture_output=True,
            text=True,
            cwd=ROOT,
            env=env,
            check=True,
        )
        assert out.stdout.strip() == expected


def test_verify_catches_a_changed_byte_and_a_non_canonical_text():
    text = canonical_text(read_study(copy.deepcopy(HOME_HEATING)))
    sha = digest(text)
    assert verify(text, sha)
    position = text.index("Lower the set point")
    changed = text[:position] + "l" + text[position + 1 :]
    assert not verify(changed, sha)
    # Re-hashed after the edit, the hash matches, but a spaced-out text is not canonical.
    spaced = text.replace(",", ", ", 1)
    assert not verify(spaced, digest(spaced))
    assert verify(changed, digest(changed))


@pytest.mark.parametrize(
    "text", ['{"b":1,"a":2}', '{"a":1,"a":1}', '{"a":NaN}', '{"a":2.0}', '{"a": 1}', "{"]
)
def test_texts_that_are_not_canonical(text):
    assert not is_canonical(text)
