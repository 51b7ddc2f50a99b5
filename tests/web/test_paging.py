"""Pages of rows: every list of a study's rows is shown a bounded page at a time, with
page links that keep the rest of the query; any page number asked for shows a page.

The rows expected are read from the study file itself (its tasks, links and leaves), not
from the views' own outline; page arithmetic is hand-worked (300 rows at 100 a page are
three pages).
"""

from __future__ import annotations

import html
import re

import pytest
from django.urls import reverse

from allocation import selectors, services
from allocation.core.limits import PAGE_ROW_CHOICES, PAGE_ROWS
from allocation.core.synthetic import synthetic_study
from allocation.views.paging import page_number

#: Page numbers no one should send, and the page each must show (of three).
ODD_PAGES = {
    "abc": 1,
    "-1": 1,
    "0": 1,
    "2.5": 1,
    "%00": 1,
    "\u0663": 1,  # ARABIC-INDIC DIGIT THREE: a decimal digit, but not an ASCII one
    "1" + "0" * 100: 3,  # 10**100: past the last page
    "9" * 5000: 3,  # more digits than Python converts to an int
}


def rel_next(page: str, target: str) -> str | None:
    found = re.search(rf'<a href="([^"]+)#{target}"[^>]* rel="next"', page)
    return html.unescape(found.group(1)) if found else None


@pytest.fixture
def large(owner):
    """A study of 300 tasks (14 goals, 286 leaves), 600 links and two plans."""
    document = synthetic_study(tasks=300, links=600, events=5, plans=2, seed=3)
    return document, services.study_import(data=document, owner=owner)


