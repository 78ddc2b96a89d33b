"""Draw a :class:`turnkit.result.Curve` as a self-contained inline SVG.

The exported sizing summary embeds its plots as SVG text: no script, no font
file, no image and no network fetch, so the page works offline and prints
well. The drawing is deliberately plain: axes with labels and units, tick
marks (linear or logarithmic), one line per series, labelled markers, shaded
bands, dashed vertical reference lines and a legend under the plot.

Colours come from a palette chosen to stay distinguishable for the common
forms of colour blindness; every series also gets its own dash pattern so
that a grey-scale print still tells them apart.

Source: B. Wong, "Points of view: Color blindness", Nature Methods 8, 441
(2011) — the eight-colour palette used here.

Examples
--------
>>> from turnkit.result import Curve, Series
>>> curve = Curve("demo", "Demo", "time", "s", "count", "", (Series("a", [0, 1], [0, 2]),))
>>> svg = curve_to_svg(curve)
>>> svg.startswith("<svg") and svg.endswith("</svg>")
True
"""

from __future__ import annotations

import math
from html import escape

import numpy as np

from .result import micro_sign

__all__ = ["PALETTE", "DASHES", "curve_to_svg", "linear_ticks", "log_ticks", "format_tick", "tick_labels"]

#: Colour-blind-safe colours, in the order series use them (black last: it is
#: kept for axes, text and markers). Source: B. Wong, Nature Methods 8, 441 (2011).
PALETTE: tuple[str, ...] = (
    "#0072B2",  # blue
    "#E69F00",  # orange
    "#009E73",  # bluish green
    "#CC79A7",  # reddish purple
    "#56B4E9",  # sky blue
    "#D55E00",  # vermillion
    "#F0E442",  # yellow
    "#000000",  # black
)

#: Dash patterns paired with the colours, so series differ without colour too.
DASHES: tuple[str, ...] = ("", "6 3", "2 2", "8 3 2 3", "1 3", "10 4", "4 2 1 2", "3 5")

_TEXT = "#222222"
_GRID = "#e6e6e6"
_AXIS = "#444444"
_BAND = "#999999"
_FONT = "font-family:system-ui,-apple-system,'Segoe UI',Roboto,Helvetica,Arial,sans-serif"

# Layout in SVG user units (px at 100 %).
_MARGIN_LEFT = 72
_MARGIN_RIGHT = 20
_MARGIN_TOP = 34
_MARGIN_BOTTOM = 52
_LEGEND_ROW = 18


def _esc(text: object) -> str:
    """Escape text for SVG content and attribute values."""
    return escape(str(text), quote=True)


def format_tick(value: float) -> str:
    """Short text for a tick label ("0", "0.5", "2000", "1e+06", "1e-05")."""
    if value == 0 or not math.isfinite(value):
        return "0" if value == 0 else str(value)
    mag = abs(value)
    if 1e-3 <= mag < 1e5:
        text = f"{value:.6g}"
    else:
        text = f"{value:.3g}"
    return text


def tick_labels(ticks: list[float]) -> list[str]:
    """Labels for ``ticks``: as short as :func:`format_tick`, longer only where needed to tell them apart."""
    labels = [format_tick(t) for t in ticks]
    digits = 7
    while len(set(labels)) < len(labels) and digits <= 16:
        labels = [format_tick(t) if t == 0 else f"{t:.{digits}g}" for t in ticks]
        digits += 1
    return labels


def _nice_step(span: float, target: int) -> float:
    raw = span / max(target, 1)
    exponent = math.floor(math.log10(raw))
    base = 10.0 ** exponent
    for factor in (1.0, 2.0, 2.5, 5.0, 10.0):
        if raw <= factor * base * (1 + 1e-9):
            return factor * base
    return 10.0 * base


