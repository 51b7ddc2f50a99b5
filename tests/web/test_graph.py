"""The dependency graph screen: the page and its htmx region, the filters, the figure's
data, and a task's details panel (as a fragment and as a page).

The expected categories, holders and handovers are worked by hand from the study in
:func:`graph_document` and the methods document (category from the stage degrees; principal holder
the automation when its stage-weighted degree is above 0.5; a link handover where the two
tasks' principal holders differ).
"""

from __future__ import annotations

import pytest
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core.cautions import CAUTIONS
from allocation.core.layout import goal_leaves
from allocation.core.synthetic import synthetic_study
from allocation.figures.graph import ACCENT, CATEGORY_BY_KEY

HX = {"HX-Request": "true"}


def graph_document(heating_document: dict) -> dict:
    """The design's home-heating study with a second goal and a plan "split".

    ::

        G1: T1 --precedes--> T2 --precedes--> T3 (G2)
        G2: T3 --informs--> T4;  T5 has no links

    Plan "split": T1 thermostat alone (device), T2 and T3 the resident alone (person),
    T4 thermostat alone (device), T5 not applicable. Handovers along links: T1 -> T2
    (thermostat to resident, precedes) and T3 -> T4 (resident to thermostat, informs).
    Plan "manual" assigns only T1 and T2 (person): T3, T4, T5 are unallocated.
    """
    document = heating_document
    document["tasks"] += [
        {"id": "G2", "title": "Keep the boiler <b>safe</b>"},
        {
            "id": "T3",
            "parent": "G2",
            "title": "Check the boiler pressure",
            "duration_s": [20, 40, 90],
            "window_s": 3600,
            "severity": 3,
            "demands": {"visual": 4.0, "auditory": 0, "cognitive": 3.7, "psychomotor": 0},
        },
        {
            "id": "T4",
            "parent": "G2",
            "title": "Log the pressure",
            "occurs": {"per_day": 1, "when": "awake"},
            "duration_s": 2,
            "severity": 1,
        },
        {
            "id": "T5",
            "parent": "G2",
            "title": "Bleed the radiators",
            "occurs": {"every_days": 30},
            "duration_s": [300, 600, 900],
            "severity": 1,
        },
    ]
    document["links"] += [
        {"from": "T2", "to": "T3", "kind": "precedes"},
        {"from": "T3", "to": "T4", "kind": "informs"},
    ]
    document["plans"].append(
        {
            "id": "split",
            "name": "Thermostat notices, resident checks",
            "assignments": {
                "T1": {"automation": "thermostat"},
                "T2": {"human": "resident"},
                "T3": {"human": "resident"},
                "T4": {"automation": "thermostat"},
                "T5": {"applies": False, "rationale": "No radiators in this home."},
            },
        }
    )
    return document


SPLIT_CATEGORIES = {
    "T1": "device",
    "T2": "person",
    "T3": "person",
    "T4": "device",
    "T5": "not_applicable",
}
MANUAL_CATEGORIES = {
    "T1": "person",
    "T2": "person",
    "T3": "unallocated",
    "T4": "unallocated",
    "T5": "unallocated",
}


@pytest.fixture
def graph_study(owner, heating_document) -> m.Study:
    return services.study_import(data=graph_document(heating_document), owner=owner)


def graph_url(study: m.Study, query: str = "") -> str:
    return reverse("study-graph", args=[study.pk]) + (f"?{query}" if query else "")


def task_url(study: m.Study, task: str, plan: str | None = None) -> str:
    url = reverse("graph-task", args=[study.pk, task])
    return f"{url}?plan={plan}" if plan else url


def node_categories(figure: dict) -> dict[str, str]:
    """Task id -> the category its node trace is drawn in (the trace's ``meta``)."""
    found = {}
    for trace in figure["data"]:
        if trace.get("meta") in CATEGORY_BY_KEY:
            for task in trace["customdata"]:
                found[task] = trace["meta"]
    return found


def traces(figure: dict, name: str) -> list[dict]:
    return [trace for trace in figure["data"] if trace.get("name") == name]


# -- the page and its region ------------------------------------------------------------


def test_graph_page_has_the_figure_legend_and_method(client, study, owner):
    client.force_login(owner)
    response = client.get(graph_url(study))
    page = response.content.decode()
    assert response.status_code == 200
    assert response.templates[0].name == "graph/graph.html"
    for text in (
        'id="graph-region"',
        '<script id="graph-figure" type="application/json">',
        'data-figure="graph-figure"',
        f'data-click-url="{reverse("graph-task", args=[study.pk, "__key__"])}?plan=manual"',
        'data-click-target="#graph-task"',
        'id="graph-task"',
        "Sugiyama, Tagawa &amp; Toda (1981)",
        "Parasuraman, Sheridan &amp;",
        "handover: the two tasks have different principal holders",
        "Unallocated",
        CAUTIONS[:60],
    ):
        assert text in page, text
    # The graph tab is the active one.
    assert f'<a href="{graph_url(study)}" class="active"' in page


