"""Bad query strings, fuzzed: every URL of Baton, every query parameter its view reads
(and parameters no view reads), sent as a signed-in owner through Django's test client.

The URLs are enumerated from the resolver, so a new URL is fuzzed without editing this
file; a pattern whose path arguments cannot be filled from the example studies fails the
test. The properties: no input gives a server error (the test client re-raises any
exception a view lets through, and a 5xx status fails too); a refusal (4xx) that is a
page names the parameter it refuses. The number of inputs tried is counted per URL and
printed at the end of the run.
"""

from __future__ import annotations

import os
import re
from collections import Counter
from urllib.parse import quote

import pytest
from django.urls import URLPattern, URLResolver, get_resolver
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from allocation import models as m
from allocation import selectors, services
from tests.report import write_past_capture

SCALE = float(os.environ.get("BATON_FUZZ_SCALE", "1"))
QUERY_EXAMPLES = max(1, int(8 * SCALE))

FUZZ = settings(
    derandomize=os.environ.get("BATON_FUZZ_RANDOM") is None,
    deadline=None,
    max_examples=QUERY_EXAMPLES,
    suppress_health_check=[
        HealthCheck.function_scoped_fixture,
        HealthCheck.too_slow,
        HealthCheck.data_too_large,
    ],
)

TRIED: Counter[str] = Counter()

#: The query parameters the views read (``grep -rn request.GET allocation/``, and the
#: forms the views fill from the query: history filters, comparison weights).
READ = [
    "agent",
    "baseline",
    "day",
    "days",
    "edit",
    "figure",
    "focus",
    "from",
    "goal",
    "handovers",
    "item",
    "next",
    "page",
    "person",
    "plan",
    "row",
    "seed",
    "show",
    "snapshot",
    "step",
    "task",
    "to",
    "who",
    "action",
    "source",
    "since",
    "until",
]

#: The parameters each view module reads (``grep -rn request.GET allocation/``); every
#: URL of the module is sent each of them with each value of NASTY, besides the drawn
#: queries. A module missing here is still sent READ through the drawn queries.
BY_MODULE = {
    "exports": ["snapshot"],
    "studies": ["snapshot"],
    "simulation": ["days", "seed", "day", "person", "figure"],
    "history": ["page", "who", "action", "source", "since"],
    "compare": ["focus"],
    "modes": ["task", "step"],
    "dashboards": ["handovers"],
    "reviews": ["show", "item"],
    "plans": ["goal"],
    "graph": ["plan", "goal", "task", "agent"],
    "ratings": ["task"],
    "snapshots": ["snapshot", "from", "to", "baseline"],
    "assumptions": ["edit", "row"],
    "security": ["next"],
}

#: Values every known parameter is sent, already percent-encoded.
NASTY = [
    "",
    "%20",
    "-1",
    "1.5",
    "NaN",
    "9" * 4400,
    "%ED%A0%80",
    "%FF",
    "x" * 100_000,
]

#: Not meant for the admin site (Django's own) nor for signing out.
SKIPPED = {"logout"}


def patterns(resolver: URLResolver | None = None, prefix: str = "") -> list[tuple]:
    """(name, route, converters) for every URL pattern, recursively."""
    resolver = resolver or get_resolver()
    found = []
    for entry in resolver.url_patterns:
        route = prefix + str(entry.pattern)
        if isinstance(entry, URLResolver):
            if getattr(entry, "namespace", None) == "admin" or route.startswith("admin"):
                continue
            found += patterns(entry, route)
        elif isinstance(entry, URLPattern):
            module = entry.callback.__module__.rsplit(".", 1)[-1]
            found.append((entry.name or route, route, module))
    return found


ALL = [p for p in patterns() if p[0] not in SKIPPED]


def fill(route: str, values: dict[str, str]) -> str:
    """The path of ``route`` with each ``<conv:name>`` replaced by ``values[name]``."""

    def one(match: re.Match) -> str:
        name = match.group(2)
        if name not in values:
            raise AssertionError(f"no example value for the path argument {name!r} of {route}")
        return quote(str(values[name]), safe="")

    path = re.sub(r"<(?:(\w+):)?(\w+)>", one, route)
    if "^" in path or "(?P" in path:
        raise AssertionError(f"cannot fill the pattern {route}")
    return "/" + path.lstrip("/")


