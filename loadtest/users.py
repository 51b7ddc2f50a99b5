"""The load test's simulated users, its statistics and its lost-edit check (no Django).

``python -m loadtest`` prepares the users and their studies, serves the app under
gunicorn and checks the database afterwards; this module holds what runs between:
each :class:`SimulatedUser` is a thread that signs in through the real login form and
then reads pages, edits plan-editor rows the way htmx posts them, downloads analyses and
exports, recording every request as a :class:`Sample` and every acknowledged edit as an
:class:`Edit`. :func:`summarise` and :func:`lost_edits` are pure and tested on their own.
"""

from __future__ import annotations

import http.client
import math
import random
import re
import threading
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from html.parser import HTMLParser
from http.cookies import SimpleCookie
from typing import Any
from urllib.parse import urlencode

__all__ = [
    "Edit",
    "KindFigures",
    "LostEdit",
    "Sample",
    "SimulatedUser",
    "Start",
    "Summary",
    "classify_save",
    "edit_fields",
    "UserPlan",
    "expected_values",
    "lost_edits",
    "percentile",
    "row_fields",
    "summarise",
]

#: The request kinds, in the order the report prints them.
KINDS = (
    "sign-in",
    "overview",
    "editor",
    "dashboard",
    "graph",
    "modes",
    "edit",
    "analysis",
    "export",
)
#: How often each action is chosen (reads, edits, analyses, exports).
ACTION_WEIGHTS = {
    "overview": 1,
    "editor": 1,
    "dashboard": 2,
    "graph": 1,
    "modes": 1,
    "edit": 6,
    "analysis": 2,
    "export": 2,
}
#: A request that takes longer than this is an error (the server is stuck, not slow).
REQUEST_TIMEOUT_S = 120
#: What a stale-version refusal of a row save says (optimistic versioning: the row moved
#: on since the person opened it). Such a refusal is an expected outcome, not an error.
CONFLICT_MARKERS = ('class="edit-conflict"', "since you opened it")

#: A kept connection idle for longer than this is not trusted with a POST.
IDLE_S = 1.0

Key = tuple[int, str, str]  # (study pk, plan id, task id)


# -- statistics ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Sample:
    """One request: its kind, how long it took, its status (0: no answer) and outcome."""

    kind: str
    seconds: float
    status: int
    error: str = ""
    conflict: bool = False


@dataclass(frozen=True)
class KindFigures:
    """Count, errors, conflicts and latency figures (seconds) of one kind of request."""

    kind: str
    requests: int
    errors: int
    conflicts: int
    median_s: float
    p95_s: float
    max_s: float


@dataclass(frozen=True)
class Summary:
    """The run's figures: per kind, overall, and throughput over the run's wall time."""

    kinds: list[KindFigures]
    overall: KindFigures
    elapsed_s: float
    throughput: float


def percentile(values: Sequence[float], q: float) -> float:
    """The ``q``-th percentile (0-100) by linear interpolation between order statistics.

    This is definition 7 of Hyndman & Fan (the default of NumPy's ``percentile`` and of
    R's ``quantile``): the value at position ``(n - 1) q / 100`` of the sorted values,
    interpolated between its neighbours. ``nan`` for no values.

    References
    ----------
    Hyndman, R. J., & Fan, Y. (1996). Sample quantiles in statistical packages. *The
    American Statistician*, 50(4), 361-365.
    """
    if not 0 <= q <= 100:
        raise ValueError(f"percentile {q} is outside 0-100")
    ordered = sorted(values)
    if not ordered:
        return math.nan
    position = (len(ordered) - 1) * q / 100
    below = math.floor(position)
    above = min(below + 1, len(ordered) - 1)
    return ordered[below] + (ordered[above] - ordered[below]) * (position - below)


def _figures(kind: str, samples: Sequence[Sample]) -> KindFigures:
    seconds = [sample.seconds for sample in samples]
    return KindFigures(
        kind=kind,
        requests=len(samples),
        errors=sum(1 for sample in samples if sample.error),
        conflicts=sum(1 for sample in samples if sample.conflict),
        median_s=percentile(seconds, 50),
        p95_s=percentile(seconds, 95),
        max_s=max(seconds, default=math.nan),
    )


