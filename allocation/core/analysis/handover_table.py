"""Every handover of a plan in one table of columns, assessed all at once.

A handover's likelihood has one factor that depends on the whole plan: the receiver's
load, their daily burden as a share of their waking day (methods document,
``#handovers``). An edit that moves work to or from a person changes it for every
handover they receive. The table keeps what does not depend on the load per row and
assesses the rows together, so that an edit costs one pass of array arithmetic over the
handovers rather than one assessment each. The arithmetic is the same, in the same order,
as :func:`~.handovers.assess_handover`; the full analysis assesses through this table
too, so an edited plan and the same plan analysed afresh give equal figures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..vocabulary import FREQUENCY_BANDS
from .handovers import DAYS_A_YEAR, Handover, HandoverSite

__all__ = ["HandoverTable", "SiteFactors"]

#: The factors of a handover's likelihood, in the order the noisy-OR combines them.
FACTORS = ("time", "load", "cue", "automation_initiated", "awareness")
BANDS = ("acceptable", "review", "unacceptable")


@dataclass(frozen=True, slots=True)
class SiteFactors:
    """A handover site with every factor of its likelihood but the receiver's load."""

    site: HandoverSite
    time_ratio: float | None
    receiver_is_human: bool
    awareness: float
    severity: int
    #: The receiver's place among the people, or -1 (no load: an automation or nobody).
    person: int
    #: Ties in risk, likelihood and occurrences are ordered by this key.
    order: int


