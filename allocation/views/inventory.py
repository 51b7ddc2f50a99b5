"""The inventory: a study's agents, events, tasks and links, edited in place.

One set of views serves the four kinds of item; each kind names its form, its service
functions and where its items sit in the study file, so that the core's messages (which
name JSON paths) land beside the right field.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from django.contrib import messages
from django.contrib.auth.decorators import login_required
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST
from django_htmx.http import HttpResponseClientRedirect, retarget

from allocation import models as m
from allocation import selectors, services
from allocation.core import Problem, StudyInvalid
from allocation.core.describe import duration_text, occurs_text, severity_text, task_outline
from allocation.forms.base import ItemForm
from allocation.forms.inventory import AgentForm, EventForm, LinkForm, StudyForm, TaskForm
from allocation.services.conflicts import EditConflict
from allocation.views.common import StudyPage, study_page
from allocation.views.conflicts import conflict_context, posted_version
from allocation.views.paging import page_of


@dataclass(frozen=True)
class Kind:
    """One kind of inventory item and how it is edited."""

    name: str
    singular: str
    form: type[ItemForm]
    save: Callable[..., Any]
    delete: Callable[..., Any]
    consequences: Callable[..., list] | None


KINDS = {
    "agents": Kind(
        "agents",
        "agent",
        AgentForm,
        services.agent_save,
        services.agent_delete,
        services.agent_delete_consequences,
    ),
    "events": Kind(
        "events",
        "event",
        EventForm,
        services.event_save,
        services.event_delete,
        services.event_delete_consequences,
    ),
    "tasks": Kind(
        "tasks",
        "task",
        TaskForm,
        services.task_save,
        services.task_delete,
        services.task_delete_consequences,
    ),
    "links": Kind("links", "link", LinkForm, services.link_save, services.link_delete, None),
}


def _kind(name: str) -> Kind:
    if name not in KINDS:
        raise Http404("No such kind of item.")
    return KINDS[name]


def _document_items(page: StudyPage, kind: Kind) -> list[dict[str, Any]]:
    return selectors.study_document(page.row)[kind.name]


def _link_pks(page: StudyPage) -> list[int]:
    return list(page.row.links.order_by("position", "pk").values_list("pk", flat=True))


def _existing(page: StudyPage, kind: Kind, key: str) -> dict[str, Any] | None:
    """The item being edited (``None`` for a new one); 404 when it is not there."""
    if key == "new":
        return None
    items = _document_items(page, kind)
    if kind.name == "links":
        pks = _link_pks(page)
        if not key.isdigit() or int(key) not in pks:
            raise Http404("No such link.")
        return items[pks.index(int(key))]
    for item in items:
        if item["id"] == key:
            return item
    raise Http404(f"No such {kind.singular}.")


def _stored_version(page: StudyPage, kind: Kind, key: str) -> int:
    """The version of the row the form shows (0 for a new item: a row made meanwhile
    with the same id is then a conflict too)."""
    if key == "new":
        return 0
    related = getattr(page.row, kind.name)
    row = related.filter(pk=int(key)) if kind.name == "links" else related.filter(key=key)
    return row.values_list("version", flat=True).first() or 0


def _form(
    kind: Kind, page: StudyPage, key: str, data: Any = None, initial: dict[str, Any] | None = None
) -> ItemForm:
    extra: dict[str, Any] = {}
    if kind.form in (TaskForm, LinkForm, EventForm):
        extra["study"] = page.study
    if kind.form is TaskForm:
        extra["task_id"] = None if key == "new" else key
    return kind.form(data, initial=initial, **extra)


def problems_by_key(problems: list[Problem], kind: Kind) -> tuple[dict[str, list], list]:
    """The core's problems about one item, by the file key they concern; the rest apart."""
    pattern = re.compile(rf"^\$\.{kind.name}\[\d+\](?:\.(\w+))?")
    by_key: dict[str, list[str]] = {}
    general = []
    for problem in problems:
        match = pattern.match(problem.path)
        if match and match[1]:
            by_key.setdefault(match[1], []).append(problem.message)
        else:
            general.append(problem)
    return by_key, general


def _sections(request: HttpRequest, page: StudyPage) -> dict[str, Any]:
    """What the four inventory sections list: one page of each (``agents_page``,
    ``events_page``, ``tasks_page``, ``links_page``), whatever the study's size."""
    study = page.study
    url = reverse("study-inventory", args=[page.row.pk])
    tasks = page_of(
        request, task_outline(study), param="tasks_page", target="section-tasks", path=url
    )
    links = page_of(
        request, range(len(study.links)), param="links_page", target="section-links", path=url
    )
    first = (links.number - 1) * links.size
    # The rows of the page's links only, in the order the study file lists them.
    link_rows = list(
        page.row.links.order_by("position", "pk").values_list("pk", flat=True)[
            first : first + len(links.rows)
        ]
    )
    return {
        "agents": page_of(
            request, study.agents, param="agents_page", target="section-agents", path=url
        ),
        "events": page_of(
            request, study.events, param="events_page", target="section-events", path=url
        ),
        "outline": tasks,
        "outline_rows": [
            {
                "task": task,
                "depth": depth,
                "is_goal": study.is_goal(task.id),
                "occurs": occurs_text(study, task),
                "duration": duration_text(task.duration_s),
                "severity": severity_text(task.severity),
            }
            for task, depth in tasks.rows
        ],
        "links": links,
        "link_rows": list(zip(link_rows, [study.links[i] for i in links.rows], strict=False)),
    }


