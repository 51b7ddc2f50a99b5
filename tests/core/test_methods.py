"""Baton's methods document (allocation/core/METHODS.md) and its reader
(allocation.core.methods).

The reader is checked on small documents written here, each with the sections worked
out by hand. The document itself is checked against the code it describes: every
anchor the registry names exists and every figure or finding section is named by the
registry; every assumption and fixed rule of ``core.assumptions`` is in it with its
status; every link inside it leads somewhere; every author and year it cites is in its
own reference list; it is shipped with the package.
"""

from __future__ import annotations

import re
import tomllib
from fnmatch import fnmatch
from pathlib import Path

import pytest

import allocation.core
from allocation.core.analysis.report import METHOD_ANCHORS, METHODS, analysis_json
from allocation.core.assumptions import ASSUMPTIONS, METHOD_NOTES
from allocation.core.methods import (
    METHODS_FILE,
    MethodsDocumentError,
    document_html,
    markdown_html,
    methods_document,
    parse_methods,
    plain_text,
    section_html,
)
from allocation.core.registry import (
    ASSUMPTION_STATUS_WORDS,
    AWARENESS_FACTORS,
    FIGURES,
    FINDING_KINDS,
    LIKELIHOOD_FACTORS,
    anchors,
)
from tests.core.analysis.studies import analyse, leaf

ROOT = Path(allocation.core.__file__).resolve().parents[2]

SAMPLE = """\
# Methods {#methods}

Intro.

## Workload {#workload}

### Person time {#person-time .figure}

Seconds a *person* spends, after `Author (2000)`.

```text
# not a heading
person time = active + supervision
```

### Window missed {#finding-window .finding}

- a list first: no summary
"""

# -- the reader, on documents written here ---------------------------------------------------


def test_sections_by_anchor_with_their_level_parent_and_classes():
    document = parse_methods(SAMPLE)
    assert document.title == "Methods"
    assert list(document.sections) == ["methods", "workload", "person-time", "finding-window"]
    person = document.section("person-time")
    assert (person.title, person.level, person.parent, person.classes) == (
        "Person time",
        3,
        "workload",
        ("figure",),
    )
    assert person.line == 7 and person.is_figure and not person.is_finding
    # The fenced block stays in the body: its '#' line is not a heading.
    assert "# not a heading" in person.body and "person time = active" in person.body
    assert document.section("workload").parent == "methods"
    assert [s.anchor for s in document.subsections("workload")] == [
        "workload",
        "person-time",
        "finding-window",
    ]
    assert [s.anchor for s in document.figure_sections()] == ["person-time"]
    assert [s.anchor for s in document.finding_sections()] == ["finding-window"]


def test_a_summary_is_the_first_paragraph_as_plain_text():
    document = parse_methods(SAMPLE)
    assert (
        document.section("person-time").summary == "Seconds a person spends, after Author (2000)."
    )
    assert document.section("methods").summary == "Intro."
    assert document.section("finding-window").summary == ""  # opens with a list
    assert plain_text("**bold**, `code` and [a link](#x)") == "bold, code and a link"


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("Stray text\n# Title {#t}\n", "line 1: text before the first heading"),
        ("# Title {#t}\n## Plain\n", "line 2: the heading 'Plain' has no anchor"),
        (
            "# Title {#t}\n## Again {#t}\n",
            "line 2: the anchor 't' is used twice (first on line 1)",
        ),
        ("# Title {#Person_Time}\n", "line 1: the anchor 'Person_Time' must be lowercase"),
        ("# Title {#t figure}\n", "line 1: 'figure' is not a class"),
        ("# Title {#t}\nSome text\n----\n", "line 3: an underlined heading"),
        ("# Title {#t}\n```\n## not closed {#x}\n", "a code block is never closed"),
        ("# {#t}\n", "line 1: the heading has no title"),
        ("", "no heading"),
    ],
)
def test_a_malformed_document_is_refused_naming_the_line(text, message):
    with pytest.raises(MethodsDocumentError, match=re.escape(message)):
        parse_methods(text, source="sample.md")


def test_an_unknown_section_names_its_anchor():
    with pytest.raises(KeyError, match="no section 'nowhere'"):
        parse_methods(SAMPLE).section("nowhere")


def test_html_escapes_raw_html_and_gives_each_heading_its_anchor():
    # CommonMark with tables; raw HTML is shown as text, never passed through.
    assert "&lt;script&gt;" in markdown_html("<script>alert(1)</script>\n")
    assert "<script>" not in markdown_html("<script>alert(1)</script>\n")
    table = markdown_html("| a | b |\n| --- | --- |\n| 1 | 2 |\n")
    assert "<table>" in table and "<td>2</td>" in table
    person = parse_methods(SAMPLE).section("person-time")
    html = section_html(person, shift=1)
    assert html.startswith('<h4 id="person-time">Person time</h4>')
    assert "<em>person</em>" in html and '<pre><code class="language-text">' in html


# -- the document, against the code ----------------------------------------------------------


def test_every_anchor_the_registry_names_is_a_section_of_the_document():
    document = methods_document()
    missing = {anchor: who for anchor, who in anchors().items() if anchor not in document}
    assert missing == {}


