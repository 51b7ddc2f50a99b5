"""Pages and their partials, and the one messages slot.

An htmx request for a page's region gets the region alone: one element, carrying the
region's stable id, with no ``<html>`` around it, and the same markup the whole page shows
under that id (a page template and its partial are one piece of markup). What an htmx
action says arrives out of band in ``<div id="messages">``, the page's one live region for
messages, and is then used: the next page does not show it again.

The responses are read as a browser's parser would read them (the standard library's
``html.parser``), not by matching the templates' own text: which elements stand at the top
of a response, and where an element with a given id starts and ends.
"""

from __future__ import annotations

import re
from html import unescape
from html.parser import HTMLParser

import pytest
from django.urls import reverse

from allocation import models as m

HX = {"HX-Request": "true"}

#: Elements without an end tag (the HTML standard's void elements).
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source"}
VOID |= {"track", "wbr"}


class Tree(HTMLParser):
    """The top-level elements of a response, and each id's element as text."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.text = text
        self.starts = [0]
        for line in text.splitlines(keepends=True):
            self.starts.append(self.starts[-1] + len(line))
        self.open: list[tuple[str, str | None, int]] = []
        self.top: list[tuple[str, dict[str, str | None]]] = []
        self.spans: dict[str, tuple[int, int]] = {}
        self.attributes: dict[str, dict[str, str | None]] = {}
        self.feed(text)
        self.close()

    def _offset(self) -> int:
        line, column = self.getpos()
        return self.starts[line - 1] + column

    def handle_starttag(self, tag, attrs):
        start, attributes = self._offset(), dict(attrs)
        if attributes.get("id"):
            self.attributes[attributes["id"]] = attributes
        if not self.open:
            self.top.append((tag, attributes))
        if tag in VOID:
            end = self.text.index(">", start) + 1
            if attributes.get("id"):
                self.spans[attributes["id"]] = (start, end)
            return
        self.open.append((tag, attributes.get("id"), start))

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag("br", attrs)  # a self-closed tag opens nothing

    def handle_endtag(self, tag):
        end = self.text.index(">", self._offset()) + 1
        while self.open:
            name, ident, start = self.open.pop()
            if ident:
                self.spans[ident] = (start, end)
            if name == tag:
                break

    def element(self, ident: str) -> str:
        start, end = self.spans[ident]
        return self.text[start:end]


def same_markup(text: str) -> str:
    """The markup with what differs on every render taken out: Django masks the CSRF
    token afresh each time it writes it."""
    return re.sub(r'name="csrfmiddlewaretoken" value="[^"]+"', 'name="csrfmiddlewaretoken"', text)


def study_url(name: str, study: m.Study, *args: object) -> str:
    return reverse(name, args=[study.pk, *args])


# Each page: its address, what the htmx request adds, and the id of the region it gets.
# The design's home-heating study: plans manual and auto (auto has modes schedule and
# hold), agents resident and thermostat, leaf tasks T1 and T2.
REGIONS = [
    ("plan-dashboard", ("auto",), "", {}, "dashboard"),
    ("plan-dashboard", ("auto",), "", {"HX-Target": "dashboard-handovers"}, "dashboard-handovers"),
    ("plan-modes", ("auto",), "", {"HX-Target": "modes-region"}, "modes-region"),
    ("plan-simulation", ("auto",), "", {"HX-Target": "simulation-region"}, "simulation-region"),
    ("plan-ratings", ("auto",), "", {}, "ratings"),
    ("plan-review", ("auto",), "", {}, "review-region"),
    ("plan-workshop", ("auto",), "?item=1", {}, "workshop-item"),
    ("plan-import", ("auto",), "", {}, "import-region"),
    ("study-snapshots", (), "", {}, "snapshot-region"),
    ("snapshot-difference", (), "", {}, "snapshot-difference"),
    ("study-graph", (), "", {}, "graph-region"),
    ("graph-task", ("T2",), "?plan=auto", {}, "graph-task"),
    ("study-compare", (), "", {}, "comparison"),
    ("study-history", (), "", {}, "history-entries"),
    ("study-assumptions", (), "?row=monitoring_s", {}, "assumption-monitoring_s"),
    ("study-assumptions", (), "?row=risk_policy", {}, "risk-policy"),
    ("inventory-item", ("agents", "new"), "", {}, "agents-form"),
    ("inventory-delete", ("agents", "thermostat"), "", {}, "agents-delete"),
    ("mode-override", ("auto", "hold", "T2"), "", {}, "override-form"),
]


@pytest.mark.parametrize(
    ("name", "args", "query", "headers", "region"),
    REGIONS,
    ids=[f"{row[0]}#{row[4]}" for row in REGIONS],
)
def test_htmx_gets_the_region_alone_and_the_page_has_the_same_markup(
    client, study, owner, name, args, query, headers, region
):
    client.force_login(owner)
    address = study_url(name, study, *args) + query
    fragment = client.get(address, headers={**HX, **headers})
    assert fragment.status_code == 200
    text = fragment.content.decode()
    top = Tree(text).top
    # One element, the region, with its id: what htmx swaps whole.
    assert [(tag, attributes.get("id")) for tag, attributes in top][:1] == [(top[0][0], region)], (
        top
    )
    assert len(top) == 1, top
    assert "<html" not in text and 'id="messages"' not in text
    page = client.get(address)
    assert page.status_code == 200
    whole = page.content.decode()
    assert whole.lstrip().lower().startswith("<!doctype html>") and "<html" in whole
    assert same_markup(Tree(whole).element(region)) == same_markup(Tree(text).element(region))


def test_the_walkthrough_of_a_finding_is_the_finding_pages_partial(client, study, owner):
    """Plan auto's finding "person and device disagree" has a sequence of events to step
    through (test_modes works it by hand); its step-through is the swapped region."""
    client.force_login(owner)
    for number in range(8):
        address = study_url("mode-finding", study, "auto", number) + "?step=1"
        page = client.get(address).content.decode()
        if 'id="walkthrough"' in page:
            break
    else:
        pytest.fail("no finding of plan auto has a step-through")
    fragment = client.get(address, headers={**HX, "HX-Target": "walkthrough"})
    text = fragment.content.decode()
    assert [attributes.get("id") for _tag, attributes in Tree(text).top] == ["walkthrough"]
    assert same_markup(Tree(page).element("walkthrough")) == same_markup(text.strip())


def test_a_saved_inventory_item_comes_back_as_its_section_of_the_page(client, study, owner):
    client.force_login(owner)
    address = study_url("inventory-item", study, "agents", "new")
    data = {"id": "neighbour", "name": "Neighbour", "kind": "human", "version": "0"}
    response = client.post(address, data, headers=HX)
    text = response.content.decode()
    top = Tree(text).top
    assert [(tag, attributes.get("id")) for tag, attributes in top] == [
        ("section", "section-agents"),
        ("div", "messages"),
    ]
    assert response["HX-Retarget"] == "#section-agents"
    assert "Neighbour" in Tree(text).element("section-agents")


# -- the messages slot ------------------------------------------------------------------


def slot(text: str) -> tuple[dict[str, str | None], list[str]]:
    """The messages slot of a response: its attributes and the messages in it, as text."""
    tree = Tree(text)
    said = [
        unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", "", item))).strip()
        for item in re.findall(r"<li\b[^>]*>(.*?)</li>", tree.element("messages"), re.S)
    ]
    return tree.attributes["messages"], said


def test_every_page_has_one_messages_slot_that_is_a_live_region(client, study, owner):
    client.force_login(owner)
    for address in (
        reverse("study-list"),
        study_url("study-detail", study),
        study_url("plan-editor", study, "auto"),
        study_url("plan-workshop", study, "auto"),
    ):
        page = client.get(address).content.decode()
        assert page.count('id="messages"') == 1, address
        attributes = Tree(page).attributes["messages"]
        assert attributes["aria-live"] == "polite" and "hx-swap-oob" not in attributes


def test_a_message_of_an_htmx_action_arrives_in_the_slot_out_of_band(client, study, owner):
    """Deleting the mode 'hold' of plan auto says so (a django.contrib message) beside the
    mode-map region it answers with."""
    client.force_login(owner)
    response = client.post(study_url("mode-delete", study, "auto", "hold"), headers=HX)
    text = response.content.decode()
    assert [attributes.get("id") for _tag, attributes in Tree(text).top] == [
        "modes-region",
        "messages",
    ]
    attributes, said = slot(text)
    assert attributes["hx-swap-oob"] == "innerHTML" and attributes["aria-live"] == "polite"
    assert said == ["Deleted the mode hold."]
    # Shown once: the next page has an empty slot.
    page = client.get(study_url("plan-modes", study, "auto")).content.decode()
    assert slot(page)[1] == []


@pytest.mark.parametrize(
    ("name", "args", "data", "message"),
    [
        # A view's own note on success.
        (
            "study-assumption-set",
            (),
            {"key": "monitoring_s", "value": "12"},
            "Saved the study's monitoring_s.",
        ),
        ("snapshot-create", (), {"title": "Workshop"}, "Frozen as"),
        # And on a refusal: nothing was stored, the problems are beside the value.
        (
            "study-assumption-set",
            (),
            {"key": "monitoring_s", "value": "-3"},
            "Nothing was saved. The value of monitoring_s has problems, listed beside it.",
        ),
    ],
)
def test_notes_of_htmx_actions_travel_in_the_slot(client, study, owner, name, args, data, message):
    client.force_login(owner)
    response = client.post(study_url(name, study, *args), data, headers=HX)
    assert response.status_code == 200
    _attributes, said = slot(response.content.decode())
    assert len(said) == 1 and said[0].startswith(message), said


def test_a_rating_recorded_by_htmx_says_so_in_the_slot(client, study, member_of):
    """Raw TLX of six ratings of 50 is their mean, 50 (Hart & Staveland 1988)."""
    client.force_login(member_of("reviewer"))
    data = {"task": "T2", "session": "S1", "participant": "P01", "weighting": "raw"}
    subscales = ("mental", "physical", "temporal", "performance", "effort", "frustration")
    data |= dict.fromkeys(subscales, "50")
    response = client.post(study_url("plan-rating-record", study, "auto"), data, headers=HX)
    _attributes, said = slot(response.content.decode())
    assert said == ["Recorded P01's ratings of T2: Raw TLX 50.0."]


def test_an_action_that_says_nothing_empties_the_slot_and_a_read_leaves_it(client, study, owner):
    client.force_login(owner)
    # A plan row saved without a problem says nothing: the slot is emptied, so it does
    # not go on showing what an earlier action said.
    response = client.post(
        study_url("plan-row-save", study, "manual", "T2"),
        {"who": "shared", "human": "resident", "automation": "thermostat", "level": "7"},
        headers=HX,
    )
    assert response.status_code == 200
    attributes, said = slot(response.content.decode())
    assert attributes["hx-swap-oob"] == "innerHTML" and said == []
    # A read (a filter, a picker, a poll) with nothing to say leaves the slot alone.
    text = client.get(study_url("study-graph", study), headers=HX).content.decode()
    assert 'id="messages"' not in text


def test_a_message_before_a_client_redirect_waits_for_the_next_page(client, study, owner):
    """An htmx answer that sends the browser elsewhere leaves its messages to that page."""
    client.force_login(owner)
    response = client.post(study_url("plan-bulk", study, "auto"), {}, headers=HX)
    assert response["HX-Refresh"] == "true" and 'id="messages"' not in response.content.decode()
    page = client.get(study_url("plan-editor", study, "auto")).content.decode()
    assert slot(page)[1] == ["Nothing was changed: select tasks, and a level or a status."]