def summarise(samples: Sequence[Sample], elapsed_s: float) -> Summary:
    """Figures per kind (in :data:`KINDS` order, then any other kind) and overall.

    Every request counts in the latencies and the throughput, errors included (a failed
    request took the server's time too); throughput is requests per second of wall time.
    """
    by_kind: dict[str, list[Sample]] = {}
    for sample in samples:
        by_kind.setdefault(sample.kind, []).append(sample)
    order = [kind for kind in KINDS if kind in by_kind] + sorted(set(by_kind) - set(KINDS))
    return Summary(
        kinds=[_figures(kind, by_kind[kind]) for kind in order],
        overall=_figures("all", samples),
        elapsed_s=elapsed_s,
        throughput=len(samples) / elapsed_s if elapsed_s > 0 else math.nan,
    )


# -- the lost-edit check ------------------------------------------------------------------


@dataclass(frozen=True)
class Edit:
    """A row save: what it should have stored, and when the request was sent and answered
    (``time.monotonic`` seconds). ``answered`` is false for a save that got no answer
    (the connection failed): it may or may not have been stored."""

    key: Key
    expected: dict[str, Any]
    started: float
    finished: float
    user: str
    answered: bool = True


@dataclass(frozen=True)
class LostEdit:
    """A (study, plan, task) whose stored values match none of the edits that may be last."""

    key: Key
    stored: dict[str, Any] | None
    candidates: list[dict[str, Any]]


def expected_values(fields: Mapping[str, str]) -> dict[str, Any]:
    """What a plan-editor row save stores, in the form :func:`lost_edits` compares.

    Only the fields the load test varies are compared: who does the task, the person,
    the device, the level (shared tasks only, one level for every stage), the status and
    the rationale (unique per edit, so that an older edit cannot pass for a newer one).
    """
    who = fields["who"]
    level = fields.get("level", "")
    return {
        "who": who,
        "human": fields.get("human") or None if who in ("person", "shared") else None,
        "automation": fields.get("automation") or None if who in ("device", "shared") else None,
        "level": int(level) if who == "shared" and level else None,
        "status": fields.get("status", ""),
        "rationale": fields.get("rationale", "").strip(),
    }


def lost_edits(
    edits: Iterable[Edit], stored: Mapping[Key, dict[str, Any] | None]
) -> list[LostEdit]:
    """The keys whose stored values are not those of an edit that may have been last.

    Edits of one key by one user are sequential, so the last acknowledged one must be
    stored. Edits of one key by two users may overlap in time, and the order they were
    answered in need not be the order they were committed in; an edit may be last unless
    another acknowledged edit of the key was *sent after it was answered* (then that one
    certainly committed later). The stored values must equal one of those candidates,
    or the values of a save that got no answer (it may have been stored at any moment).
    ``stored`` maps each key to its values (as :func:`expected_values` gives them), or to
    ``None`` when the row is missing.
    """
    by_key: dict[Key, list[Edit]] = {}
    for edit in edits:
        by_key.setdefault(edit.key, []).append(edit)
    lost = []
    for key, key_edits in sorted(by_key.items()):
        answered = [edit for edit in key_edits if edit.answered]
        latest_start = max((edit.started for edit in answered), default=-math.inf)
        candidates = [edit.expected for edit in answered if edit.finished >= latest_start]
        candidates += [edit.expected for edit in key_edits if not edit.answered]
        values = stored.get(key)
        if values not in candidates:
            lost.append(LostEdit(key=key, stored=values, candidates=candidates))
    return lost


# -- reading the plan editor's rows --------------------------------------------------------


@dataclass
class RowForm:
    """One plan-editor row as htmx would post it (``hx-include="this"``): every named
    field inside the ``<tr>`` with its current value, and each select's options."""

    task: str
    fields: dict[str, str] = field(default_factory=dict)
    options: dict[str, list[str]] = field(default_factory=dict)


