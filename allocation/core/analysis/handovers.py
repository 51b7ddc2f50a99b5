"""Handover points: where work or control passes between agents (methods document,
``#handovers``).

Three sources:

1. ``link``: a link whose two tasks are principally held by different agents;
2. ``shared``: a shared assignment whose stages pass from one agent to the other;
3. ``mode``: a mode transition that changes who holds a task.

Each handover's likelihood combines its factors by a weighted noisy-OR (tool
assumption ``likelihood_weights``)::

    likelihood = 1 - prod over factors of (1 - weight_f * factor_f)

- ``time``: the time budget ratio, capped at 1: (receiver's response latency + the
  receiver's time on the task) / time left in the task's window (floored at 1 s; no
  window, no time factor). Takeover-time studies show why this matters (Eriksson &
  Stanton 2017; Gold et al. 2013);
- ``load``: the receiver's daily burden as a share of their waking day;
- ``cue``: weakness of the cue to a human receiver (``cue_weakness``);
- ``automation_initiated``: who starts it (``initiation_weight``);
- ``awareness``: the receiving task's mode-awareness index.

The likelihood is a screening *index*, not a probability. Its band also weighs how
often the handover happens: expected slips a year = per day x 365 x index (tool
assumption: the index read as a chance per occurrence), placed in the policy's frequency
bands, then crossed with the severity in the policy's matrix (frequency band x severity
-> band). The score ``risk`` is severity (1-5) times the frequency level (1 improbable to
5 frequent); ``likelihood_band`` stays the band of the index alone.

References
----------
.. [1] Eriksson, A., & Stanton, N. A. (2017). Takeover time in highly automated vehicles.
   Human Factors, 59(4), 689-705.
.. [2] Gold, C., Damböck, D., Lorenz, L., & Bengler, K. (2013). "Take over!" How long
   does it take to get the driver back into the loop? Proc. HFES 57(1), 1938-1942.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from .risk import frequency_band, frequency_level, likelihood_band, matrix_band, noisy_or

#: Days a year, for expected slips a year (tool assumption: 365).
DAYS_A_YEAR = 365

__all__ = ["Handover", "HandoverSite", "assess_handover", "time_budget_ratio"]


@dataclass(frozen=True, slots=True)
class HandoverSite:
    """Where a handover is, before it is assessed."""

    source: str
    from_task: str
    to_task: str
    from_agent: str | None
    to_agent: str | None
    per_day: float
    cue: str | None
    initiator: str
    modes: tuple[str, ...] = ()
    trigger: str | None = None
    stage: str | None = None


@dataclass(frozen=True, slots=True)
class Handover:
    """An assessed handover, with every factor and its contribution kept."""

    site: HandoverSite
    time_ratio: float | None
    receiver_load: float
    awareness: float
    severity: int
    factors: dict[str, float] = field(default_factory=dict)
    contributions: dict[str, float] = field(default_factory=dict)
    likelihood: float = 0.0
    likelihood_band: int = 1
    risk: int = 1
    band: str = "acceptable"
    frequency_per_year: float = 0.0
    frequency_band: str = "improbable"

    def to_json(self) -> dict[str, Any]:
        site = self.site
        return {
            "source": site.source,
            "from_task": site.from_task,
            "to_task": site.to_task,
            "from_agent": site.from_agent,
            "to_agent": site.to_agent,
            "per_day": site.per_day,
            "time_ratio": self.time_ratio,
            "likelihood": self.likelihood,
            "severity": self.severity,
            "risk": self.risk,
            "band": self.band,
            "likelihood_band": self.likelihood_band,
            "frequency_per_year": self.frequency_per_year,
            "frequency_band": self.frequency_band,
            "cue": site.cue,
            "initiator": site.initiator,
            "automation_initiated": site.initiator == "automation",
            "receiver_load": self.receiver_load,
            "awareness": self.awareness,
            "factors": self.factors,
            "contributions": self.contributions,
            "modes": list(site.modes),
            "trigger": site.trigger,
            "stage": site.stage,
        }


def time_budget_ratio(
    latency_s: float,
    work_s: float,
    window_s: float | None,
    ready_s: float,
    floor_s: float = 1.0,
) -> float | None:
    """(latency + work) / time left in the window; ``None`` when there is no window.

    The time left is the window less the time the work is ready at, floored at
    ``floor_s`` (the assumption ``time_budget_floor_s``).
    """
    if window_s is None:
        return None
    return (latency_s + work_s) / max(window_s - ready_s, floor_s)


def assess_handover(
    site: HandoverSite,
    *,
    receiver_is_human: bool,
    time_ratio: float | None,
    receiver_load: float,
    awareness: float,
    severity: int,
    assumptions: dict[str, Any],
    policy: dict[str, Any],
) -> Handover:
    """Combine a handover's factors into its likelihood, risk and band."""
    weights = assumptions["likelihood_weights"]
    weakness = assumptions["cue_weakness"]
    factors = {
        "time": 0.0 if time_ratio is None else min(1.0, time_ratio),
        "load": min(1.0, max(0.0, receiver_load)),
        "cue": float(weakness[site.cue or "none"]) if receiver_is_human else 0.0,
        "automation_initiated": float(assumptions["initiation_weight"].get(site.initiator, 0)),
        "awareness": awareness,
    }
    contributions = {name: float(weights[name]) * value for name, value in factors.items()}
    likelihood = noisy_or(contributions)
    band = likelihood_band(likelihood, policy)
    per_year = site.per_day * DAYS_A_YEAR * likelihood
    frequency = frequency_band(per_year, policy)
    risk = severity * frequency_level(frequency)
    return Handover(
        site=site,
        time_ratio=time_ratio,
        receiver_load=factors["load"],
        awareness=awareness,
        severity=severity,
        factors=factors,
        contributions=contributions,
        likelihood=likelihood,
        likelihood_band=band,
        risk=risk,
        band=matrix_band(frequency, severity, policy),
        frequency_per_year=per_year,
        frequency_band=frequency,
    )
