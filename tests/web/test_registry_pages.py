"""Figures, finding kinds and statuses on the screens in the registry's words, and every
method note linked to its section of Baton's methods document.

The pages are every study page of an example study (closed-loop insulin: five plans,
three with a mode map, every kind of finding but one, handovers of every source and band)
as its owner sees them, found from the URL configuration as ``test_access.py`` finds
them, with a snapshot and a finished simulation so that those pages have content. They
are checked against the registry and the methods document (whose own tests check them
against the published sources and each other):

- no key of the registry that is not a plain word (``night_interruptions_per_day``,
  ``uncued_change``) appears in a page's visible text or its charts' labels; identifiers
  set in ``<code>`` (task ids, the study file's and the assumptions' keys) are the
  study's own and are left out;
- the dashboards and the compare page name each figure they show with the registry's
  label and write its value as the registry does;
- every link to the Methods page points at a section the document has, every method note
  (``class="method"``) carries one, and the Methods page shows every section under its
  anchor with a list of contents.
"""

from __future__ import annotations

import json
import re
from html import unescape
from html.parser import HTMLParser

import pytest
from django.urls import get_resolver, reverse

from allocation import models as m
from allocation import selectors, services
from allocation.core import registry
from allocation.core.analysis.compare import HEADLINE_FIGURES, OBJECTIVE_FIGURES, PERSON_FIGURES
from allocation.core.methods import methods_document, plain_text
from allocation.core.registry import figure_number, figure_text
from allocation.examples import example_documents

from .test_access import study_url_names

IMMEDIATE = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}
#: A short simulation, so that the simulation pages show a run's figures.
DAYS, SEED = 3, 1

#: Every key of the registry's tables that no sentence would hold as a word.
RAW_KEYS = sorted(
    key
    for table in (
        registry.FIGURES,
        registry.SIMULATED,
        registry.AWARENESS_FACTORS,
        registry.LIKELIHOOD_FACTORS,
        registry.FINDING_KINDS,
        registry.ASSIGNMENT_STATUS_WORDS,
        registry.DECISION_STATUS_WORDS,
        registry.RISK_BANDS,
        registry.HANDOVER_SOURCES,
        registry.CATEGORIES,
    )
    for key in table
    if "_" in key
)
#: Where plotly shows text: trace names, labels, hover texts, titles and annotations.
CHART_TEXT = {"name", "text", "hovertemplate", "hovertext", "ticktext", "x", "y"}


class Page(HTMLParser):
    """A page read for what a reader sees: its text outside scripts, styles and code; the
    chart data its scripts carry; its links to the Methods page; and its method notes,
    each with whether it links to the Methods page."""

    SKIP = {"script", "style", "code", "pre", "title"}

    def __init__(self, methods_url: str) -> None:
        super().__init__(convert_charrefs=True)
        self.methods_url = methods_url
        self.text: list[str] = []
        self.charts: list[str] = []
        self.links: list[str] = []
        self.notes: list[dict[str, object]] = []
        self.ids: list[str] = []
        self._skip: list[str] = []
        self._json = False
        self._open: list[tuple[str, int]] = []  # (tag, index in notes) of method notes
        self._depth: dict[str, int] = {}

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        if attributes.get("id"):
            self.ids.append(attributes["id"])
        if tag in self.SKIP:
            self._skip.append(tag)
            self._json = tag == "script" and attributes.get("type") == "application/json"
        href = attributes.get("href") or ""
        if tag == "a" and href.startswith(self.methods_url):
            self.links.append(href)
            for _tag, index in self._open:
                self.notes[index]["linked"] = True
        self._depth[tag] = self._depth.get(tag, 0) + 1
        if "method" in (attributes.get("class") or "").split():
            self.notes.append({"tag": tag, "linked": False, "text": ""})
            self._open.append((tag, len(self.notes) - 1))
            self.notes[-1]["level"] = self._depth[tag]

    def handle_endtag(self, tag):
        if self._skip and self._skip[-1] == tag:
            self._skip.pop()
            self._json = False
        if self._open:
            last_tag, index = self._open[-1]
            if last_tag == tag and self.notes[index]["level"] == self._depth.get(tag, 0):
                self._open.pop()
        self._depth[tag] = max(0, self._depth.get(tag, 0) - 1)

    def handle_data(self, data):
        if self._json:
            self.charts.append(data)
        elif not self._skip:
            self.text.append(data)
            for _tag, index in self._open:
                self.notes[index]["text"] += data

    @property
    def visible(self) -> str:
        return " ".join(" ".join(self.text).split())