def test_graph_region_alone_for_htmx(client, study, owner):
    client.force_login(owner)
    response = client.get(graph_url(study, "plan=auto&goal=&agent="), headers=HX)
    page = response.content.decode()
    assert response.status_code == 200
    assert page.lstrip().startswith('<div id="graph-region"')
    assert "<html" not in page and "Cautions" not in page
    assert response.context["query"].plan == "auto"


def test_boosted_request_gets_the_whole_page(client, study, owner):
    client.force_login(owner)
    response = client.get(graph_url(study), headers={**HX, "HX-Boosted": "true"})
    assert "<html" in response.content.decode()


def test_form_swaps_the_region_and_keeps_the_url_shareable(client, study, owner):
    client.force_login(owner)
    page = client.get(graph_url(study)).content.decode()
    assert 'hx-target="#graph-region"' in page and 'hx-push-url="true"' in page
    # A GET form: without htmx it loads the same URL as a whole page.
    assert f'method="get" action="{graph_url(study)}"' in page
    assert f'hx-get="{graph_url(study)}"' in page


# -- the figure -------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("plan", "expected"), [("split", SPLIT_CATEGORIES), ("manual", MANUAL_CATEGORIES)]
)
def test_node_colours_are_the_categories_under_the_plan(
    client, graph_study, owner, plan, expected
):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, f"plan={plan}"))
    figure = response.context["figure"]
    assert node_categories(figure) == expected
    for trace in figure["data"]:
        if trace.get("meta") in CATEGORY_BY_KEY:
            category = CATEGORY_BY_KEY[trace["meta"]]
            assert trace["marker"]["color"] == category.colour
            assert trace["marker"]["symbol"] == category.symbol
    # The analysis file agrees on every applicable task.
    analysis = client.get(reverse("plan-analysis-download", args=[graph_study.pk, plan])).json()
    for task, category in expected.items():
        if category in ("person", "device", "shared"):
            assert analysis["tasks"][task]["category"] == category


def test_handover_links_are_drawn_thick_in_the_accent(client, graph_study, owner):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, "plan=split"))
    figure = response.context["figure"]
    nodes = response.context["layout"].nodes
    (precedes,) = traces(figure, "handover precedes")
    (informs,) = traces(figure, "handover informs")
    (plain,) = traces(figure, "precedes")
    for trace in (precedes, informs):
        assert trace["line"]["color"] == ACCENT and trace["line"]["width"] > 3
    assert informs["line"]["dash"] == "dash" and precedes["line"]["dash"] == "solid"
    assert plain["line"]["color"] != ACCENT and plain["line"]["width"] < 2

    def ends(trace):
        """(first, last) point of each route in a line trace split by None."""
        routes, current = [], []
        for x, y in zip(trace["x"], trace["y"], strict=True):
            if x is None:
                routes.append((current[0], current[-1]))
                current = []
            else:
                current.append((x, y))
        return routes

    def at(task):
        return (nodes[task].x, nodes[task].y)

    assert ends(precedes) == [(at("T1"), at("T2"))]
    assert ends(informs) == [(at("T3"), at("T4"))]
    assert ends(plain) == [(at("T2"), at("T3"))]
    (markers,) = traces(figure, "handover")
    assert markers["customdata"] == ["T2", "T4"]  # a click opens the receiving task
    analysis = response.context["analysis"]
    by_target = {h.site.to_task: h for h in analysis.handovers if h.site.source == "link"}
    for target, hover in zip(markers["customdata"], markers["hovertext"], strict=True):
        handover = by_target[target]
        # The registry's words: "screening score", the band's label, the frequency band.
        assert f"screening score {handover.risk} ({handover.band})" in hover
        assert handover.frequency_band in hover
    assert "Thermostat → Resident" in markers["hovertext"][0]


def test_hover_text_names_the_task_holder_and_rate(client, graph_study, owner):
    client.force_login(owner)
    figure = client.get(graph_url(graph_study, "plan=split")).context["figure"]
    hovers = {
        task: text
        for trace in figure["data"]
        if trace.get("meta")
        for task, text in zip(trace["customdata"], trace["hovertext"], strict=True)
    }
    assert hovers["T4"].startswith("<b>T4</b> Log the pressure")
    assert "held by: Thermostat" in hovers["T4"]
    assert "occurrences: 1.00 a day" in hovers["T4"]  # per_day 1, hand-worked
    # The goal's title was typed as "Keep the boiler <b>safe</b>": escaped, not markup.
    assert "goal: G2 Keep the boiler &lt;b&gt;safe&lt;/b&gt;" in hovers["T4"]


