"""Comments, decisions and the workshop view.

The expected open items are worked by hand from the home-heating test study
(tests/core/conftest.py):

- plan ``manual``: T1 and T2 have no status, no handover (the resident holds both), one
  finding: the resident does T1, which needs sensing, without that capability
  (Feigh & Pritchett 2014, requirement 1). One open item.
- plan ``auto``: T2 is ``proposed``; its two handovers are mode changes of T2 with
  severity 2 (Methods, #handover-risk: risk = severity x likelihood band): schedule -> hold has a
  likelihood of 0.46, band 3 of the example policy's bands (0.2, 0.4, 0.6, 0.8), risk 6;
  hold -> schedule 0.34, band 2, risk 4; both below the example policy's review
  threshold of 10, so neither is open. Five findings: accountability, ambiguous
  indication, error state, uncued change, unforeseen transition. Six open items.
- T2's person time under ``auto``: level 7 on every stage gives d = (7 - 1) / 9 = 2/3
  (Parasuraman et al. 2000 levels; Methods, #person-time), and T2's duration [3, 10, 20] s
  counts at its triangular mean (3 + 10 + 20) / 3 = 11 s, so 11 s x 1/3 + 4 s supervision
  at level 7 + 10 s monitoring (the accountable resident does not hold it; Pritchett, Kim
  & Feigh 2014) = 53/3 = 17.67 s per occurrence, once a day.
"""

from __future__ import annotations

import pytest
from django.core.exceptions import PermissionDenied
from django.urls import reverse

from allocation import models as m
from allocation import services
from allocation.core.analysis.risk import DEFAULT_RISK_POLICY
from allocation.selectors import plan_analysis, study_load
from allocation.selectors.reviews import review_items

AUTO_OPEN = [
    ("assignment", "T2"),
    ("finding", "accountability:T2@resident,thermostat"),
    ("finding", "ambiguous_indication:T2/schedule,hold"),
    ("finding", "error_state:T2/schedule,hold"),
    ("finding", "uncued_change:T2/hold,schedule"),
    ("finding", "unforeseen_transition:T2/hold,schedule"),
]
MANUAL_OPEN = [("finding", "capability:T1@resident")]


def open_items(row, plan_id, show_all=False):
    result = study_load(row)
    analysis = plan_analysis(row, plan_id)
    return review_items(row, result.study, plan_id, analysis, show_all=show_all)


def keys(items):
    return [(item.kind, item.key) for item in items]


def url(name, study, plan="auto"):
    return reverse(name, args=[study.pk, plan])


# -- open items ---------------------------------------------------------------------------


def test_open_items_of_the_home_heating_plans_match_the_hand_worked_lists(study):
    assert keys(open_items(study, "auto")) == AUTO_OPEN
    assert keys(open_items(study, "manual")) == MANUAL_OPEN


def test_a_handover_in_the_review_band_is_open(owner, heating_document):
    """Both mode changes of T2 happen 0 times a day (no rate): 0 slips a year,
    improbable, severity 2. A band matrix that sends improbable at severity 2 to review
    opens both; the example matrix leaves them acceptable. Score 2 x 1 = 2."""
    row = services.study_import(data=heating_document, owner=owner)
    assert [item for item in open_items(row, "auto") if item.kind == "handover"] == []
    matrix = {"improbable": ["acceptable", "review", "acceptable", "acceptable", "acceptable"]}
    heating_document["study"]["id"] = "heating-strict"
    heating_document["study"]["risk_policy"] = {
        "band_matrix": {**DEFAULT_RISK_POLICY["band_matrix"], **matrix}
    }
    row = services.study_import(data=heating_document, owner=owner)
    handovers = [item for item in open_items(row, "auto") if item.kind == "handover"]
    assert sorted(item.key for item in handovers) == [
        "T2>T2@hold>schedule",
        "T2>T2@schedule>hold",
    ]
    assert handovers[0].reasons == ["review band"]
    # The registry's label and band words.
    assert ("Screening score", "2 (Review)") in handovers[0].facts
    assert ("Expected slips a year", "0.000 (improbable)") in handovers[0].facts


