"""Tags every template may use (a builtin of the template engine, no ``{% load %}``):
figures, finding kinds and statuses in the registry's words, and links to the sections of
Baton's methods document.

A figure is written with its key, never with words or a precision of the template's own::

    {{ headline.burden_s_per_day|figure:"burden_s_per_day" }}   ->  4.07 h a day
    {{ person.burden_s_per_day|figure_cell:"burden_s_per_day" }} ->  4.07 h
    {% figure_label "burden_s_per_day" %}                       ->  Person time
    {{ finding.kind|finding_kind }}                             ->  Change without a cue
    {{ handover.band|term:"risk-band" }}                        ->  Review
    {% method_link "person-time" %}                             ->  a link to Methods

A key or an anchor the registry or the methods document does not know raises, naming
it, so a page cannot quietly show a raw key or link to a missing section.
"""

from __future__ import annotations

import functools
from typing import Any

from django import template
from django.urls import reverse
from django.utils.html import format_html
from django.utils.safestring import mark_safe
from django.utils.text import Truncator

from allocation.core import registry
from allocation.core.methods import methods_document

register = template.Library()

#: The registry's fixed lists, by the name templates give them.
TERMS = {
    "assignment-status": registry.ASSIGNMENT_STATUS_WORDS,
    "assumption-status": registry.ASSUMPTION_STATUS_WORDS,
    "decision-status": registry.DECISION_STATUS_WORDS,
    "risk-band": registry.RISK_BANDS,
    "frequency-band": registry.FREQUENCY_BAND_WORDS,
    "handover-source": registry.HANDOVER_SOURCES,
    "category": registry.CATEGORIES,
    "cue": registry.CUE_WORDS,
    "cause": registry.CAUSE_WORDS,
}


def method_url(anchor: str) -> str:
    """The address of a section of the methods page.

    Raises
    ------
    KeyError
        Naming the anchor, when the methods document has no such section.
    """
    methods_document().section(anchor)
    return f"{reverse('methods')}#{anchor}"


def term_label(value: str, table: str) -> str:
    """A value of one of the registry's fixed lists (:data:`TERMS`) in words."""
    words = TERMS[table].get(value)
    if words is None:
        raise KeyError(f"no {table} {value!r} in the registry")
    return words.label


@register.filter(name="figure")
def figure_filter(value: float | None, key: str) -> str:
    """A figure's value with its unit, as the registry writes it."""
    return registry.figure_text(key, value)


@register.filter(name="figure_cell")
def figure_cell_filter(value: float | None, key: str) -> str:
    """A figure's value in a column whose heading gives what it is per: a duration in
    its unit of time (``4.07 h``), any other figure as a number."""
    return registry.figure_text(key, value, unit=False)


@register.filter(name="figure_number")
def figure_number_filter(value: float | None, key: str) -> str:
    """A figure's value at the registry's precision, without its unit (for a column whose
    heading gives the unit)."""
    return registry.figure_number(key, value)


@register.filter(name="figure_signed")
def figure_signed_filter(value: float | None, key: str) -> str:
    """A difference of a figure, with its sign and unit."""
    return registry.figure_text(key, value, signed=True)


@register.simple_tag
def figure_label(key: str) -> str:
    """A figure's label."""
    return registry.figure(key).label


def column_unit(key: str) -> str:
    """What a column of :func:`figure_cell` values is in: what a duration is per, the
    unit of any other figure."""
    spec = registry.figure(key)
    return spec.per if spec.seconds else spec.unit


@register.simple_tag
def figure_heading(key: str) -> str:
    """A figure's column heading: its short label (else its label) and the column's unit."""
    unit = column_unit(key)
    heading = registry.figure(key).heading
    if not unit or heading.endswith(unit):  # "Handovers a day" says its unit already
        return heading
    return format_html('{} <span class="unit">{}</span>', registry.figure(key).heading, unit)


@register.simple_tag
def figure_short(key: str) -> str:
    """A figure's short label (else its label), for a narrow table whose caption gives
    the unit."""
    return registry.figure(key).heading


@register.simple_tag
def figure_unit(key: str) -> str:
    """A figure's unit (empty for a pure number)."""
    return registry.figure(key).unit


@register.filter(name="finding_kind")
def finding_kind_filter(kind: str) -> str:
    """A kind of finding in words."""
    return registry.finding_kind(kind).label


@register.filter(name="term")
def term_filter(value: str, table: str) -> str:
    """A status, band, source or category in the registry's words."""
    return term_label(value, table)


@register.simple_tag(name="method_url")
def method_url_tag(anchor: str) -> str:
    """The address of a section of the methods page."""
    return method_url(anchor)


@register.simple_tag
def method_link(anchor: str, text: str = "") -> str:
    """A link to a section of the methods page, named ``text`` or after the section."""
    title = text or f"Methods: {methods_document().section(anchor).title}"
    return format_html('<a class="method-link" href="{}">{}</a>', method_url(anchor), title)


@register.simple_tag
def method_summary(anchor: str) -> str:
    """The first paragraph of a section of the methods document, as plain text."""
    return methods_document().section(anchor).summary


@register.simple_tag
def options(
    choices: Any,
    selected: Any,
    blank: str = "",
    truncate: int = 0,
    title: bool = False,
    text: str = "label",
    prefix: str = "",
    pick: str = "",
) -> str:
    """The ``<option>`` elements of a select, the one whose value equals ``selected``
    (with ``pick``, ``selected[pick]``) marked selected; ``blank`` adds a first option
    with no value. ``choices`` holds (value, label) pairs or plain values; each option
    shows its label (``text="value"``: its value, after ``prefix``), cut to ``truncate``
    characters, with the label as its title if ``title``.

    A plan editor page renders the same lists in every row: each distinct list and choice
    is made once.
    """
    if pick:
        selected = selected.get(pick) if hasattr(selected, "get") else None
    pairs = tuple(tuple(c) if isinstance(c, list | tuple) else (c, c) for c in choices)
    try:
        return _options(pairs, selected, blank, truncate, title, text, prefix)
    except TypeError:  # a value that cannot be a key of the cache
        return _options.__wrapped__(pairs, selected, blank, truncate, title, text, prefix)


@functools.lru_cache(maxsize=4096)
def _options(pairs, selected, blank, truncate, title, text, prefix) -> str:
    parts = [format_html('<option value="">{}</option>', blank)] if blank else []
    for value, label in pairs:
        shown = str(label if text == "label" else value)
        if truncate:
            shown = Truncator(shown).chars(truncate)
        parts.append(
            format_html(
                '<option value="{}"{}{}>{}{}</option>',
                value,
                format_html(' title="{}"', label) if title else "",
                mark_safe(" selected") if selected == value else "",
                prefix,
                shown,
            )
        )
    return mark_safe("".join(parts))