def test_user_text_is_escaped_on_the_page(client, graph_study, owner):
    client.force_login(owner)
    page = client.get(graph_url(graph_study)).content.decode()
    assert "<b>safe</b>" not in page
    assert "Keep the boiler &lt;b&gt;safe&lt;/b&gt;" in page


# -- filters ----------------------------------------------------------------------------


def test_goal_filter_keeps_the_goal_and_fades_its_neighbours(client, graph_study, owner):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, "plan=split&goal=G2"), headers=HX)
    selection = response.context["selection"]
    assert selection.focus == ("T3", "T4", "T5")
    assert selection.context == ("T2",)
    figure = response.context["figure"]
    faded = [trace for trace in figure["data"] if "(outside the filter)" in trace["name"]]
    assert [task for trace in faded if trace.get("meta") for task in trace["customdata"]] == ["T2"]
    assert all(trace["opacity"] < 1 for trace in faded if trace.get("meta"))
    assert "with 1 linked task outside the filter (faded)" in response.content.decode()


def test_agent_filter_keeps_what_the_agent_holds_under_the_plan(client, graph_study, owner):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, "plan=split&agent=thermostat"))
    selection = response.context["selection"]
    assert selection.focus == ("T1", "T4")
    assert selection.context == ("T2", "T3")
    # Under "manual" the resident holds T1 and T2, and nobody holds the rest.
    response = client.get(graph_url(graph_study, "plan=manual&agent=resident"))
    assert response.context["selection"].focus == ("T1", "T2")
    response = client.get(graph_url(graph_study, "plan=manual&agent=thermostat"))
    assert response.context["selection"].focus == ()
    assert "the chosen agent holds no task" in response.content.decode()


def test_filters_together(client, graph_study, owner):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, "plan=split&goal=G2&agent=resident"))
    assert response.context["selection"].focus == ("T3",)
    assert response.context["selection"].context == ("T2", "T4")


@pytest.mark.parametrize(
    ("query", "field", "words"),
    [
        ("plan=nope", "plan", "This study has no plan “nope”; showing plan “manual” instead."),
        ("goal=T1", "goal", "“T1” is not a goal of this study"),
        ("agent=nobody", "agent", "This study has no agent “nobody”"),
        ("task=G1", "task", "This study has no leaf task “G1” to show."),
    ],
)
def test_bad_filters_say_what_is_wrong_and_show_the_rest(
    client, graph_study, owner, query, field, words
):
    client.force_login(owner)
    response = client.get(graph_url(graph_study, query))
    assert response.status_code == 200
    assert words in response.context["query"].errors[field]
    assert 'role="alert"' in response.content.decode()
    assert response.context["selection"].focus == ("T1", "T2", "T3", "T4", "T5")


def test_task_parameter_opens_its_details_beside_the_graph(client, graph_study, owner):
    client.force_login(owner)
    page = client.get(graph_url(graph_study, "plan=split&task=T3")).content.decode()
    assert "Check the boiler pressure" in page and "<h2><code>T3</code>" in page


# -- the details panel ------------------------------------------------------------------


def test_details_fragment_for_htmx(client, study, owner):
    client.force_login(owner)
    response = client.get(task_url(study, "T2", "auto"), headers=HX)
    page = response.content.decode()
    assert response.status_code == 200
    assert page.lstrip().startswith('<section id="graph-task"')
    assert "<html" not in page


