"""Bokeh figures drawn from :class:`turnkit.result.Curve` plot data.

A figure is built once per curve key with :func:`build_figure`; afterwards
:func:`update` swaps the arrays inside its existing ``ColumnDataSource``
objects, so the browser repaints the same canvas instead of creating a new
figure (no flicker, no lost zoom tools). Nothing here computes physics: the
arrays come from the sizing result as they are, and the only arithmetic is
fitting shaded bands to the visible x-range.

Colours follow the Okabe–Ito palette, which stays distinguishable under the
common forms of colour-vision deficiency; lines also differ by dash pattern
or marker shape so that no meaning rests on colour alone.

References
----------
.. [1] B. Wong, "Points of view: Color blindness", Nature Methods 8, 441 (2011).
"""

from __future__ import annotations

import html
import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from bokeh.layouts import column
from bokeh.models import ColumnDataSource, CustomJSTicker, Div, HoverTool, Legend, LegendItem, PrintfTickFormatter
from bokeh.plotting import figure

from ..result import Curve, Value, micro_sign

__all__ = [
    "OKABE_ITO",
    "SERIES_COLOURS",
    "FigureHandles",
    "axis_title",
    "build_figure",
    "update",
    "caption_text",
    "format_number",
]

# Source: B. Wong, Nature Methods 8, 441 (2011), Fig. 2 (Okabe & Ito's palette).
OKABE_ITO: dict[str, str] = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "bluish_green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish_purple": "#CC79A7",
}

#: Colours given to a curve's series in order; yellow comes last because it is
#: faint on white.
SERIES_COLOURS: tuple[str, ...] = tuple(OKABE_ITO[k] for k in (
    "blue", "orange", "bluish_green", "reddish_purple", "sky_blue", "vermillion", "black", "yellow"))

_LINE_DASHES = ("solid", "dotdash", "dotted", "dashdot")

#: Tick code for logarithmic axes: the sparsest of the mantissa sets that gives at least three
#: labels in view (1; 1-3; 1-2-5; 1-2-3-5-7; every digit); over many decades every k-th decade only.
_LOG_TICKS_JS = """
const lo = Math.min(cb_data.start, cb_data.end), hi = Math.max(cb_data.start, cb_data.end);
if (!(lo > 0) || !(hi > lo) || !isFinite(hi)) { return []; }
const sets = [[1], [1, 3], [1, 2, 5], [1, 2, 3, 5, 7], [1, 1.5, 2, 3, 4, 5, 6, 7, 8, 9]];
let ticks = [];
for (const set of sets) {
  ticks = [];
  for (let e = Math.floor(Math.log10(lo)) - 1; e <= Math.ceil(Math.log10(hi)); e++) {
    for (const m of set) {
      const t = Number((m * Math.pow(10, e)).toPrecision(12));
      if (t >= lo && t <= hi) { ticks.push(t); }
    }
  }
  if (ticks.length >= 3) { break; }
}
if (ticks.length > 7) {
  const k = Math.ceil(ticks.length / 6);
  ticks = ticks.filter((t, i) => i % k === 0);
}
return ticks;
"""


def _log_ticker() -> CustomJSTicker:
    return CustomJSTicker(major_code=_LOG_TICKS_JS, minor_code="return []")
_MARKER_COLOUR = OKABE_ITO["black"]
_LIMIT_COLOUR = OKABE_ITO["vermillion"]
_FONT = "'Source Sans 3', 'Segoe UI', 'Helvetica Neue', Arial, sans-serif"
_INK = "#1f2a33"
_GRID = "#e3e8ec"


def format_number(value: float, unit: str = "") -> str:
    """A number to 4 significant figures with its unit, as the result's values print."""
    return Value(key="", label="", value=float(value), unit=unit).formatted()


def axis_title(label: str, unit: str) -> str:
    """Axis title with its unit in brackets (``"poll period [ms]"``)."""
    return f"{label} [{micro_sign(unit)}]" if unit else label


@dataclass(eq=False)
class FigureHandles:
    """The Bokeh objects of one plot, kept so that :func:`update` can refill them.

    Attributes
    ----------
    key : str
        The curve key this figure draws.
    figure : bokeh.plotting.figure
        The plot.
    layout : bokeh.models.Column
        The figure with its caption below, ready for a ``BokehModel``.
    series : dict of str to ColumnDataSource
        One source per series name (columns ``x``, ``y``).
    markers, vlines, bands : ColumnDataSource
        Marked points (``x``, ``y``, ``name``, ``text``), vertical reference
        lines (``x``, ``name``, ``text``) and shaded x-ranges (``x0``, ``x1``,
        ``name``).
    caption : bokeh.models.Div
        Text under the plot: the marked points and the curve's note.
    """

    key: str
    figure: Any
    layout: Any
    series: dict[str, ColumnDataSource]
    markers: ColumnDataSource
    vlines: ColumnDataSource
    bands: ColumnDataSource
    caption: Div
    log_x: bool = False
    log_y: bool = False
    legend: Any = None
    _n_series: int = field(default=0, repr=False)
    _n_lines: int = field(default=0, repr=False)