def test_figures_point_at_figure_sections_and_kinds_at_finding_sections():
    document = methods_document()
    for table in (FIGURES, AWARENESS_FACTORS, LIKELIHOOD_FACTORS):
        for key, item in table.items():
            assert document.section(item.anchor).is_figure, key
    for key, kind in FINDING_KINDS.items():
        assert document.section(kind.anchor).is_finding, key


def test_every_figure_and_finding_section_is_named_by_the_registry():
    named = anchors()
    document = methods_document()
    unnamed = [s.anchor for s in document.figure_sections() if s.anchor not in named]
    unnamed += [s.anchor for s in document.finding_sections() if s.anchor not in named]
    assert unnamed == []


def test_every_assumption_is_in_the_document_with_its_status():
    document = methods_document()
    table = document.section("assumption-list").body
    for assumption in ASSUMPTIONS:
        row = re.search(rf"^\| `{assumption.key}` \| ([^|]+) \|", table, re.M)
        assert row, assumption.key
        assert row.group(1).strip() == ASSUMPTION_STATUS_WORDS[assumption.status].label
    rules = document.section("fixed-rules").body
    for key, _status, _text in METHOD_NOTES:
        assert f"`{key}`" in rules, key
    # Each assumption is also named where it is used, outside the list.
    used = "".join(
        s.body for s in document.sections.values() if s.anchor not in ("assumption-list",)
    )
    for assumption in ASSUMPTIONS:
        assert f"`{assumption.key}`" in used, assumption.key


def test_every_link_inside_the_document_leads_to_a_section():
    document = methods_document()
    text = "".join(section.body for section in document.sections.values())
    targets = set(re.findall(r"\]\(#([^)]+)\)", text))
    assert targets and targets - set(document.sections) == set()


def test_every_author_and_year_cited_is_in_the_reference_list():
    document = methods_document()
    references = document.section("references").body
    entries = [entry for entry in references.split("\n- ") if entry.strip()]
    cited = set()
    for section in document.sections.values():
        if section.anchor == "references":
            continue
        text = f"{section.title}\n{section.body}".replace("\n", " ")
        cited |= set(re.findall(r"\b([A-Z][a-z]+),?(?: et al\.)? \(?((?:19|20)\d\d)\b", text))
    assert len(cited) > 20
    absent = {
        (name, year) for name, year in cited if not any(name in e and year in e for e in entries)
    }
    assert absent == set()
    # And every reference is cited somewhere (its first author's name).
    body = "".join(s.body for s in document.sections.values() if s.anchor != "references")
    for entry in entries:
        first = re.match(r"[-\s]*([A-Z][^,]+?)[,. ]", entry).group(1)
        assert first in body, first


def test_the_core_cites_only_published_sources_and_its_methods_document():
    """No file of the core (the document included) points to notes outside the
    repository."""
    core = Path(allocation.core.__file__).parent
    outside = re.compile(r"\bDESIGN\b|REFERENCES\.md")
    cited = [
        f"{path.relative_to(core)}:{number}"
        for path in sorted([*core.rglob("*.py"), *core.rglob("*.md")])
        for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1)
        if outside.search(line)
    ]
    assert cited == []


def test_the_method_notes_are_the_summaries_of_their_sections():
    document = methods_document()
    assert [name for name, _text in METHODS] == list(METHOD_ANCHORS)
    for name, text in METHODS:
        assert text == document.section(METHOD_ANCHORS[name]).summary != "", name
        assert not re.search(r"[*`]|\]\(", text), name  # plain text for exports
    # The analysis file names each note's section.
    result = analyse([leaf("T1", occurs={"per_day": 1})])
    listed = analysis_json(result)["methods"]
    assert [(m["name"], m["anchor"]) for m in listed] == list(METHOD_ANCHORS.items())


def test_the_whole_document_renders_with_one_id_per_section():
    document = methods_document()
    html = document_html(document)
    for anchor in document.sections:
        assert html.count(f'id="{anchor}"') == 1, anchor
    assert "<table>" in html and "{#" not in html


def test_a_prefix_moves_every_id_and_every_link_to_a_section():
    """Inside another page (the printable report) the document's anchors take a prefix,
    and its links inside the document follow them."""
    document = methods_document()
    html = document_html(document, shift=1, id_prefix="method-")
    for anchor in document.sections:
        assert html.count(f'id="method-{anchor}"') == 1, anchor
    links = re.findall(r'href="#([^"]+)"', html)
    assert links, "the document links between its sections"
    assert all(link.startswith("method-") for link in links)
    assert {link.removeprefix("method-") for link in links} <= set(document.sections)


def test_the_document_ships_with_the_package():
    pyproject = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    patterns = pyproject["tool"]["setuptools"]["package-data"]["allocation"]
    assert any(fnmatch(f"core/{METHODS_FILE}", pattern) for pattern in patterns)


def test_every_assumption_says_where_it_is_used():
    """The Assumptions page links each assumption to the sections that use it: read from
    the last column of the document's list, every link reaching a section."""
    from allocation.core.methods import assumption_uses

    uses = assumption_uses()
    document = methods_document()
    for assumption in ASSUMPTIONS:
        assert uses.get(assumption.key), assumption.key
        for _title, anchor in uses[assumption.key]:
            assert anchor in document, (assumption.key, anchor)
    assert ("Supervision", "supervision") in uses["supervision_s"]