def test_assignment_item_shows_who_level_words_and_figures(study):
    item = open_items(study, "auto")[0]
    facts = dict(item.facts)
    assert facts["Who"] == "Resident with Thermostat"
    # Sheridan & Verplank (1978) level 7, as Parasuraman et al. (2000) Table I words it.
    assert facts["Level"] == "level 7: executes automatically, then necessarily informs the human"
    # Figures and the status in the registry's words (17.67 s reads 17.7 s).
    assert facts["Person time on the task"] == "17.7 s a day"
    assert facts["Status"] == "Proposed"
    assert facts["Handover points"] == "2"
    assert item.message == "Set-back saves energy without effort."


def test_a_comment_makes_an_item_open_until_its_thread_is_resolved(study, member_of):
    reviewer = member_of("reviewer")
    comment = services.comment_post(
        study=study,
        user=reviewer,
        kind="handover",
        plan_key="auto",
        key="T2>T2@hold>schedule",
        body="Is 'next period' shown anywhere?",
    )
    assert keys(open_items(study, "auto")) == [
        *AUTO_OPEN[:1],
        ("handover", "T2>T2@hold>schedule"),
        *AUTO_OPEN[1:],
    ]
    services.comment_resolve(study=study, user=reviewer, comment=comment.pk, resolved=True)
    assert keys(open_items(study, "auto")) == AUTO_OPEN
    # "All" still lists it, with its resolved thread.
    every = {(i.kind, i.key): i for i in open_items(study, "auto", show_all=True)}
    assert every[("handover", "T2>T2@hold>schedule")].threads[0].resolved


def test_a_task_comment_shows_under_every_plan_and_an_open_decision_keeps_an_item_open(
    study, member_of
):
    services.comment_post(
        study=study, user=member_of("reviewer"), kind="task", key="T1", body="Who notices?"
    )
    editor = member_of("editor")
    services.decision_save(
        study=study, user=editor, kind="plan", plan_key="manual", decision="Keep as baseline"
    )
    assert ("task", "T1") in keys(open_items(study, "auto"))
    manual = keys(open_items(study, "manual"))
    assert ("task", "T1") in manual and ("plan", "") in manual
    decision = m.Decision.objects.get()
    services.decision_status_set(study=study, user=editor, decision=decision.pk, status="agreed")
    assert ("plan", "") not in keys(open_items(study, "manual"))


def test_remarks_about_a_finding_that_went_away_are_kept_and_shown(study, member_of, owner):
    services.comment_post(
        study=study,
        user=member_of("reviewer"),
        kind="finding",
        plan_key="manual",
        key="capability:T1@resident",
        body="Give the resident a sensor?",
    )
    # The resident gains the capability: the finding goes, the remark stays.
    services.agent_save(
        study=study,
        key="resident",
        item={
            "id": "resident",
            "name": "Resident",
            "kind": "human",
            "capabilities": ["judgement", "sensing"],
            "asleep": ["23:00", "07:00"],
            "response_s": {"awake": [20, 60, 300], "asleep": [300, 900, 3600]},
        },
    )
    items = open_items(study, "manual")
    assert keys(items) == [("finding", "capability:T1@resident")]
    assert not items[0].present
    assert items[0].threads[0].root.body == "Give the resident a sensor?"


# -- roles ----------------------------------------------------------------------------------


def test_viewer_cannot_comment(client, study, member_of):
    viewer = member_of("viewer")
    client.force_login(viewer)
    response = client.post(
        url("review-comment", study), {"kind": "task", "key": "T1", "body": "hello"}
    )
    assert response.status_code == 403
    with pytest.raises(PermissionDenied):
        services.comment_post(study=study, user=viewer, kind="task", key="T1", body="hello")
    assert not m.Comment.objects.exists()
    page = client.get(url("plan-review", study)).content.decode()
    assert 'class="comment-form"' not in page and 'class="decision-form"' not in page


