"""The report's charts as PNG images, drawn with matplotlib's Agg renderer.

The same images go into the printable HTML report (as ``data:`` URIs) and into the PDF.
The figures are made without pyplot (no global state, safe in a web process) and saved
without the "Software" stamp, so the same analysis gives the same bytes.
"""

from __future__ import annotations

import base64
import io
from dataclasses import dataclass

from allocation.core.vocabulary import STAGES

from .source import ExportSource

__all__ = ["Chart", "report_charts"]

#: The report's colours: one hue for people, one for devices, greys for the rest.
PERSON = "#3c6e91"
DEVICE = "#c0803a"
BANDS = {"acceptable": "#8da37a", "review": "#d9b44a", "unacceptable": "#b5483b"}
DPI = 110


@dataclass(frozen=True)
class Chart:
    """One chart: its title, a sentence saying what it shows, and the PNG bytes."""

    key: str
    title: str
    caption: str
    png: bytes

    @property
    def data_uri(self) -> str:
        return "data:image/png;base64," + base64.b64encode(self.png).decode("ascii")


def _png(figure) -> bytes:
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(figure)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=DPI, metadata={"Software": None})
    return buffer.getvalue()


def _figure(width: float, height: float):
    from matplotlib.figure import Figure

    figure = Figure(figsize=(width, height), layout="constrained")
    return figure, figure.add_subplot()


def _label(task_id: str, title: str) -> str:
    text = f"{task_id} {title}"
    return text if len(text) <= 40 else text[:39] + "…"


#: The degree chart shows at most this many tasks; a longer study gets several charts.
TASKS_PER_CHART = 30


def _degrees(source: ExportSource) -> list[Chart]:
    result = source.analysis
    all_leaves = list(result.study.leaves)
    charts = []
    for start in range(0, len(all_leaves), TASKS_PER_CHART):
        leaves = all_leaves[start : start + TASKS_PER_CHART]
        values = [
            [result.tasks[task.id].involved.degrees[stage] for stage in STAGES] for task in leaves
        ]
        figure, axes = _figure(6.4, 0.9 + 0.32 * len(leaves))
        axes.imshow(values, cmap="Oranges", vmin=0, vmax=1, aspect="auto")
        axes.set_xticks(range(len(STAGES)), STAGES)
        axes.set_yticks(range(len(leaves)), [_label(task.id, task.title) for task in leaves])
        axes.tick_params(labelsize=8)
        for row, line in enumerate(values):
            for column, value in enumerate(line):
                colour = "white" if value > 0.6 else "black"
                axes.text(
                    column, row, f"{value:.2f}", ha="center", va="center", fontsize=7, color=colour
                )
        part = ""
        if len(all_leaves) > TASKS_PER_CHART:
            part = f" (tasks {start + 1}-{start + len(leaves)} of {len(all_leaves)})"
        charts.append(
            Chart(
                f"degrees-{start // TASKS_PER_CHART + 1}",
                "Degree of automation by stage" + part,
                "0 = the person does the stage, 1 = the device does it (Parasuraman, Sheridan "
                "& Wickens 2000 stages; degree (L - 1) / 9 on the ten-level scale).",
                _png(figure),
            )
        )
    return charts


#: The person-time chart shows at most this many tasks, the largest first.
TOP_TASKS = 25


def _person_time(source: ExportSource) -> Chart:
    result = source.analysis
    timed = [
        (sum(result.tasks[task.id].person_s_per_day.values()), index, task)
        for index, task in enumerate(result.study.leaves)
    ]
    timed = sorted((item for item in timed if item[0] > 0), key=lambda item: (-item[0], item[1]))
    timed = timed[:TOP_TASKS]
    leaves = [task for _value, _index, task in timed]
    values = [value for value, _index, _task in timed]
    figure, axes = _figure(6.4, 0.9 + 0.3 * len(leaves))
    positions = range(len(leaves))
    axes.barh(positions, values, color=PERSON)
    axes.set_yticks(positions, [_label(task.id, task.title) for task in leaves])
    axes.invert_yaxis()
    axes.set_xlabel("person seconds per day")
    axes.tick_params(labelsize=8)
    return Chart(
        "person-time",
        "Person time per task",
        f"Seconds a day all people together spend on each task under the plan (the "
        f"{TOP_TASKS} largest; tasks that take no person time left out), supervision and "
        "monitoring included (DESIGN §3.1).",
        _png(figure),
    )


def _handovers(source: ExportSource) -> Chart | None:
    handovers = source.analysis.handovers
    if not handovers:
        return None
    figure, axes = _figure(6.4, 0.9 + 0.3 * len(handovers))
    positions = range(len(handovers))
    labels = [
        f"{h.site.from_task} → {h.site.to_task} ({h.site.source}"
        + (f", {h.site.stage}" if h.site.stage else "")
        + ")"
        for h in handovers
    ]
    colours = [BANDS.get(h.band, "#999999") for h in handovers]
    axes.barh(positions, [h.likelihood for h in handovers], color=colours)
    axes.set_yticks(positions, labels)
    axes.invert_yaxis()
    axes.set_xlim(0, 1)
    axes.set_xlabel("likelihood of a failed handover (bar colour: risk band)")
    axes.tick_params(labelsize=8)
    return Chart(
        "handovers",
        "Handovers by likelihood",
        "Weighted noisy-OR of time budget, load, cue, initiation and awareness (tool "
        "assumption weights); colour is the band of severity x likelihood under the study's "
        "risk policy.",
        _png(figure),
    )


def report_charts(source: ExportSource) -> list[Chart]:
    """The charts of the printable report, in order."""
    charts = [*_degrees(source), _person_time(source), _handovers(source)]
    return [chart for chart in charts if chart is not None]