@require_GET
@login_required
def study_inventory(request: HttpRequest, pk: int) -> HttpResponse:
    page = study_page(request, pk)
    if page.study is None:
        raise Http404("The study cannot be read.")
    context = page.context("study-inventory", **_sections(request, page))
    return render(request, "inventory/page.html", context)


def _section_response(request: HttpRequest, page: StudyPage, kind: Kind) -> HttpResponse:
    page = study_page(request, page.row.pk, role=m.Role.EDITOR)
    context = page.context("study-inventory", kind=kind.name, **_sections(request, page))
    response = render(request, f"inventory/page.html#section-{kind.name}", context)
    return retarget(response, f"#section-{kind.name}")


@require_http_methods(["GET", "POST"])
@login_required
def item_edit(request: HttpRequest, pk: int, kind: str, key: str) -> HttpResponse:
    """The form for a new or an existing item (GET), and saving it (POST)."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    spec = _kind(kind)
    existing = _existing(page, spec, key)
    if request.method == "GET":
        initial = spec.form.initial_for(existing) if existing else {}
        form = _form(spec, page, key, initial=initial)
        version = _stored_version(page, spec, key)
        return _form_response(request, page, spec, key, form, {}, [], version=version)
    form = _form(spec, page, key, data=request.POST)
    by_key: dict[str, list[str]] = {}
    general: list[Problem] = []
    version = posted_version(request.POST)
    conflict = None
    if form.is_valid():
        item = form.item()
    if form.is_valid():  # item() may add errors (a half-given range)
        target = None if key == "new" else (int(key) if spec.name == "links" else key)
        arguments = {"pk" if spec.name == "links" else "key": target}
        try:
            spec.save(study=page.row, item=item, expected_version=version, **arguments)
        except EditConflict as error:
            # The form comes back with the values typed and their version: saving it
            # again ("Use mine") overwrites knowingly.
            conflict, version = conflict_context(error, item), error.version
        except StudyInvalid as error:
            by_key, general = problems_by_key(error.errors, spec)
        else:
            messages.success(request, f"Saved the {spec.singular}.")
            if request.htmx:
                return _section_response(request, page, spec)
            return redirect(reverse("study-inventory", args=[pk]) + f"#section-{spec.name}")
    return _form_response(
        request,
        page,
        spec,
        key,
        form,
        by_key,
        general,
        status=200 if request.htmx else (409 if conflict else 400),
        version=version,
        conflict=conflict,
    )


def _form_response(
    request, page, spec, key, form, by_key, general, status=200, version=None, conflict=None
):
    context = page.context(
        "study-inventory",
        kind=spec,
        key=key,
        form=form,
        groups=form.field_groups(),
        core_errors=by_key,
        general=general,
        action=reverse("inventory-item", args=[page.row.pk, spec.name, key]),
        hidden=[] if version is None else [("version", version)],
        conflict=conflict,
    )
    template = "inventory/form_page.html#form" if request.htmx else "inventory/form_page.html"
    return render(request, template, context, status=status)


@require_http_methods(["GET", "POST"])
@login_required
def item_delete(request: HttpRequest, pk: int, kind: str, key: str) -> HttpResponse:
    """Ask first, saying what else goes (GET); delete (POST)."""
    page = study_page(request, pk, role=m.Role.EDITOR)
    spec = _kind(kind)
    if key == "new":
        raise Http404("Nothing to delete.")
    existing = _existing(page, spec, key)
    target = int(key) if spec.name == "links" else key
    arguments = {"pk" if spec.name == "links" else "key": target}
    if request.method == "GET":
        consequences = spec.consequences(study=page.row, **arguments) if spec.consequences else []
        context = page.context(
            "study-inventory",
            kind=spec,
            key=key,
            item=existing,
            consequences=consequences,
            action=reverse("inventory-delete", args=[pk, kind, key]),
        )
        template = (
            "inventory/delete_page.html#form" if request.htmx else "inventory/delete_page.html"
        )
        return render(request, template, context)
    try:
        spec.delete(study=page.row, **arguments)
    except StudyInvalid as error:
        messages.error(
            request,
            f"The {spec.singular} was not deleted: "
            + "; ".join(str(problem) for problem in error.errors),
        )
    else:
        messages.success(request, f"Deleted the {spec.singular}.")
    if request.htmx:
        return _section_response(request, page, spec)
    return redirect(reverse("study-inventory", args=[pk]) + f"#section-{spec.name}")


@require_POST
@login_required
def study_new(request: HttpRequest) -> HttpResponse:
    """Start an empty study; its creator owns it."""
    form = StudyForm(request.POST)
    if form.is_valid():
        try:
            study = services.study_new(
                owner=request.user,
                key=form.cleaned_data["id"].strip(),
                title=form.cleaned_data["title"].strip(),
                scale=form.cleaned_data["scale"],
            )
        except StudyInvalid as error:
            messages.error(
                request,
                "The study was not created: "
                + "; ".join(str(problem) for problem in error.errors),
            )
        else:
            url = reverse("study-inventory", args=[study.pk])
            return HttpResponseClientRedirect(url) if request.htmx else redirect(url)
    else:
        messages.error(request, "The study was not created: give it an id, a title and a scale.")
    url = reverse("study-list")
    return HttpResponseClientRedirect(url) if request.htmx else redirect(url)
