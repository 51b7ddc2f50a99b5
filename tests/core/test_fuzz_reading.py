"""Fuzzing the study-file reader: arbitrary JSON and mutated valid study files.

The property is the reader's contract (allocation/core/FORMAT.md): reading
never raises for bad input, every problem names a JSON path into the file, and a file
that reads without errors writes back to a file that reads again to the same study
(the round trip the import relies on). The strategies here are shared with the web
fuzz tests (tests/web/test_fuzz.py), which send the same inputs through the upload.
"""

from __future__ import annotations

import copy
import json
import re
from collections import Counter
from typing import Any

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from allocation.core import load_study, load_study_text, study_to_json
from tests.core.conftest import HOME_HEATING

#: Inputs tried per target; tests/web/test_fuzz.py prints them when the session ends.
TRIED: Counter[str] = Counter()

#: Bounded so that the suite stays fast (a few minutes for everything).
EXAMPLES = 150

#: A path as the reader writes them: ``$``, then ``.key``, ``[index]`` or ``["odd key"]``
#: steps (keys that are not identifiers are quoted; see reading.py).
PATH = re.compile(r'^\$(\.[^.\[\]]+|\[\d+\]|\["(?:[^"\\]|\\.)*"\])*')

# -- values -------------------------------------------------------------------------

#: Numbers at and past the edges: huge ints (past float range too), the float
#: extremes, negative zero, and the non-finite values Python's json reads from NaN and
#: Infinity literals.
EDGE_NUMBERS = st.sampled_from(
    [
        0,
        -1,
        -0.0,
        1e-320,
        1.7976931348623157e308,
        10**400,
        -(10**400),
        2**63,
        float("nan"),
        float("inf"),
        float("-inf"),
        86400,
        86401,
        0.5,
        1e9,
    ]
)
TEXTS = st.one_of(
    st.text(max_size=30),
    st.text(alphabet=st.characters(codec="utf-8"), min_size=1, max_size=8),
    st.sampled_from(
        [
            "",
            " ",
            "<script>alert(1)</script>",
            "T1",
            "G1",
            "resident",
            "leave",
            "human",
            "automation",
            "sv10",
            "ek10",
            "08:15",
            "25:99",
            "\u202e",
            "\ud7ff",
            "a" * 5000,
            "=cmd|' /C calc'!A0",
            "null",
            "$.tasks[0]",
            "T1\x00",
        ]
    ),
)
SCALARS = st.one_of(st.none(), st.booleans(), EDGE_NUMBERS, st.integers(), st.floats(), TEXTS)
JSON_VALUES = st.recursive(
    SCALARS,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4), st.dictionaries(TEXTS, inner, max_size=4)
    ),
    max_leaves=12,
)


def deep(depth: int) -> Any:
    """A list nested ``depth`` deep (the reader must not recurse without bound)."""
    value: Any = 1
    for _ in range(depth):
        value = [value]
    return value


# -- mutations of a valid file ------------------------------------------------------


def paths(value: Any, prefix: tuple = ()) -> list[tuple]:
    """Every place in a JSON value, as key/index steps from the root (down to a depth
    of 40: a value nested deeper by an earlier mutation is changed as a whole)."""
    found = [prefix]
    if len(prefix) >= 40:
        return found
    if isinstance(value, dict):
        for key, item in value.items():
            found += paths(item, (*prefix, key))
    elif isinstance(value, list):
        for index, item in enumerate(value):
            found += paths(item, (*prefix, index))
    return found


def _at(document: Any, steps: tuple) -> Any:
    for step in steps:
        document = document[step]
    return document


def mutate(document: dict, steps: tuple, how: str, value: Any) -> dict:
    """``document`` with one change at ``steps``: drop, replace, retype, duplicate or
    rename the value there (a new copy; the argument is left alone)."""
    document = copy.deepcopy(document)
    if not steps:
        return value if how == "replace" else document
    parent, last = _at(document, steps[:-1]), steps[-1]
    current = parent[last]
    if how == "drop":
        del parent[last]
    elif how == "replace":
        parent[last] = value
    elif how == "retype":
        if isinstance(value, bool):
            parent[last] = {"value": current}
        else:
            parent[last] = [current] if isinstance(current, str) else str(current)
    elif how == "duplicate" and isinstance(parent, list):
        parent.insert(last, copy.deepcopy(current))
    elif how == "rename" and isinstance(parent, dict):
        parent[f"{last}_" if isinstance(value, bool) else str(value)[:20]] = parent.pop(last)
    elif how == "deep":
        parent[last] = deep(300 if isinstance(value, bool) and value else 60)
    elif how == "huge":
        parent[last] = "x" * 200_000 if isinstance(current, str) else 10**4000
    return document


