"""No template, script or rendered document asks the browser to run a string.

Baton's pages are served with ``script-src 'self'`` and no ``'unsafe-inline'`` or
``'unsafe-eval'`` (allocation/web/security.py). Under that policy a browser refuses, by
the W3C Content Security Policy Level 3 (sections 6.1.1 and 6.1.11, "script-src" and
"unsafe-eval"): an inline ``<script>`` with code, an ``on…=`` attribute, a
``javascript:`` URL, and ``eval``/``new Function``/string timers. htmx evaluates strings
for event filters in ``hx-trigger`` (``click[ctrlKey]``), for ``hx-on`` attributes and for
``js:`` values in ``hx-vals``/``hx-headers`` and every ``hx-vars`` (htmx 2 reference,
https://htmx.org/attributes/hx-trigger/, /hx-on/, /hx-vals/, /hx-vars/), all refused by
``htmx.config.allowEval = false`` (https://htmx.org/reference/#config) and by the policy.
The browser sweep (tests/browser/test_no_eval.py) shows the pages run clean; this test
keeps such code from coming back in a place the sweep has not reached yet.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

# (what, pattern) for HTML: templates, HTML built in Python, the methods document.
HTML_RULES = [
    ("an hx-on attribute (htmx compiles it as code)", re.compile(r"\b(?:data-)?hx-on(?=[:\-=])")),
    (
        "an hx-trigger event filter [...] (htmx evaluates it)",
        re.compile(r"\b(?:data-)?hx-trigger\s*=\s*(?:\"[^\"]*\[|'[^']*\[)"),
    ),
    ("an hx-vars attribute (always evaluated)", re.compile(r"\b(?:data-)?hx-vars\s*=")),
    (
        "a js: value in hx-vals or hx-headers (evaluated)",
        re.compile(r"\b(?:data-)?hx-(?:vals|headers)\s*=\s*[\"']\s*(?:js|javascript)\s*:", re.I),
    ),
    ("a javascript: URL", re.compile(r"javascript\s*:", re.I)),
    (
        "an inline event handler attribute (on...=)",
        re.compile(r"<[a-zA-Z][^<>]*?\son[a-z]+\s*=", re.S),
    ),
]
# A <script> element is allowed only when it loads a file or carries JSON data.
SCRIPT_TAG = re.compile(r"<script\b([^>]*)>", re.I)
ALLOWED_SCRIPT = re.compile(r"\bsrc\s*=|\btype\s*=\s*[\"']application/json[\"']", re.I)

JS_RULES = [
    ("eval(...)", re.compile(r"(?<![\w.$])eval\s*\(")),
    ("new Function(...)", re.compile(r"\bnew\s+Function\b")),
    ("a timer given a string", re.compile(r"\bset(?:Timeout|Interval)\s*\(\s*[\"'`]")),
    ("htmx allowed to evaluate", re.compile(r"allowEval\s*[:=]\s*true")),
    ("an on... attribute set from script", re.compile(r"setAttribute\(\s*[\"']on", re.I)),
    *HTML_RULES[:5],
]


def html_findings(text: str) -> list[tuple[int, str]]:
    """(line, what) for each piece of ``text`` that would run a string as code."""
    found = []
    for what, pattern in HTML_RULES:
        found += [(text.count("\n", 0, m.start()) + 1, what) for m in pattern.finditer(text)]
    for match in SCRIPT_TAG.finditer(text):
        if not ALLOWED_SCRIPT.search(match.group(1)):
            found.append((text.count("\n", 0, match.start()) + 1, "an inline <script>"))
    return sorted(found)


def js_findings(text: str) -> list[tuple[int, str]]:
    found = []
    for what, pattern in JS_RULES:
        found += [(text.count("\n", 0, m.start()) + 1, what) for m in pattern.finditer(text)]
    return sorted(found)


def _files() -> list[tuple[Path, object]]:
    templates = sorted((ROOT / "templates").rglob("*.html"))
    # Python that writes HTML (template tags, views, exports), not the pure core.
    python = [
        p for p in sorted((ROOT / "allocation").rglob("*.py")) if "core" not in p.parts[-3:-1]
    ]
    documents = [ROOT / "allocation" / "core" / "METHODS.md"]
    scripts = sorted((ROOT / "static" / "baton").rglob("*.js"))
    return [(p, html_findings) for p in templates + python + documents] + [
        (p, js_findings) for p in scripts
    ]


def test_the_scan_reaches_the_files():
    names = {path.relative_to(ROOT).as_posix() for path, _ in _files()}
    # The pages' shared frame, the plan editor and every script of Baton's own.
    assert {"templates/base.html", "templates/plans/editor.html"} <= names
    assert {"static/baton/plans.js", "static/baton/charts.js"} <= names
    assert "allocation/templatetags/baton.py" in names


def test_no_template_or_script_runs_a_string():
    problems = [
        f"{path.relative_to(ROOT)}:{line}: {what}"
        for path, check in _files()
        for line, what in check(path.read_text("utf-8"))
    ]
    assert problems == [], "\n".join(problems)


def test_htmx_is_told_never_to_evaluate():
    base = (ROOT / "templates" / "base.html").read_text("utf-8")
    assert re.search(r"<meta name=\"htmx-config\" content='\{\"allowEval\":false\}'>", base)
    # Before htmx itself, which reads its configuration once as it loads.
    assert base.index('name="htmx-config"') < base.index("{% htmx_script %}")


# The scan against the examples of each attribute in htmx's own reference pages and the
# policy's own examples: each must be found, and the allowed forms must not.
@pytest.mark.parametrize(
    "html",
    [
        '<div hx-get="/clicked" hx-trigger="click[ctrlKey]">',  # htmx.org/attributes/hx-trigger
        "<div hx-get='/x' hx-trigger='keyup[key==\"Enter\"] changed'>",
        "<button hx-on:click=\"alert('Clicked!')\">",  # htmx.org/attributes/hx-on
        '<button hx-on::before-request="x()">',
        '<button hx-on-htmx-before-request="x()">',
        "<div hx-get=\"/e\" hx-vals='js:{lastKey: event.key}'>",  # htmx.org/attributes/hx-vals
        '<div hx-vars="myVar:computeMyVar()">',  # htmx.org/attributes/hx-vars
        '<a href="javascript:void(0)">',
        '<tr class="row"\n    onclick="go()">',
        "<script>document.title = 'x'</script>",
        '<script type="module">import x from "./x.js"</script>',
    ],
)
def test_the_scan_finds_what_the_policy_refuses(html):
    assert html_findings(html)


@pytest.mark.parametrize(
    "html",
    [
        '<div hx-get="/status" hx-trigger="every 1s" hx-swap="outerHTML">',
        '<form hx-get="/graph" hx-trigger="change, submit">',
        '<tr hx-post="/row" hx-trigger="baton:save" hx-include="this">',
        '<body hx-headers=\'{"X-CSRFToken": "abc"}\'>',
        '<script src="/static/baton/plans.js" defer></script>',
        '<script id="figure" type="application/json">{"data": []}</script>',
        '<option value="one">one</option>',
        "<p>Run it once = every day</p>",
    ],
)
def test_the_scan_lets_the_allowed_forms_through(html):
    assert html_findings(html) == []


@pytest.mark.parametrize(
    "script",
    [
        "eval('1 + 1')",
        "const f = new Function('a', 'return a')",
        'setTimeout("tick()", 10)',
        "htmx.config.allowEval = true",
        "button.setAttribute('onclick', 'go()')",
        "row.innerHTML = '<a href=\"javascript:go()\">'",
    ],
)
def test_the_scan_finds_evaluation_in_scripts(script):
    assert js_findings(script)


def test_the_scan_lets_ordinary_scripts_through():
    assert js_findings((ROOT / "static" / "baton" / "charts.js").read_text("utf-8")) == []
    assert js_findings("setTimeout(() => tick(), 10); htmx.trigger(row, 'baton:save')") == []
