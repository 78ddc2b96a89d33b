"""Inline SVG plots of result curves: ticks, axes, series, markers, bands, legend, escaping."""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.result import Band, Curve, Marker, Series
from turnkit.svgplot import DASHES, PALETTE, curve_to_svg, format_tick, linear_ticks, log_ticks, tick_labels

NS = {"svg": "http://www.w3.org/2000/svg"}


def _curve(**changes) -> Curve:
    fields = dict(
        key="k", title="Count error against speed", x_label="motor speed", x_unit="rpm",
        y_label="count error", y_unit="qt",
        series=(Series("fixed schedule", [0, 100, 200, 300], [0, 0, 1, 3]),
                Series("adaptive schedule", [0, 100, 200, 300], [0, 0, 0, 1], style="step")),
    )
    fields.update(changes)
    return Curve(**fields)


def _svg(curve: Curve, **kwargs) -> ET.Element:
    return ET.fromstring(curve_to_svg(curve, **kwargs))


def _texts(root: ET.Element) -> list[str]:
    return ["".join(t.itertext()) for t in root.iter("{http://www.w3.org/2000/svg}text")]


def _points(polyline: ET.Element) -> np.ndarray:
    return np.array([[float(v) for v in p.split(",")] for p in polyline.get("points").split()])


def _plot_box(root: ET.Element) -> tuple[float, float, float, float]:
    """x0, y0, x1, y1 of the framed plot area (the unfilled rectangle)."""
    for rect in root.iter("{http://www.w3.org/2000/svg}rect"):
        if rect.get("fill") == "none":
            x, y = float(rect.get("x")), float(rect.get("y"))
            return x, y, x + float(rect.get("width")), y + float(rect.get("height"))
    raise AssertionError("no plot frame")


# --- palette ---------------------------------------------------------------------

def test_palette_is_the_published_colour_blind_safe_set():
    # Source: B. Wong, "Points of view: Color blindness", Nature Methods 8, 441 (2011), Fig. 2:
    # black 0,0,0; orange 230,159,0; sky blue 86,180,233; bluish green 0,158,115; yellow 240,228,66;
    # blue 0,114,178; vermillion 213,94,0; reddish purple 204,121,167.
    published = {(0, 0, 0), (230, 159, 0), (86, 180, 233), (0, 158, 115), (240, 228, 66), (0, 114, 178),
                 (213, 94, 0), (204, 121, 167)}
    rgb = {tuple(int(c[i:i + 2], 16) for i in (1, 3, 5)) for c in PALETTE}
    assert rgb == published and len(PALETTE) == 8
    assert len(set(DASHES)) == len(DASHES) == len(PALETTE)


# --- ticks -----------------------------------------------------------------------

def test_linear_ticks_use_round_steps():
    assert linear_ticks(0.1, 0.73) == (0.0, 0.8, [0.0, 0.2, 0.4, 0.6, 0.8])
    assert linear_ticks(-3, 17)[2] == [-5.0, 0.0, 5.0, 10.0, 15.0, 20.0]
    low, high, ticks = linear_ticks(5, 5)
    assert low < 5 < high


@settings(max_examples=100, deadline=None)
@given(st.floats(-1e6, 1e6, allow_nan=False), st.floats(1e-6, 1e6, allow_nan=False))
def test_linear_ticks_cover_the_range_with_even_round_steps(low, span):
    high = low + span
    axis_low, axis_high, ticks = linear_ticks(low, high)
    step = (ticks[-1] - ticks[0]) / (len(ticks) - 1)
    # Covered to within a billionth of a step (float noise must not add a whole tick), or the
    # float resolution of the limits themselves when the span is a trillionth of them.
    slack = step * 1e-9 + max(abs(low), abs(high)) * 1e-14
    assert axis_low <= low + slack and axis_high >= high - slack
    assert 2 <= len(ticks) <= 14
    steps = np.diff(ticks)
    # Even up to the float resolution of the tick values themselves.
    assert np.allclose(steps, steps[0], rtol=0, atol=abs(steps[0]) * 1e-6 + max(map(abs, ticks)) * 1e-14)
    assert len(set(tick_labels(ticks))) == len(ticks)
    mantissa = step / 10 ** math.floor(math.log10(step))
    assert any(math.isclose(mantissa, m, rel_tol=1e-4) for m in (1, 2, 2.5, 5, 10))