class _RowParser(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.rows: dict[str, RowForm] = {}
        self._row: RowForm | None = None
        self._depth = 0
        self._select: str | None = None
        self._first_option: str | None = None
        self._selected = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        attributes = {name: value or "" for name, value in attrs}
        if tag == "tr":
            if self._row is None and attributes.get("id", "").startswith("row-"):
                self._row = RowForm(task=attributes["id"][len("row-") :])
                self._depth = 0
            elif self._row is not None:
                self._depth += 1
            return
        row = self._row
        if row is None or "disabled" in attributes:
            return
        name = attributes.get("name", "")
        if tag == "input" and name:
            kind = attributes.get("type", "text").lower()
            if kind in ("checkbox", "radio"):
                if "checked" in attributes:
                    row.fields[name] = attributes.get("value", "on")
            elif kind not in ("submit", "button", "file"):
                row.fields[name] = attributes.get("value", "")
        elif tag == "textarea" and name:
            row.fields[name] = ""
        elif tag == "select" and name:
            self._select, self._first_option, self._selected = name, None, False
            row.options[name] = []
        elif tag == "option" and self._select is not None:
            value = attributes.get("value", "")
            row.options[self._select].append(value)
            if self._first_option is None:
                self._first_option = value
            if "selected" in attributes:
                row.fields[self._select] = value
                self._selected = True

    def handle_endtag(self, tag: str) -> None:
        if self._row is None:
            return
        if tag == "select" and self._select is not None:
            if not self._selected and self._first_option is not None:
                self._row.fields[self._select] = self._first_option
            self._select = None
        elif tag == "tr":
            if self._depth == 0:
                self.rows[self._row.task] = self._row
                self._row = None
            else:
                self._depth -= 1


def row_fields(html: str) -> dict[str, RowForm]:
    """Every editable plan-editor row in a page or fragment, by task id."""
    parser = _RowParser()
    parser.feed(html)
    parser.close()
    return parser.rows


def edit_fields(row: RowForm, rng: random.Random, rationale: str) -> dict[str, str] | None:
    """The row's fields with new random values: who does it (person, device or shared),
    the person and the device, a level, a status, and the given rationale. ``None`` when
    the row offers no person or no device to choose."""
    humans = [value for value in row.options.get("human", []) if value]
    machines = [value for value in row.options.get("automation", []) if value]
    whos = [
        value for value in row.options.get("who", []) if value in ("person", "device", "shared")
    ]
    levels = [value for value in row.options.get("level", []) if value]
    statuses = [value for value in row.options.get("status", []) if value]
    if not humans or not machines or not whos or not levels:
        return None
    # One level for every stage: the per-stage levels are left out of the post.
    fields = {
        name: value
        for name, value in row.fields.items()
        if name != "per_stage" and not name.startswith("level_")
    }
    fields.update(
        who=rng.choice(whos),
        human=rng.choice(humans),
        automation=rng.choice(machines),
        level=rng.choice(levels),
        status=rng.choice(statuses) if statuses else "",
        rationale=rationale,
    )
    return fields


_CSRF_INPUT = re.compile(r'name="csrfmiddlewaretoken" value="([^"]+)"')
_PROBLEMS = re.compile(r'<ul class="row-problems"[^>]*>(.*?)</ul>', re.S)


def classify_save(status: int, text: str, task: str, plan_id: str) -> tuple[str, bool]:
    """Judge a row save's answer: ``(error, conflict)``. Acknowledged is a 200 with the
    task's row and no row problems; a stale-version refusal is a conflict (not an error);
    anything else is an error, with what went wrong."""
    if status == 409 or (status == 200 and any(mark in text for mark in CONFLICT_MARKERS)):
        return "", True
    if status != 200:
        return f"HTTP {status} for the save of {task} in plan {plan_id}", False
    problems = _PROBLEMS.search(text)
    if problems is not None:
        words = re.sub(r"<[^>]+>", " ", problems.group(1))
        return f"save of {task} refused: {' '.join(words.split())[:200]}", False
    if f'id="row-{task}"' not in text:
        return f"the save of {task} did not answer with its row", False
    return "", False


# -- a simulated user ---------------------------------------------------------------------


class Start:
    """The line every simulated user waits at after signing in; the work phase (and its
    clock) starts when the last one arrives."""

    def __init__(self, users: int, seconds: float) -> None:
        self.seconds = seconds
        self.started = math.nan
        self._barrier = threading.Barrier(users, action=self._go)

    def _go(self) -> None:
        self.started = time.monotonic()

    def wait(self) -> float:
        """Wait for the others; answer the work phase's deadline (``time.monotonic``)."""
        self._barrier.wait()
        return self.started + self.seconds


@dataclass(frozen=True)
class UserPlan:
    """What one simulated user may do: its sign-in, its study and the study's plans.

    ``paths`` maps a page kind to a function of the plan id giving its path, and
    ``"edit"`` to one of (plan id, task id); ``login`` is the login page's path.
    """

    name: str
    username: str
    password: str
    study_pk: int
    plans: list[str]
    login: str
    paths: dict[str, Callable[..., str]]


class _Session:
    """One keep-alive connection with a cookie jar, as a browser tab has."""

    def __init__(self, host: str, port: int) -> None:
        self.host, self.port = host, port
        self.cookies: dict[str, str] = {}
        self._connection: http.client.HTTPConnection | None = None
        self._used = 0.0

    @property
    def origin(self) -> str:
        return f"http://{self.host}:{self.port}"

    def request(
        self,
        method: str,
        path: str,
        body: dict[str, str] | None = None,
        headers: dict | None = None,
    ) -> tuple[int, dict[str, str], str]:
        """Send one request; answer status, headers and the body as text. A GET on a
        connection the server closed while idle is sent again once on a new one; a POST is
        never sent twice (a save might be stored twice): it goes on a new connection when
        the kept one has been idle for a while (gunicorn closes them after 2 s)."""
        all_headers = {"Host": f"{self.host}:{self.port}", "User-Agent": "baton-loadtest"}
        if self.cookies:
            all_headers["Cookie"] = "; ".join(f"{k}={v}" for k, v in self.cookies.items())
        encoded = None
        if body is not None:
            encoded = urlencode(body).encode()
            all_headers["Content-Type"] = "application/x-www-form-urlencoded"
            all_headers["Origin"] = self.origin
        all_headers.update(headers or {})
        if method != "GET" and time.monotonic() - self._used > IDLE_S:
            self.close()
        for attempt in (1, 2) if method == "GET" else (2,):
            if self._connection is None:
                self._connection = http.client.HTTPConnection(
                    self.host, self.port, timeout=REQUEST_TIMEOUT_S
                )
            try:
                self._connection.request(method, path, body=encoded, headers=all_headers)
                response = self._connection.getresponse()
                data = response.read()
            except (http.client.RemoteDisconnected, ConnectionResetError, BrokenPipeError):
                self.close()
                if attempt == 2:
                    raise
                continue
            for cookie in response.headers.get_all("Set-Cookie") or []:
                for morsel in SimpleCookie(cookie).values():
                    if morsel["max-age"] == "0":
                        self.cookies.pop(morsel.key, None)
                    else:
                        self.cookies[morsel.key] = morsel.value
            self._used = time.monotonic()
            if response.will_close:
                self.close()
            return response.status, dict(response.headers), data.decode("utf-8", "replace")
        raise AssertionError("unreachable")

    def close(self) -> None:
        if self._connection is not None:
            self._connection.close()
            self._connection = None


class SimulatedUser(threading.Thread):
    """A person at a browser: signs in, waits at the start line for the others, then
    reads, edits, analyses and exports at random until the deadline or the budget of
    requests (sign-in not counted) runs out. Never raises: every failure is a
    :class:`Sample` with its error."""

    def __init__(
        self,
        plan: UserPlan,
        *,
        host: str,
        port: int,
        start: Start,
        max_requests: int,
        seed: int,
        tag: str,
    ) -> None:
        super().__init__(name=plan.name, daemon=True)
        self.plan = plan
        self.session = _Session(host, port)
        self.start_line = start
        self.deadline = math.inf
        self.max_requests = max_requests
        self.rng = random.Random(seed)
        self.tag = tag
        self.samples: list[Sample] = []
        self.edits: list[Edit] = []
        self._rows: dict[str, dict[str, RowForm]] = {}

    # Each request goes through here: timed, classified, never raising.
    def _send(
        self,
        kind: str,
        method: str,
        path: str,
        body: dict[str, str] | None = None,
        headers: dict | None = None,
        check: Callable[[int, str], tuple[str, bool]] | None = None,
    ) -> tuple[int, str] | None:
        start = time.monotonic()
        try:
            status, _headers, text = self.session.request(method, path, body, headers)
        except Exception as error:  # noqa: BLE001 - every failure is a recorded error
            self.session.close()
            self.samples.append(
                Sample(kind, time.monotonic() - start, 0, f"{type(error).__name__}: {error}")
            )
            return None
        seconds = time.monotonic() - start
        error, conflict = "", False
        if check is not None:
            error, conflict = check(status, text)
        elif not 200 <= status < 400:
            error = f"HTTP {status} for {method} {path}"
        self.samples.append(Sample(kind, seconds, status, error, conflict))
        return status, text

    @property
    def _budget(self) -> int:
        return self.max_requests - sum(1 for sample in self.samples if sample.kind != "sign-in")

    def _running(self) -> bool:
        return self._budget > 0 and time.monotonic() < self.deadline

    def run(self) -> None:
        try:
            try:
                signed_in = self._sign_in()
            except Exception as error:  # noqa: BLE001 - recorded; the others must not wait
                self.samples.append(Sample("sign-in", 0.0, 0, f"{type(error).__name__}: {error}"))
                signed_in = False
            # Everyone starts working together once all have signed in (or failed to).
            self.deadline = self.start_line.wait()
            if signed_in:
                actions = list(ACTION_WEIGHTS)
                weights = [ACTION_WEIGHTS[action] for action in actions]
                while self._running():
                    action = self.rng.choices(actions, weights)[0]
                    plan_id = self.rng.choice(self.plan.plans)
                    if action == "edit":
                        self._edit(plan_id)
                    else:
                        self._read(action, plan_id)
        finally:
            self.session.close()

    def _sign_in(self) -> bool:
        got = self._send("sign-in", "GET", self.plan.login)
        if got is None or got[0] != 200:
            return False
        token = _CSRF_INPUT.search(got[1])
        if token is None:
            self.samples.append(Sample("sign-in", 0.0, got[0], "no CSRF token on the login page"))
            return False

        def signed_in(status: int, text: str) -> tuple[str, bool]:
            if status == 302 and "sessionid" in self.session.cookies:
                return "", False
            return f"sign-in refused (HTTP {status})", False

        got = self._send(
            "sign-in",
            "POST",
            self.plan.login,
            {
                "csrfmiddlewaretoken": token.group(1),
                "username": self.plan.username,
                "password": self.plan.password,
            },
            {"Referer": self.session.origin + self.plan.login},
            check=signed_in,
        )
        return got is not None and got[0] == 302 and "sessionid" in self.session.cookies

    def _read(self, kind: str, plan_id: str) -> None:
        path = self.plan.paths[kind](plan_id)
        got = self._send(kind, "GET", path)
        if kind == "editor" and got is not None and got[0] == 200:
            self._rows[plan_id] = row_fields(got[1])

    def _edit(self, plan_id: str) -> None:
        if plan_id not in self._rows:
            # Open the editor first, as a person would; its rows carry the form fields.
            self._read("editor", plan_id)
            if plan_id not in self._rows or not self._running():
                return
        rows = self._rows[plan_id]
        choices = [row for row in rows.values() if "who" in row.fields]
        if not choices:
            return
        row = self.rng.choice(choices)
        rationale = f"load {self.tag} {self.plan.name} edit {len(self.samples)}"
        fields = edit_fields(row, self.rng, rationale)
        if fields is None:
            return
        task = row.task
        headers = {
            "HX-Request": "true",
            "HX-Target": f"row-{task}",
            "HX-Trigger": f"row-{task}",
            "HX-Current-URL": self.session.origin + self.plan.paths["editor"](plan_id),
            "X-CSRFToken": self.session.cookies.get("csrftoken", ""),
        }
        path = self.plan.paths["edit"](plan_id, task)
        started = time.monotonic()

        got = self._send(
            "edit",
            "POST",
            path,
            fields,
            headers,
            check=lambda status, text: classify_save(status, text, task, plan_id),
        )
        if got is None:
            # No answer: an error already; the check accepts these values as stored too.
            key = (self.plan.study_pk, plan_id, task)
            self.edits.append(
                Edit(key, expected_values(fields), started, math.inf, self.plan.name, False)
            )
            self._rows.pop(plan_id, None)
            return
        sample = self.samples[-1]
        answered = row_fields(got[1]).get(task)
        if sample.conflict or sample.error:
            # Start again from what is stored, as "keep theirs" would.
            if answered is not None and "who" in answered.fields:
                rows[task] = answered
            else:
                self._rows.pop(plan_id, None)
            return
        self.edits.append(
            Edit(
                key=(self.plan.study_pk, plan_id, task),
                expected=expected_values(fields),
                started=started,
                finished=time.monotonic(),
                user=self.plan.name,
            )
        )
        if answered is not None:
            rows[task] = answered