@pytest.fixture(scope="module", autouse=True)
def inputs_tried(request):
    yield TRIED
    if TRIED:
        write_past_capture(
            request.config,
            [
                f"query fuzzing: {sum(TRIED.values())} requests over {len(TRIED)} URLs, "
                f"{len(READ)} known parameters"
            ],
        )


@pytest.fixture
def examples(owner, heating_document):
    """The example studies and the home-heating study, all owned by ``owner``."""
    services.examples_load(owner=owner)
    services.study_import(data=heating_document, owner=owner)
    return list(m.Study.objects.order_by("pk"))


def arguments(study: m.Study) -> dict[str, str]:
    model = selectors.study_load(study).study
    plan = next((p for p in model.plans if p.modes and p.modes.states), None)
    plan = plan or (model.plans[0] if model.plans else None)
    values = {
        "pk": str(study.pk),
        "fmt": "csv",
        "kind": "agents",
        "finding": "0",
        "number": "0",
    }
    values["transition"] = "0"
    if model.agents:
        values["key"] = model.agents[0].id
    if plan is not None:
        values["plan"] = plan.id
        if plan.modes and plan.modes.states:
            values["mode"] = plan.modes.states[0].id
    if model.leaves:
        values["task"] = model.leaves[0].id
    return values


def values(other_ids: list[str]) -> st.SearchStrategy[str]:
    """A raw (already percent-encoded) query value."""
    plain = st.one_of(
        st.sampled_from(["", " ", "\t", "%20", "0", "-1", "1.5", "NaN", "inf", "-inf", "1e309"]),
        st.sampled_from(["all", "worst", "csv", "new", "true", "[]", "{}", "null"]),
        st.sampled_from(other_ids),
        st.integers().map(str),
        st.integers(min_value=4290, max_value=4400).map(lambda n: "9" * n),
        st.floats(allow_nan=True, allow_infinity=True).map(repr),
        st.text(max_size=20),
    ).map(lambda s: quote(s, safe=""))
    raw = st.sampled_from(["%ED%A0%80", "%FF", "%C0%AF", "%00", "a%ED%B2%A9b", "%"])
    huge = st.integers(min_value=1_000, max_value=100_000).map(lambda n: "x" * n)
    return st.one_of(plain, raw, huge)


def queries(other_ids: list[str]) -> st.SearchStrategy[list[tuple[str, str]]]:
    names = st.one_of(
        st.sampled_from(READ),
        st.sampled_from([f"{n}[]" for n in READ[:5]] + ["%FF", "%ED%A0%80", "", "x" * 300]),
        st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=8),
    )
    pair = st.tuples(names, values(other_ids))
    # Repeated names are kept: ``?page=1&page=x`` is a list to a QueryDict.
    return st.lists(pair, min_size=1, max_size=6)


@pytest.mark.django_db
@pytest.mark.parametrize("name,route,module", ALL, ids=[p[0] for p in ALL])
def test_no_query_gives_a_server_error(client, owner, examples, name, route, module):
    client.force_login(owner)
    studies = examples
    # The study with a mode map, so that the mode pages have something to show.
    chosen = studies[0]
    for study in studies:
        if all(k in arguments(study) for k in ("plan", "mode", "task", "key")):
            chosen = study
            break
    path = fill(route, arguments(chosen))
    other_ids = sorted(
        {v for s in studies if s.pk != chosen.pk for v in arguments(s).values()} | {"999999"}
    )

    def send(query, htmx):
        url = path + "?" + "&".join(f"{k}={v}" for k, v in query)
        headers = {"HTTP_HX_REQUEST": "true"} if htmx else {}
        TRIED[name] += 1
        response = client.get(url, **headers)
        assert response.status_code < 500, (url[:300], response.status_code)
        if 400 <= response.status_code < 500 and response.status_code not in (403, 404, 405):
            text = response.content.decode("utf-8", "replace")
            asked = {k for k, _ in query}
            assert any(k and k in text for k in asked), (url[:300], text[:500])

    for parameter in BY_MODULE.get(module, []):
        for i, value in enumerate(NASTY):
            send(query=[(parameter, value)], htmx=bool(i % 2))
        send(query=[(parameter, "1"), (parameter, "x")], htmx=False)
    FUZZ(given(query=queries(other_ids), htmx=st.booleans())(send))()
