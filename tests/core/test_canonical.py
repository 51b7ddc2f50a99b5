"""The canonical text of a study file and its SHA-256 (allocation.core.canonical).

References: RFC 8785 (JSON Canonicalization Scheme): the worked example of §3.2.2 to
§3.2.4 (input, sorted text, UTF-8 bytes in hexadecimal), the sorting example of §3.2.3
and the number samples of Appendix B (IEEE 754 bit patterns and their text), each
re-checked against ``JSON.stringify`` of Node.js 20, which implements the ECMAScript
Number::toString that RFC 8785 adopts; RFC 7493 §2.2 for the whole numbers a double holds
exactly; FIPS 180-2 Appendix B.1 for the SHA-256 of "abc". Old snapshots: canonical texts
of Baton's first form (``baton-1``), written out by hand, hashed with :mod:`hashlib`.
"""

from __future__ import annotations

import copy
import hashlib
import json
import os
import struct
import subprocess
import sys
from pathlib import Path

import pytest
import rfc8785
from hypothesis import given, settings
from hypothesis import strategies as st

from allocation.core import load_study, read_study, study_to_json
from allocation.core.canonical import (
    BATON_1,
    RFC_8785,
    CanonicalError,
    canonical_json,
    canonical_text,
    digest,
    is_canonical,
    read_canonical,
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


def double(bits: str) -> float:
    """The IEEE 754 double with these 64 bits, in hexadecimal as Appendix B prints them."""
    return struct.unpack(">d", bytes.fromhex(bits))[0]


@pytest.mark.parametrize(
    ("bits", "text"),
    [
        ("0000000000000000", "0"),  # zero
        ("8000000000000000", "0"),  # minus zero
        ("0000000000000001", "5e-324"),  # min pos number
        ("8000000000000001", "-5e-324"),  # min neg number
        ("7fefffffffffffff", "1.7976931348623157e+308"),  # max pos number
        ("ffefffffffffffff", "-1.7976931348623157e+308"),  # max neg number
        ("4340000000000000", "9007199254740992"),  # max pos int
        ("c340000000000000", "-9007199254740992"),  # max neg int
        ("4430000000000000", "295147905179352830000"),  # ~2**68
        ("44b52d02c7e14af5", "9.999999999999997e+22"),
        ("44b52d02c7e14af6", "1e+23"),
        ("44b52d02c7e14af7", "1.0000000000000001e+23"),
        ("444b1ae4d6e2ef4e", "999999999999999700000"),
        ("444b1ae4d6e2ef4f", "999999999999999900000"),
        ("444b1ae4d6e2ef50", "1e+21"),
        ("3eb0c6f7a0b5ed8c", "9.999999999999997e-7"),
        ("3eb0c6f7a0b5ed8d", "0.000001"),
        ("41b3de4355555553", "333333333.3333332"),
        ("41b3de4355555554", "333333333.33333325"),
        ("41b3de4355555555", "333333333.3333333"),
        ("41b3de4355555556", "333333333.3333334"),
        ("41b3de4355555557", "333333333.33333343"),
        ("becbf647612f3696", "-0.0000033333333333333333"),
        ("43143ff3c1cb0959", "1424953923781206.2"),  # round to even
    ],
)
@pytest.mark.parametrize("form", [RFC_8785, BATON_1])
def test_number_samples_of_rfc8785_appendix_b(bits, text, form):
    """RFC 8785 Appendix B, row by row; both forms write doubles alike, and the text
    reads back as the same double (for the old form too, so old snapshots verify)."""
    assert canonical_json(double(bits), form) == text
    assert is_canonical(text, form)


@pytest.mark.parametrize("bits", ["7fffffffffffffff", "7ff0000000000000"])
def test_nan_and_infinity_of_rfc8785_appendix_b_have_no_text(bits):
    """RFC 8785 Appendix B: NaN and Infinity rows have no JSON representation."""
    with pytest.raises(CanonicalError):
        canonical_json({"x": double(bits)})


def test_the_worked_example_of_rfc8785_section_3_2():
    """RFC 8785 §3.2.2 (input parsed, primitives serialized), §3.2.3 (the text once
    sorted) and §3.2.4 (its UTF-8 bytes, printed there in hexadecimal)."""
    source = r"""{
      "numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],
      "string": "\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/",
      "literals": [null, true, false]
    }"""
    text = canonical_json(json.loads(source))
    assert text == (
        '{"literals":[null,true,false],"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],'
        '"string":"€$\\u000f\\nA\'B\\"\\\\\\\\\\"/"}'
    )
    assert text.encode("utf-8") == bytes.fromhex(
        "7b 22 6c 69 74 65 72 61 6c 73 22 3a 5b 6e 75 6c 6c 2c 74 72"
        "75 65 2c 66 61 6c 73 65 5d 2c 22 6e 75 6d 62 65 72 73 22 3a"
        "5b 33 33 33 33 33 33 33 33 33 2e 33 33 33 33 33 33 33 2c 31"
        "65 2b 33 30 2c 34 2e 35 2c 30 2e 30 30 32 2c 31 65 2d 32 37"
        "5d 2c 22 73 74 72 69 6e 67 22 3a 22 e2 82 ac 24 5c 75 30 30"
        "30 66 5c 6e 41 27 42 5c 22 5c 5c 5c 5c 5c 22 2f 22 7d"
    )


def test_whole_numbers_up_to_2_53_minus_1_are_written_beyond_refused_with_their_path():
    """RFC 7493 §2.2: whole numbers in [-(2**53)+1, (2**53)-1] are the ones a double holds
    with all their neighbours; the RFC 8785 form refuses the rest rather than round them
    (2**53 + 1 would become 9007199254740992)."""
    assert canonical_json([2**53 - 1, -(2**53) + 1]) == "[9007199254740991,-9007199254740991]"
    for value, path in [
        ({"tasks": [{"window_s": 2**53}]}, "$.tasks[0].window_s"),
        ({"lag s": [0, -(2**53) - 1]}, '$["lag s"][1]'),
    ]:
        with pytest.raises(CanonicalError) as caught:
            canonical_json(value)
        assert caught.value.path == path
        assert "9,007,199,254,740,991" in caught.value.reason


def test_the_old_form_kept_every_digit_of_a_whole_number():
    """Baton's first form (before RFC 8785 was adopted) wrote 2**60 + 1 as its digits;
    those texts still read back to the same integer and so still verify."""
    assert canonical_json(2**60 + 1, BATON_1) == "1152921504606846977"
    assert read_canonical("1152921504606846977", BATON_1) == 2**60 + 1
    assert is_canonical("1152921504606846977", BATON_1)


def test_a_large_double_written_whole_reads_back_as_that_double():
    """RFC 8785 Appendix B row 4430000000000000: ~2**68 is written without exponent; read
    back as RFC 8785 reads numbers (as doubles), the text is canonical; 2**53 + 1 written
    out is not (the double nearest it is 2**53, written 9007199254740992)."""
    assert read_canonical("295147905179352830000") == double("4430000000000000")
    assert is_canonical("295147905179352830000")
    assert is_canonical("9007199254740992")
    assert not is_canonical("9007199254740993")
    assert is_canonical("9007199254740993", BATON_1)


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
        ({"title": "bad \ud800"}, "$.title"),
        ({"x": [1, float("nan")]}, "$.x[1]"),
        ({"x": float("inf")}, "$.x"),
        ({"a b": [float("-inf")]}, '$["a b"][0]'),
        ({1: "a"}, "$"),
        ({"x": {"bad \udfff": 1}}, "$.x"),
        ({"x": {1, 2}}, "$.x"),
    ],
)
@pytest.mark.parametrize("form", [RFC_8785, BATON_1])
def test_values_without_a_canonical_text_are_refused_with_their_path(value, path, form):
    """RFC 8785 §3.2.2 (I-JSON: no NaN, infinities or lone surrogates) and §3.2.3 (keys
    are strings); the path is written as the study reader writes paths."""
    with pytest.raises(CanonicalError) as caught:
        canonical_json(value, form)
    assert caught.value.path == path


