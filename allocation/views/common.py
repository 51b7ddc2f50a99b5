"""What every study page shares: the access check, the loaded study, the tabs."""

from __future__ import annotations

from dataclasses import dataclass, field

from django.http import HttpRequest
from django.urls import NoReverseMatch, reverse

from allocation import models as m
from allocation import selectors
from allocation.core import LoadResult, Study
from allocation.core.analysis import PlanAnalysis
from allocation.core.limits import PAGE_PROBLEMS, PAGE_ROWS

#: The study's screens, in tab order: label, URL name, whether the URL takes a plan.
STUDY_TABS = (
    ("Overview", "study-detail", False),
    ("Inventory", "study-inventory", False),
    ("Plan editor", "plan-editor", True),
    ("Mode map", "plan-modes", True),
    ("Graph", "study-graph", False),
    ("Dashboards", "plan-dashboard", True),
    ("Simulation", "plan-simulation", True),
    ("Compare", "study-compare", False),
    ("Workload ratings", "plan-ratings", True),
    ("Review", "plan-review", True),
    ("Snapshots", "study-snapshots", False),
    ("History", "study-history", False),
    ("Assumptions", "study-assumptions", False),
)


@dataclass
class StudyPage:
    """A study as a page needs it: the row, the user's role, the core study and problems."""

    row: m.Study
    role: str
    result: LoadResult
    tabs: list[dict[str, object]] = field(default_factory=list)

    @property
    def study(self) -> Study:
        return self.result.study

    @property
    def can_edit(self) -> bool:
        return m.Role.rank(self.role) >= m.Role.rank(m.Role.EDITOR)

    def analyses(self) -> dict[str, PlanAnalysis]:
        """Every plan analysed (none while the study has errors)."""
        return selectors.study_analyses(self.row)

    def analysis(self, plan_id: str) -> PlanAnalysis | None:
        """One plan analysed (``None`` while the study has errors)."""
        return selectors.plan_analysis(self.row, plan_id)

    def plan_or_404(self, plan_id: str):
        from django.http import Http404

        if self.study is None or plan_id not in self.study.plans_by_id:
            raise Http404("No such plan.")
        return self.study.plans_by_id[plan_id]

    def context(self, active: str, **extra: object) -> dict[str, object]:
        """The template context every study page starts from."""
        return {
            "page": self,
            "study_row": self.row,
            "study": self.study,
            "problems": self.result.problems,
            # Only the first problems are listed: a study may have thousands.
            "problems_shown": PAGE_PROBLEMS,
            # A choice among more items than a page lists is typed, not picked.
            "page_rows": PAGE_ROWS,
            "problems_slice": f":{PAGE_PROBLEMS}",
            "tabs": study_tabs(self, active),
            "can_edit": self.can_edit,
            **extra,
        }


def study_page(request: HttpRequest, pk: int, role: str = m.Role.VIEWER) -> StudyPage:
    """Load a study for a page; 404 unless the user holds at least ``role`` in it."""
    row = selectors.study_for_user(user=request.user, pk=pk, role=role)
    return StudyPage(row=row, role=row.role, result=selectors.study_load(row))


def study_tabs(page: StudyPage, active: str) -> list[dict[str, object]]:
    """The study's tabs whose screens exist, the active one marked."""
    plans = page.study.plans if page.study else ()
    first_plan = plans[0].id if plans else None
    # The mode map opens on the first plan that has one.
    with_modes = next((plan.id for plan in plans if plan.modes is not None), first_plan)
    tabs = []
    for label, name, takes_plan in STUDY_TABS:
        if takes_plan and first_plan is None:
            continue
        plan = with_modes if name == "plan-modes" else first_plan
        args = [page.row.pk, plan] if takes_plan else [page.row.pk]
        try:
            url = reverse(name, args=args)
        except NoReverseMatch:
            continue
        tabs.append({"label": label, "url": url, "active": name == active})
    return tabs