def test_log_ticks_mark_decades_and_fill_in_minor_ticks():
    low, high, major, minor = log_ticks(3, 4000)
    assert (low, high) == (1.0, 10000.0)
    assert major == [1.0, 10.0, 100.0, 1000.0, 10000.0]
    assert len(minor) == 4 * 8 and 2.0 in minor and 9000.0 in minor


def test_log_ticks_add_two_and_five_on_a_short_range():
    low, high, major, minor = log_ticks(12, 80)
    assert (low, high) == (10.0, 100.0)
    assert major == [10.0, 20.0, 50.0, 100.0]
    assert 20.0 not in minor and 30.0 in minor


def test_log_ticks_thin_labels_over_many_decades():
    _, _, major, minor = log_ticks(1e-9, 1e9)
    assert len(major) <= 9 and minor == []


@pytest.mark.parametrize("bad", [(0, 10), (-1, 10), (1, math.inf)])
def test_log_ticks_refuse_non_positive_or_infinite_limits(bad):
    with pytest.raises(ValueError, match="positive and finite"):
        log_ticks(*bad)


def test_tick_labels_grow_only_to_tell_close_ticks_apart():
    assert tick_labels([0.0, 0.5, 1.0]) == ["0", "0.5", "1"]
    labels = tick_labels(linear_ticks(2048.0, 2048.000001)[2])
    assert len(set(labels)) == len(labels) and labels[0].startswith("2048")


def test_tick_labels_are_short():
    assert [format_tick(v) for v in (0, 0.5, 2000.0, 1e6, 1e-5, 0.30000000000000004)] == \
        ["0", "0.5", "2000", "1e+06", "1e-05", "0.3"]


# --- drawing -----------------------------------------------------------------------

def test_svg_is_well_formed_with_title_axis_labels_and_units():
    root = _svg(_curve())
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert root.find("svg:title", NS).text == "Count error against speed"
    texts = _texts(root)
    assert "motor speed (rpm)" in texts and "count error (qt)" in texts
    assert "fixed schedule" in texts and "adaptive schedule" in texts
    assert root.get("role") == "img" and "count error against motor speed" in root.get("aria-label")


def test_series_points_land_inside_the_plot_at_their_values():
    root = _svg(_curve())
    x0, y0, x1, y1 = _plot_box(root)
    line = _points(root.findall(".//svg:polyline", NS)[0])
    assert len(line) == 4
    assert (line[:, 0] >= x0 - 1e-6).all() and (line[:, 0] <= x1 + 1e-6).all()
    assert (line[:, 1] >= y0 - 1e-6).all() and (line[:, 1] <= y1 + 1e-6).all()
    # x from 0 to 300 on an axis 0..300: ends at the frame's edges, evenly spaced between.
    assert line[0, 0] == pytest.approx(x0) and line[-1, 0] == pytest.approx(x1)
    assert np.allclose(np.diff(line[:, 0]), (x1 - x0) / 3, atol=0.02)  # coordinates have 2 decimals
    # Larger y is higher on the page (smaller SVG y).
    assert line[3, 1] < line[2, 1] < line[1, 1] == line[0, 1]


def test_step_series_holds_each_value_until_the_next_x():
    root = _svg(_curve())
    step = _points(root.findall(".//svg:polyline", NS)[1])
    assert len(step) == 2 * 4 - 1
    # Horizontal then vertical segments alternate.
    assert step[1, 1] == step[0, 1] and step[2, 0] == step[1, 0]


def test_points_series_draws_dots():
    root = _svg(_curve(series=(Series("measured", [1, 2, 3], [1, 4, 9], style="points"),)))
    assert len(root.findall(".//svg:g/svg:circle", NS)) == 3
    assert root.findall(".//svg:polyline", NS) == []


def test_non_finite_values_break_the_line_instead_of_drawing_garbage():
    curve = _curve(series=(Series("gappy", [0, 1, 2, 3, 4], [1, 2, np.nan, 4, np.inf]),))
    svg = curve_to_svg(curve)
    assert "nan" not in svg.lower() and "inf" not in svg.lower()
    runs = ET.fromstring(svg).findall(".//svg:polyline", NS)
    assert [len(_points(r)) for r in runs] == [2, 1]


