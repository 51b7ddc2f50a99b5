"""Baton's methods document, read into sections by anchor.

``METHODS.md`` (beside this module, shipped with the package) defines every figure Baton
computes: definition, formula, inputs, the assumptions it uses with their status, and
published references. Each heading ends with its anchor, ``## Person time {#person-time}``,
and may carry classes after it: ``.figure`` marks the section that defines figures of the
registry (:mod:`.registry`), ``.finding`` the one that defines a kind of finding. The
first paragraph of a section is its summary, the short method note screens show beside
a figure and exports print.

>>> document = methods_document()
>>> document.section("person-time").title
'Person time'

Markdown becomes HTML through markdown-it-py (CommonMark with tables), with raw HTML in
the text escaped rather than passed through.

References
----------
.. [1] MacFarlane, J. (2024). CommonMark Spec, version 0.31.2. https://spec.commonmark.org/
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import cache
from html import escape
from importlib import resources

from markdown_it import MarkdownIt

from .errors import BatonError

__all__ = [
    "METHODS_FILE",
    "MethodsDocument",
    "MethodsDocumentError",
    "Section",
    "assumption_uses",
    "document_html",
    "markdown_html",
    "methods_document",
    "parse_methods",
    "plain_text",
    "section_html",
]

METHODS_FILE = "METHODS.md"

_HEADING = re.compile(r"^(#{1,6})[ \t]+(.*)$")
_ATTRIBUTES = re.compile(r"^(?P<title>.*?)[ \t]*\{#(?P<anchor>[^\s}]+)(?P<classes>[^}]*)\}[ \t]*$")
_ANCHOR = re.compile(r"^[a-z0-9]+(?:-[a-z0-9]+)*$")
_CLASS = re.compile(r"^\.[a-z][a-z0-9-]*$")
_FENCE = re.compile(r"^[ ]{0,3}(`{3,}|~{3,})")
_SETEXT = re.compile(r"^[ ]{0,3}(=+|-+)[ \t]*$")


class MethodsDocumentError(BatonError):
    """The methods document is not in the form this module reads; names the line."""


@dataclass(frozen=True)
class Section:
    """One heading of the methods document and the Markdown under it, up to the next
    heading (of any level).

    ``parent`` is the anchor of the nearest heading above it of a higher level.
    """

    anchor: str
    title: str
    level: int
    classes: tuple[str, ...]
    body: str
    line: int
    parent: str | None

    @property
    def is_figure(self) -> bool:
        return "figure" in self.classes

    @property
    def is_finding(self) -> bool:
        return "finding" in self.classes

    @property
    def summary(self) -> str:
        """The first paragraph as plain text on one line; empty when the section opens
        with something else (a list, a table, code)."""
        lines = []
        for line in self.body.strip("\n").splitlines():
            if not line.strip():
                break
            lines.append(line.strip())
        if not lines or re.match(r"^([-*+>|]|\d+[.)]|```|~~~)", lines[0]):
            return ""
        return plain_text(" ".join(lines))


@dataclass(frozen=True)
class MethodsDocument:
    """The whole document: its sections in order, by anchor."""

    title: str
    sections: dict[str, Section]

    def section(self, anchor: str) -> Section:
        """The section of an anchor.

        Raises
        ------
        KeyError
            Naming the anchor, when the document has no such section.
        """
        found = self.sections.get(anchor)
        if found is None:
            raise KeyError(f"the methods document has no section {anchor!r}")
        return found

    def __contains__(self, anchor: object) -> bool:
        return anchor in self.sections

    def subsections(self, anchor: str) -> list[Section]:
        """A section and every section under it, in order."""
        start = self.section(anchor)
        found = [start]
        inside = False
        for item in self.sections.values():
            if item is start:
                inside = True
                continue
            if inside:
                if item.level <= start.level:
                    break
                found.append(item)
        return found

    def figure_sections(self) -> list[Section]:
        return [item for item in self.sections.values() if item.is_figure]

    def finding_sections(self) -> list[Section]:
        return [item for item in self.sections.values() if item.is_finding]


def parse_methods(text: str, source: str = METHODS_FILE) -> MethodsDocument:
    """Read a methods document into its sections.

    Parameters
    ----------
    text : str
        The Markdown: nothing before its first heading, every heading an ATX heading
        (``#`` to ``######``) ending with ``{#anchor}`` and optional ``.class`` words.
    source : str
        The name used in messages.

    Returns
    -------
    MethodsDocument

    Raises
    ------
    MethodsDocumentError
        Naming the line: text before the first heading, a heading without an anchor, an
        anchor that is not lowercase words joined by hyphens or is used twice, a class
        that is not ``.word``, an underlined (setext) heading.
    """
    # Per heading: line, anchor, level, classes, title; its body lines in ``bodies``.
    found: list[tuple[int, str, int, tuple[str, ...], str]] = []
    bodies: list[list[str]] = []
    fence: str | None = None
    previous = ""
    lines = text.splitlines()
    for number, line in enumerate(lines, start=1):
        opening = _FENCE.match(line)
        if fence is not None:
            if opening and opening.group(1)[0] == fence[0] and len(opening.group(1)) >= len(fence):
                fence = None
            bodies[-1].append(line)
            previous = line
            continue
        if opening:
            fence = opening.group(1)
        heading = _HEADING.match(line) if fence is None else None
        if heading is None:
            if not bodies:
                if line.strip():
                    raise MethodsDocumentError(
                        f"{source}, line {number}: text before the first heading"
                    )
                continue
            if _SETEXT.match(line) and previous.strip() and not previous.lstrip().startswith("|"):
                raise MethodsDocumentError(
                    f"{source}, line {number}: an underlined heading; write it with '#' and "
                    "an anchor"
                )
            bodies[-1].append(line)
            previous = line
            continue
        level = len(heading.group(1))
        match = _ATTRIBUTES.match(heading.group(2))
        if match is None:
            raise MethodsDocumentError(
                f"{source}, line {number}: the heading {heading.group(2).strip()!r} has no "
                "anchor; end it with {#anchor}"
            )
        anchor = match.group("anchor")
        if not _ANCHOR.match(anchor):
            raise MethodsDocumentError(
                f"{source}, line {number}: the anchor {anchor!r} must be lowercase letters "
                "and digits joined by single hyphens"
            )
        classes = tuple(match.group("classes").split())
        for word in classes:
            if not _CLASS.match(word):
                raise MethodsDocumentError(
                    f"{source}, line {number}: {word!r} is not a class; write it as .word"
                )
        if any(anchor == item[1] for item in found):
            first = next(item[0] for item in found if item[1] == anchor)
            raise MethodsDocumentError(
                f"{source}, line {number}: the anchor {anchor!r} is used twice (first on line "
                f"{first})"
            )
        title = match.group("title").strip()
        if not title:
            raise MethodsDocumentError(f"{source}, line {number}: the heading has no title")
        found.append((number, anchor, level, tuple(word[1:] for word in classes), title))
        bodies.append([])
        previous = ""
    if fence is not None:
        raise MethodsDocumentError(f"{source}: a code block is never closed")
    if not found:
        raise MethodsDocumentError(f"{source}: no heading")
    sections: dict[str, Section] = {}
    stack: list[tuple[int, str]] = []
    for (number, anchor, level, classes, title), body in zip(found, bodies, strict=True):
        while stack and stack[-1][0] >= level:
            stack.pop()
        sections[anchor] = Section(
            anchor=anchor,
            title=title,
            level=level,
            classes=classes,
            body="\n".join(body).strip("\n") + "\n",
            line=number,
            parent=stack[-1][1] if stack else None,
        )
        stack.append((level, anchor))
    top = next(iter(sections.values()))
    return MethodsDocument(top.title, sections)


@cache
def methods_document() -> MethodsDocument:
    """Baton's own methods document, read once per process."""
    text = resources.files(__package__).joinpath(METHODS_FILE).read_text(encoding="utf-8")
    return parse_methods(text)


_USE_ROW = re.compile(r"^\| `(?P<key>[a-z_]+)` \|.*\|(?P<used>[^|]*)\|\s*$", re.M)
_LINK = re.compile(r"\[(?P<title>[^\]]+)\]\(#(?P<anchor>[a-z0-9-]+)\)")


@cache
def assumption_uses() -> dict[str, tuple[tuple[str, str], ...]]:
    """Where each assumption is used: its row of the document's list of assumptions,
    as ``(title, anchor)`` pairs of the sections named in its last column."""
    table = methods_document().section("assumption-list").body
    return {
        match["key"]: tuple(
            (link["title"], link["anchor"]) for link in _LINK.finditer(match["used"])
        )
        for match in _USE_ROW.finditer(table)
    }


@cache
def _renderer() -> MarkdownIt:
    # CommonMark with tables; raw HTML in the text is escaped, never passed through.
    return MarkdownIt("commonmark", {"html": False}).enable("table")


def markdown_html(text: str) -> str:
    """Markdown as HTML (CommonMark with tables; any HTML in the text is escaped)."""
    return _renderer().render(text)


def plain_text(text: str) -> str:
    """Inline Markdown as plain text: emphasis and code marks dropped, links as their text."""
    parts = []
    for token in _renderer().parseInline(text)[0].children or []:
        if token.type in ("text", "code_inline"):
            parts.append(token.content)
        elif token.type in ("softbreak", "hardbreak"):
            parts.append(" ")
    return "".join(parts).strip()


def section_html(section: Section, shift: int = 0, id_prefix: str = "") -> str:
    """One section as HTML: its heading, with the anchor as its id, then its body.

    ``shift`` lowers every heading by that many levels (to sit under a page's own title),
    down to ``h6`` at most. ``id_prefix`` goes before every heading's id and every link
    to a section, so that the document can sit inside a page whose own ids would clash
    with its anchors (the printable report).
    """
    level = min(6, section.level + shift)
    title = _renderer().renderInline(section.title)
    body = markdown_html(section.body)
    if id_prefix:
        body = body.replace('href="#', f'href="#{escape(id_prefix)}')
    anchor = escape(id_prefix + section.anchor)
    return f'<h{level} id="{anchor}">{title}</h{level}>\n' + body


def document_html(document: MethodsDocument, shift: int = 0, id_prefix: str = "") -> str:
    """The whole document as HTML, each heading with its anchor (after ``id_prefix``) as
    its id."""
    return "".join(
        section_html(section, shift, id_prefix) for section in document.sections.values()
    )