def linear_ticks(low: float, high: float, target: int = 6) -> tuple[float, float, list[float]]:
    """Round axis limits and tick positions that cover ``[low, high]``.

    Coverage is exact up to a billionth of a tick step, so that float noise
    in the data never adds a whole empty tick.

    Returns
    -------
    axis_low, axis_high : float
        Limits widened to whole ticks.
    ticks : list of float
        Tick positions from ``axis_low`` to ``axis_high`` (steps of 1, 2, 2.5 or
        5 times a power of ten).
    """
    if not (math.isfinite(low) and math.isfinite(high)):
        raise ValueError(f"axis limits must be finite, not {low!r}, {high!r}")
    if high < low:
        low, high = high, low
    if high == low:
        pad = abs(low) * 0.1 or 1.0
        low, high = low - pad, high + pad
    step = _nice_step(high - low, target)
    first = math.floor(low / step + 1e-9)
    last = math.ceil(high / step - 1e-9)
    # Clean "-0.0" and binary noise such as 0.30000000000000004.
    ticks = [0.0 if k == 0 else float(f"{k * step:.15g}") for k in range(first, last + 1)]
    return ticks[0], ticks[-1], ticks


def log_ticks(low: float, high: float) -> tuple[float, float, list[float], list[float]]:
    """Decade-based limits and ticks covering positive ``[low, high]``.

    Returns
    -------
    axis_low, axis_high : float
        Limits widened to whole decades.
    major : list of float
        Labelled ticks: every decade, thinned to at most about eight labels;
        when the range spans fewer than two decades, also 2× and 5×.
    minor : list of float
        Unlabelled ticks at 2..9 × each decade (only for up to 12 decades).
    """
    if not (low > 0 and high > 0 and math.isfinite(low) and math.isfinite(high)):
        raise ValueError(f"log axis limits must be positive and finite, not {low!r}, {high!r}")
    if high < low:
        low, high = high, low
    lo_exp = math.floor(math.log10(low) + 1e-9)
    hi_exp = math.ceil(math.log10(high) - 1e-9)
    if hi_exp == lo_exp:
        hi_exp += 1
    decades = hi_exp - lo_exp
    stride = max(1, math.ceil(decades / 8))
    major = [10.0 ** e for e in range(lo_exp, hi_exp + 1) if (e - lo_exp) % stride == 0]
    minor: list[float] = []
    if decades <= 12:
        for e in range(lo_exp, hi_exp):
            minor.extend(m * 10.0 ** e for m in range(2, 10))
    if decades < 2:
        extra = [m * 10.0 ** e for e in range(lo_exp, hi_exp) for m in (2, 5)]
        major = sorted(major + extra)
        minor = [m for m in minor if not any(math.isclose(m, x) for x in extra)]
    return 10.0 ** lo_exp, 10.0 ** hi_exp, major, minor


class _Axis:
    """Maps data values to pixels along one axis (linear or log10)."""

    def __init__(self, low: float, high: float, pixel_low: float, pixel_high: float, log: bool):
        self.log = log
        self.pixel_low = pixel_low
        self.pixel_high = pixel_high
        if log:
            self.low, self.high, self.ticks, self.minor = log_ticks(low, high)
            self._lo, self._hi = math.log10(self.low), math.log10(self.high)
        else:
            self.low, self.high, self.ticks = linear_ticks(low, high)
            self.minor = []
            self._lo, self._hi = self.low, self.high

    def __call__(self, values):
        v = np.asarray(values, dtype=float)
        if self.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                v = np.log10(v)
        frac = (v - self._lo) / (self._hi - self._lo)
        return self.pixel_low + frac * (self.pixel_high - self.pixel_low)

    def clamp(self, value: float) -> float:
        """``value`` limited to the axis range (infinities included)."""
        return min(max(value, self.low), self.high)


def _usable(values: np.ndarray, log: bool) -> np.ndarray:
    """Mask of the values that can be drawn (finite, and positive on a log axis)."""
    ok = np.isfinite(values)
    if log:
        ok &= values > 0
    return ok


def _data_range(curve, axis: str, log: bool) -> tuple[float, float] | None:
    chunks = []
    for s in curve.series:
        x, y = s.x, s.y
        ok = _usable(x, curve.log_x) & _usable(y, curve.log_y)
        chunks.append((x if axis == "x" else y)[ok])
    for m in curve.markers:
        v = m.x if axis == "x" else m.y
        chunks.append(np.array([v], dtype=float))
    if axis == "x":
        chunks.extend(np.array([v.x], dtype=float) for v in curve.vlines)
    values = np.concatenate(chunks) if chunks else np.array([], dtype=float)
    values = values[_usable(values, log)]
    if values.size == 0 and axis == "x":
        # Only bands: let their finite edges set the range.
        edges = np.array([e for b in curve.bands for e in (b.x_start, b.x_end)], dtype=float)
        values = edges[_usable(edges, log)]
    if values.size == 0:
        return None
    return float(values.min()), float(values.max())