def test_page_numbers_are_always_a_page():
    # 250 rows at 100 a page are 3 pages (hand-worked).
    pages = -(-250 // 100)
    assert pages == 3
    cases = {"": 1, None: 1, "1": 1, "2": 2, "3": 3, "4": 3, " 2 ": 2, "0002": 2, **ODD_PAGES}
    for asked, expected in cases.items():
        assert page_number(asked, pages) == expected, asked
    assert page_number("5", 1) == 1 and page_number("abc", 0) == 1


def test_the_editor_shows_every_leaf_once_over_its_pages(client, owner, large):
    document, study = large
    client.force_login(owner)
    leaves = [
        task["id"]
        for task in document["tasks"]
        if not any(other.get("parent") == task["id"] for other in document["tasks"])
    ]
    assert len(leaves) == 286
    url = reverse("plan-editor", args=[study.pk, "plan-1"]) + "?goal=all"
    seen: list[str] = []
    pages = 0
    while url:
        page = client.get(url).content.decode()
        pages += 1
        rows = re.findall(r'<tr id="row-([^"]+)"', page)
        goals = page.count('<tr class="goal">') - page.count("(continued)")
        # A page holds at most PAGE_ROWS rows of the outline (goals and leaves).
        assert 0 < len(rows) + goals <= PAGE_ROWS
        seen += rows
        url = rel_next(page, "plan-rows")
        if url:
            assert "goal=all" in url  # the page links keep the goal shown
    # 300 outline rows (goals and leaves) at PAGE_ROWS a page.
    assert pages == -(-300 // PAGE_ROWS)
    assert sorted(seen) == sorted(leaves) and len(seen) == len(set(seen))


def test_a_page_that_starts_inside_a_goal_names_the_goal(client, owner, large):
    _document, study = large
    client.force_login(owner)
    url = reverse("plan-editor", args=[study.pk, "plan-0"])
    page = client.get(url + "?goal=all&page=2").content.decode()
    first = page.index('<tr class="goal">')
    assert first < page.index('<tr id="row-') and "(continued)" in page[first:]


@pytest.mark.parametrize("asked", list(ODD_PAGES))
def test_odd_page_numbers_show_a_page_never_an_error(client, owner, large, asked):
    _document, study = large
    client.force_login(owner)
    pk = study.pk
    urls = [
        (reverse("plan-editor", args=[pk, "plan-0"]) + "?goal=all", "page"),
        (reverse("study-detail", args=[pk]), "tasks_page"),
        (reverse("study-detail", args=[pk]), "links_page"),
        (reverse("study-inventory", args=[pk]), "tasks_page"),
        (reverse("study-inventory", args=[pk]), "links_page"),
        (reverse("plan-dashboard", args=[pk, "plan-0"]) + "?handovers=all", "handovers_page"),
        (reverse("plan-dashboard", args=[pk, "plan-0"]), "findings_page"),
        (reverse("plan-review", args=[pk, "plan-0"]), "page"),
        (reverse("study-compare", args=[pk]), "handovers_added_page"),
        (reverse("plan-ratings", args=[pk, "plan-0"]), "unrated_page"),
        (reverse("study-graph", args=[pk]) + "?goal=", "tasks_page"),
    ]
    for url, param in urls:
        joiner = "&" if "?" in url else "?"
        response = client.get(f"{url}{joiner}{param}={asked}")
        assert response.status_code == 200, (url, param)


def test_the_editor_answers_with_the_page_asked_for_or_the_nearest(client, owner, large):
    _document, study = large
    client.force_login(owner)
    url = reverse("plan-editor", args=[study.pk, "plan-0"]) + "?goal=all"
    last = client.get(url + "&page=3").content.decode()
    past = client.get(url + "&page=" + "1" + "0" * 100).content.decode()
    first = client.get(url).content.decode()
    odd = client.get(url + "&page=-1").content.decode()
    rows = lambda page: re.findall(r'<tr id="row-([^"]+)"', page)  # noqa: E731
    assert rows(past) == rows(last) and rows(odd) == rows(first)
    assert rows(first) != rows(last)


def test_the_inventory_pages_each_list_apart_and_keeps_the_others(client, owner, large):
    document, study = large
    client.force_login(owner)
    url = reverse("study-inventory", args=[study.pk])
    page = client.get(url + "?tasks_page=2&links_page=2").content.decode()

    def link_row(link: dict) -> str:
        return (
            f"<td><code>{link['from']}</code></td><td>{link['kind']}</td>"
            f"<td><code>{link['to']}</code></td>"
        )

    # Page 2 of the links is the file's links 101 to 200, in the file's order.
    links = document["links"]
    shown = [link_row(link) in page for link in links]
    assert shown[PAGE_ROWS : 2 * PAGE_ROWS] == [True] * PAGE_ROWS
    assert not any(shown[:PAGE_ROWS]) and not any(shown[2 * PAGE_ROWS :])
    # Its page links keep the tasks' page, and the tasks' links keep the links' page.
    assert "tasks_page=2" in rel_next(page, "section-links")
    assert "links_page=2" in rel_next(page, "section-tasks")


def test_bulk_apply_changes_the_rows_selected_on_a_page_and_returns_to_it(client, owner, large):
    _document, study = large
    client.force_login(owner)
    editor = reverse("plan-editor", args=[study.pk, "plan-0"])
    page = client.get(editor + "?goal=all&page=2").content.decode()
    picked = re.findall(r'<tr id="row-([^"]+)"', page)[:3]
    response = client.post(
        reverse("plan-bulk", args=[study.pk, "plan-0"]),
        {"tasks": picked, "status": "rejected", "goal": "all", "page": "2"},
    )
    assert response.status_code == 302
    assert response["Location"] == editor + "?goal=all&page=2"
    assignments = selectors.study_document(study)["plans"][0]["assignments"]
    assert [assignments[task].get("status") for task in picked] == ["rejected"] * 3
    assert sum(a.get("status") == "rejected" for a in assignments.values()) == 3
    # With htmx the page is refreshed where it stands (its goal and page in the address).
    again = client.post(
        reverse("plan-bulk", args=[study.pk, "plan-0"]),
        {"tasks": picked, "status": "agreed"},
        headers={"HX-Request": "true"},
    )
    assert again["HX-Refresh"] == "true"


def test_a_row_saved_without_scripts_returns_to_the_page_holding_it(client, owner, large):
    document, study = large
    client.force_login(owner)
    task = next(t["id"] for t in document["tasks"] if t.get("parent") == "G9")
    response = client.post(
        reverse("plan-row-save", args=[study.pk, "plan-0", task]),
        {"who": "person", "human": "person"},
    )
    assert response.status_code == 302 and response["Location"].endswith(f"#row-{task}")
    assert f'id="row-{task}"' in client.get(response["Location"]).content.decode()


def test_many_agents_are_typed_in_each_row_and_listed_once(client, owner):
    document = synthetic_study(tasks=40, links=60, events=2, plans=1, seed=4)
    for index in range(PAGE_ROW_CHOICES):
        document["agents"].append({"id": f"extra-{index}", "name": "X" * 200, "kind": "human"})
    study = services.study_import(data=document, owner=owner)
    client.force_login(owner)
    page = client.get(reverse("plan-editor", args=[study.pk, "plan-0"])).content.decode()
    assert page.count('<datalist id="plan-agents">') == 1
    # Each long name (cut to 40 characters) is in the person list and the agent list,
    # once each, and in no row.
    assert page.count("X" * 39 + "…") == 2 * PAGE_ROW_CHOICES
    assert 'list="plan-humans"' in page and '<select name="human"' not in page
    # A typed agent saves like a chosen one.
    task = re.findall(r'<tr id="row-([^"]+)"', page)[0]
    client.post(
        reverse("plan-row-save", args=[study.pk, "plan-0", task]),
        {"who": "person", "human": "extra-3"},
    )
    assigned = selectors.study_document(study)["plans"][0]["assignments"][task]
    assert assigned == {"human": "extra-3"}


def test_the_lists_of_an_empty_study_have_one_empty_page(client, owner):
    study = services.study_new(owner=owner, key="empty", title="Empty", scale="sv10")
    client.force_login(owner)
    for url in (
        reverse("study-inventory", args=[study.pk]),
        reverse("study-detail", args=[study.pk]) + "?tasks_page=2&links_page=abc",
        reverse("study-inventory", args=[study.pk]) + "?links_page=3",
    ):
        response = client.get(url)
        assert response.status_code == 200, url
        assert 'class="pager' not in response.content.decode()