def chart_strings(value, key: str = "") -> list[str]:
    """The strings of a plotly figure a reader sees (labels, names, hover texts)."""
    if isinstance(value, dict):
        found = []
        for inner_key, inner in value.items():
            if inner_key == "title" and isinstance(inner, dict):
                found += [str(inner.get("text", ""))]
            elif inner_key in ("customdata", "meta"):
                continue
            else:
                found += chart_strings(inner, inner_key)
        return found
    if isinstance(value, list):
        return [text for item in value for text in chart_strings(item, key)]
    if isinstance(value, str) and key in CHART_TEXT:
        return [value]
    return []


def read(html: str) -> Page:
    page = Page(reverse("methods"))
    page.feed(html)
    page.close()
    return page


@pytest.fixture
def insulin(owner, settings) -> m.Study:
    """The closed-loop insulin example, frozen once and simulated for a few days."""
    document = next(d for d in example_documents() if d["study"]["id"] == "closed-loop-insulin")
    study = services.study_import(data=document, owner=owner)
    services.snapshot_create(study=study, title="Before the workshop", user=owner)
    settings.TASKS = IMMEDIATE
    run = services.simulation_request(
        study=study, plan_key="full-loop", days=DAYS, seed=SEED, user=owner
    )
    run.refresh_from_db()
    assert run.status == m.SimulationStatus.DONE
    return study


def study_pages(client, study: m.Study) -> dict[str, str]:
    """Every HTML page of the study a GET gives its owner, by address: each URL of the
    study with every plan, and the first task, agent, event, mode and finding."""
    core = selectors.study_load(study).study
    leaf = core.leaves[0].id
    samples = {
        "pk": study.pk,
        "task": leaf,
        "agent": core.agents[0].id,
        "event": core.events[0].id,
        "kind": "tasks",
        "key": leaf,
        "transition": "0",
        "finding": 0,
        "number": 0,
        "fmt": "csv",
    }
    query = {
        "plan-simulation": f"?days={DAYS}&seed={SEED}",
        "study-simulation-compare": f"?days={DAYS}&seed={SEED}&person={core.humans[0].id}",
        "plan-review": "?show=all",
        "plan-workshop": "?show=all",
    }
    pages = {}
    for name in study_url_names():
        arguments = get_resolver().reverse_dict.getlist(name)[0][0][0][1]
        for plan in core.plans if "plan" in arguments else [None]:
            kwargs = {arg: samples.get(arg) for arg in arguments}
            if plan is not None:
                kwargs["plan"] = plan.id
            if "mode" in arguments:
                if plan is None or plan.modes is None:
                    continue
                kwargs["mode"] = plan.modes.states[0].id
            if any(value is None for value in kwargs.values()):
                continue
            url = reverse(name, kwargs=kwargs) + query.get(name, "")
            response = client.get(url)
            if response.status_code != 200 or "text/html" not in response["Content-Type"]:
                continue
            pages[url] = response.content.decode()
    return pages


def test_no_page_shows_a_raw_key_of_the_registry(client, insulin, owner):
    client.force_login(owner)
    pages = study_pages(client, insulin)
    # The pages this test is about are all there (a routing change would show here).
    for name in ("plan-dashboard", "plan-review", "plan-modes", "plan-simulation"):
        assert any(url.startswith(reverse(name, args=[insulin.pk, "full-loop"])) for url in pages)
    assert reverse("study-compare", args=[insulin.pk]) in pages
    assert len(pages) > 40
    pages[reverse("methods")] = client.get(reverse("methods")).content.decode()
    assert "night_interruptions_per_day" in RAW_KEYS and "uncued_change" in RAW_KEYS
    found = {}
    for url, html in pages.items():
        page = read(html)
        texts = [page.visible]
        for data in page.charts:
            texts += chart_strings(json.loads(data))
        for key in RAW_KEYS:
            pattern = re.compile(rf"(?<![\w-]){re.escape(key)}(?![\w-])")
            for text in texts:
                match = pattern.search(unescape(text))
                if match:
                    where = unescape(text)[max(0, match.start() - 40) : match.end() + 40]
                    found.setdefault(url, []).append(where)
    assert found == {}


def test_every_method_note_links_to_a_section_that_exists(client, insulin, owner):
    client.force_login(owner)
    pages = study_pages(client, insulin)
    anchors = set(methods_document().sections)
    methods_url = reverse("methods")
    notes = links = 0
    for url, html in pages.items():
        page = read(html)
        for href in page.links:
            if href == methods_url:
                continue  # the Methods page in the site's navigation
            assert href.startswith(methods_url + "#"), (url, href)
            assert href.split("#", 1)[1] in anchors, (url, href)
            links += 1
        for note in page.notes:
            assert note["linked"], (url, note["text"][:120])
            notes += 1
    # Every analysis page has a method note (dashboards, compare, graph, modes, ratings,
    # simulation, snapshots, assumptions, exports, review, overview).
    assert notes > 30 and links > notes


