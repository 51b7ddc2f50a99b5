"""Risk of a handover: severity times likelihood band, banded by the study's policy.

The default policy is an example only and says so: the manufacturer sets its own
acceptability criteria (ISO 14971:2019 sets no scales).
"""

from __future__ import annotations

from bisect import bisect_right
from typing import Any

from ..vocabulary import FREQUENCY_BANDS

__all__ = [
    "DEFAULT_BAND_MATRIX",
    "DEFAULT_RISK_POLICY",
    "FREQUENCY_BANDS",
    "frequency_band",
    "frequency_level",
    "likelihood_band",
    "matrix_band",
    "noisy_or",
    "resolve_policy",
]

#: Example policy (tool assumption, not a recommendation): likelihood cut into five equal
#: bands, and the risk scores (severity x band, 1-25) from which a handover needs review
#: or is unacceptable.
#: Example matrix (tool assumption, not a recommendation): frequency band x severity
#: (1-5) -> band. Unacceptable where frequent and severity 3 or more, probable or more
#: and severity 4 or more, or occasional or more and severity 5; acceptable where
#: improbable, where remote and severity 3 or less, or at severity 1; review otherwise.
DEFAULT_BAND_MATRIX = {
    "frequent": ["acceptable", "review", "unacceptable", "unacceptable", "unacceptable"],
    "probable": ["acceptable", "review", "review", "unacceptable", "unacceptable"],
    "occasional": ["acceptable", "review", "review", "review", "unacceptable"],
    "remote": ["acceptable", "acceptable", "acceptable", "review", "review"],
    "improbable": ["acceptable", "acceptable", "acceptable", "acceptable", "acceptable"],
}

DEFAULT_RISK_POLICY = {
    "likelihood_bands": [0.2, 0.4, 0.6, 0.8],
    # Expected slips a year from which a handover is frequent, probable, occasional,
    # remote (below the last: improbable).
    "frequency_bands": [10, 1, 0.1, 0.01],
    "band_matrix": DEFAULT_BAND_MATRIX,
    "review": 10,
    "unacceptable": 17,
    # Tasks of this severity or above are safety-critical (the mode-map check).
    "critical_severity": 4,
    "note": "Example policy only. The manufacturer sets its own risk acceptability "
    "criteria (ISO 14971); replace these thresholds with yours.",
}


def resolve_policy(policy: dict[str, Any] | None) -> dict[str, Any]:
    """The study's risk policy, with the example's values where it sets none."""
    resolved = {**DEFAULT_RISK_POLICY, **(policy or {})}
    # A matrix given in part takes the example's rows for the frequency bands it leaves out.
    resolved["band_matrix"] = {**DEFAULT_BAND_MATRIX, **(resolved.get("band_matrix") or {})}
    resolved["is_example"] = not policy or not (
        {"likelihood_bands", "frequency_bands", "band_matrix"} & set(policy)
    )
    return resolved


def noisy_or(terms: dict[str, float]) -> float:
    """Combine factor terms w_i * f_i in [0, 1]: 1 - prod(1 - term)."""
    remaining = 1.0
    for term in terms.values():
        remaining *= 1 - min(max(term, 0.0), 1.0)
    return 1 - remaining


def likelihood_band(likelihood: float, policy: dict[str, Any]) -> int:
    """The likelihood band 1-5 of a likelihood in [0, 1]."""
    return 1 + bisect_right(policy["likelihood_bands"], likelihood)


def frequency_band(per_year: float, policy: dict[str, Any]) -> str:
    """The frequency band of a handover's expected slips a year: ``frequent`` at or
    above the first cut, ``improbable`` below the last."""
    for cut, name in zip(policy["frequency_bands"], FREQUENCY_BANDS, strict=False):
        if per_year >= cut:
            return name
    return FREQUENCY_BANDS[-1]


def frequency_level(name: str) -> int:
    """5 for ``frequent`` down to 1 for ``improbable``."""
    return len(FREQUENCY_BANDS) - FREQUENCY_BANDS.index(name)


def matrix_band(frequency: str, severity: int, policy: dict[str, Any]) -> str:
    """The band of a frequency band and a severity (1-5) in the policy's matrix."""
    return str(policy["band_matrix"][frequency][min(max(severity, 1), 5) - 1])
