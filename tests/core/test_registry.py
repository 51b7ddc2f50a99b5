"""The registry of figures, finding kinds and statuses (allocation.core.registry).

Two kinds of check. The formatting is checked against values worked by hand (each
worked out beside its assertion). The coverage is checked against what the analyses
actually produce: every figure key of the analysis file, the headline and the simulation,
every finding kind, handover source, category and factor that the example studies and
seeded synthetic studies give, and every kind the core's code can raise (read from its
source), must have the registry's words.
"""

from __future__ import annotations

import ast
import json
import math
from functools import cache
from pathlib import Path

import pytest

import allocation.core
from allocation.core import read_study
from allocation.core.analysis import analyse_plan, prepare
from allocation.core.analysis.modecheck import MODE_FINDING_KINDS
from allocation.core.analysis.risk import matrix_band, resolve_policy
from allocation.core.assumptions import ASSUMPTIONS, METHOD_NOTES
from allocation.core.registry import (
    ASSIGNMENT_STATUS_WORDS,
    ASSUMPTION_STATUS_WORDS,
    AWARENESS_FACTORS,
    BETTER,
    CATEGORIES,
    FIGURES,
    FINDING_KINDS,
    FREQUENCY_BAND_WORDS,
    HANDOVER_SOURCES,
    LIKELIHOOD_FACTORS,
    RISK_BANDS,
    SIMULATED,
    figure,
    figure_number,
    figure_text,
    finding_kind,
)
from allocation.core.simulation import FIGURE_WORDS
from allocation.core.simulation import FIGURES as SIMULATION_FIGURES
from allocation.core.synthetic import synthetic_study
from allocation.core.vocabulary import ASSIGNMENT_STATUSES
from allocation.examples import example_paths

CORE = Path(allocation.core.__file__).resolve().parent

# -- formatting, worked by hand --------------------------------------------------------------


def test_a_day_of_person_time_reads_in_hours():
    # 14,644 s / 3,600 = 4.0678 h; three significant digits: 4.07.
    assert figure_text("burden_s_per_day", 14644) == "4.07 h a day"
    assert figure_text("burden_s_per_day", 14644, unit=False) == "4.07 h"


def test_durations_take_the_largest_unit_that_reads_well():
    # 52 / 3 = 17.33 s, written to three significant digits.
    assert figure_text("person_s", 52 / 3) == "17.3 s"
    # 90 s = 1.5 min; 45 s stays in seconds; 2 days = 172,800 s.
    assert figure_text("monitoring_s_per_day", 90) == "1.5 min a day"
    assert figure_text("supervision_s", 45) == "45 s"
    assert figure_text("latency_s", 172800) == "2 d"
    assert figure_text("overload_s_visual", 0) == "0 s a day"


def test_numbers_take_the_figures_decimals_and_unit():
    assert figure_text("night_interruptions_per_day", 0.25) == "0.25 a day"
    assert figure_text("interruptions_per_day", 3) == "3.00 a day"
    assert figure_text("cut_ratio", 1 / 3) == "0.333"  # 0.3333… to three decimals
    assert figure_text("max_risk", 12) == "12"
    assert figure_text("overload_min", 12.34) == "12.3 min a day"
    assert figure_text("peak_visual", 9.4) == "9.4 VACP sum"
    # Thousands grouped; the minus sign, not a hyphen.
    assert figure_number("burden_s_per_day", 14644) == "14,644.0"
    assert figure_number("modularity", -0.2) == "−0.200"


def test_a_rare_figure_never_reads_as_none():
    # Once a year: 1/365 = 0.00274 a day, which two decimals would write 0.00; two
    # significant digits keep it, written out in full (never as 1e-07).
    assert figure_text("occurrences_per_day", 1 / 365) == "0.0027 a day"
    assert figure_number("handovers_per_day", 1e-7) == "0.0000001"
    assert figure_number("modularity", -0.00042) == "−0.00042"
    # Zero is zero at the figure's precision.
    assert figure_number("occurrences_per_day", 0) == "0.00"


def test_differences_carry_their_sign_and_never_read_as_none():
    assert figure_number("interruptions_per_day", 1.5, signed=True) == "+1.50"
    assert figure_number("interruptions_per_day", 0, signed=True) == "±0"
    # -0.001 rounds to 0.00 at two decimals: two significant digits keep it visible.
    assert figure_number("interruptions_per_day", -0.001, signed=True) == "−0.001"
    # -90 s is 1.5 min less.
    assert figure_text("burden_change", -90, signed=True) == "−1.5 min a day"
    assert figure_text("burden_change", 7200, signed=True) == "+2 h a day"
    assert figure_text("burden_change", 0, signed=True) == "±0"


def test_a_value_that_is_not_there_reads_as_a_dash():
    assert figure_text("time_ratio", None) == "—"
    assert figure_text("time_ratio", math.nan) == "—"
    assert figure_number("cut_ratio", None) == "—"


def test_a_simulated_figure_takes_the_words_of_the_analytic_one():
    assert figure("burden_s") is FIGURES["burden_s_per_day"]
    assert figure_text("night_interruptions", 0.5) == "0.50 a day"
    assert FIGURE_WORDS["burden_s"] == ("Person time", "s a day")
    with pytest.raises(KeyError, match="no figure 'burden'"):
        figure("burden")
    with pytest.raises(KeyError, match="no finding kind 'mode_error'"):
        finding_kind("mode_error")