def test_reviewer_comments_but_cannot_decide(client, study, member_of):
    client.force_login(member_of("reviewer"))
    response = client.post(
        url("review-comment", study),
        {"kind": "assignment", "key": "T2", "body": "Why level 7?", "view": "review"},
    )
    assert response.status_code == 302
    comment = m.Comment.objects.get()
    assert (comment.plan_key, comment.target_kind, comment.target_key) == (
        "auto",
        "assignment",
        "T2",
    )
    assert comment.author_name == "reviewer-user"
    response = client.post(
        url("review-decide", study), {"kind": "assignment", "key": "T2", "decision": "Agree"}
    )
    assert response.status_code == 403
    assert not m.Decision.objects.exists()
    page = client.get(url("plan-review", study)).content.decode()
    assert 'class="comment-form"' in page and 'class="decision-form"' not in page


def test_editor_decides_and_the_audit_trail_keeps_the_status_history(client, study, member_of):
    editor = member_of("editor")
    client.force_login(editor)
    response = client.post(
        url("review-decide", study),
        {
            "kind": "finding",
            "key": "error_state:T2/schedule,hold",
            "decision": "Show the mode by its own symbol",
            "rationale": "Both modes show a clock.",
            "status": "open",
        },
    )
    assert response.status_code == 302
    decision = m.Decision.objects.get()
    assert (decision.decided_by_name, decision.status) == ("editor-user", "open")
    for status in ("agreed", "deferred"):
        client.post(
            url("review-decision-status", study), {"decision": decision.pk, "status": status}
        )
    decision.refresh_from_db()
    assert decision.status == "deferred"
    entries = m.AuditEntry.objects.filter(study=study, action__startswith="decision.").order_by(
        "at", "pk"
    )
    assert [e.action for e in entries] == ["decision.save", "decision.status", "decision.status"]
    assert [(e.before or {}).get("status") for e in entries] == [None, "open", "agreed"]
    assert [e.after["status"] for e in entries] == ["open", "agreed", "deferred"]
    assert entries[0].target == "plan auto / finding error_state:T2/schedule,hold"


def test_an_unknown_status_is_refused(study, member_of):
    with pytest.raises(services.ReviewRefused) as refused:
        services.decision_save(
            study=study, user=member_of("editor"), kind="study", decision="x", status="maybe"
        )
    assert refused.value.field == "status"
    assert not m.Decision.objects.exists()


def test_a_thread_is_resolved_by_its_author_or_an_editor_only(client, study, member_of):
    author = member_of("reviewer", "ann")
    other = member_of("reviewer", "bob")
    comment = services.comment_post(study=study, user=author, kind="task", key="T2", body="?")
    with pytest.raises(PermissionDenied):
        services.comment_resolve(study=study, user=other, comment=comment.pk, resolved=True)
    client.force_login(other)
    assert (
        client.post(url("review-resolve", study), {"comment": comment.pk, "resolved": "1"})
    ).status_code == 403
    services.comment_resolve(study=study, user=author, comment=comment.pk, resolved=True)
    services.comment_resolve(
        study=study, user=member_of("editor"), comment=comment.pk, resolved=False
    )
    comment.refresh_from_db()
    assert not comment.resolved
    actions = list(
        m.AuditEntry.objects.filter(action__startswith="comment.")
        .order_by("at", "pk")
        .values_list("action", flat=True)
    )
    assert actions == ["comment.post", "comment.resolve", "comment.reopen"]


# -- threads ----------------------------------------------------------------------------------