class HandoverTable:
    """The assessed handovers of one plan, kept row by row.

    Parameters
    ----------
    assumptions : dict
        The resolved assumptions (``likelihood_weights``, ``cue_weakness``,
        ``initiation_weight``).
    policy : dict
        The resolved risk policy.
    """

    COLUMNS = ("per_day", "c_time", "c_cue", "c_auto", "c_awareness", "severity")

    def __init__(self, assumptions: dict[str, Any], policy: dict[str, Any]):
        self.assumptions = assumptions
        self.policy = policy
        self.weights = {name: float(assumptions["likelihood_weights"][name]) for name in FACTORS}
        self.rows: list[SiteFactors | None] = []
        self.free: list[int] = []
        self.size = 0
        self.columns = {name: np.zeros(64) for name in self.COLUMNS}
        self.person = np.full(64, -1, dtype=np.int64)
        self.order_key = np.zeros(64, dtype=np.int64)  # past float precision: integers
        self.active = np.zeros(64, dtype=bool)
        self.assessed: dict[str, np.ndarray] = {}
        self.built: dict[int, tuple[tuple[float, float], Handover]] = {}
        matrix = policy["band_matrix"]
        self.band_of = np.array(
            [
                [BANDS.index(str(matrix[band][severity])) for severity in range(5)]
                for band in FREQUENCY_BANDS
            ],
            dtype=np.int64,
        )

    # -- rows -----------------------------------------------------------------------

    def add(self, factors: SiteFactors) -> int:
        """Place a site in the table; its row number."""
        if self.free:
            row = self.free.pop()
            self.rows[row] = factors
        else:
            row = len(self.rows)
            self.rows.append(factors)
            if row >= self.active.size:
                self._grow()
        weights, weakness = self.weights, self.assumptions["cue_weakness"]
        site = factors.site
        values = self._values(factors, weakness)
        columns = self.columns
        columns["per_day"][row] = site.per_day
        columns["c_time"][row] = weights["time"] * values["time"]
        columns["c_cue"][row] = weights["cue"] * values["cue"]
        columns["c_auto"][row] = weights["automation_initiated"] * values["automation_initiated"]
        columns["c_awareness"][row] = weights["awareness"] * values["awareness"]
        columns["severity"][row] = factors.severity
        self.order_key[row] = factors.order
        self.person[row] = factors.person
        self.active[row] = True
        self.size += 1
        return row

    def remove(self, row: int) -> None:
        """Take a row out of the table."""
        self.rows[row] = None
        self.active[row] = False
        self.built.pop(row, None)
        self.free.append(row)
        self.size -= 1

    def _grow(self) -> None:
        capacity = 2 * self.active.size
        for name, column in self.columns.items():
            self.columns[name] = np.concatenate([column, np.zeros(capacity - column.size)])
        self.person = np.concatenate([self.person, np.full(capacity - self.person.size, -1)])
        self.order_key = np.concatenate(
            [self.order_key, np.zeros(capacity - self.order_key.size, np.int64)]
        )
        self.active = np.concatenate([self.active, np.zeros(capacity - self.active.size, bool)])

    def _values(self, factors: SiteFactors, weakness: dict[str, Any]) -> dict[str, float]:
        """The factors other than the load (as :func:`~.handovers.assess_handover`)."""
        site = factors.site
        return {
            "time": 0.0 if factors.time_ratio is None else min(1.0, factors.time_ratio),
            "cue": float(weakness[site.cue or "none"]) if factors.receiver_is_human else 0.0,
            "automation_initiated": float(
                self.assumptions["initiation_weight"].get(site.initiator, 0)
            ),
            "awareness": factors.awareness,
        }

    # -- assessment -----------------------------------------------------------------

    def assess(self, loads: np.ndarray) -> None:
        """Assess every row with the people's loads (burden over waking time)."""
        n = len(self.rows)
        columns = {name: column[:n] for name, column in self.columns.items()}
        person = self.person[:n]
        load = np.where(person >= 0, loads[np.maximum(person, 0)] if loads.size else 0.0, 0.0)
        load = np.minimum(1.0, np.maximum(0.0, load))
        contribution = self.weights["load"] * load

        def kept(term: np.ndarray) -> np.ndarray:
            return 1 - np.minimum(np.maximum(term, 0.0), 1.0)

        remaining = 1.0 * kept(columns["c_time"])
        for term in (contribution, columns["c_cue"], columns["c_auto"], columns["c_awareness"]):
            remaining = remaining * kept(term)
        likelihood = 1 - remaining
        per_year = columns["per_day"] * DAYS_A_YEAR * likelihood
        cuts = self.policy["frequency_bands"]
        frequency = np.full(n, len(FREQUENCY_BANDS) - 1, dtype=np.int64)
        for index in reversed(range(min(len(cuts), len(FREQUENCY_BANDS)))):
            frequency = np.where(per_year >= cuts[index], index, frequency)
        severity = columns["severity"].astype(np.int64)
        level = len(FREQUENCY_BANDS) - frequency
        self.assessed = {
            "load": load,
            "likelihood": likelihood,
            "likelihood_band": 1
            + np.searchsorted(self.policy["likelihood_bands"], likelihood, side="right"),
            "per_year": per_year,
            "frequency": frequency,
            "risk": severity * level,
            "band": self.band_of[frequency, np.clip(severity, 1, 5) - 1],
        }

    def order(self) -> np.ndarray:
        """The rows in use, by risk, then likelihood, then occurrences a day (each
        highest first), ties in the order of their sites."""
        assessed, n = self.assessed, len(self.rows)
        rows = np.flatnonzero(self.active[:n])
        keys = (
            self.order_key[rows],
            -self.columns["per_day"][rows],
            -assessed["likelihood"][rows],
            -assessed["risk"][rows],
        )
        return rows[np.lexsort(keys)]

    def headline(self) -> dict[str, float]:
        """The handover figures of a plan's headline."""
        rows = np.flatnonzero(self.active[: len(self.rows)])
        risk = self.assessed["risk"][rows] if rows.size else np.zeros(0, np.int64)
        return {
            "handovers": int(rows.size),
            "handovers_per_day": _exact_sum(self.columns["per_day"][rows]),
            "handovers_to_review": int(np.count_nonzero(self.assessed["band"][rows] != 0)),
            "max_risk": int(risk.max()) if rows.size else 0,
        }

    def handovers(self) -> list[Handover]:
        """The assessed handovers, highest risk first."""
        return [self.handover(int(row)) for row in self.order()]

    def handover(self, row: int) -> Handover:
        """The assessed handover of one row (kept until its likelihood changes)."""
        assessed = self.assessed
        likelihood = float(assessed["likelihood"][row])
        key = (likelihood, float(assessed["load"][row]))
        built = self.built.get(row)
        if built is not None and built[0] == key:
            return built[1]
        factors = self.rows[row]
        assert factors is not None
        values = self._values(factors, self.assumptions["cue_weakness"])
        values = {
            "time": values["time"],
            "load": float(assessed["load"][row]),
            "cue": values["cue"],
            "automation_initiated": values["automation_initiated"],
            "awareness": values["awareness"],
        }
        handover = Handover(
            site=factors.site,
            time_ratio=factors.time_ratio,
            receiver_load=values["load"],
            awareness=factors.awareness,
            severity=factors.severity,
            factors=values,
            contributions={name: self.weights[name] * value for name, value in values.items()},
            likelihood=likelihood,
            likelihood_band=int(assessed["likelihood_band"][row]),
            risk=int(assessed["risk"][row]),
            band=BANDS[int(assessed["band"][row])],
            frequency_per_year=float(assessed["per_year"][row]),
            frequency_band=FREQUENCY_BANDS[int(assessed["frequency"][row])],
        )
        self.built[row] = (key, handover)
        return handover


def _exact_sum(values: np.ndarray) -> float:
    """The correctly rounded sum, whatever the order of the values."""
    return math.fsum(values.tolist())
