"""The fixed words of the model: kinds, stages, channels, severities, enumerations.

Kept in one place so that the file format, the database choices and the screens
agree on them.
"""

from __future__ import annotations

__all__ = [
    "AGENT_KINDS",
    "ASSIGNMENT_STATUSES",
    "CHANNELS",
    "CUES",
    "EVENT_WHEN",
    "FREQUENCY_BANDS",
    "INITIATORS",
    "LINK_KINDS",
    "RISK_BAND_NAMES",
    "SCALES",
    "SEVERITIES",
    "STAGES",
    "STAGE_NAMES",
    "TRANSITION_CAUSES",
    "VACP_ANCHORS",
]

#: Agent kinds.
AGENT_KINDS = ("human", "automation")

#: A handover's frequency bands, from the most to the least often (expected slips a year).
FREQUENCY_BANDS = ("frequent", "probable", "occasional", "remote", "improbable")

#: The bands of the screening index a handover lands in.
RISK_BAND_NAMES = ("acceptable", "review", "unacceptable")

#: The four stages of information processing, in order. Published: Parasuraman,
#: Sheridan & Wickens (2000), IEEE Trans. SMC-A 30(3), 286-297.
STAGES = ("acquisition", "analysis", "decision", "action")
STAGE_NAMES = {
    "acquisition": "Information acquisition",
    "analysis": "Information analysis",
    "decision": "Decision and action selection",
    "action": "Action implementation",
}

#: Level-of-automation scales a study may use.
SCALES = {
    "sv10": "Sheridan & Verplank (1978), ten levels, per stage (Parasuraman et al. 2000)",
    "ek10": "Endsley & Kaber (1999), ten levels with a role matrix",
}

#: Severity levels 1-5. Published: informative examples of ISO 14971:2007 Annex D
#: and ISO/TR 24971:2020 (via a 2018 handbook). Manufacturers set their own.
SEVERITIES = {
    1: ("negligible", "inconvenience or temporary discomfort"),
    2: ("minor", "temporary injury not needing professional intervention"),
    3: ("serious", "injury needing professional intervention"),
    4: ("critical", "permanent impairment or life-threatening injury"),
    5: ("catastrophic", "death"),
}

#: Feedback given to the person, and cues of mode transitions, weakest first.
CUES = ("none", "on_request", "display", "alert", "alert_confirm")

#: Who initiates an assignment's occurrences.
INITIATORS = ("human", "automation", "event", "schedule")

#: Who causes a mode transition.
TRANSITION_CAUSES = ("human", "automation", "event", "schedule", "environment")

ASSIGNMENT_STATUSES = ("proposed", "agreed", "rejected", "open")

LINK_KINDS = ("precedes", "informs")

#: When a rate-based event or task may happen.
EVENT_WHEN = ("awake", "asleep", "any")

#: VACP channels and their anchor values with descriptors. Published: McCracken &
#: Aldrich (1984), ARI Technical Note ASI479-024-84, via Aldrich, Szabo & Bierbaum
#: (1989); the 0.0 rows are from memory.
CHANNELS = ("visual", "auditory", "cognitive", "psychomotor")
VACP_ANCHORS: dict[str, tuple[tuple[float, str], ...]] = {
    "visual": (
        (0.0, "none"),
        (1.0, "register / detect"),
        (3.7, "discriminate"),
        (4.0, "inspect / check"),
        (5.0, "locate / align"),
        (5.4, "track / follow"),
        (5.9, "read (symbol)"),
        (7.0, "scan / search / monitor"),
    ),
    "auditory": (
        (0.0, "none"),
        (1.0, "detect / register sound"),
        (2.0, "orient to sound (general)"),
        (4.2, "orient to sound (selective)"),
        (4.3, "verify auditory feedback"),
        (4.9, "interpret semantic content (speech)"),
        (6.6, "discriminate sound characteristics"),
        (7.0, "interpret sound patterns"),
    ),
    "cognitive": (
        (0.0, "none"),
        (1.0, "automatic (simple association)"),
        (1.2, "alternative selection"),
        (3.7, "sign / signal recognition"),
        (4.6, "evaluation / judgement, single aspect"),
        (5.3, "encoding / decoding, recall"),
        (6.8, "evaluation / judgement, several aspects"),
        (7.0, "estimation, calculation, conversion"),
    ),
    "psychomotor": (
        (0.0, "none"),
        (1.0, "speech"),
        (2.2, "discrete actuation (button, toggle, trigger)"),
        (2.6, "continuous adjustive"),
        (4.6, "manipulative"),
        (5.8, "discrete adjustive"),
        (6.5, "symbolic production (writing)"),
        (7.0, "serial discrete manipulation (keyboard)"),
    ),
}