def _style(fig) -> None:
    fig.background_fill_color = "#fbfcfd"
    fig.border_fill_color = "#ffffff"
    fig.outline_line_color = "#c9d2d9"
    fig.title.text_font = _FONT
    fig.title.text_font_size = "13px"
    fig.title.text_font_style = "bold"
    fig.title.text_color = _INK
    fig.toolbar.autohide = True
    fig.toolbar.logo = None
    for axis in (*fig.xaxis, *fig.yaxis):
        axis.axis_label_text_font = _FONT
        axis.axis_label_text_font_size = "12px"
        axis.axis_label_text_font_style = "normal"
        axis.axis_label_text_color = _INK
        axis.major_label_text_font = _FONT
        axis.major_label_text_font_size = "11px"
        axis.major_label_text_color = "#4a5864"
        axis.axis_line_color = "#9aa8b3"
        axis.major_tick_line_color = "#9aa8b3"
        axis.minor_tick_line_color = None
    for grid in (*fig.xgrid, *fig.ygrid):
        grid.grid_line_color = _GRID
    fig.min_border_right = 16


def _finite_span(curve: Curve) -> tuple[float, float] | None:
    """Smallest and largest finite x over the curve's series and markers."""
    xs = [np.asarray(s.x, dtype=float) for s in curve.series]
    xs.append(np.array([m.x for m in curve.markers] + [v.x for v in curve.vlines], dtype=float))
    allx = np.concatenate(xs) if xs else np.array([])
    allx = allx[np.isfinite(allx)]
    if curve.log_x:
        allx = allx[allx > 0]
    if allx.size == 0:
        return None
    return float(allx.min()), float(allx.max())


def _band_data(curve: Curve) -> dict[str, Any]:
    # Bands may run to +-inf ("every longer period"); a strip needs finite ends,
    # so open ends are drawn to just past the data.
    span = _finite_span(curve)
    x0, x1, names = [], [], []
    for band in curve.bands:
        a, b = float(band.x_start), float(band.x_end)
        if span is not None:
            lo, hi = span
            if curve.log_x:
                lo, hi = lo / 10.0, hi * 10.0
            else:
                pad = (hi - lo) or abs(hi) or 1.0
                lo, hi = lo - pad, hi + pad
            a, b = min(max(a, lo), hi), min(max(b, lo), hi)
        if not (math.isfinite(a) and math.isfinite(b)):
            continue
        x0.append(min(a, b))
        x1.append(max(a, b))
        names.append(band.name)
    return {"x0": np.array(x0, dtype=float), "x1": np.array(x1, dtype=float), "name": names}


def _marker_data(curve: Curve) -> dict[str, Any]:
    return {
        "x": np.array([m.x for m in curve.markers], dtype=float),
        "y": np.array([m.y for m in curve.markers], dtype=float),
        "name": [m.name for m in curve.markers],
        "text": [_point_text(curve, m.x, m.y) for m in curve.markers],
    }


def _vline_data(curve: Curve) -> dict[str, Any]:
    return {
        "x": np.array([v.x for v in curve.vlines], dtype=float),
        "name": [v.name for v in curve.vlines],
        "text": [format_number(v.x, curve.x_unit) for v in curve.vlines],
    }


def _point_text(curve: Curve, x: float, y: float) -> str:
    return f"{format_number(x, curve.x_unit)} → {format_number(y, curve.y_unit)}"


def caption_text(curve: Curve) -> str:
    """HTML for the caption under a plot: marked points, reference lines, the note."""
    parts = []
    for m in curve.markers:
        parts.append(f"<span class='tk-cap-marker'>◆ {html.escape(m.name)}: "
                     f"{html.escape(_point_text(curve, m.x, m.y))}</span>")
    if not curve.note:
        for v in curve.vlines:
            parts.append(f"<span class='tk-cap-limit'>┆ {html.escape(v.name)}: "
                         f"{html.escape(format_number(v.x, curve.x_unit))}</span>")
    if curve.note:
        parts.append(f"<span class='tk-cap-note'>{html.escape(micro_sign(curve.note))}</span>")
    return " &nbsp;·&nbsp; ".join(parts)