def test_every_figure_is_well_formed():
    for table in (FIGURES, AWARENESS_FACTORS, LIKELIHOOD_FACTORS):
        for key, item in table.items():
            assert item.key == key and item.label and item.anchor, key
            assert item.better in BETTER, key
            assert item.decimals >= 0, key
            if item.seconds:
                assert item.unit == "s" or item.unit.startswith("s "), key
    # Modularity is the one headline figure where more is better: a partition that keeps
    # tightly linked tasks together scores higher (Newman 2006).
    assert FIGURES["modularity"].better == "higher"
    assert FIGURES["cut_ratio"].better == "lower"


# -- coverage: what the analyses produce ----------------------------------------------------


@cache
def analyses():
    """Every plan of the three example studies and of three seeded synthetic studies."""
    found = []
    studies = [
        read_study(json.loads(path.read_text(encoding="utf-8"))) for path in example_paths()
    ]
    studies += [
        read_study(synthetic_study(tasks=120, links=240, events=8, seed=seed)) for seed in range(3)
    ]
    for study in studies:
        graph = prepare(study)
        found += [analyse_plan(study, plan.id, graph=graph) for plan in study.plans]
    return found


def numeric_keys(record: dict) -> set[str]:
    return {
        key
        for key, value in record.items()
        if isinstance(value, int | float) and not isinstance(value, bool)
    }


def test_every_figure_of_the_analysis_file_has_words():
    keys: set[str] = set()
    for analysis in analyses():
        data = analysis.to_json()
        for person in data["people"].values():
            keys |= numeric_keys(person)
        for task in data["tasks"].values():
            keys |= numeric_keys(task) | {"person_s_per_day", "degrees", "asleep_share"}
        for handover in data["handovers"]:
            # A handover's per_day is its share of the handover occurrences; its severity
            # is the receiving task's (an input).
            keys |= numeric_keys(handover) - {"per_day", "severity"} | {"handovers_per_day"}
        keys |= numeric_keys(data["coherence"]) - {"groups", "link_weight_per_day"}
        keys |= set(data["headline"])
    assert keys - set(FIGURES) == set()


def test_every_simulated_figure_has_words():
    for key in SIMULATION_FIGURES:
        assert figure(key).label == FIGURE_WORDS[key][0]
    assert set(SIMULATED) <= set(SIMULATION_FIGURES)


def test_every_factor_has_words():
    awareness, likelihood = set(), set()
    for analysis in analyses():
        for task in analysis.tasks.values():
            if task.awareness is not None:
                awareness |= set(task.awareness.factors)
        for handover in analysis.handovers:
            likelihood |= set(handover.factors)
    assert awareness == set(AWARENESS_FACTORS)
    assert likelihood == set(LIKELIHOOD_FACTORS)


def test_every_finding_kind_the_analyses_raise_has_words():
    raised = {finding.kind for analysis in analyses() for finding in analysis.findings}
    # The studies raise most kinds, the mode-map ones included; the source scan below
    # covers the rest.
    assert {"accountability", "capability", "window_missed", "error_state"} <= raised
    assert raised <= set(FINDING_KINDS)
    assert set(MODE_FINDING_KINDS) <= set(FINDING_KINDS)


def kinds_in_source() -> set[str]:
    """The first argument of every ``Finding("kind", ...)`` in the core's code."""
    kinds = set()
    for path in CORE.rglob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if (
                isinstance(node, ast.Call)
                and isinstance(node.func, ast.Name)
                and node.func.id == "Finding"
                and node.args
            ):
                first = node.args[0]
                assert isinstance(first, ast.Constant), f"{path.name}:{node.lineno}"
                kinds.add(first.value)
    return kinds


def test_the_registry_names_exactly_the_kinds_the_code_can_raise():
    assert kinds_in_source() == set(FINDING_KINDS)


def test_every_handover_source_band_and_category_has_words():
    sources, bands, categories = set(), set(), set()
    for analysis in analyses():
        sources |= {handover.site.source for handover in analysis.handovers}
        bands |= {handover.band for handover in analysis.handovers}
        categories |= {task["category"] for task in analysis.to_json()["tasks"].values()}
    assert sources <= set(HANDOVER_SOURCES) and {"link", "shared", "mode"} <= sources
    assert bands <= set(RISK_BANDS) and categories <= set(CATEGORIES)
    # The example matrix's three bands, at severity 3 from improbable to frequent
    # (methods document, #handover-risk): acceptable, review, unacceptable.
    policy = resolve_policy({})
    cells = [matrix_band(f, 3, policy) for f in ("improbable", "occasional", "frequent")]
    assert cells == list(RISK_BANDS)
    frequencies = {handover.frequency_band for a in analyses() for handover in a.handovers}
    assert frequencies <= set(FREQUENCY_BAND_WORDS)


def test_every_status_has_words():
    assert list(ASSIGNMENT_STATUS_WORDS) == list(ASSIGNMENT_STATUSES)
    used = {assumption.status for assumption in ASSUMPTIONS}
    used |= {status for _key, status, _text in METHOD_NOTES}
    assert used <= set(ASSUMPTION_STATUS_WORDS)
