"""Static SVG drawings of the screens' plotly figures, for the printable report.

The screens hand plotly.js a figure as a plain dict (``{"data": [...], "layout": {...}}``,
built in the chart modules). The report draws the SAME dicts here, so a chart on paper
has the screen's traces, names, colours and axis titles; only what plotly.js does in the
browser (hover, zoom) is left out. The drawing is plain SVG text: no browser, no raster,
and the same figure gives the same bytes.

What is drawn: bar traces (vertical and horizontal; grouped, stacked or overlaid, one
colour or one per bar), heatmaps on category axes (their colour scale as stops, cell
text, gaps) and scatter traces (lines, markers, text, vertical error bars); cartesian
axes with titles, linear or category, fixed or automatic ranges, reversed order, grid
and zero lines, side-by-side panels (``xaxis2``/``yaxis2`` with domains); the legend.
Hover templates, custom data, shapes and annotations are ignored; a trace type outside
this list is refused with its name, so a chart never prints half-drawn.

Text: plotly reads labels as HTML (the chart modules escape what a study's author typed
and break lines with ``<br>``). Here each label is read back to plain text and escaped
again for XML, so typed text prints as typed and never as markup.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

__all__ = ["axis_ranges", "figure_svg", "label_text", "text_width"]

#: plotly.js's own defaults where a figure leaves a setting out.
COLORWAY = (
    "#1f77b4",
    "#ff7f0e",
    "#2ca02c",
    "#d62728",
    "#9467bd",
    "#8c564b",
    "#e377c2",
    "#7f7f7f",
    "#bcbd22",
    "#17becf",
)
DEFAULT_FONT = {"family": "sans-serif", "size": 12, "color": "#444444"}
DEFAULT_MARGIN = {"l": 80, "r": 80, "t": 100, "b": 80}
GRID = "#eeeeee"
ZERO_LINE = "#444444"
BAR_GAP = 0.2
LEGEND_SWATCH = 12
LINE_HEIGHT = 1.25
DASHES = {"dash": "6,4", "dot": "2,3", "dashdot": "6,3,2,3", "longdash": "10,4"}

_BREAK = re.compile(r"<br\s*/?>", re.IGNORECASE)
_TAG = re.compile(r"</?(?:b|i|em|strong|sup|sub|span)(?:\s[^>]*)?>", re.IGNORECASE)


def label_text(value: object) -> list[str]:
    """A plotly label as lines of plain text: ``<br>`` breaks, entities read back."""
    if value is None:
        return []
    lines = [html.unescape(_TAG.sub("", line)) for line in _BREAK.split(str(value))]
    # SVG text collapses spaces: an indent (a sub-goal's) is kept as no-break spaces.
    return ["\u00a0" * (len(line) - len(line.lstrip(" "))) + line.lstrip(" ") for line in lines]


def _xml(text: str) -> str:
    return html.escape(text, quote=True)


#: Advance widths of DejaVu Sans (the report's face) in ems, by character class: enough
#: to lay out labels and margins without reading a font file.
_NARROW = set("iljI.,:;'!|` ")
_THIN = set('ft()[]{}/\\-r"*')
_WIDE = set("mwMW%@…—")


def text_width(text: str, size: float) -> float:
    """The width of ``text`` at ``size`` in user units, estimated from DejaVu Sans."""
    total = 0.0
    for char in text:
        if char in _NARROW:
            total += 0.3
        elif char in _THIN:
            total += 0.4
        elif char in _WIDE:
            total += 0.95
        elif char.isdigit():
            total += 0.64
        elif char.isascii():
            total += 0.72 if char.isupper() else 0.6
        else:
            total += 0.85
    return total * size


def _number(value: float) -> str:
    """A coordinate with at most two decimals, no trailing zeros: stable text."""
    text = f"{value:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


# -- colours --------------------------------------------------------------------------

_RGBA = re.compile(r"rgba?\(\s*([\d.]+)\s*,\s*([\d.]+)\s*,\s*([\d.]+)\s*(?:,\s*([\d.]+)\s*)?\)")
_NAMED = {"white": (255, 255, 255), "black": (0, 0, 0)}


def _rgba(colour: str) -> tuple[tuple[int, int, int] | None, float]:
    """``(rgb, alpha)`` of a CSS colour as plotly takes them; rgb None for other names."""
    colour = colour.strip().lower()
    if colour == "transparent":
        return (0, 0, 0), 0.0
    if colour in _NAMED:
        return _NAMED[colour], 1.0
    if colour.startswith("#") and len(colour) in (4, 7):
        digits = colour[1:]
        if len(digits) == 3:
            digits = "".join(d * 2 for d in digits)
        try:
            return (int(digits[0:2], 16), int(digits[2:4], 16), int(digits[4:6], 16)), 1.0
        except ValueError:
            return None, 1.0
    match = _RGBA.fullmatch(colour)
    if match:
        red, green, blue, alpha = match.groups()
        rgb = tuple(min(255, round(float(part))) for part in (red, green, blue))
        return rgb, 1.0 if alpha is None else min(1.0, float(alpha))  # type: ignore[return-value]
    return None, 1.0


def _hex(rgb: Sequence[int]) -> str:
    return "#" + "".join(f"{part:02x}" for part in rgb)


def _paint(kind: str, colour: str | None) -> str:
    """``fill="…"`` (or ``stroke``), with an opacity when the colour has one."""
    if colour is None:
        return f'{kind}="none"'
    rgb, alpha = _rgba(colour)
    if alpha <= 0:
        return f'{kind}="none"'
    text = f'{kind}="{_xml(_hex(rgb) if rgb is not None else colour)}"'
    if alpha < 1:
        text += f' {kind}-opacity="{_number(alpha)}"'
    return text


def _visible(colour: str | None) -> bool:
    return colour is not None and _rgba(colour)[1] > 0


def scale_colour(scale: Sequence[Sequence[Any]], position: float) -> str:
    """The colour at ``position`` (0 to 1) of a plotly colour scale given as stops."""
    stops = [(float(at), _rgba(str(colour))[0] or (0, 0, 0)) for at, colour in scale]
    position = min(1.0, max(0.0, position))
    for (low, low_rgb), (high, high_rgb) in zip(stops, stops[1:], strict=False):
        if position <= high:
            share = 0.0 if high == low else (position - low) / (high - low)
            return _hex(
                [round(a + (b - a) * share) for a, b in zip(low_rgb, high_rgb, strict=True)]
            )
    return _hex(stops[-1][1])


# -- axes -----------------------------------------------------------------------------


def _nice_step(span: float, count: int) -> float:
    """A tick step of 1, 2, 2.5 or 5 times a power of ten giving about ``count`` ticks."""
    if span <= 0:
        return 1.0
    rough = span / max(1, count)
    power = 10 ** math.floor(math.log10(rough))
    for factor in (1, 2, 2.5, 5, 10):
        if rough <= factor * power:
            return factor * power
    return 10 * power


def _tick_text(value: float, step: float, thousands: bool) -> str:
    if thousands:
        value, step = value / 1000, step / 1000
    decimals = 0
    while decimals < 6 and abs(step * 10**decimals - round(step * 10**decimals)) > 1e-6:
        decimals += 1
    text = f"{value:.{decimals}f}"
    if text.startswith("-") and float(text) == 0:
        text = text[1:]
    text = text.replace("-", "−")  # plotly's minus sign
    return text + ("k" if thousands and text != "0" else "")


@dataclass
class Axis:
    """One cartesian axis: its settings, what the traces put on it, where it is drawn."""

    name: str  # "x", "x2", "y", ...
    spec: dict[str, Any]
    categories: list[str] = field(default_factory=list)
    values: list[float] = field(default_factory=list)
    is_category: bool = False
    low: float = 0.0
    high: float = 1.0
    start: float = 0.0  # pixel of ``low`` (or of the first category edge)
    end: float = 1.0
    _index: dict[str, int] = field(default_factory=dict)

    @property
    def horizontal(self) -> bool:
        return self.name.startswith("x")

    @property
    def reversed(self) -> bool:
        return self.spec.get("autorange") == "reversed"

    @property
    def title(self) -> list[str]:
        title = self.spec.get("title")
        if isinstance(title, dict):
            title = title.get("text")
        return label_text(title)

    def add(self, values: Iterable[Any]) -> None:
        for value in values:
            if value is None:
                continue
            if isinstance(value, str) or self.spec.get("type") == "category":
                key = str(value)
                if key not in self._index:
                    self._index[key] = len(self.categories)
                    self.categories.append(key)
            elif isinstance(value, int | float) and math.isfinite(value):
                self.values.append(float(value))

    def settle(self, pad_high: bool) -> None:
        """Choose category or linear and the range (plotly's autorange, simplified)."""
        self.is_category = self.spec.get("type") == "category" or (
            bool(self.categories) and self.spec.get("type") != "linear"
        )
        if self.is_category:
            self.low, self.high = -0.5, len(self.categories) - 0.5
            return
        fixed = self.spec.get("range")
        if fixed and len(fixed) == 2 and all(isinstance(v, int | float) for v in fixed):
            self.low, self.high = float(fixed[0]), float(fixed[1])
            return
        values = self.values or [0.0, 1.0]
        low, high = min(values), max(values)
        if self.spec.get("rangemode") == "tozero":
            low, high = min(low, 0.0), max(high, 0.0)
        if high == low:
            low, high = low - 1, high + 1
        span = high - low
        if pad_high:
            # Bars start at zero; the far end gets plotly's five per cent of room.
            high = high + 0.05 * span if high > 0 else high
            low = low - 0.05 * span if low < 0 else low
        else:
            low, high = low - 0.05 * span, high + 0.05 * span
            if self.spec.get("rangemode") == "tozero":
                low = max(low, 0.0) if min(values) >= 0 else low
        self.low, self.high = low, high

    def place(self, start: float, end: float) -> None:
        self.start, self.end = start, end

    def position(self, value: Any) -> float:
        """The pixel of a value (a category's centre on a category axis)."""
        if self.is_category:
            share = (self._index[str(value)] - self.low) / (self.high - self.low)
        else:
            share = (float(value) - self.low) / (self.high - self.low)
        flipped = self.reversed != (not self.horizontal)  # y grows upwards on paper
        if flipped:
            share = 1 - share
        return self.start + share * (self.end - self.start)

    def slot(self) -> float:
        """The pixels one category takes."""
        count = max(1, len(self.categories))
        return abs(self.end - self.start) / count

    def ticks(self) -> list[tuple[float, list[str]]]:
        """``(pixel, label lines)`` of each tick."""
        if self.is_category:
            return [(self.position(name), label_text(name)) for name in self.categories]
        length = abs(self.end - self.start)
        step = _nice_step(
            self.high - self.low, max(2, int(length // (80 if self.horizontal else 50)))
        )
        thousands = max(abs(self.low), abs(self.high)) >= 10000
        first = math.ceil(self.low / step - 1e-9)
        result = []
        index = first
        while index * step <= self.high + 1e-9 * step:
            value = index * step
            result.append((self.position(value), [_tick_text(value, step, thousands)]))
            index += 1
        return result


# -- the drawing ------------------------------------------------------------------------


class _Canvas:
    def __init__(self) -> None:
        self.parts: list[str] = []

    def add(self, text: str) -> None:
        self.parts.append(text)

    def text(
        self,
        x: float,
        y: float,
        lines: list[str],
        *,
        size: float,
        colour: str,
        anchor: str = "start",
        baseline: str = "middle",
        rotate: bool = False,
        weight: str | None = None,
    ) -> None:
        """Lines of text; ``baseline`` says where ``y`` is: top, middle or bottom."""
        if not lines:
            return
        step = size * LINE_HEIGHT
        block = step * (len(lines) - 1)
        first = {"top": y + size * 0.8, "middle": y - block / 2 + size * 0.35}.get(
            baseline, y - block - size * 0.25
        )
        extra = f' font-weight="{weight}"' if weight else ""
        turn = f' transform="rotate(-90 {_number(x)} {_number(y)})"' if rotate else ""
        tspans = "".join(
            f'<tspan x="{_number(x)}" y="{_number(first + i * step)}">{_xml(line)}</tspan>'
            for i, line in enumerate(lines)
        )
        self.add(
            f'<text font-size="{_number(size)}" {_paint("fill", colour)} '
            f'text-anchor="{anchor}"{extra}{turn}>{tspans}</text>'
        )

    def rect(self, x: float, y: float, width: float, height: float, fill: str | None) -> None:
        if width <= 0 or height <= 0 or not _visible(fill):
            return
        self.add(
            f'<rect x="{_number(x)}" y="{_number(y)}" width="{_number(width)}" '
            f'height="{_number(height)}" {_paint("fill", fill)}/>'
        )

    def line(self, x1, y1, x2, y2, colour: str, width: float = 1, dash: str | None = None):
        extra = f' stroke-dasharray="{dash}"' if dash else ""
        self.add(
            f'<line x1="{_number(x1)}" y1="{_number(y1)}" x2="{_number(x2)}" '
            f'y2="{_number(y2)}" {_paint("stroke", colour)} stroke-width="{_number(width)}"'
            f"{extra}/>"
        )


def _axis_names(trace: dict[str, Any]) -> tuple[str, str]:
    return str(trace.get("xaxis") or "x"), str(trace.get("yaxis") or "y")


def _layout_key(name: str) -> str:
    return name[0] + "axis" + name[1:]


def _as_list(value: Any, length: int) -> list[Any]:
    if isinstance(value, list | tuple):
        return list(value) + [None] * max(0, length - len(value))
    return [value] * length


def _trace_colour(trace: dict[str, Any], index: int) -> str:
    marker = trace.get("marker") or {}
    colour = marker.get("color")
    if isinstance(colour, str):
        return colour
    line = trace.get("line") or {}
    if isinstance(line.get("color"), str):
        return line["color"]
    if isinstance(colour, list | tuple) and colour and isinstance(colour[0], str):
        return colour[0]
    return COLORWAY[index % len(COLORWAY)]


def _bar_values(trace: dict[str, Any]) -> tuple[list[Any], list[Any]]:
    """(positions, lengths) of a bar trace, whichever way it points."""
    if trace.get("orientation") == "h":
        lengths = list(trace.get("x") or [])
        positions = list(trace.get("y") or range(len(lengths)))
    else:
        lengths = list(trace.get("y") or [])
        positions = list(trace.get("x") or range(len(lengths)))
    count = min(len(lengths), len(positions))
    return positions[:count], lengths[:count]


def _number_or_none(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    return float(value) if math.isfinite(value) else None


def _axes(data: list[dict[str, Any]], layout: dict[str, Any]) -> dict[str, Axis]:
    """The figure's axes, each with what the traces put on it and its range settled."""
    barmode = layout.get("barmode", "group")
    axes: dict[str, Axis] = {}

    def axis(name: str) -> Axis:
        if name not in axes:
            axes[name] = Axis(name, dict(layout.get(_layout_key(name)) or {}))
        return axes[name]

    padded: set[str] = set()
    stacks: dict[tuple[str, str, str, bool], float] = {}
    for trace in data:
        x_name, y_name = _axis_names(trace)
        x_axis, y_axis = axis(x_name), axis(y_name)
        kind = trace.get("type", "scatter")
        if kind == "bar":
            positions, lengths = _bar_values(trace)
            horizontal = trace.get("orientation") == "h"
            place, length = (y_axis, x_axis) if horizontal else (x_axis, y_axis)
            place.add(positions)
            padded.add(length.name)
            if barmode == "stack":
                totals = []
                for position, value in zip(positions, lengths, strict=True):
                    number = _number_or_none(value) or 0.0
                    key = (x_name, y_name, str(position), number >= 0)
                    stacks[key] = stacks.get(key, 0.0) + number
                    totals.append(stacks[key])
                length.add([0.0, *totals])
            else:
                length.add([0.0, *(_number_or_none(v) or 0.0 for v in lengths)])
        elif kind == "heatmap":
            rows = trace.get("z") or []
            columns = max((len(row) for row in rows), default=0)
            x_axis.spec.setdefault("type", "category")
            y_axis.spec.setdefault("type", "category")
            x_axis.add([str(v) for v in trace.get("x") or range(columns)])
            y_axis.add([str(v) for v in trace.get("y") or range(len(rows))])
        else:
            xs = list(trace.get("x") or [])
            ys = list(trace.get("y") or [])
            x_axis.add(xs)
            y_axis.add(ys)
            errors = trace.get("error_y") or {}
            if errors.get("array") is not None:
                ups = _as_list(errors.get("array"), len(ys))
                downs = _as_list(errors.get("arrayminus", errors.get("array")), len(ys))
                for value, up, down in zip(ys, ups, downs, strict=False):
                    if _number_or_none(value) is not None:
                        y_axis.add([value + (up or 0), value - (down or 0)])
    for name in sorted(layout):
        if re.fullmatch(r"[xy]axis\d*", name):
            axis(name[0] + name[5:])
    if not axes:
        axis("x"), axis("y")
    for item in axes.values():
        item.settle(item.name in padded)

    return axes


def axis_ranges(figure: dict[str, Any]) -> dict[str, tuple[float, float]]:
    """The range of each value axis as the drawing sets it (``{"x": (0, 10.5)}``): a
    chart cut into parts keeps the whole chart's ranges, so the parts compare."""
    data = [trace for trace in figure.get("data") or [] if trace.get("visible", True) is True]
    axes = _axes(data, dict(figure.get("layout") or {}))
    return {name: (item.low, item.high) for name, item in axes.items() if not item.is_category}


SUPPORTED = ("bar", "heatmap", "scatter")


def figure_svg(
    figure: dict[str, Any],
    *,
    width: int = 900,
    font_family: str | None = None,
    title: str = "",
) -> str:
    """The plotly figure ``figure`` drawn as an SVG document (text).

    Parameters
    ----------
    figure : dict
        ``{"data": [...], "layout": {...}}`` as the chart modules build it for plotly.js.
    width : int
        Width in user units (plotly's pixels); the height is the layout's, plus the room
        its legend takes.
    font_family : str, optional
        Replaces the layout's font family (the report prints in its own face).
    title : str
        The drawing's accessible name (``<title>`` and ``aria-label``).

    Raises
    ------
    ValueError
        A trace type this drawing does not know, named.
    """
    data = [trace for trace in figure.get("data") or [] if trace.get("visible", True) is True]
    layout = dict(figure.get("layout") or {})
    for trace in data:
        kind = trace.get("type", "scatter")
        if kind not in SUPPORTED:
            raise ValueError(
                f"chart trace of type {kind!r} cannot be drawn for the report "
                f"(drawn: {', '.join(SUPPORTED)})"
            )
    font = {**DEFAULT_FONT, **(layout.get("font") or {})}
    if font_family:
        font["family"] = font_family
    size = float(font["size"])
    ink = str(font["color"])
    height = float(layout.get("height") or 450)
    margin = {**DEFAULT_MARGIN, **(layout.get("margin") or {})}
    barmode = layout.get("barmode", "group")

    axes = _axes(data, layout)

    # The legend: one entry per legend group (or unnamed trace), in trace order.
    entries: list[tuple[str, str]] = []
    seen_groups: set[str] = set()
    for index, trace in enumerate(data):
        if trace.get("type") == "heatmap" or trace.get("showlegend") is False:
            continue
        if not trace.get("name"):
            continue
        group = trace.get("legendgroup")
        if group is not None:
            if group in seen_groups:
                continue
            seen_groups.add(group)
        entries.append((" ".join(label_text(trace["name"])), _trace_colour(trace, index)))
    wants_legend = layout.get("showlegend")
    if wants_legend is None:
        wants_legend = sum(1 for t in data if t.get("type") != "heatmap") > 1
    if not wants_legend:
        entries = []
    legend = layout.get("legend") or {}
    if legend.get("traceorder") == "reversed":
        entries.reverse()
    vertical_legend = legend.get("orientation", "v") != "h"

    # Margins: the layout's, widened where tick labels and titles need it (automargin):
    # first the sides (y labels, a legend at the right), then, with the x axes placed,
    # the foot (x labels wrapped to their slots, x titles).
    left, right, top, bottom = (float(margin[k]) for k in ("l", "r", "t", "b"))
    tick_size = size * 0.92
    gap = 6.0
    shown = [item for item in axes.values() if item.spec.get("visible") is not False]
    for item in shown:
        if item.horizontal or not _anchored_left(item):
            continue
        item.place(0, 400)  # provisional pixels: the labels only
        wide = max(
            (text_width(line, tick_size) for _p, lines in item.ticks() for line in lines),
            default=0.0,
        )
        title_room = (size * LINE_HEIGHT * len(item.title) + gap) if item.title else 0.0
        left = max(left, gap + wide + gap + title_room)
    if entries and vertical_legend:
        widest = max(text_width(name, size) for name, _colour in entries)
        right = max(right, widest + LEGEND_SWATCH + 4 * gap)
    plot_left, plot_right = left, width - right
    if plot_right - plot_left < 80:  # labels too long for the width: squeeze them
        plot_left, plot_right = width * 0.45, width - min(right, width * 0.2)
    for item in axes.values():
        if item.horizontal:
            domain = item.spec.get("domain") or [0, 1]
            span = plot_right - plot_left
            item.place(plot_left + float(domain[0]) * span, plot_left + float(domain[1]) * span)
    wrapped: dict[str, list[tuple[float, list[str]]]] = {}
    for item in shown:
        if not item.horizontal:
            continue
        ticks = item.ticks()
        if item.is_category:
            ticks = [(pixel, _wrap(lines, item.slot() - gap, tick_size)) for pixel, lines in ticks]
        wrapped[item.name] = ticks
        tall = max((len(lines) for _pixel, lines in ticks), default=1)
        title_room = (gap + size * LINE_HEIGHT * len(item.title)) if item.title else 0.0
        bottom = max(bottom, gap + tick_size * LINE_HEIGHT * tall + title_room + gap)
    plot_top, plot_bottom = top, height - bottom
    if plot_bottom - plot_top < 60:
        height = plot_top + 60 + bottom
        plot_bottom = height - bottom
    for item in axes.values():
        if not item.horizontal:
            domain = item.spec.get("domain") or [0, 1]
            span = plot_bottom - plot_top
            item.place(
                plot_top + (1 - float(domain[1])) * span, plot_bottom - float(domain[0]) * span
            )

    # Horizontal legend rows below the plot: the drawing grows to hold them.
    legend_rows: list[list[tuple[str, str, float]]] = []
    if entries and not vertical_legend:
        row: list[tuple[str, str, float]] = []
        used = 0.0
        for name, colour in entries:
            item_width = LEGEND_SWATCH + gap + text_width(name, size) + 3 * gap
            if row and used + item_width > plot_right - plot_left:
                legend_rows.append(row)
                row, used = [], 0.0
            row.append((name, colour, item_width))
            used += item_width
        legend_rows.append(row)
    legend_height = len(legend_rows) * size * LINE_HEIGHT * 1.3 + (gap if legend_rows else 0)
    total_height = height + legend_height

    canvas = _Canvas()
    paper = layout.get("paper_bgcolor", "#ffffff")
    canvas.rect(0, 0, width, total_height, paper)
    plot_colour = layout.get("plot_bgcolor", "#ffffff")
    for x_name, y_name in _panels(data, axes):
        x_axis, y_axis = axes[x_name], axes[y_name]
        canvas.rect(
            min(x_axis.start, x_axis.end),
            min(y_axis.start, y_axis.end),
            abs(x_axis.end - x_axis.start),
            abs(y_axis.end - y_axis.start),
            plot_colour,
        )

    # Grid and zero lines under the traces.
    for x_name, y_name in _panels(data, axes):
        x_axis, y_axis = axes[x_name], axes[y_name]
        for along, across in ((x_axis, y_axis), (y_axis, x_axis)):
            if along.is_category or along.spec.get("showgrid") is False:
                continue
            colour = along.spec.get("gridcolor", GRID)
            for pixel, _lines in along.ticks():
                if along.horizontal:
                    canvas.line(pixel, across.start, pixel, across.end, colour)
                else:
                    canvas.line(across.start, pixel, across.end, pixel, colour)
            if along.low < 0 < along.high and along.spec.get("zeroline", True):
                zero = along.position(0)
                colour = along.spec.get("zerolinecolor", ZERO_LINE)
                if along.horizontal:
                    canvas.line(zero, across.start, zero, across.end, colour, 1.5)
                else:
                    canvas.line(across.start, zero, across.end, zero, colour, 1.5)

    # The traces.
    bar_slots: dict[tuple[str, str], list[int]] = {}
    for index, trace in enumerate(data):
        if trace.get("type") == "bar":
            bar_slots.setdefault(_axis_names(trace), []).append(index)
    stacked: dict[tuple[str, str, str, bool], float] = {}
    canvas.add('<g class="traces">')
    for index, trace in enumerate(data):
        kind = trace.get("type", "scatter")
        x_axis, y_axis = (axes[name] for name in _axis_names(trace))
        if kind == "bar":
            _draw_bars(canvas, trace, index, x_axis, y_axis, barmode, bar_slots, stacked)
        elif kind == "heatmap":
            _draw_heatmap(canvas, trace, x_axis, y_axis, size, ink)
        else:
            _draw_scatter(canvas, trace, index, x_axis, y_axis, size, ink)
    canvas.add("</g>")

    # Tick labels and axis titles.
    for item in axes.values():
        if item.spec.get("visible") is False:
            continue
        partner = _partner(item, axes)
        if item.horizontal:
            base = max(partner.start, partner.end) if partner else plot_bottom
            tall = 1
            for pixel, lines in wrapped[item.name]:
                tall = max(tall, len(lines))
                canvas.text(
                    pixel,
                    base + gap,
                    lines,
                    size=tick_size,
                    colour=ink,
                    anchor="middle",
                    baseline="top",
                )
            if item.title:
                middle = (item.start + item.end) / 2
                y = base + gap + tick_size * LINE_HEIGHT * tall + gap
                canvas.text(
                    middle, y, item.title, size=size, colour=ink, anchor="middle", baseline="top"
                )
        else:
            base = min(partner.start, partner.end) if partner else plot_left
            wide = 0.0
            for pixel, lines in item.ticks():
                wide = max([wide, *(text_width(line, tick_size) for line in lines)])
                canvas.text(base - gap, pixel, lines, size=tick_size, colour=ink, anchor="end")
            if item.title:
                middle = (item.start + item.end) / 2
                x = base - gap - wide - gap - size * 0.4
                canvas.text(
                    x, middle, item.title, size=size, colour=ink, anchor="middle", rotate=True
                )

    # The legend.
    if legend_rows:
        y = height + gap
        for row in legend_rows:
            x = plot_left
            for name, colour, item_width in row:
                canvas.rect(x, y, LEGEND_SWATCH, LEGEND_SWATCH, colour)
                canvas.text(
                    x + LEGEND_SWATCH + gap, y + LEGEND_SWATCH / 2, [name], size=size, colour=ink
                )
                x += item_width
            y += size * LINE_HEIGHT * 1.3
    elif entries:
        x = plot_right + 2 * gap
        y = plot_top
        for name, colour in entries:
            canvas.rect(x, y, LEGEND_SWATCH, LEGEND_SWATCH, colour)
            canvas.text(
                x + LEGEND_SWATCH + gap, y + LEGEND_SWATCH / 2, [name], size=size, colour=ink
            )
            y += size * LINE_HEIGHT * 1.3

    label = _xml(title)
    head = (
        f'<svg xmlns="http://www.w3.org/2000/svg" class="chart" width="{width}" '
        f'height="{_number(total_height)}" viewBox="0 0 {width} {_number(total_height)}" '
        f'font-family="{_xml(str(font["family"]))}" role="img" aria-label="{label}">'
        f"<title>{label}</title>"
    )
    return head + "".join(canvas.parts) + "</svg>"


def _anchored_left(item: Axis) -> bool:
    """A y axis whose labels stand in the left margin (not beside a second panel)."""
    anchor = item.spec.get("anchor")
    return anchor in (None, "x", "free")


def _partner(item: Axis, axes: dict[str, Axis]) -> Axis | None:
    """The axis ``item`` is drawn against: its anchor, else the first of the other kind."""
    anchor = item.spec.get("anchor")
    if anchor and anchor in axes:
        return axes[anchor]
    other = "y" if item.horizontal else "x"
    return axes.get(other)


def _panels(data: list[dict[str, Any]], axes: dict[str, Axis]) -> list[tuple[str, str]]:
    panels: list[tuple[str, str]] = []
    for trace in data:
        pair = _axis_names(trace)
        if pair not in panels:
            panels.append(pair)
    return panels or [("x", "y")]


def _wrap(lines: list[str], limit: float, size: float) -> list[str]:
    """Category labels broken at spaces to fit their slot."""
    result: list[str] = []
    for line in lines:
        words = line.split(" ")
        current = ""
        for word in words:
            trial = f"{current} {word}" if current else word
            if current and text_width(trial, size) > limit:
                result.append(current)
                current = word
            else:
                current = trial
        result.append(current)
    return result


def _draw_bars(canvas, trace, index, x_axis, y_axis, barmode, bar_slots, stacked) -> None:
    horizontal = trace.get("orientation") == "h"
    place, length = (y_axis, x_axis) if horizontal else (x_axis, y_axis)
    positions, lengths = _bar_values(trace)
    colours = (trace.get("marker") or {}).get("color")
    per_bar = isinstance(colours, list | tuple)
    default = _trace_colour(trace, index)
    opacity = trace.get("opacity")
    slot = (
        place.slot()
        if place.is_category
        else abs(place.end - place.start) / max(1, len(positions))
    )
    group = slot * (1 - BAR_GAP)
    siblings = bar_slots[_axis_names(trace)]
    if barmode == "group" and len(siblings) > 1:
        thickness = group / len(siblings)
        offset = -group / 2 + siblings.index(index) * thickness
    else:
        thickness, offset = group, -group / 2
    for number, (position, value) in enumerate(zip(positions, lengths, strict=True)):
        amount = _number_or_none(value)
        if amount is None:
            continue
        colour = colours[number] if per_bar and number < len(colours) else default
        if not isinstance(colour, str):
            colour = default
        if opacity is not None and _rgba(colour)[0] is not None:
            colour = "rgba({},{},{},{})".format(*_rgba(colour)[0], opacity)
        base = 0.0
        if barmode == "stack":
            key = (x_axis.name, y_axis.name, str(position), amount >= 0)
            base = stacked.get(key, 0.0)
            stacked[key] = base + amount
        centre = place.position(position)
        low = length.position(max(min(base, base + amount), length.low))
        high = length.position(min(max(base, base + amount), length.high))
        start = centre + offset
        if horizontal:
            canvas.rect(min(low, high), start, abs(high - low), thickness, colour)
        else:
            canvas.rect(start, min(low, high), thickness, abs(high - low), colour)


def _draw_heatmap(canvas, trace, x_axis, y_axis, size, ink) -> None:
    rows = trace.get("z") or []
    xs = [str(v) for v in trace.get("x") or range(max((len(r) for r in rows), default=0))]
    ys = [str(v) for v in trace.get("y") or range(len(rows))]
    scale = trace.get("colorscale")
    if not isinstance(scale, list | tuple):
        raise ValueError(
            f"heatmap colour scale {scale!r} cannot be drawn for the report: give its stops"
        )
    values = [v for row in rows for v in row if _number_or_none(v) is not None]
    low = float(trace.get("zmin", min(values, default=0)))
    high = float(trace.get("zmax", max(values, default=1)))
    texts = trace.get("text")
    template = trace.get("texttemplate")
    text_font = trace.get("textfont") or {}
    text_size = float(text_font.get("size", size))
    text_colour = str(text_font.get("color", ink))
    x_gap, y_gap = float(trace.get("xgap", 0)), float(trace.get("ygap", 0))
    width, height = x_axis.slot(), y_axis.slot()
    for row_index, row in enumerate(rows):
        for column, value in enumerate(row):
            number = _number_or_none(value)
            if number is None or row_index >= len(ys) or column >= len(xs):
                continue
            share = 0.5 if high == low else (number - low) / (high - low)
            colour = scale_colour(scale, share)
            x = x_axis.position(xs[column]) - width / 2
            y = y_axis.position(ys[row_index]) - height / 2
            canvas.rect(x + x_gap / 2, y + y_gap / 2, width - x_gap, height - y_gap, colour)
            if template and texts is not None:
                cell = texts[row_index][column] if row_index < len(texts) else None
                if cell is not None:
                    shown = (
                        str(template).replace("%{text}", str(cell)).replace("%{z}", f"{number:g}")
                    )
                    canvas.text(
                        x + width / 2,
                        y + height / 2,
                        label_text(shown),
                        size=text_size,
                        colour=text_colour,
                        anchor="middle",
                    )


def _draw_scatter(canvas, trace, index, x_axis, y_axis, size, ink) -> None:
    xs = list(trace.get("x") or [])
    ys = list(trace.get("y") or [])
    count = min(len(xs), len(ys))
    mode = trace.get("mode") or ("lines+markers" if count < 20 else "lines")
    colour = _trace_colour(trace, index)
    points = [
        (x_axis.position(x), y_axis.position(y))
        if (x_axis.is_category or _number_or_none(x) is not None)
        and (y_axis.is_category or _number_or_none(y) is not None)
        else None
        for x, y in zip(xs[:count], ys[:count], strict=True)
    ]
    errors = trace.get("error_y") or {}
    if errors.get("array") is not None and errors.get("visible", True):
        ups = _as_list(errors.get("array"), count)
        downs = _as_list(errors.get("arrayminus", errors.get("array")), count)
        error_colour = errors.get("color", colour)
        cap = float(errors.get("width", 4))
        for point, y, up, down in zip(points, ys, ups, downs, strict=False):
            if point is None or _number_or_none(y) is None:
                continue
            top = y_axis.position(y + (up or 0))
            foot = y_axis.position(y - (down or 0))
            thickness = float(errors.get("thickness", 2))
            canvas.line(point[0], top, point[0], foot, error_colour, thickness)
            canvas.line(point[0] - cap, top, point[0] + cap, top, error_colour, thickness)
            canvas.line(point[0] - cap, foot, point[0] + cap, foot, error_colour, thickness)
    if "lines" in mode:
        line = trace.get("line") or {}
        stroke = str(line.get("color", colour))
        dash = DASHES.get(str(line.get("dash", "")))
        width = float(line.get("width", 2))
        run: list[tuple[float, float]] = []
        for point in [*points, None]:
            if point is not None:
                run.append(point)
                continue
            if len(run) > 1:
                path = " ".join(f"{_number(x)},{_number(y)}" for x, y in run)
                extra = f' stroke-dasharray="{dash}"' if dash else ""
                canvas.add(
                    f'<polyline points="{path}" fill="none" {_paint("stroke", stroke)} '
                    f'stroke-width="{_number(width)}"{extra}/>'
                )
            run = []
    if "markers" in mode:
        marker = trace.get("marker") or {}
        colours = marker.get("color")
        sizes = _as_list(marker.get("size", 6), count)
        for number, point in enumerate(points):
            if point is None:
                continue
            fill = colours[number] if isinstance(colours, list | tuple) else colours or colour
            radius = float(sizes[number] or 6) / 2
            canvas.add(
                f'<circle cx="{_number(point[0])}" cy="{_number(point[1])}" '
                f'r="{_number(radius)}" {_paint("fill", str(fill))}/>'
            )
    if "text" in mode:
        texts = _as_list(trace.get("text"), count)
        position = str(trace.get("textposition", "middle center"))
        for point, text in zip(points, texts, strict=False):
            if point is None or text is None:
                continue
            lift = (
                -size
                if position.startswith("top")
                else size
                if position.startswith("bottom")
                else 0
            )
            canvas.text(
                point[0],
                point[1] + lift,
                label_text(text),
                size=size * 0.9,
                colour=ink,
                anchor="middle",
            )