def test_replies_join_the_thread_of_the_comment_they_answer(study, member_of):
    reviewer = member_of("reviewer")
    first = services.comment_post(
        study=study, user=reviewer, kind="finding", plan_key="auto",
        key="uncued_change:T2/hold,schedule", body="Add a chime?",
    )  # fmt: skip
    reply = services.comment_post(study=study, user=reviewer, body="Or a light.", parent=first.pk)
    deeper = services.comment_post(study=study, user=reviewer, body="Both.", parent=reply.pk)
    other = services.comment_post(
        study=study, user=reviewer, kind="finding", plan_key="auto",
        key="uncued_change:T2/hold,schedule", body="A second point.",
    )  # fmt: skip
    assert (reply.target_kind, reply.plan_key, reply.target_key) == (
        "finding",
        "auto",
        "uncued_change:T2/hold,schedule",
    )
    assert deeper.parent_id == reply.pk
    item = next(i for i in open_items(study, "auto") if i.key == "uncued_change:T2/hold,schedule")
    assert [(t.root.pk, [r.pk for r in t.replies]) for t in item.threads] == [
        (first.pk, [reply.pk, deeper.pk]),
        (other.pk, []),
    ]
    assert item.unresolved == 2


def test_a_reply_to_a_comment_of_another_study_is_refused(
    study, member_of, owner, heating_document
):
    heating_document["study"]["id"] = "elsewhere"
    elsewhere = services.study_import(data=heating_document, owner=owner)
    foreign = services.comment_post(study=elsewhere, user=owner, kind="study", body="hi")
    with pytest.raises(services.ReviewRefused) as refused:
        services.comment_post(study=study, user=owner, body="reply", parent=foreign.pk)
    assert refused.value.field == "parent"
    assert m.Comment.objects.count() == 1


# -- target validation ------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kind", "plan", "key", "field", "words"),
    [
        ("task", "", "T9", "key", "no task 'T9'"),
        ("assignment", "auto", "G1", "key", "is a goal"),
        ("assignment", "nope", "T1", "plan", "no plan 'nope'"),
        ("handover", "auto", "T1>T2", "key", "no handover 'T1>T2'"),
        # The capability finding is the manual plan's, not the automatic one's.
        ("finding", "auto", "capability:T1@resident", "key", "no finding"),
        ("gossip", "auto", "", "kind", "Unknown kind"),
    ],
)
def test_a_remark_about_a_thing_that_does_not_exist_is_refused_and_nothing_is_stored(
    client, study, member_of, kind, plan, key, field, words
):
    editor = member_of("editor")
    entries = m.AuditEntry.objects.count()
    with pytest.raises(services.ReviewRefused) as refused:
        services.comment_post(
            study=study, user=editor, kind=kind, plan_key=plan, key=key, body="x"
        )
    assert refused.value.field == field and words in str(refused.value)
    with pytest.raises(services.ReviewRefused):
        services.decision_save(
            study=study, user=editor, kind=kind, plan_key=plan, key=key, decision="x"
        )
    client.force_login(editor)
    response = client.post(
        url("review-comment", study, plan or "auto"),
        {"kind": kind, "key": key, "body": "x"},
        headers={"HX-Request": "true"},
        follow=False,
    )
    if plan == "nope":
        assert response.status_code == 404
    else:
        # Nothing to show again: htmx is sent to the review page, which says why.
        assert response.status_code == 200 and response["HX-Redirect"]
        page = client.get(response["HX-Redirect"]).content.decode()
        assert "Not posted:" in page
    assert not m.Comment.objects.exists() and not m.Decision.objects.exists()
    assert m.AuditEntry.objects.count() == entries


def test_an_empty_comment_is_refused_with_a_message_on_the_item(client, study, member_of):
    client.force_login(member_of("reviewer"))
    response = client.post(
        url("review-comment", study),
        {"kind": "assignment", "key": "T2", "body": "   ", "view": "review"},
        headers={"HX-Request": "true"},
    )
    assert response.status_code == 200
    text = response.content.decode()
    assert "Not posted: The comment is empty" in text
    assert not m.Comment.objects.exists()


# -- pages ------------------------------------------------------------------------------------