def test_log_axes_skip_non_positive_values_and_label_the_scale():
    curve = _curve(series=(Series("life", [0, 1, 10, 100], [5, 6, 7, 8]),), log_x=True, x_label="poll period",
                   x_unit="ms")
    root = _svg(curve)
    (line,) = root.findall(".//svg:polyline", NS)
    assert len(_points(line)) == 3
    texts = _texts(root)
    assert "poll period (ms), log scale" in texts
    assert {"1", "10", "100"} <= set(texts)
    # Decades are equally spaced on a log axis.
    xs = _points(line)[:, 0]
    assert xs[1] - xs[0] == pytest.approx(xs[2] - xs[1])


def test_markers_bands_and_vertical_lines_are_drawn_and_listed_in_the_legend():
    curve = _curve(markers=(Marker("this design", 150, 1),), bands=(Band("ambiguous", 250, math.inf),),
                   vlines=(Marker("required speed", 220, 0),))
    root = _svg(curve)
    x0, y0, x1, y1 = _plot_box(root)
    texts = _texts(root)
    # The legend carries their numbers, so a printout shows them without hovering.
    for label in ("this design: 150 rpm, 1 qt", "ambiguous: 250 to unlimited rpm", "required speed: 220 rpm"):
        assert label in texts
    band = next(r for r in root.iter("{http://www.w3.org/2000/svg}rect") if r.find("svg:title", NS) is not None)
    # An open-ended band is cut at the frame.
    assert float(band.get("x")) + float(band.get("width")) == pytest.approx(x1)
    marker = next(p for p in root.iter("{http://www.w3.org/2000/svg}path") if p.find("svg:title", NS) is not None)
    assert marker.find("svg:title", NS).text == "this design: 150 rpm, 1 qt"


def test_user_text_is_escaped():
    evil = "<script>alert(1)</script>"
    svg = curve_to_svg(_curve(title=evil, x_label=evil, series=(Series(evil, [0, 1], [0, 1]),),
                              markers=(Marker(evil, 0.5, 0.5),), note=evil))
    assert "<script>" not in svg
    root = ET.fromstring(svg)
    assert root.find("svg:title", NS).text == evil
    assert root.find("svg:desc", NS).text == evil


def test_svg_refers_to_nothing_outside_itself():
    svg = curve_to_svg(_curve(markers=(Marker("m", 1, 1),), bands=(Band("b", 1, 2),)))
    assert not re.search(r"(href|src)\s*=", svg)
    assert "url(" not in svg and "<image" not in svg and "<script" not in svg
    # The only URL is the SVG namespace name, which is never fetched.
    assert re.findall(r"https?://[^\"']+", svg) == ["http://www.w3.org/2000/svg"]


def test_legend_grows_the_picture_instead_of_covering_the_plot():
    one = _svg(_curve(series=(Series("a", [0, 1], [0, 1]),)))
    many = _svg(_curve(series=tuple(Series(f"s{i}", [0, 1], [i, i + 1]) for i in range(9))))
    assert float(many.get("height")) > float(one.get("height"))
    assert _plot_box(many) == _plot_box(one)


def test_colours_and_dashes_cycle_per_series():
    series = tuple(Series(f"s{i}", [0, 1], [i, i + 1]) for i in range(9))
    lines = _svg(_curve(series=series)).findall(".//svg:polyline", NS)
    assert [line.get("stroke") for line in lines] == [*PALETTE, PALETTE[0]]
    assert lines[0].get("stroke-dasharray") is None and lines[1].get("stroke-dasharray") == DASHES[1]


def test_an_empty_curve_still_draws_its_axes():
    root = _svg(_curve(series=()))
    assert "motor speed (rpm)" in _texts(root)
    assert root.findall(".//svg:polyline", NS) == []


def test_plot_size_is_checked():
    with pytest.raises(ValueError, match="at least 200 x 150"):
        curve_to_svg(_curve(), width=100)
    root = _svg(_curve(), width=480, height=300, title=False)
    assert root.get("viewBox").startswith("0 0 480 ")
    assert "Count error against speed" not in _texts(root)
