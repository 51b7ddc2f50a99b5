"""Risk of a handover: severity times likelihood band, banded by the study's policy.

The default policy is an example only and says so: the manufacturer sets its own
acceptability criteria (ISO 14971:2019 sets no scales).
"""

from __future__ import annotations

from bisect import bisect_right
from typing import Any

__all__ = ["DEFAULT_RISK_POLICY", "likelihood_band", "noisy_or", "resolve_policy", "risk_band"]

#: Example policy (tool assumption, not a recommendation): likelihood cut into five equal
#: bands, and the risk scores (severity x band, 1-25) from which a handover needs review
#: or is unacceptable.
DEFAULT_RISK_POLICY = {
    "likelihood_bands": [0.2, 0.4, 0.6, 0.8],
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
    resolved["is_example"] = not policy or not (
        {"likelihood_bands", "review", "unacceptable"} & set(policy)
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


def risk_band(risk: int, policy: dict[str, Any]) -> str:
    """``"acceptable"``, ``"review"`` or ``"unacceptable"`` for a risk score."""
    if risk >= policy["unacceptable"]:
        return "unacceptable"
    if risk >= policy["review"]:
        return "review"
    return "acceptable"