def test_the_dashboard_names_and_writes_each_figure_as_the_registry_does(client, insulin, owner):
    client.force_login(owner)
    html = client.get(reverse("plan-dashboard", args=[insulin.pk, "full-loop"])).content.decode()
    text = read(html).visible
    analysis = selectors.plan_analysis(insulin, "full-loop")
    headline = analysis.headline()
    # The head of the page: each headline figure, value and label, as the registry has them.
    for key in ("burden_s_per_day", "interruptions_per_day", "night_interruptions_per_day"):
        assert f"{figure_text(key, headline[key])} {registry.FIGURES[key].label}" in text, key
    for key in ("handovers", "handovers_to_review", "findings"):
        assert f"{figure_text(key, headline[key])} {registry.FIGURES[key].label}" in text, key
    # Each person's day: the columns are the registry's headings with their unit.
    for key in (
        "burden_s_per_day",
        "monitoring_s_per_day",
        "interactions_per_day",
        "interruptions_per_day",
        "night_interruptions_per_day",
        "awake_share_used",
    ):
        spec = registry.FIGURES[key]
        assert spec.heading in text, key
        person = next(iter(analysis.people.values())).to_json()
        assert figure_text(key, person[key], unit=False) in text, key
    for key in ("cut_ratio", "modularity"):
        value = getattr(analysis.coherence, key)
        assert f"{figure_text(key, value)} {registry.FIGURES[key].label}" in text, key
    for key in ("handovers_per_day", "time_ratio", "likelihood", "risk", "mode_share"):
        assert registry.FIGURES[key].heading in text, key
    # Findings by kind, handovers by source and band, the awareness factors: their words.
    for finding in analysis.findings:
        assert registry.finding_kind(finding.kind).label in text, finding.kind
    for handover in analysis.handovers[:50]:
        assert registry.HANDOVER_SOURCES[handover.site.source].label in text
        assert registry.RISK_BANDS[handover.band].label in text
    for factor in registry.AWARENESS_FACTORS.values():
        assert factor.label in text, factor.key


def test_the_compare_page_names_and_writes_each_figure_as_the_registry_does(
    client, insulin, owner
):
    client.force_login(owner)
    url = reverse("study-compare", args=[insulin.pk]) + "?baseline=injections&plan=full-loop"
    html = client.get(url).content.decode()
    text = read(html).visible
    baseline = selectors.plan_analysis(insulin, "injections")
    headline = baseline.headline()
    for key in HEADLINE_FIGURES:
        spec = registry.FIGURES[key]
        row = f"{spec.label} {spec.unit}".strip()
        assert row in text, key
        # The baseline's value, at the registry's precision, follows its direction.
        assert figure_number(key, headline[key]) in text, key
    for key in PERSON_FIGURES:
        assert registry.FIGURES[key].label in text, key
    # The objective's weights are named by the figures' labels and units.
    for key in OBJECTIVE_FIGURES:
        spec = registry.FIGURES[key]
        assert f"{spec.label} {spec.unit}".strip() in text, key
    # Findings that appear against the baseline, by the registry's words for their kind.
    appear = {finding.kind for finding in selectors.plan_analysis(insulin, "full-loop").findings}
    appear -= {finding.kind for finding in baseline.findings}
    assert appear
    for kind in appear:
        assert registry.finding_kind(kind).label in text, kind


def test_the_methods_page_shows_every_section_under_its_anchor(client, owner):
    client.force_login(owner)
    response = client.get(reverse("methods"))
    assert response.status_code == 200
    page = read(response.content.decode())
    document = methods_document()
    sections = list(document.sections.values())
    # One element per section with its anchor as its id, each once.
    assert [anchor for anchor in page.ids if anchor in document.sections] == [
        section.anchor for section in sections
    ]
    assert len(set(page.ids)) == len(page.ids)
    # The contents list every section after the title, in order.
    nav = response.content.decode().split('class="methods-contents"', 1)[1].split("</nav>", 1)[0]
    contents = re.findall(r'<a href="#([a-z0-9-]+)">', nav)
    assert contents == [section.anchor for section in sections[1:]]
    # Its words are the document's: each section's title, and a formula of one (#supervision).
    for section in sections:
        assert plain_text(section.title) in page.visible, section.anchor
    formula = "supervision = max(supervision_s[L_decision], supervision_s[L_action])"
    assert formula in response.content.decode()
    # The cautions, as on every analysis page, and the page is in the navigation.
    assert "Cautions." in page.visible
    assert f'href="{reverse("methods")}"' in client.get(reverse("study-list")).content.decode()


def test_the_methods_page_needs_a_sign_in_but_no_study(client, db):
    response = client.get(reverse("methods"))
    assert response.status_code == 302 and reverse("login") in response["Location"]
