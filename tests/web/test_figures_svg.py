"""The report's SVG drawing of plotly figures, checked on figures worked by hand.

Each figure here is small enough to draw on paper: bar lengths proportional to their
values from a common zero, stacked bars end to end, heatmap cells coloured by linear
interpolation between the colour scale's stops (plotly's colorscale reference: a value's
position between zmin and zmax picks the colour between the two stops around it), and
labels read as plotly reads them (HTML: ``<br>`` breaks a line, entities are characters).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest

from allocation.figures.svg import axis_ranges, figure_svg, label_text

SVG = "{http://www.w3.org/2000/svg}"


def drawn(figure: dict) -> ET.Element:
    return ET.fromstring(figure_svg(figure, width=600, title="test"))


def rects(svg: ET.Element, fill: str) -> list[dict[str, float]]:
    """The traces' rectangles of one colour (not the legend's swatches)."""
    traces = next(g for g in svg.iter(f"{SVG}g") if g.get("class") == "traces")
    return [
        {key: float(rect.get(key)) for key in ("x", "y", "width", "height")}
        for rect in traces.iter(f"{SVG}rect")
        if rect.get("fill") == fill
    ]


def lines(svg: ET.Element) -> list[str]:
    return [span.text or "" for span in svg.iter(f"{SVG}tspan")]


def test_vertical_bars_are_as_tall_as_their_values_from_one_zero():
    svg = drawn(
        {
            "data": [
                {"type": "bar", "x": ["a", "b"], "y": [1, 2], "marker": {"color": "#2f7d6d"}}
            ],
            "layout": {"height": 300, "xaxis": {"title": {"text": "letters"}}},
        }
    )
    first, second = rects(svg, "#2f7d6d")
    # Same foot (the zero line), twice the height, the same width.
    assert first["y"] + first["height"] == pytest.approx(second["y"] + second["height"])
    assert second["height"] == pytest.approx(2 * first["height"], abs=0.02)
    assert first["width"] == pytest.approx(second["width"])
    assert second["x"] > first["x"]  # categories left to right in order
    assert "letters" in lines(svg) and "a" in lines(svg) and "b" in lines(svg)


def test_stacked_horizontal_bars_run_end_to_end_and_reversed_rows_read_downwards():
    figure = {
        "data": [
            {
                "type": "bar",
                "orientation": "h",
                "name": "one",
                "y": ["r1", "r2"],
                "x": [1, 2],
                "marker": {"color": "#111111"},
            },
            {
                "type": "bar",
                "orientation": "h",
                "name": "two",
                "y": ["r1", "r2"],
                "x": [3, 2],
                "marker": {"color": "#222222"},
            },
        ],
        "layout": {"barmode": "stack", "height": 300, "yaxis": {"autorange": "reversed"}},
    }
    svg = drawn(figure)
    (one_r1, one_r2), (two_r1, two_r2) = rects(svg, "#111111"), rects(svg, "#222222")
    # The second trace starts where the first ends; r1 totals 4, r2 totals 4.
    assert two_r1["x"] == pytest.approx(one_r1["x"] + one_r1["width"], abs=0.02)
    assert one_r1["width"] + two_r1["width"] == pytest.approx(
        one_r2["width"] + two_r2["width"], abs=0.05
    )
    assert two_r1["width"] == pytest.approx(3 * one_r1["width"], abs=0.05)
    assert one_r1["y"] < one_r2["y"]  # reversed: the first row on top
    # Two traces: a legend with both names.
    assert {"one", "two"} <= set(lines(svg))
    # The value axis spans 0 to the longest stack and plotly's 5 % beyond it.
    assert axis_ranges(figure)["x"] == pytest.approx((0.0, 4.2))


def test_heatmap_cells_take_the_scale_colour_between_its_stops():
    """Stops black at 0 and white at 1; z 0, 0.5, 1 over zmin 0, zmax 1: black, the grey
    halfway (127.5, rounded to 128 = 0x80) and white. A step scale (two stops at the same
    place) gives one colour either side."""
    svg = drawn(
        {
            "data": [
                {
                    "type": "heatmap",
                    "x": ["a", "b", "c"],
                    "y": ["row"],
                    "z": [[0, 0.5, 1]],
                    "zmin": 0,
                    "zmax": 1,
                    "colorscale": [[0, "#000000"], [1, "#ffffff"]],
                    "text": [["x", "y", "z"]],
                    "texttemplate": "%{text}",
                }
            ],
            "layout": {
                "height": 200,
                "paper_bgcolor": "rgba(0,0,0,0)",
                "plot_bgcolor": "rgba(0,0,0,0)",
            },
        }
    )
    assert [len(rects(svg, colour)) for colour in ("#000000", "#808080", "#ffffff")] == [1, 1, 1]
    assert {"x", "y", "z"} <= set(lines(svg))
    steps = drawn(
        {
            "data": [
                {
                    "type": "heatmap",
                    "z": [[0, 1]],
                    "colorscale": [
                        [0, "#d3e7de"],
                        [0.5, "#d3e7de"],
                        [0.5, "#e9a384"],
                        [1, "#e9a384"],
                    ],
                }
            ],
            "layout": {"height": 200},
        }
    )
    assert len(rects(steps, "#d3e7de")) == 1 and len(rects(steps, "#e9a384")) == 1


def test_labels_are_read_as_plotly_reads_them_and_written_as_text():
    assert label_text("1<br>below 0.2") == ["1", "below 0.2"]
    assert label_text("&lt;b&gt;x&lt;/b&gt; &amp; co") == ["<b>x</b> & co"]
    text = figure_svg(
        {
            "data": [
                {
                    "type": "bar",
                    "name": "&lt;script&gt;alert(1)&lt;/script&gt;",
                    "x": ["a"],
                    "y": [1],
                },
                {"type": "bar", "name": "second", "x": ["a"], "y": [2]},
            ],
            "layout": {},
        },
        title='"quoted" <title>',
    )
    assert "<script" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert "<title>&quot;quoted&quot; &lt;title&gt;</title>" in text
    # And it is well-formed XML whose text reads as typed.
    assert "<script>alert(1)</script>" in lines(ET.fromstring(text))


def test_a_trace_type_it_cannot_draw_is_refused_by_name():
    with pytest.raises(ValueError, match="'pie'"):
        figure_svg({"data": [{"type": "pie", "values": [1, 2]}], "layout": {}})


def test_the_same_figure_gives_the_same_text():
    figure = {"data": [{"type": "scatter", "x": [0, 1, 2], "y": [3, 1, 2]}], "layout": {}}
    assert figure_svg(figure) == figure_svg(figure)
    circles = list(ET.fromstring(figure_svg(figure)).iter(f"{SVG}circle"))
    assert len(circles) == 3  # fewer than 20 points: lines and markers, as plotly draws