def test_review_page_full_and_as_fragment(client, study):
    client.force_login(study.memberships.get().user)
    page = client.get(url("plan-review", study)).content.decode()
    assert "<html" in page and "Review of Thermostat does it, resident informed" in page
    assert "6 items open" in page
    assert "Feigh &amp; Pritchett (2014)" in page  # the method note names its sources
    assert 'id="cautions"' in page
    fragment = client.get(
        url("plan-review", study) + "?show=all", headers={"HX-Request": "true"}
    ).content.decode()
    assert "<html" not in fragment and fragment.lstrip().startswith('<section id="review-region"')
    # All: T1's and T2's assignments, two handovers, five findings, the plan, the study.
    assert "11 items in all" in fragment


def test_htmx_comment_answers_with_the_item_and_markup_is_shown_as_text(client, study, member_of):
    client.force_login(member_of("reviewer"))
    response = client.post(
        url("review-comment", study),
        {
            "kind": "assignment",
            "key": "T2",
            "body": "<script>alert('x')</script> & <b>bold</b>",
            "view": "review",
        },
        headers={"HX-Request": "true"},
    )
    text = response.content.decode()
    anchor = open_items(study, "auto")[0].anchor
    assert text.lstrip().startswith(f'<article id="{anchor}"')
    assert (
        "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;" in text
    )
    assert "<script>alert" not in text and "<b>bold" not in text
    workshop = client.get(url("plan-workshop", study)).content.decode()
    assert "&lt;script&gt;alert" in workshop and "<script>alert" not in workshop


# -- the workshop -----------------------------------------------------------------------------


def test_workshop_walks_the_open_items_one_by_one(client, study):
    client.force_login(study.memberships.get().user)
    base = url("plan-workshop", study)
    first = client.get(base).content.decode()
    assert "Item <strong>1</strong> of <strong>6</strong>" in first
    assert "T2 Lower the set point" in first and "17.7 s a day" in first
    assert f'rel="next" href="{base}?item=2"' in first and 'rel="prev"' not in first
    second = client.get(base + "?item=2").content.decode()
    assert "Item <strong>2</strong> of <strong>6</strong>" in second
    assert "Finding: Accountable without holding the task (T2)" in second
    assert "they must keep watch over it" in second
    assert f'rel="prev" href="{base}?item=1"' in second
    last = client.get(base + "?item=99").content.decode()  # past the end: the last item
    assert "Item <strong>6</strong> of <strong>6</strong>" in last
    assert "Change the person cannot follow" in last and 'rel="next"' not in last
    fragment = client.get(base + "?item=4", headers={"HX-Request": "true"}).content.decode()
    assert fragment.lstrip().startswith('<section id="workshop-item"') and "<html" not in fragment
    assert "Finding: Person and device disagree (T2)" in fragment


def test_workshop_decision_and_comment_stay_on_the_item(client, study, member_of):
    client.force_login(member_of("editor"))
    base = url("plan-workshop", study)
    response = client.post(
        url("review-decide", study),
        {
            "kind": "finding",
            "key": "error_state:T2/schedule,hold",
            "decision": "Give hold its own symbol",
            "status": "agreed",
            "view": "workshop",
            "item": "4",
        },
    )
    assert response.status_code == 302 and response["Location"] == f"{base}?item=4"
    page = client.get(response["Location"]).content.decode()
    assert "Give hold its own symbol" in page and "1 decided" in page
    fragment = client.post(
        url("review-comment", study),
        {
            "kind": "finding",
            "key": "error_state:T2/schedule,hold",
            "body": "Agreed in the room.",
            "view": "workshop",
            "item": "4",
        },
        headers={"HX-Request": "true"},
    ).content.decode()
    assert fragment.lstrip().startswith('<section id="workshop-item"')
    assert "Item <strong>4</strong> of <strong>6</strong>" in fragment
    assert "Agreed in the room." in fragment


def test_workshop_with_nothing_open(client, owner, heating_document):
    heating_document["plans"] = heating_document["plans"][:1]
    heating_document["agents"][0]["capabilities"].append("sensing")
    row = services.study_import(data=heating_document, owner=owner)
    client.force_login(owner)
    page = client.get(reverse("plan-workshop", args=[row.pk, "manual"])).content.decode()
    assert "Nothing is open in this plan" in page and "No items" in page