def test_details_page_shows_the_task_under_the_plan(client, study, owner):
    """T2 under "auto": shared at sv10 level 7 on every stage, so each stage's degree is
    (7 - 1) / 9 = 0.67 and the thermostat is the principal holder (0.67 > 0.5). The
    resident's time per occurrence: 1/3 of the duration [3, 10, 20] s + 4 s supervision
    (their look of 10 s once a day, periodic monitoring with a display, counts a day, not
    per occurrence); expected, at the triangular mean (3 + 10 + 20) / 3 = 11 s: 23/3 =
    7.67 s; at the typical 10 s: 22/3 = 7.33 s."""
    client.force_login(owner)
    response = client.get(task_url(study, "T2", "auto"))
    page = response.content.decode()
    assert response.status_code == 200
    assert response.templates[0].name == "graph/task.html"
    for text in (
        "Lower the set point",
        "<code>G1</code> Keep the home comfortable",
        "in a chain",  # occurrence
        "10 s (3 s–20 s)",  # duration
        "2 minor",  # severity
        "inspect / check",  # VACP visual 4.0 (McCracken & Aldrich 1984)
        "discrete actuation (button, toggle, trigger)",  # psychomotor 2.2
        "<strong>Shared</strong>",
        "<dt>Held by</dt><dd>Thermostat</dd>",
        "executes automatically, then necessarily informs the human",  # sv10 level 7
        "0.67",
        "Mode awareness",
        "Mode-awareness index <strong>",  # the registry's label
        "Automation of decision and action",
        "Mode change",  # the hold mode hands T2 to the resident
        "Back to the graph",
        # A day: 7.67 s for the one occurrence and the 10 s look, 17.7 s.
        "<dt>Expected person time per occurrence</dt><dd>7.67 s; Resident 17.7 s a day",
        "<dt>Person time per occurrence at typical durations</dt><dd>7.33 s</dd>",
        CAUTIONS[:60],
    ):
        assert text in page, text
    details = response.context["details"]
    analysis_json = client.get(reverse("plan-analysis-download", args=[study.pk, "auto"])).json()
    awareness = analysis_json["tasks"]["T2"]["awareness"]
    assert details["awareness"].index == pytest.approx(awareness)
    # At the registry's precision for the index (three decimals).
    assert f"Mode-awareness index <strong>{awareness:.3f}</strong>" in page
    assert [row["stage"] for row in details["levels"]] == [
        "Information acquisition",
        "Information analysis",
        "Decision and action selection",
        "Action implementation",
    ]


def test_details_list_the_link_handovers_of_the_task(client, graph_study, owner):
    client.force_login(owner)
    details = client.get(task_url(graph_study, "T2", "split")).context["details"]
    (handover,) = details["handovers"]
    assert (handover["from_task"], handover["to_task"]) == ("T1", "T2")
    assert (handover["from_agent"], handover["to_agent"]) == ("Thermostat", "Resident")
    assert details["category"].key == "person" and details["holder"] == "Resident"
    assert [(n["direction"], n["task"].id) for n in details["neighbours"]] == [
        ("from", "T1"),
        ("to", "T3"),
    ]


def test_details_of_a_task_the_plan_leaves_out(client, graph_study, owner):
    client.force_login(owner)
    page = client.get(task_url(graph_study, "T5", "split")).content.decode()
    assert "<strong>Not applicable</strong>" in page
    page = client.get(task_url(graph_study, "T5", "manual")).content.decode()
    assert "<strong>Unallocated</strong>" in page


@pytest.mark.parametrize(("task", "plan"), [("G1", "auto"), ("T99", "auto"), ("T2", "nope")])
def test_details_404_for_what_is_not_there(client, study, owner, task, plan):
    client.force_login(owner)
    assert client.get(task_url(study, task, plan)).status_code == 404


# -- studies without plans, with errors, and large ones ---------------------------------


def test_a_study_without_plans_draws_every_task_unallocated(client, owner, heating_document):
    heating_document["plans"] = []
    study = services.study_import(data=heating_document, owner=owner)
    client.force_login(owner)
    response = client.get(graph_url(study))
    assert node_categories(response.context["figure"]) == {
        "T1": "unallocated",
        "T2": "unallocated",
    }
    page = client.get(task_url(study, "T1")).content.decode()
    assert "The study has no plan yet" in page


def test_a_study_with_errors_says_so_instead_of_drawing(client, study, owner):
    t1, t2 = (study.tasks.get(key=key) for key in ("T1", "T2"))
    m.Link.objects.create(study=study, source=t2, target=t1, kind="precedes", position=9)
    client.force_login(owner)
    response = client.get(graph_url(study))
    page = response.content.decode()
    assert response.status_code == 200
    assert "The graph needs a study without errors" in page
    assert "graph-figure" not in page


def test_a_large_study_opens_on_its_first_goal(client, owner):
    """1,000 tasks and 3,000 links (the scale the screen is built for): the graph opens
    on goal G0 and offers every task behind a link."""
    study = services.study_import(
        data=synthetic_study(tasks=1000, links=3000, seed=1), owner=owner
    )
    client.force_login(owner)
    response = client.get(graph_url(study))
    assert response.status_code == 200
    query = response.context["query"]
    assert (query.goal, query.goal_defaulted) == ("G0", True)
    core = response.context["study"]
    assert response.context["selection"].focus == tuple(goal_leaves(core, "G0"))
    page = response.content.decode()
    assert f"This study has {len(core.leaves)} leaf tasks" in page
    show_all = f"{graph_url(study)}?plan=plan-0&amp;goal=&amp;agent="
    assert f'href="{show_all}" hx-get="{show_all}"' in page