def _add_series(h: FigureHandles, name: str, style: str, x, y) -> None:
    fig = h.figure
    i = h._n_series
    h._n_series += 1
    colour = SERIES_COLOURS[i % len(SERIES_COLOURS)]
    source = ColumnDataSource({"x": np.asarray(x, dtype=float), "y": np.asarray(y, dtype=float)})
    if style == "dashed":
        # A reference level (required life, required resolution): thin and dashed.
        renderer = fig.line("x", "y", source=source, line_width=1.6, color=colour, line_dash="dashed", name=name)
    elif style == "points":
        renderer = fig.scatter("x", "y", source=source, size=7, color=colour, alpha=0.9,
                               marker=("circle", "triangle", "square", "inverted_triangle")[i % 4], name=name)
    elif style == "step":
        renderer = fig.step("x", "y", source=source, mode="after", line_width=2, color=colour, name=name)
    else:
        # Later plain lines also get their own dash pattern: colour is never the only cue.
        dash = _LINE_DASHES[h._n_lines % len(_LINE_DASHES)]
        h._n_lines += 1
        renderer = fig.line("x", "y", source=source, line_width=2.2, color=colour, line_dash=dash, name=name)
    h.series[name] = source
    h.legend.items.append(LegendItem(label=name, renderers=[renderer]))
    fig.add_tools(HoverTool(
        renderers=[renderer],
        tooltips=[("", html.escape(name)),
                  (_hover_label(fig, "x"), "@x{%0.4g}"),
                  (_hover_label(fig, "y"), "@y{%0.4g}")],
        formatters={"@x": "printf", "@y": "printf"},
    ))


def _hover_label(fig, axis: str) -> str:
    return (fig.xaxis if axis == "x" else fig.yaxis)[0].axis_label or axis


def build_figure(curve: Curve, *, width: int = 430, height: int = 290) -> FigureHandles:
    """Build the Bokeh figure for ``curve``.

    Parameters
    ----------
    curve : Curve
        The plot data (series, markers, bands, vertical lines, axis labels
        and units, log flags).
    width, height : int
        Size of the plot area in CSS pixels.

    Returns
    -------
    FigureHandles
        The figure, its layout (figure plus caption) and its data sources.
    """
    fig = figure(
        title=curve.title,
        width=width,
        height=height,
        x_axis_type="log" if curve.log_x else "linear",
        y_axis_type="log" if curve.log_y else "linear",
        x_axis_label=axis_title(curve.x_label, curve.x_unit),
        y_axis_label=axis_title(curve.y_label, curve.y_unit),
        tools="pan,wheel_zoom,box_zoom,reset,save",
        active_scroll=None,
        name=f"tk-figure-{curve.key}",
    )
    _style(fig)
    # Plain numbers (1, 10, 100; 1e-05) on log axes rather than superscript powers.
    if curve.log_x:
        fig.xaxis.formatter = PrintfTickFormatter(format="%g")
    if curve.log_y:
        fig.yaxis.formatter = PrintfTickFormatter(format="%g")
    # Bokeh labels a log axis spanning less than two decades with linear steps ("30 40 50 60 70"),
    # crowded at the top; label 1-3 or 1-2-5 steps instead, about evenly spaced on the log scale.
    if curve.log_x:
        fig.xaxis.ticker = fig.xgrid.ticker = _log_ticker()
    if curve.log_y:
        fig.yaxis.ticker = fig.ygrid.ticker = _log_ticker()
    # Below the plot, so that it never hides a curve.
    legend = Legend(items=[], orientation="horizontal", ncols=3, click_policy="hide",
                    label_text_font=_FONT, label_text_font_size="11px", border_line_color=None,
                    spacing=2, padding=2, margin=4, glyph_width=22, label_standoff=4)
    fig.add_layout(legend, "below")

    bands = ColumnDataSource(_band_data(curve))
    band_r = fig.vstrip(x0="x0", x1="x1", source=bands, fill_color=_LIMIT_COLOUR, fill_alpha=0.10,
                        hatch_pattern="/", hatch_color=_LIMIT_COLOUR, hatch_alpha=0.25, hatch_scale=10,
                        line_color=None, level="underlay")
    vlines = ColumnDataSource(_vline_data(curve))
    vline_r = fig.vspan(x="x", source=vlines, line_color=_LIMIT_COLOUR, line_width=2, line_dash="dashed")
    caption = Div(text=caption_text(curve), css_classes=["tk-plot-caption"], width=width,
                  styles={"font-family": _FONT, "font-size": "12px", "color": "#33414d"})
    layout = column(fig, caption, name=f"tk-plot-{curve.key}")
    h = FigureHandles(key=curve.key, figure=fig, layout=layout, series={}, markers=None, vlines=vlines,
                      bands=bands, caption=caption, log_x=curve.log_x, log_y=curve.log_y, legend=legend)
    for s in curve.series:
        _add_series(h, s.name, s.style, s.x, s.y)
    markers = ColumnDataSource(_marker_data(curve))
    marker_r = fig.scatter("x", "y", source=markers, marker="diamond", size=15, fill_color="#ffffff",
                           line_color=_MARKER_COLOUR, line_width=2.5, level="overlay")
    h.markers = markers
    fig.add_tools(HoverTool(renderers=[marker_r], tooltips=[("", "@name"), ("", "@text")]))
    fig.add_tools(HoverTool(renderers=[vline_r], tooltips=[("", "@name"), ("", "@text")]))
    legend.items.append(LegendItem(label={"field": "name"}, renderers=[marker_r]))
    legend.items.append(LegendItem(label={"field": "name"}, renderers=[vline_r]))
    legend.items.append(LegendItem(label={"field": "name"}, renderers=[band_r]))
    _label_budget_parts(h, curve)
    return h