def test_sha256_matches_the_fips_check_value():
    """FIPS 180-2, Appendix B.1: SHA-256("abc")."""
    assert digest("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_study_text_is_the_canonical_json_of_its_study_file():
    study = read_study(copy.deepcopy(HOME_HEATING))
    text = canonical_text(study)
    # The home-heating test file is written back unchanged by the core (import then export
    # is lossless, test_roundtrip.py), so its canonical text can be made from the file
    # directly.
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


#: JSON values as a study file holds them: whole numbers a double holds exactly, finite
#: doubles, text (any code point but lone surrogates), lists and objects.
JSON_VALUES = st.recursive(
    st.none()
    | st.booleans()
    | st.integers(-(2**53) + 1, 2**53 - 1)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(st.characters(blacklist_categories=["Cs"])),
    lambda inner: (
        st.lists(inner, max_size=4)
        | st.dictionaries(st.text(st.characters(blacklist_categories=["Cs"])), inner, max_size=4)
    ),
    max_leaves=20,
)


@settings(max_examples=500, deadline=None)
@given(JSON_VALUES)
def test_the_old_form_is_the_text_rfc8785_writes_within_its_domain(value):
    """Against the ``rfc8785`` package (an implementation of RFC 8785): every value it
    accepts, Baton's first form wrote byte for byte as it does, so snapshots taken then
    have the hash a snapshot of the same study has now."""
    assert canonical_json(value, BATON_1).encode("utf-8") == rfc8785.dumps(value)


# -- snapshots taken in Baton's first form ------------------------------------------------

#: A study file in Baton's first canonical form, written out by hand: keys sorted, no
#: spaces, and a longest duration of 2**53 + 1 seconds kept to the digit, which the
#: RFC 8785 form refuses (RFC 7493 §2.2). Its hash is taken with hashlib, not with Baton.
OLD_TEXT = (
    '{"agents":[{"id":"pilot","kind":"human","name":"Pilot"}],'
    '"events":[{"id":"start","name":"Start of the flight","times":["08:00"]}],'
    '"format":"baton.study","links":[],'
    '"plans":[{"assignments":{"T1":{"human":"pilot"}},"id":"manual","name":"Pilot does it"}],'
    '"study":{"id":"fuel-check","scale":"sv10","title":"Fuel check"},'
    '"tasks":[{"duration_s":[2,5,9007199254740993],"id":"T1","occurs":{"event":"start"},'
    '"severity":2,"title":"Check the fuel"}],"version":1}'
)


def sha256(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_an_old_snapshot_still_verifies_in_its_own_form():
    assert verify(OLD_TEXT, sha256(OLD_TEXT), BATON_1)
    assert read_canonical(OLD_TEXT, BATON_1)["tasks"][0]["duration_s"][2] == 2**53 + 1
    # The reason the form is recorded: in the RFC 8785 form this text is not canonical
    # (2**53 + 1 is read as the double 2**53), so it would fail there.
    assert not verify(OLD_TEXT, sha256(OLD_TEXT), RFC_8785)


def test_an_old_snapshot_changed_fails_in_its_own_form():
    changed = OLD_TEXT.replace("9007199254740993", "9007199254740994")
    assert not verify(changed, sha256(OLD_TEXT), BATON_1)
    spaced = OLD_TEXT.replace(",", ", ", 1)
    assert not verify(spaced, sha256(spaced), BATON_1)
    assert not verify(OLD_TEXT, sha256(OLD_TEXT), "baton-0")


def test_an_old_snapshot_of_an_ordinary_study_has_the_hash_a_new_one_has():
    """Without whole numbers beyond 2**53 − 1 the two forms are byte for byte the same:
    the study the old text holds, lasting at most 30 s, is written today as the same
    text but for its format version (a snapshot taken today is of version 2; this study
    has no rate, so nothing else changes in the upgrade), with that text's SHA-256."""
    old = OLD_TEXT.replace("9007199254740993", "30")
    assert verify(old, sha256(old), BATON_1) and verify(old, sha256(old), RFC_8785)
    today = old.replace('"version":1}', '"version":2}')
    assert study_digest(read_study(json.loads(old))) == sha256(today)


def test_a_study_with_a_number_beyond_2_53_has_no_text_in_the_current_form():
    study = read_study(read_canonical(OLD_TEXT, BATON_1))
    with pytest.raises(CanonicalError) as caught:
        canonical_text(study)
    assert caught.value.path == "$.tasks[0].duration_s[2]"