def _polyline_runs(px: np.ndarray, py: np.ndarray, ok: np.ndarray) -> list[str]:
    """``points`` attributes for each run of drawable points (gaps break the line)."""
    runs = []
    # Indices where a run of good points starts and ends.
    edges = np.flatnonzero(np.diff(np.concatenate(([0], ok.astype(np.int8), [0]))))
    for start, stop in zip(edges[::2], edges[1::2]):
        xs = np.round(px[start:stop], 2).tolist()
        ys = np.round(py[start:stop], 2).tolist()
        runs.append(" ".join(f"{x:g},{y:g}" for x, y in zip(xs, ys)))
    return runs


def _step_xy(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Points of a step plot that holds each y until the next x."""
    if x.size < 2:
        return x, y
    sx = np.repeat(x, 2)[1:]
    sy = np.repeat(y, 2)[:-1]
    return sx, sy


def curve_to_svg(curve, *, width: int = 640, height: int = 340, title: bool = True) -> str:
    """Return ``curve`` drawn as an ``<svg>`` element (a string).

    Parameters
    ----------
    curve : turnkit.result.Curve
        Plot data with labels and units.
    width, height : int
        Size of the plot area plus its margins, in px; the legend adds rows
        below. The SVG scales to its container (``viewBox``, ``width:100%``).
    title : bool
        Draw the curve's title above the plot.

    Returns
    -------
    str
        SVG markup with every user-supplied text escaped. Non-finite points
        (and non-positive points on a log axis) are left out and break the line.
    """
    if width < 200 or height < 150:
        raise ValueError(f"plot size must be at least 200 x 150 px, not {width} x {height}")
    def at(value: float, unit: str) -> str:
        if math.isfinite(value):
            text = format_tick(float(f"{value:.4g}"))
        else:
            text = "unlimited" if value > 0 else "-unlimited"
        return f"{text} {micro_sign(unit)}".rstrip()

    # Reference items carry their numbers in the legend, so a printed page shows them too.
    legend_items = [(s.name, "series", i) for i, s in enumerate(curve.series)]
    legend_items += [(f"{m.name}: {at(m.x, curve.x_unit)}, {at(m.y, curve.y_unit)}", "marker", i)
                     for i, m in enumerate(curve.markers)]
    legend_items += [(f"{b.name}: {at(min(b.x_start, b.x_end), '')} to {at(max(b.x_start, b.x_end), curve.x_unit)}",
                      "band", i) for i, b in enumerate(curve.bands)]
    legend_items += [(f"{v.name}: {at(v.x, curve.x_unit)}", "vline", i) for i, v in enumerate(curve.vlines)]
    # As many legend columns as fit the longest label (about 6.2 px per character at 11 px).
    longest = max((len(name) for name, _, _ in legend_items), default=0)
    per_row = max(1, min(3, int((width - _MARGIN_LEFT) // (longest * 6.2 + 40))))
    legend_rows = math.ceil(len(legend_items) / per_row)
    total_height = height + legend_rows * _LEGEND_ROW + (8 if legend_rows else 0)

    left, right = _MARGIN_LEFT, width - _MARGIN_RIGHT
    top, bottom = _MARGIN_TOP if title else 14, height - _MARGIN_BOTTOM

    x_range = _data_range(curve, "x", curve.log_x) or ((1.0, 10.0) if curve.log_x else (0.0, 1.0))
    y_range = _data_range(curve, "y", curve.log_y) or ((1.0, 10.0) if curve.log_y else (0.0, 1.0))
    xa = _Axis(*x_range, left, right, curve.log_x)
    ya = _Axis(*y_range, bottom, top, curve.log_y)

    label = f"{curve.title}: {curve.y_label} against {curve.x_label}"
    out: list[str] = [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="turnkit-plot" role="img" '
        f'viewBox="0 0 {width} {total_height}" width="{width}" height="{total_height}" '
        f'style="max-width:100%;height:auto;{_FONT}" aria-label="{_esc(label)}">',
        f"<title>{_esc(curve.title)}</title>",
    ]
    if curve.note:
        out.append(f"<desc>{_esc(curve.note)}</desc>")
    out.append(f'<rect x="0" y="0" width="{width}" height="{total_height}" fill="#ffffff"/>')

    # Bands first, under everything else.
    for b in curve.bands:
        x0, x1 = sorted((b.x_start, b.x_end))
        if curve.log_x and x1 <= 0:
            continue
        lo = xa.low if (curve.log_x and x0 <= 0) else xa.clamp(x0)
        hi = xa.clamp(x1)
        p0, p1 = float(xa(lo)), float(xa(hi))
        if p1 - p0 <= 0:
            continue
        out.append(f'<rect x="{p0:.2f}" y="{top}" width="{p1 - p0:.2f}" height="{bottom - top}" '
                   f'fill="{_BAND}" fill-opacity="0.22"><title>{_esc(b.name)}</title></rect>')

    # Grid and ticks.
    grid, ticks = [], []
    for t, text in zip(xa.ticks, tick_labels(xa.ticks)):
        p = float(xa(t))
        grid.append(f'<line x1="{p:.2f}" y1="{top}" x2="{p:.2f}" y2="{bottom}" stroke="{_GRID}"/>')
        ticks.append(f'<line x1="{p:.2f}" y1="{bottom}" x2="{p:.2f}" y2="{bottom + 5}" stroke="{_AXIS}"/>')
        ticks.append(f'<text x="{p:.2f}" y="{bottom + 18}" text-anchor="middle" font-size="11" '
                     f'fill="{_TEXT}">{_esc(text)}</text>')
    for t in xa.minor:
        p = float(xa(t))
        ticks.append(f'<line x1="{p:.2f}" y1="{bottom}" x2="{p:.2f}" y2="{bottom + 3}" stroke="{_AXIS}"/>')
    for t, text in zip(ya.ticks, tick_labels(ya.ticks)):
        p = float(ya(t))
        grid.append(f'<line x1="{left}" y1="{p:.2f}" x2="{right}" y2="{p:.2f}" stroke="{_GRID}"/>')
        ticks.append(f'<line x1="{left - 5}" y1="{p:.2f}" x2="{left}" y2="{p:.2f}" stroke="{_AXIS}"/>')
        ticks.append(f'<text x="{left - 8}" y="{p + 4:.2f}" text-anchor="end" font-size="11" '
                     f'fill="{_TEXT}">{_esc(text)}</text>')
    for t in ya.minor:
        p = float(ya(t))
        ticks.append(f'<line x1="{left - 3}" y1="{p:.2f}" x2="{left}" y2="{p:.2f}" stroke="{_AXIS}"/>')
    out.extend(grid)
    out.append(f'<rect x="{left}" y="{top}" width="{right - left}" height="{bottom - top}" '
               f'fill="none" stroke="{_AXIS}"/>')
    out.extend(ticks)

    # Axis labels with units.
    def axis_text(name: str, unit: str, log: bool) -> str:
        text = f"{name} ({micro_sign(unit)})" if unit else name
        return text + (", log scale" if log else "")

    out.append(f'<text x="{(left + right) / 2:.2f}" y="{bottom + 38}" text-anchor="middle" font-size="12" '
               f'fill="{_TEXT}">{_esc(axis_text(curve.x_label, curve.x_unit, curve.log_x))}</text>')
    cy = (top + bottom) / 2
    out.append(f'<text x="16" y="{cy:.2f}" text-anchor="middle" font-size="12" fill="{_TEXT}" '
               f'transform="rotate(-90 16 {cy:.2f})">'
               f'{_esc(axis_text(curve.y_label, curve.y_unit, curve.log_y))}</text>')
    if title:
        out.append(f'<text x="{left}" y="20" font-size="14" font-weight="600" fill="{_TEXT}">'
                   f"{_esc(curve.title)}</text>")

    # Series.
    for i, s in enumerate(curve.series):
        colour, dash = PALETTE[i % len(PALETTE)], DASHES[i % len(DASHES)]
        x, y = s.x, s.y
        if s.style == "step":
            x, y = _step_xy(x, y)
        ok = _usable(x, curve.log_x) & _usable(y, curve.log_y)
        px, py = xa(x), ya(y)
        name = _esc(s.name)
        if s.style == "points":
            out.append(f'<g fill="{colour}"><title>{name}</title>')
            for xi, yi in zip(px[ok], py[ok]):
                out.append(f'<circle cx="{xi:.2f}" cy="{yi:.2f}" r="2.6"/>')
            out.append("</g>")
        else:
            dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
            for points in _polyline_runs(px, py, ok):
                out.append(f'<polyline points="{points}" fill="none" stroke="{colour}" stroke-width="2"'
                           f'{dash_attr} stroke-linejoin="round"><title>{name}</title></polyline>')

    # Vertical reference lines.
    for v in curve.vlines:
        if not _usable(np.array([v.x], dtype=float), curve.log_x)[0]:
            continue
        p = float(xa(xa.clamp(v.x)))
        out.append(f'<line x1="{p:.2f}" y1="{top}" x2="{p:.2f}" y2="{bottom}" stroke="{_TEXT}" '
                   f'stroke-width="1.3" stroke-dasharray="5 4"><title>{_esc(v.name)}</title></line>')

    # Markers: black-edged diamonds with their value on hover.
    for m in curve.markers:
        point = np.array([m.x, m.y], dtype=float)
        if not (_usable(point[:1], curve.log_x)[0] and _usable(point[1:], curve.log_y)[0]):
            continue
        mx, my = float(xa(m.x)), float(ya(m.y))
        out.append(
            f'<path d="M{mx:.2f},{my - 7:.2f} L{mx + 7:.2f},{my:.2f} L{mx:.2f},{my + 7:.2f} '
            f'L{mx - 7:.2f},{my:.2f} Z" fill="#ffffff" stroke="#000000" stroke-width="2">'
            f"<title>{_esc(m.name)}: {_esc(format_tick(m.x))} {_esc(curve.x_unit)}, "
            f"{_esc(format_tick(m.y))} {_esc(curve.y_unit)}</title></path>")

    # Legend under the plot.
    column = (width - _MARGIN_LEFT) / per_row
    for k, (name, kind, i) in enumerate(legend_items):
        row, col = divmod(k, per_row)
        lx = _MARGIN_LEFT + col * column
        ly = height + 4 + row * _LEGEND_ROW
        if kind == "series":
            s = curve.series[i]
            colour, dash = PALETTE[i % len(PALETTE)], DASHES[i % len(DASHES)]
            if s.style == "points":
                out.append(f'<circle cx="{lx + 12:.2f}" cy="{ly:.2f}" r="3" fill="{colour}"/>')
            else:
                dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
                out.append(f'<line x1="{lx:.2f}" y1="{ly:.2f}" x2="{lx + 24:.2f}" y2="{ly:.2f}" '
                           f'stroke="{colour}" stroke-width="2"{dash_attr}/>')
        elif kind == "marker":
            out.append(f'<path d="M{lx + 12:.2f},{ly - 5:.2f} L{lx + 17:.2f},{ly:.2f} L{lx + 12:.2f},'
                       f'{ly + 5:.2f} L{lx + 7:.2f},{ly:.2f} Z" fill="#ffffff" stroke="#000000" '
                       f'stroke-width="1.6"/>')
        elif kind == "band":
            out.append(f'<rect x="{lx:.2f}" y="{ly - 6:.2f}" width="24" height="12" fill="{_BAND}" '
                       f'fill-opacity="0.35"/>')
        else:
            out.append(f'<line x1="{lx + 12:.2f}" y1="{ly - 7:.2f}" x2="{lx + 12:.2f}" y2="{ly + 7:.2f}" '
                       f'stroke="{_TEXT}" stroke-width="1.3" stroke-dasharray="3 2"/>')
        out.append(f'<text x="{lx + 30:.2f}" y="{ly + 4:.2f}" font-size="11" fill="{_TEXT}">'
                   f"{_esc(name)}</text>")
    out.append("</svg>")
    return "\n".join(out)