def _label_budget_parts(h: FigureHandles, curve: Curve) -> None:
    """Name each step of the accuracy waterfall on the x axis (the parts are listed in its note)."""
    if curve.key != "accuracy_waterfall":
        return
    # The note reads "1: <part> <size> <unit>; 2: ..."; the tick k names the k-th riser.
    parts = re.findall(r"(\d+): (.+?) \S+ \S+(?:; |$)", curve.note)
    axis = h.figure.xaxis[0]
    ticks = [0] + [int(k) for k, _ in parts]
    labels = {0: "", **{int(k): name for k, name in parts}}
    # Assign only what changed: a new ticker makes Bokeh re-walk the whole document on every update.
    if list(getattr(axis.ticker, "ticks", ()) or ()) != ticks:
        axis.ticker = ticks
    if dict(axis.major_label_overrides) != labels:
        axis.major_label_overrides = labels
    if axis.major_label_orientation != math.pi / 4:
        axis.major_label_orientation = math.pi / 4


def _same_column(a, b) -> bool:
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        a, b = np.asarray(a), np.asarray(b)
        if a.dtype.kind == "f" and b.dtype.kind == "f":
            return a.shape == b.shape and bool(np.array_equal(a, b, equal_nan=True))
        return a.shape == b.shape and bool(np.array_equal(a, b))
    return list(a) == list(b)


def _replace(source: ColumnDataSource, data: dict[str, Any]) -> bool:
    """Replace a source's data unless it is unchanged (an unchanged plot sends nothing to the page).

    Returns True when the data were replaced.
    """
    old = source.data
    if old.keys() == data.keys() and all(_same_column(old[k], data[k]) for k in data):
        return False
    source.data = data
    return True


def update(handles: FigureHandles, curve: Curve) -> None:
    """Replace the data of an existing figure with ``curve``'s arrays.

    Each source's ``data`` is replaced as a whole, inside one held document
    change when the figure is shown, so the browser repaints the same canvas;
    a source whose data did not change is left alone and costs nothing. A series that is missing from ``curve`` is
    emptied; a series name seen for the first time is added to the figure.

    Parameters
    ----------
    handles : FigureHandles
        What :func:`build_figure` returned.
    curve : Curve
        New plot data with the same key.
    """
    if curve.key != handles.key:
        raise ValueError(f"figure draws curve {handles.key!r}, not {curve.key!r}")
    doc = handles.layout.document
    if doc is not None:
        doc.hold("combine")
    try:
        seen = set()
        changed = False
        for s in curve.series:
            seen.add(s.name)
            source = handles.series.get(s.name)
            if source is None:
                _add_series(handles, s.name, s.style, s.x, s.y)
                changed = True
            else:
                changed |= _replace(source, {"x": np.asarray(s.x, dtype=float), "y": np.asarray(s.y, dtype=float)})
        for name, source in handles.series.items():
            if name not in seen:
                changed |= _replace(source, {"x": np.array([], dtype=float), "y": np.array([], dtype=float)})
        changed |= _replace(handles.markers, _marker_data(curve))
        changed |= _replace(handles.vlines, _vline_data(curve))
        changed |= _replace(handles.bands, _band_data(curve))
        caption = caption_text(curve)
        if handles.caption.text != caption:
            handles.caption.text = caption
        if handles.figure.title.text != curve.title:
            handles.figure.title.text = curve.title
        _label_budget_parts(handles, curve)
        # BokehJS repaints the legend's swatches (small canvases of their own) only when the legend
        # itself changes: after new data moved the axes, they were left blank. Any change to the
        # legend model makes the page re-render it, so count the updates in its tags.
        if changed and handles.legend is not None:
            handles.legend.tags = [int(handles.legend.tags[0]) + 1 if handles.legend.tags else 1]
    finally:
        if doc is not None:
            doc.unhold()