HOWS = ["drop", "replace", "retype", "duplicate", "rename", "deep", "huge"]


@st.composite
def mutated_studies(draw, base: dict | None = None) -> dict:
    """A valid study file (home heating unless ``base``) with one to three changes."""
    document = copy.deepcopy(base if base is not None else HOME_HEATING)
    for _ in range(draw(st.integers(1, 3))):
        if not isinstance(document, dict | list):
            break
        steps = draw(st.sampled_from(paths(document)))
        how = draw(st.sampled_from(HOWS))
        document = mutate(document, steps, how, draw(JSON_VALUES))
    return document


def to_text(document: Any) -> str:
    """JSON text the way the upload receives it (NaN and Infinity as JS literals,
    which Python's json reads and writes)."""
    return json.dumps(document, ensure_ascii=False)


@st.composite
def raw_texts(draw) -> tuple[str, str | bytes]:
    """Text that is not a clean JSON encoding: repeated keys, a BOM, truncation, NUL,
    bytes that are not UTF-8, deep nesting, the empty file; with the kind of damage."""
    text = to_text(draw(mutated_studies()))
    kind = draw(
        st.sampled_from(["repeat", "bom", "cut", "nul", "latin1", "nest", "empty", "trailing"])
    )
    if kind == "repeat":
        # Repeat one key's pair inside its object, as a hand-edited file might.
        return kind, text.replace('"title": ', '"title": "again", "title": ', 1)
    if kind == "bom":
        return kind, "\ufeff" + text
    if kind == "cut":
        return kind, text[: draw(st.integers(0, max(0, len(text) - 1)))]
    if kind == "nul":
        return kind, text.replace('"', '"\x00', 1)
    if kind == "latin1":
        return kind, ("é" + text).encode("latin-1", errors="replace")
    if kind == "nest":
        depth = draw(st.sampled_from([50, 999, 5000, 200_000]))
        return kind, "[" * depth + "]" * depth
    if kind == "empty":
        return kind, draw(st.sampled_from(["", " ", "\n", "null", "0", "[]", "{}"]))
    return kind, text + draw(st.sampled_from([",", "}", " x", "\n\n{}"]))


# -- the properties -------------------------------------------------------------------


def assert_read_contract(result) -> None:
    """Problems with a JSON path and a message; an error-free study writes back to a
    file that reads again, error-free, to the same file."""
    for problem in result.problems:
        assert PATH.fullmatch(problem.path), problem
        assert problem.message.strip(), problem
        assert problem.level in {"error", "warning"}
    if result.ok:
        written = study_to_json(result.study)
        again = load_study(json.loads(json.dumps(written, allow_nan=False)))
        assert again.ok, again.problems
        assert study_to_json(again.study) == written


FUZZ = settings(
    max_examples=EXAMPLES,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)


@FUZZ
@given(JSON_VALUES)
def test_arbitrary_json_is_refused_with_paths_never_raised(value):
    TRIED["core reader: arbitrary JSON"] += 1
    assert_read_contract(load_study(value))


@FUZZ
@given(mutated_studies())
def test_mutated_study_files_read_with_paths_never_raised(document):
    TRIED["core reader: mutated study files"] += 1
    result = load_study(document)
    assert_read_contract(result)


@FUZZ
@given(raw_texts())
def test_broken_study_text_is_refused_with_paths_never_raised(damaged):
    TRIED["core reader: broken JSON text"] += 1
    kind, text = damaged
    result = load_study_text(text)
    assert_read_contract(result)
    if kind == "repeat" and '"title": "again"' in text:
        # A repeated key is refused, never silently resolved (reading.parse_json_text).
        assert not result.ok
