"""Reading a study file (JSON format version 2, or version 1 upgraded) into the model.

Reading checks the shape of every value: unknown and missing keys, types, enumerations,
ranges, times of day. It collects every problem with its JSON path rather than stopping
at the first, and builds as much of the study as it can so that the cross-reference
checks of :mod:`allocation.core.checks` can run on the rest.

A version 1 file is upgraded as it is read, losslessly: a rate without ``when`` follows
the awake day (version 1's default; version 2's is ``any``), and where more than one
person has an asleep window a rate that follows someone's day takes the first of them,
with a warning at its path (version 1 named no one).
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable, Iterable
from typing import Any

from .assumptions import check_assumptions
from .errors import Problem
from .limits import (
    ESCALATE_AFTER_MAX_S,
    ESCALATION_PEOPLE_MAX,
    INTEGER_DIGITS,
    LABEL_LENGTH,
    MAX_PER_DAY,
    MODE_TIMES_MAX,
    MONITORING_LOOKS_MAX,
    NOTE_LENGTH,
    PHRASE_LENGTH,
    SIMULATION_MAX_BIN_S,
    SIMULATION_MIN_BIN_S,
    STUDY_MAX_ITEMS,
    STUDY_MAX_PLAN_TASKS,
    WORD_LENGTH,
)
from .model import (
    ANY_MODE,
    DETECTION,
    MONITORING_STYLES,
    Agent,
    Assignment,
    Event,
    Lag,
    Link,
    Mode,
    ModeMap,
    Monitoring,
    Occurs,
    Plan,
    Range,
    Reliability,
    Study,
    Task,
    Transition,
)
from .objective_file import OBJECTIVE_KEYS
from .vocabulary import (
    AGENT_KINDS,
    ASSIGNMENT_STATUSES,
    CHANNELS,
    CUES,
    EVENT_WHEN,
    FREQUENCY_BANDS,
    INITIATORS,
    LINK_KINDS,
    RISK_BAND_NAMES,
    SCALES,
    STAGES,
    TRANSITION_CAUSES,
)

#: The keys a study's risk policy may hold.
RISK_POLICY_KEYS = (
    "likelihood_bands",
    "frequency_bands",
    "band_matrix",
    "review",
    "unacceptable",
    "note",
    "critical_severity",
)

__all__ = [
    "FORMAT_NAME",
    "RISK_POLICY_KEYS",
    "FORMAT_VERSION",
    "FORMAT_VERSIONS",
    "StudyReader",
    "child_path",
    "parse_json_text",
]

FORMAT_NAME = "baton.study"
FORMAT_VERSION = 2
#: The versions this reader reads; older ones are upgraded as they are read.
FORMAT_VERSIONS = (1, 2)

_IDENTIFIER = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}\Z")
_PLAIN_KEY = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*\Z")
_CLOCK = re.compile(r"^([0-9]{2}):([0-9]{2})(?::([0-9]{2}))?\Z")
_MISSING = object()


def child_path(path: str, key: str | int) -> str:
    """The JSON path of ``key`` inside the value at ``path``."""
    if isinstance(key, int):
        return f"{path}[{key}]"
    if _PLAIN_KEY.match(key):
        return f"{path}.{key}"
    return f"{path}[{json.dumps(key)}]"


class _TooManyDigits(ValueError):
    pass


def _parse_int(digits: str) -> int:
    """An integer of the file, refusing more digits than Python converts."""
    if len(digits.lstrip("-")) > INTEGER_DIGITS:
        raise _TooManyDigits(
            f"the file holds an integer of {len(digits.lstrip('-'))} digits (it starts "
            f"{digits[:12]}…); numbers may have at most {INTEGER_DIGITS} digits"
        )
    return int(digits)


def _surrogate_in(text: str) -> str | None:
    for char in text:
        if "\ud800" <= char <= "\udfff":
            return f"U+{ord(char):04X}"
    return None


def _lone_surrogate(value: Any, path: str) -> Problem | None:
    """The first string or key holding a lone surrogate (not text: no UTF-8 for it)."""
    stack = [(value, path)]
    while stack:
        item, where = stack.pop()
        if isinstance(item, str):
            code = _surrogate_in(item)
            if code:
                return Problem(where, f"contains a lone surrogate ({code}), which is not text")
        elif isinstance(item, dict):
            for key, child in reversed(list(item.items())):
                code = _surrogate_in(key)
                if code:
                    return Problem(
                        where, f"a key contains a lone surrogate ({code}), which is not text"
                    )
                stack.append((child, child_path(where, key)))
        elif isinstance(item, list):
            stack.extend(
                (child, child_path(where, i)) for i, child in reversed(list(enumerate(item)))
            )
    return None


def parse_json_text(text: str | bytes) -> tuple[Any, list[Problem]]:
    """Parse JSON text; a syntax error becomes a problem naming line and column.

    A key repeated inside one object is an error too (JSON parsers keep only the last).
    """
    repeated: list[str] = []

    def unique_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
        result: dict[str, Any] = {}
        for key, value in pairs:
            if key in result:
                repeated.append(key)
            result[key] = value
        return result

    if isinstance(text, bytes) and (
        text.startswith((b"\xff\xfe", b"\xfe\xff"))
        or (len(text) >= 2 and (text[0] == 0 or text[1] == 0))
    ):
        # json.loads would detect UTF-16 and UTF-32 and read them; the format is UTF-8 only.
        return None, [
            Problem("$", "the file must be UTF-8 text (this looks like UTF-16 or UTF-32)")
        ]
    try:
        data = json.loads(text, object_pairs_hook=unique_keys, parse_int=_parse_int)
        if repeated:
            keys = ", ".join(json.dumps(key) for key in dict.fromkeys(repeated))
            return None, [
                Problem("$", f"a key appears twice in one object: {keys}; give each key once")
            ]
        surrogate = _lone_surrogate(data, "$")
        if surrogate:
            return None, [surrogate]
        return data, []
    except _TooManyDigits as error:
        return None, [Problem("$", str(error))]
    except UnicodeDecodeError:
        return None, [Problem("$", "the file is not UTF-8 text")]
    except RecursionError:
        return None, [Problem("$", "the file is not valid JSON: it is nested too deeply")]
    except json.JSONDecodeError as error:
        message = f"the file is not valid JSON: {error.msg} at line {error.lineno}, "
        message += f"column {error.colno}"
        return None, [Problem("$", message)]


def _finite(value: int | float) -> bool:
    """Whether a number is finite; an int too large for a float counts as not finite."""
    try:
        return math.isfinite(value)
    except OverflowError:
        return False


def _describe(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true or false"
    if isinstance(value, int | float):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "an object"
    return type(value).__name__


class StudyReader:
    """Turns a decoded study file into a :class:`Study`, collecting problems.

    Use :func:`allocation.core.fileformat.load_study`; this class is the machinery.
    """

    def __init__(self) -> None:
        self.problems: list[Problem] = []
        self.located: dict[int, str] = {}
        self.version = FORMAT_VERSION
        # The humans with an asleep window, in file order (for upgrading version 1).
        self.sleepers: list[Agent] = []

    def locate(self, obj: object, default: str) -> str:
        """The JSON path ``obj`` was read from (``default`` if it was not read here)."""
        return self.located.get(id(obj), default)

    # -- generic value checks -------------------------------------------------------

    def error(self, path: str, message: str) -> None:
        self.problems.append(Problem(path, message))

    def warn(self, path: str, message: str) -> None:
        self.problems.append(Problem(path, message, "warning"))

    def obj(
        self, value: Any, path: str, required: Iterable[str], optional: Iterable[str] = ()
    ) -> dict[str, Any] | None:
        """Check an object's type and keys; ``None`` when it is not an object."""
        if not isinstance(value, dict):
            self.error(path, f"must be an object, not {_describe(value)}")
            return None
        required = tuple(required)
        allowed = set(required) | set(optional)
        for key in value:
            if key not in allowed:
                known = ", ".join(sorted(allowed))
                self.error(child_path(path, key), f"is not a known key here (known: {known})")
        for key in required:
            if key not in value:
                self.error(child_path(path, key), "is missing")
        return value

    def listing(self, value: Any, path: str) -> list[Any]:
        if not isinstance(value, list):
            self.error(path, f"must be a list, not {_describe(value)}")
            return []
        return value

    def text(self, value: Any, path: str) -> str | None:
        """Text that is not blank (an optional text is left out rather than blank)."""
        if not isinstance(value, str):
            self.error(path, f"must be text, not {_describe(value)}")
            return None
        if not value.strip():
            self.error(path, "must not be blank (leave an optional key out instead)")
            return None
        if "\x00" in value:
            # No database stores it in text (PostgreSQL refuses it outright).
            self.error(path, "contains the NUL character (\\u0000), which text may not hold")
            return None
        return value

    def label(self, value: Any, path: str) -> str | None:
        """A name or title: text of at most :data:`LABEL_LENGTH` characters."""
        return self._short(self.text(value, path), path, LABEL_LENGTH)

    def phrase(self, value: Any, path: str) -> str | None:
        """A task title or a trigger: text of at most :data:`PHRASE_LENGTH` characters."""
        return self._short(self.text(value, path), path, PHRASE_LENGTH)

    def note(self, value: Any, path: str) -> str | None:
        """Free text (a description, notes, a rationale): at most :data:`NOTE_LENGTH`."""
        return self._short(self.text(value, path), path, NOTE_LENGTH)

    def word(self, value: Any, path: str) -> str | None:
        """A capability (an item of a list of words): at most :data:`WORD_LENGTH`."""
        return self._short(self.text(value, path), path, WORD_LENGTH)

    def _short(self, value: str | None, path: str, limit: int) -> str | None:
        if value is not None and len(value) > limit:
            self.error(path, f"is {len(value):,} characters long; at most {limit} are kept")
            return None
        return value

    def identifier(self, value: Any, path: str) -> str | None:
        if not isinstance(value, str):
            self.error(path, f"must be an id (text), not {_describe(value)}")
            return None
        if not _IDENTIFIER.match(value):
            self.error(
                path,
                f"{value!r} is not a valid id: use 1-64 letters, digits, '.', '-' or '_', "
                "starting with a letter or digit",
            )
            return None
        return value

    def number(
        self,
        value: Any,
        path: str,
        *,
        minimum: float | None = 0,
        positive: bool = False,
        maximum: float | None = None,
    ) -> int | float | None:
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.error(path, f"must be a number, not {_describe(value)}")
            return None
        if not _finite(value):
            self.error(path, "must be a finite number")
            return None
        if positive and value <= 0:
            self.error(path, f"must be more than 0, not {value:g}")
            return None
        if minimum is not None and value < minimum:
            self.error(path, f"must be at least {minimum:g}, not {value:g}")
            return None
        if maximum is not None and value > maximum:
            self.error(path, f"must be at most {maximum:g}, not {value:g}")
            return None
        return value

    def integer(self, value: Any, path: str, low: int, high: int) -> int | None:
        if isinstance(value, bool) or not isinstance(value, int):
            self.error(path, f"must be a whole number from {low} to {high}, not {value!r}")
            return None
        if not low <= value <= high:
            self.error(path, f"must be from {low} to {high}, not {value}")
            return None
        return value

    def choice(self, value: Any, path: str, options: Iterable[str]) -> str | None:
        options = tuple(options)
        if not isinstance(value, str) or value not in options:
            allowed = ", ".join(options)
            self.error(path, f"must be one of {allowed}, not {json.dumps(value)}")
            return None
        return value

    def clock(self, value: Any, path: str) -> str | None:
        if not isinstance(value, str):
            self.error(path, f'must be a time of day as "HH:MM", not {_describe(value)}')
            return None
        match = _CLOCK.match(value)
        if not match or int(match[1]) > 23 or int(match[2]) > 59 or int(match[3] or 0) > 59:
            self.error(path, f'{value!r} is not a time of day: use "HH:MM" from 00:00 to 23:59')
            return None
        return value

    def strings(self, value: Any, path: str) -> tuple[str, ...] | None:
        items = self.listing(value, path)
        if not isinstance(value, list):
            return None
        good = [self.word(item, child_path(path, i)) for i, item in enumerate(items)]
        return tuple(item for item in good if item is not None)

    def needs(self, value: Any, path: str) -> tuple[str, ...] | dict[str, tuple[str, ...]] | None:
        """Capabilities for every stage (a list), or per stage (an object by stage)."""
        if not isinstance(value, dict):
            return self.strings(value, path)
        data = self.obj(value, path, (), STAGES)
        if data is None:
            return None
        return {
            stage: self.strings(names, child_path(path, stage)) or ()
            for stage, names in data.items()
            if stage in STAGES
        }

    def range_(self, value: Any, path: str) -> Range | None:
        """A ``[min, typical, max]`` list or a single number, all at least 0."""
        if isinstance(value, list):
            if len(value) != 3:
                self.error(path, f"must be [min, typical, max], not a list of {len(value)}")
                return None
            low, typical, high = (
                self.number(item, child_path(path, i)) for i, item in enumerate(value)
            )
            if low is None or typical is None or high is None:
                return None
            if not low <= typical <= high:
                self.error(path, f"must be in order min <= typical <= max, not {value}")
                return None
            return Range(low, typical, high)
        number = self.number(value, path)
        return None if number is None else Range.exactly(number)

    def lag(self, value: Any, path: str) -> Lag | None:
        if isinstance(value, list):
            if len(value) != 2:
                self.error(path, f"must be [min, max], not a list of {len(value)}")
                return None
            shortest, longest = (
                self.number(item, child_path(path, i)) for i, item in enumerate(value)
            )
            if shortest is None or longest is None:
                return None
            if shortest > longest:
                self.error(path, f"must be in order min <= max, not {value}")
                return None
            return Lag(shortest, longest)
        number = self.number(value, path)
        return None if number is None else Lag.exactly(number)

    def optional(
        self, data: dict[str, Any], key: str, path: str, read: Callable[[Any, str], Any]
    ) -> Any:
        """Read ``data[key]`` with ``read`` if the key is there, else ``None``."""
        value = data.get(key, _MISSING)
        if value is _MISSING:
            return None
        return read(value, child_path(path, key))

    def entries(self, data: dict[str, Any], key: str, path: str, read: Callable) -> tuple:
        """Read every item of the list at ``data[key]``, dropping unreadable ones."""
        if key not in data:
            return ()
        list_path = child_path(path, key)
        result = []
        for index, item in enumerate(self.listing(data[key], list_path)):
            item_path = child_path(list_path, index)
            value = read(item, item_path)
            if value is not None:
                self.located[id(value)] = item_path
                result.append(value)
        return tuple(result)

    # -- the study ------------------------------------------------------------------

    def _too_large(self, root: dict[str, Any]) -> bool:
        """Whether a list of the study holds more items than a study may; such a file is
        not read further, so its size costs nothing more than this count."""
        too_large = False
        for key, most in STUDY_MAX_ITEMS.items():
            items = root.get(key)
            if isinstance(items, list) and len(items) > most:
                self.error(
                    child_path("$", key),
                    f"holds {len(items):,} {key}; a study may hold at most {most:,} "
                    f"(limit STUDY_MAX_{key.upper()})",
                )
                too_large = True
        tasks, plans = root.get("tasks"), root.get("plans")
        if not too_large and isinstance(tasks, list) and isinstance(plans, list):
            pairs = len(tasks) * len(plans)
            if pairs > STUDY_MAX_PLAN_TASKS:
                # Each plan is analysed, edited and reviewed over every task.
                self.error(
                    "$.plans",
                    f"holds {len(plans):,} plans of a study of {len(tasks):,} tasks, "
                    f"{pairs:,} plan-task pairs; a study may hold at most "
                    f"{STUDY_MAX_PLAN_TASKS:,} (limit STUDY_MAX_PLAN_TASKS): fewer plans, "
                    "or the study split in two",
                )
                too_large = True
        return too_large

    def study(self, data: Any) -> Study | None:
        root = self.obj(
            data,
            "$",
            ("format", "version", "study", "agents", "events", "tasks", "links", "plans"),
        )
        if root is None or self._too_large(root):
            return None
        if "format" in root and root["format"] != FORMAT_NAME:
            self.error(
                "$.format", f"must be {json.dumps(FORMAT_NAME)}, not {json.dumps(root['format'])}"
            )
        if "version" in root:
            version = root["version"]
            if isinstance(version, bool) or version not in FORMAT_VERSIONS:
                self.error(
                    "$.version",
                    f"must be {FORMAT_VERSION} (or 1, upgraded as it is read); this Baton "
                    f"reads versions 1 and 2, not {json.dumps(version)}",
                )
            else:
                self.version = int(version)
        header = (
            self.obj(
                root["study"],
                "$.study",
                ("id", "title", "scale"),
                ("description", "bin_s", "assumptions", "risk_policy", "objective"),
            )
            if "study" in root
            else None
        )
        if header is None:
            header = {}  # already reported; read the rest so that every error is found
        path = "$.study"
        study_id = self.identifier(header.get("id", "study"), child_path(path, "id"))
        title = self.label(header.get("title", "?"), child_path(path, "title"))
        scale = self.choice(header.get("scale", "sv10"), child_path(path, "scale"), SCALES)
        description = self.optional(header, "description", path, self.note)
        bin_s = self.optional(header, "bin_s", path, self.bin_width)
        assumptions = self.optional(header, "assumptions", path, self.assumptions)
        risk_policy = self.optional(header, "risk_policy", path, self.risk_policy)
        objective = self.optional(header, "objective", path, self.objective)
        if objective:
            # The objective's home in the file; the analyses read it with the other
            # assumptions (methods document, #objective).
            given = set(objective) & set(assumptions or {})
            for key in sorted(given):
                self.error(
                    child_path(child_path(path, "assumptions"), key),
                    "is given twice: here and in study.objective; keep it in study.objective",
                )
            assumptions = {**(assumptions or {}), **objective}
        # Agents first: upgrading a version 1 rate needs to know who sleeps.
        agents = self.entries(root, "agents", "$", self.agent)
        self.sleepers = [agent for agent in agents if agent.is_human and agent.asleep]
        return Study(
            id=study_id or "study",
            title=title or "?",
            scale=scale or "sv10",
            description=description,
            bin_s=bin_s,
            assumptions=assumptions,
            risk_policy=risk_policy,
            agents=agents,
            events=self.entries(root, "events", "$", self.event),
            tasks=self.entries(root, "tasks", "$", self.task),
            links=self.entries(root, "links", "$", self.link),
            plans=self.entries(root, "plans", "$", self.plan),
        )

    def objective(self, value: Any, path: str) -> dict[str, Any] | None:
        """``{"weights": {...}, "reference": {...}}``: the study objective's weights and
        reference points, as the assumptions ``objective_weights`` and
        ``objective_reference``."""
        data = self.obj(value, path, (), tuple(OBJECTIVE_KEYS))
        if data is None:
            return None
        found = {}
        for key, assumption in OBJECTIVE_KEYS.items():
            if key not in data:
                continue
            problems = check_assumptions({assumption: data[key]})
            for _name, message in problems:
                self.error(child_path(path, key), message)
            if not problems:
                found[assumption] = data[key]
        return found

    def bin_width(self, value: Any, path: str) -> int | float | None:
        """The workload bin, within ``SIMULATION_MIN_BIN_S`` and ``SIMULATION_MAX_BIN_S``:
        the simulation's memory grows as the bin narrows."""
        width = self.number(value, path, positive=True)
        if width is None:
            return None
        if width < SIMULATION_MIN_BIN_S:
            self.error(
                path,
                f"a workload bin of {width:g} s is finer than the limit of "
                f"{SIMULATION_MIN_BIN_S:g} s (SIMULATION_MIN_BIN_S): finer bins add nothing "
                "to the time line and multiply the simulation's memory",
            )
            return None
        if width > SIMULATION_MAX_BIN_S:
            self.error(
                path,
                f"a workload bin of {width:g} s is wider than the limit of "
                f"{SIMULATION_MAX_BIN_S:g} s (SIMULATION_MAX_BIN_S), one day",
            )
            return None
        return width

    def assumptions(self, value: Any, path: str) -> dict[str, Any] | None:
        if not isinstance(value, dict):
            self.error(path, f"must be an object, not {_describe(value)}")
            return None
        for key, message in check_assumptions(value):
            self.error(child_path(path, key), message)
        return value

    def risk_policy(self, value: Any, path: str) -> dict[str, Any] | None:
        policy = self.obj(
            value,
            path,
            (),
            RISK_POLICY_KEYS,
        )
        if policy is None:
            return None
        if "frequency_bands" in policy:
            self.frequency_bands(policy["frequency_bands"], child_path(path, "frequency_bands"))
        if "band_matrix" in policy:
            self.band_matrix(policy["band_matrix"], child_path(path, "band_matrix"))
        if "likelihood_bands" in policy:
            bands_path = child_path(path, "likelihood_bands")
            bands = self.listing(policy["likelihood_bands"], bands_path)
            cuts = [
                self.number(b, child_path(bands_path, i), positive=True, maximum=1)
                for i, b in enumerate(bands)
            ]
            known = [cut for cut in cuts if cut is not None]
            for i, cut in enumerate(cuts):
                if cut == 1:  # the bands lie in (0, 1): a cut at 1 leaves the top band empty
                    self.error(child_path(bands_path, i), "must be less than 1")
            if isinstance(policy["likelihood_bands"], list) and len(bands) != 4:
                self.error(bands_path, "must list 4 cut points between the 5 likelihood bands")
            elif len(known) == len(cuts) and any(
                a >= b for a, b in zip(known, known[1:], strict=False)
            ):
                self.error(bands_path, "must rise strictly from band to band")
        review = self.optional(policy, "review", path, lambda v, p: self.integer(v, p, 1, 25))
        unacceptable = self.optional(
            policy, "unacceptable", path, lambda v, p: self.integer(v, p, 1, 25)
        )
        if review is not None and unacceptable is not None and review > unacceptable:
            self.error(
                child_path(path, "review"),
                f"must not be above unacceptable ({review} > {unacceptable})",
            )
        self.optional(policy, "note", path, self.note)
        # The severity from which a task counts as safety-critical (1-5, default 4).
        self.optional(policy, "critical_severity", path, lambda v, p: self.integer(v, p, 1, 5))
        return value

    def frequency_bands(self, value: Any, path: str) -> None:
        """Four cuts in expected slips a year, falling strictly: frequent, probable,
        occasional, remote (below the last, improbable)."""
        bands = self.listing(value, path)
        cuts = [self.number(b, child_path(path, i), positive=True) for i, b in enumerate(bands)]
        known = [cut for cut in cuts if cut is not None]
        if isinstance(value, list) and len(bands) != 4:
            self.error(path, "must list 4 cut points between the 5 frequency bands")
        elif len(known) == len(cuts) and any(
            a <= b for a, b in zip(known, known[1:], strict=False)
        ):
            self.error(path, "must fall strictly from frequent to remote, like [10, 1, 0.1, 0.01]")

    def band_matrix(self, value: Any, path: str) -> None:
        """Each frequency band's row of five bands, by severity 1 to 5."""
        rows = self.obj(value, path, FREQUENCY_BANDS, ())
        if rows is None:
            return
        for name in FREQUENCY_BANDS:
            if name not in rows:
                continue
            row_path = child_path(path, name)
            cells = self.listing(rows[name], row_path)
            if isinstance(rows[name], list) and len(cells) != 5:
                self.error(row_path, "must give 5 bands, one per severity from 1 to 5")
                continue
            for i, cell in enumerate(cells):
                self.choice(cell, child_path(row_path, i), RISK_BAND_NAMES)

    def agent(self, value: Any, path: str) -> Agent | None:
        data = self.obj(
            value,
            path,
            ("id", "name", "kind"),
            ("capabilities", "asleep", "on_duty", "response_s", "notes"),
        )
        if data is None or "id" not in data:
            return None
        agent_id = self.identifier(data["id"], child_path(path, "id"))
        if agent_id is None:
            return None
        kind = self.optional(data, "kind", path, lambda v, p: self.choice(v, p, AGENT_KINDS))
        return Agent(
            id=agent_id,
            name=self.optional(data, "name", path, self.label) or agent_id,
            kind=kind or "human",
            capabilities=self.optional(data, "capabilities", path, self.strings),
            asleep=self.optional(data, "asleep", path, self.asleep),
            response_s=self.optional(data, "response_s", path, self.response),
            notes=self.optional(data, "notes", path, self.note),
            # Duty hours are [from, to] like the asleep window.
            on_duty=self.optional(data, "on_duty", path, self.asleep),
        )

    def asleep(self, value: Any, path: str) -> tuple[str, str] | None:
        items = self.listing(value, path)
        if isinstance(value, list) and len(items) != 2:
            self.error(path, "must be [from, to] as two times of day")
            return None
        clocks = [self.clock(item, child_path(path, i)) for i, item in enumerate(items)]
        if len(clocks) != 2:
            return None
        start, end = clocks
        if start is None or end is None:
            return None
        if start == end:
            self.error(path, "must not start and end at the same time")
            return None
        return (start, end)

    def response(self, value: Any, path: str) -> dict[str, Range] | None:
        data = self.obj(value, path, (), EVENT_WHEN)
        if data is None:
            return None
        result = {}
        for key in EVENT_WHEN:
            if key in data:
                latency = self.range_(data[key], child_path(path, key))
                if latency is not None:
                    result[key] = latency
        return result

    def _occurrence_fields(self, data: dict[str, Any], path: str) -> dict[str, Any]:
        """The ways of occurring shared by events and tasks: times, per_day, every_days."""
        fields: dict[str, Any] = {}
        if "times" in data:
            times_path = child_path(path, "times")
            items = self.listing(data["times"], times_path)
            clocks = [self.clock(item, child_path(times_path, i)) for i, item in enumerate(items)]
            if isinstance(data["times"], list) and not items:
                self.error(times_path, "must list at least one time of day")
            fields["times"] = tuple(c for c in clocks if c is not None)
        fields["jitter_s"] = self.optional(data, "jitter_s", path, self.number)
        fields["per_day"] = self.optional(
            data,
            "per_day",
            path,
            lambda v, p: self.number(v, p, positive=True, maximum=MAX_PER_DAY),
        )
        fields["when"] = self.optional(
            data, "when", path, lambda v, p: self.choice(v, p, EVENT_WHEN)
        )
        fields["every_days"] = self.optional(
            data,
            "every_days",
            path,
            lambda v, p: self.number(v, p, positive=True, minimum=1 / MAX_PER_DAY),
        )
        fields["of"] = self.optional(data, "of", path, self.identifier)
        self._one_way(data, path, ("times", "per_day", "every_days", "event"))
        if "jitter_s" in data and "times" not in data:
            self.error(child_path(path, "jitter_s"), "goes only with times")
        if "when" in data and "per_day" not in data:
            self.error(child_path(path, "when"), "goes only with per_day")
        if "of" in data and "per_day" not in data and "every_days" not in data:
            self.error(child_path(path, "of"), "goes only with per_day or every_days")
        if self.version == 1:
            self._upgrade_rate(fields, data, path)
        return fields

    def _upgrade_rate(self, fields: dict[str, Any], data: dict[str, Any], path: str) -> None:
        """A version 1 rate in version 2's terms: the same figures, said explicitly."""
        if "per_day" in data and "when" not in data:
            fields["when"] = "awake"  # version 1's default; version 2's is "any"
        follows_a_day = fields.get("when") in ("awake", "asleep") or "every_days" in data
        if follows_a_day and "of" not in data and len(self.sleepers) > 1:
            first = self.sleepers[0]
            fields["of"] = first.id
            others = [agent.id for agent in self.sleepers[1:]]
            also = f"{' and '.join(others)} {'sleeps' if len(others) == 1 else 'sleep'} too"
            way = "when" if "when" in data else "per_day" if "per_day" in data else "every_days"
            self.warn(
                child_path(path, way),
                f"taken as the day and night of {first.id!r}, the first person listed with an "
                f"asleep window (a version 1 file names no one; {also}): say whose "
                'with "of"',
            )

    def _one_way(self, data: dict[str, Any], path: str, ways: tuple[str, ...]) -> None:
        given = [way for way in ways if way in data]
        if len(given) > 1:
            self.error(path, f"must occur in one way only, but gives {' and '.join(given)}")

    def event(self, value: Any, path: str) -> Event | None:
        data = self.obj(
            value,
            path,
            ("id", "name"),
            ("times", "jitter_s", "per_day", "when", "of", "every_days", "notes"),
        )
        if data is None or "id" not in data:
            return None
        event_id = self.identifier(data["id"], child_path(path, "id"))
        if event_id is None:
            return None
        fields = self._occurrence_fields(data, path)
        if not any(way in data for way in ("times", "per_day", "every_days")):
            self.error(path, "must occur in one way: times, per_day or every_days")
        return Event(
            id=event_id,
            name=self.optional(data, "name", path, self.label) or event_id,
            notes=self.optional(data, "notes", path, self.note),
            **fields,
        )

    def occurs(self, value: Any, path: str) -> Occurs | None:
        data = self.obj(
            value,
            path,
            (),
            ("times", "jitter_s", "per_day", "when", "of", "every_days", "event", "probability"),
        )
        if data is None:
            return None
        fields = self._occurrence_fields(data, path)
        if not any(way in data for way in ("times", "per_day", "every_days", "event")):
            self.error(
                path,
                "must give one way of occurring: times, per_day, every_days "
                "or event (leave occurs out for a task that occurs only in a chain)",
            )
        if "probability" in data and "event" not in data:
            self.error(child_path(path, "probability"), "goes only with event")
        return Occurs(
            event=self.optional(data, "event", path, self.identifier),
            probability=self.optional(
                data, "probability", path, lambda v, p: self.number(v, p, positive=True, maximum=1)
            ),
            **fields,
        )

    def demands(self, value: Any, path: str) -> dict[str, Any] | None:
        data = self.obj(value, path, (), CHANNELS)
        if data is None:
            return None
        for channel in CHANNELS:
            self.optional(data, channel, path, lambda v, p: self.number(v, p, maximum=7))
        return value

    def split(self, value: Any, path: str) -> dict[str, Any] | None:
        data = self.obj(value, path, (), STAGES)
        if data is None:
            return None
        shares = [self.optional(data, stage, path, self.number) for stage in STAGES]
        if None not in [shares[i] for i, stage in enumerate(STAGES) if stage in data]:
            total = sum(share for share in shares if share is not None)
            if abs(total - 1) > 1e-6:
                self.error(path, f"shares must add up to 1, not {total:g}")
        return value

    def task(self, value: Any, path: str) -> Task | None:
        data = self.obj(
            value,
            path,
            ("id", "title"),
            (
                "parent",
                "occurs",
                "duration_s",
                "window_s",
                "severity",
                "demands",
                "split",
                "needs",
                "notes",
            ),
        )
        if data is None or "id" not in data:
            return None
        task_id = self.identifier(data["id"], child_path(path, "id"))
        if task_id is None:
            return None
        return Task(
            id=task_id,
            title=self.optional(data, "title", path, self.phrase) or task_id,
            parent=self.optional(data, "parent", path, self.identifier),
            occurs=self.optional(data, "occurs", path, self.occurs),
            duration_s=self.optional(data, "duration_s", path, self.range_),
            window_s=self.optional(
                data, "window_s", path, lambda v, p: self.number(v, p, positive=True)
            ),
            severity=self.optional(data, "severity", path, lambda v, p: self.integer(v, p, 1, 5)),
            demands=self.optional(data, "demands", path, self.demands),
            split=self.optional(data, "split", path, self.split),
            needs=self.optional(data, "needs", path, self.needs),
            notes=self.optional(data, "notes", path, self.note),
        )

    def link(self, value: Any, path: str) -> Link | None:
        data = self.obj(value, path, ("from", "to", "kind"), ("lag_s", "probability", "notes"))
        if data is None or "from" not in data or "to" not in data:
            return None
        source = self.identifier(data["from"], child_path(path, "from"))
        target = self.identifier(data["to"], child_path(path, "to"))
        kind = self.optional(data, "kind", path, lambda v, p: self.choice(v, p, LINK_KINDS))
        if source is None or target is None:
            return None
        if kind == "informs":
            for key in ("lag_s", "probability"):
                if key in data:
                    self.error(child_path(path, key), 'goes only with kind "precedes"')
        return Link(
            source=source,
            target=target,
            kind=kind or "precedes",
            lag_s=self.optional(data, "lag_s", path, self.lag),
            probability=self.optional(
                data, "probability", path, lambda v, p: self.number(v, p, positive=True, maximum=1)
            ),
            notes=self.optional(data, "notes", path, self.note),
        )

    def levels(self, value: Any, path: str) -> int | dict[str, int] | None:
        if isinstance(value, dict):
            data = self.obj(value, path, STAGES)
            if data is None:
                return None
            levels = {
                stage: self.integer(data[stage], child_path(path, stage), 1, 10)
                for stage in STAGES
                if stage in data
            }
            known = {stage: level for stage, level in levels.items() if level is not None}
            if len(known) < len(STAGES):
                return None
            return known
        return self.integer(value, path, 1, 10)

    def assignment(self, value: Any, path: str) -> Assignment | None:
        data = self.obj(
            value,
            path,
            (),
            (
                "human",
                "automation",
                "levels",
                "duration_s",
                "accountable",
                "feedback",
                "initiator",
                "status",
                "rationale",
                "applies",
                "monitoring",
                "pass_through",
                "reliability",
                "escalate_after_s",
            ),
        )
        if data is None:
            return None
        applies = self.optional(data, "applies", path, self.applies)
        if applies is False:
            for key in sorted(set(data) - {"applies", "rationale", "status", "pass_through"}):
                self.error(
                    child_path(path, key),
                    "goes only with a task that applies; "
                    'an assignment with "applies": false names no one',
                )
        elif "pass_through" in data:
            self.error(
                child_path(path, "pass_through"),
                'goes only with "applies": false (a task not done whose chain goes on)',
            )
        elif "human" not in data and "automation" not in data:
            self.error(
                path,
                "must name a human, an automation, or both (or say "
                '"applies": false for a task not done under this plan)',
            )
        people = self.optional(data, "human", path, self.people_asked) or ()
        if len(people) > 1 and "escalate_after_s" not in data:
            self.error(
                child_path(path, "human"),
                "lists people to ask in turn, so the assignment needs escalate_after_s: how "
                "long the one asked has to answer before the next is asked",
            )
        if "escalate_after_s" in data and not isinstance(data.get("human"), list):
            self.error(
                child_path(path, "escalate_after_s"),
                "goes only with a human given as a list of at least two people, asked in turn",
            )
        assignment = Assignment(
            human=people[0] if people else None,
            escalation=tuple(people[1:]) or None,
            escalate_after_s=self.optional(
                data,
                "escalate_after_s",
                path,
                lambda v, p: self.number(v, p, positive=True, maximum=ESCALATE_AFTER_MAX_S),
            ),
            automation=self.optional(data, "automation", path, self.identifier),
            # An unreadable level is kept as given, so the checks do not add "needs levels".
            levels=self.optional(data, "levels", path, self.levels) or data.get("levels"),
            duration_s=self.optional(data, "duration_s", path, self.range_),
            accountable=self.optional(data, "accountable", path, self.identifier),
            feedback=self.optional(data, "feedback", path, lambda v, p: self.choice(v, p, CUES)),
            initiator=self.optional(
                data, "initiator", path, lambda v, p: self.choice(v, p, INITIATORS)
            ),
            status=self.optional(
                data, "status", path, lambda v, p: self.choice(v, p, ASSIGNMENT_STATUSES)
            ),
            rationale=self.optional(data, "rationale", path, self.note),
            applies=applies,
            monitoring=self.optional(data, "monitoring", path, self.monitoring),
            pass_through=self.optional(data, "pass_through", path, self.pass_through),
            reliability=self.optional(data, "reliability", path, self.reliability),
        )
        if assignment.reliability is not None and assignment.automation is None:
            self.error(
                child_path(path, "reliability"),
                "goes only with an assignment that names an automation (it is how often "
                "the automation fails)",
            )
        return assignment

    def people_asked(self, value: Any, path: str) -> tuple[str, ...] | None:
        """A human's id, or a list of ids asked in turn (at least two, each once, at most
        ``ESCALATION_PEOPLE_MAX``)."""
        if not isinstance(value, list):
            one = self.identifier(value, path)
            return None if one is None else (one,)
        if not 2 <= len(value) <= ESCALATION_PEOPLE_MAX:
            self.error(
                path,
                f"as a list names from 2 to {ESCALATION_PEOPLE_MAX} people asked in turn, not "
                f"{len(value)} (one person is written as an id alone)",
            )
            return None
        ids = [self.identifier(item, f"{path}[{index}]") for index, item in enumerate(value)]
        if any(item is None for item in ids):
            return None
        for index, item in enumerate(ids):
            if item in ids[:index]:
                self.error(f"{path}[{index}]", f"names {item} a second time")
                return None
        return tuple(item for item in ids if item is not None)

    def reliability(self, value: Any, path: str) -> Reliability | None:
        """How often the automation fails: ``fails_per_1000`` (0 to 1,000), how a failure
        is noticed (``detected_by``, needed when it can fail), who takes over
        (``fallback``) and ``false_alerts_per_day``."""
        data = self.obj(
            value,
            path,
            ("fails_per_1000",),
            ("detected_by", "fallback", "false_alerts_per_day"),
        )
        if data is None or "fails_per_1000" not in data:
            return None
        fails = self.number(
            data["fails_per_1000"], child_path(path, "fails_per_1000"), maximum=1000
        )
        detected = self.optional(
            data, "detected_by", path, lambda v, p: self.choice(v, p, DETECTION)
        )
        if fails and "detected_by" not in data:
            self.error(
                path,
                'needs detected_by ("alert", "display" or "none"): how the person learns '
                "that the automation failed",
            )
        false_alerts = self.optional(
            data,
            "false_alerts_per_day",
            path,
            lambda v, p: self.number(v, p, maximum=MONITORING_LOOKS_MAX),
        )
        if fails is None:
            return None
        return Reliability(
            fails_per_1000=fails,
            detected_by=detected,
            fallback=self.optional(data, "fallback", path, self.identifier),
            false_alerts_per_day=false_alerts,
        )

    def pass_through(self, value: Any, path: str) -> bool | None:
        if value is not True:
            self.error(
                path,
                f"can only be true (the chain goes on without the task), not {json.dumps(value)}",
            )
            return None
        return True

    def monitoring(self, value: Any, path: str) -> Monitoring | None:
        """How the accountable person keeps watch: ``"each"``, ``"exception"``, or
        ``{"style": ..., "per_day": n}`` (periodic) / ``{"style": ..., "share": s}``
        (continuous)."""
        if isinstance(value, str):
            if value not in ("each", "exception"):
                self.error(
                    path,
                    f"{value!r} is not a monitoring style written as a word: use "
                    '"each" or "exception", or an object such as '
                    '{"style": "periodic", "per_day": 2}',
                )
                return None
            return Monitoring(value)
        amounts = {"periodic": "per_day", "continuous": "share"}
        data = self.obj(value, path, ("style",), ("per_day", "share"))
        if data is None or "style" not in data:
            return None
        style = self.choice(data["style"], child_path(path, "style"), MONITORING_STYLES)
        if style is None:
            return None
        needed = amounts.get(style)
        for key in sorted(set(data) - {"style"}):
            if key != needed:
                self.error(
                    child_path(path, key),
                    f"goes only with the style {'periodic' if key == 'per_day' else 'continuous'}",
                )
        if needed is not None and needed not in data:
            self.error(path, f"the style {style} needs {needed}")
            return None
        if style == "periodic":
            per_day = self.number(
                data["per_day"],
                child_path(path, "per_day"),
                positive=True,
                maximum=MONITORING_LOOKS_MAX,
            )
            return None if per_day is None else Monitoring(style, per_day=per_day)
        if style == "continuous":
            share = self.number(data["share"], child_path(path, "share"), positive=True, maximum=1)
            return None if share is None else Monitoring(style, share=share)
        return Monitoring(style)

    def applies(self, value: Any, path: str) -> bool | None:
        if value is not False:
            self.error(
                path,
                f"can only be false (a task applies unless it says so), not {json.dumps(value)}",
            )
            return None
        return False

    def assignment_map(self, value: Any, path: str) -> dict[str, Assignment] | None:
        if not isinstance(value, dict):
            self.error(
                path, f"must be an object mapping task ids to assignments, not {_describe(value)}"
            )
            return None
        result = {}
        for task_id, item in value.items():
            item_path = child_path(path, task_id)
            if self.identifier(task_id, item_path) is None:
                continue
            assignment = self.assignment(item, item_path)
            if assignment is not None:
                result[task_id] = assignment
        return result

    def plan(self, value: Any, path: str) -> Plan | None:
        data = self.obj(value, path, ("id", "name", "assignments"), ("description", "modes"))
        if data is None or "id" not in data:
            return None
        plan_id = self.identifier(data["id"], child_path(path, "id"))
        if plan_id is None:
            return None
        return Plan(
            id=plan_id,
            name=self.optional(data, "name", path, self.label) or plan_id,
            description=self.optional(data, "description", path, self.note),
            assignments=self.optional(data, "assignments", path, self.assignment_map) or {},
            modes=self.optional(data, "modes", path, self.mode_map),
        )

    def mode_map(self, value: Any, path: str) -> ModeMap | None:
        data = self.obj(value, path, ("initial", "states", "transitions"))
        if data is None:
            return None
        initial = self.optional(data, "initial", path, self.identifier)
        return ModeMap(
            initial=initial or "",
            states=self.entries(data, "states", path, self.mode),
            transitions=self.entries(data, "transitions", path, self.transition),
        )

    def mode(self, value: Any, path: str) -> Mode | None:
        data = self.obj(value, path, ("id", "name"), ("indication", "overrides", "notes"))
        if data is None or "id" not in data:
            return None
        mode_id = self.identifier(data["id"], child_path(path, "id"))
        if mode_id is None:
            return None
        return Mode(
            id=mode_id,
            name=self.optional(data, "name", path, self.label) or mode_id,
            indication=self.optional(data, "indication", path, self.note),
            overrides=self.optional(data, "overrides", path, self.assignment_map),
            notes=self.optional(data, "notes", path, self.note),
        )

    def mode_source(self, value: Any, path: str) -> str | None:
        """A transition's ``from``: a mode id, or ``"*"`` for every mode."""
        if value == ANY_MODE:
            return ANY_MODE
        if isinstance(value, str) and not _IDENTIFIER.match(value):
            self.error(
                path,
                f'{value!r} is neither a mode id nor "*" (every mode): an id has 1-64 '
                "letters, digits, '.', '-' or '_', starting with a letter or digit",
            )
            return None
        return self.identifier(value, path)

    def transition(self, value: Any, path: str) -> Transition | None:
        data = self.obj(
            value,
            path,
            ("from", "to", "trigger", "by", "cue"),
            ("per_day", "notes", "event", "times"),
        )
        if data is None or "from" not in data or "to" not in data:
            return None
        given = [way for way in ("per_day", "event", "times") if way in data]
        if len(given) > 1:
            self.error(path, f"happens in one way only, but gives {' and '.join(given)}")
        times = None
        if "times" in data:
            times_path = child_path(path, "times")
            items = self.listing(data["times"], times_path)
            if isinstance(data["times"], list) and not 1 <= len(items) <= MODE_TIMES_MAX:
                self.error(times_path, f"must list from 1 to {MODE_TIMES_MAX:,} times of day")
                items = []
            clocks = [self.clock(item, child_path(times_path, i)) for i, item in enumerate(items)]
            times = tuple(clock for clock in clocks if clock is not None) or None
        # "from": "*" is a transition from every mode (overridden where a mode has its
        # own transition with the same trigger).
        source = self.mode_source(data["from"], child_path(path, "from"))
        if data["to"] == ANY_MODE:
            self.error(
                child_path(path, "to"),
                'must name one mode: "*" (every mode) is for "from" only',
            )
            return None
        target = self.identifier(data["to"], child_path(path, "to"))
        if source is None or target is None:
            return None
        return Transition(
            source=source,
            target=target,
            trigger=self.optional(data, "trigger", path, self.phrase) or "",
            by=self.optional(data, "by", path, lambda v, p: self.choice(v, p, TRANSITION_CAUSES))
            or "human",
            cue=self.optional(data, "cue", path, lambda v, p: self.choice(v, p, CUES)) or "none",
            per_day=self.optional(
                data,
                "per_day",
                path,
                lambda v, p: self.number(v, p, positive=True, maximum=MAX_PER_DAY),
            ),
            notes=self.optional(data, "notes", path, self.note),
            event=self.optional(data, "event", path, self.identifier),
            times=times,
        )
