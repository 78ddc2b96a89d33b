"""Two Hall latches 90° apart: the quadrant code and the 0–360° angle.

The AMR bridges give the shaft angle only modulo 180°. Two Hall latches on
the same two-pole magnet, mounted 90° apart, split the turn into four
quadrants and give a 2-bit reflected Gray code (one bit changes per quarter
turn)::

    quadrant q     0 (0–90°)   1 (90–180°)   2 (180–270°)   3 (270–360°)
    code g1 g0     00          01            11             10

Latch ``g1`` is high for θ in (180°, 360°), latch ``g0`` for θ in (90°, 270°).
Gray → index is b1 = g1, b0 = g1 XOR g0.

Half-turn resolution. The fine angle a = θ mod 180° has two candidates, a and
a + 180°. The one that lies within 90° of the reported quadrant's centre
(90°·q + 45°) is taken. A latch edge that is displaced by d from its nominal
place reports the neighbouring quadrant for up to d past the edge; the pick
is still right while d plus the fine-angle error stays below 45°. So

    margin_deg = 45° − (switch_point_tolerance + hysteresis/2 + |magnet_misalignment| + fine error)

and a design whose margin is not positive can read 180° wrong next to each of
the four latch edges (see :attr:`HalfTurnMargin.fail_zones_deg`).

:func:`decode_full_turn_deg` decodes raw bridge samples and applies the
latch code in one blockwise pass, for long recordings and simulations.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import DesignValueError
from .sensor import _BLOCK as _SENSOR_BLOCK
from .sensor import _FINE_MAX_DEG, _float_input, _work_dtype, decode_block_deg

__all__ = [
    "GRAY_SEQUENCE",
    "LOST_POSITION_CAUTION",
    "QuadrantLatches",
    "HalfTurnMargin",
    "HalfTurnTrace",
    "gray_to_quadrant",
    "quadrant_to_gray",
    "combine_half_turn_deg",
    "decode_full_turn_deg",
    "half_turn_margin",
    "simulate_half_turn",
    "LATCH_POWER_MODES",
    "QuadrantWidths",
    "quadrant_widths",
    "edge_set_widths",
    "worst_case_edge_shifts_deg",
    "random_edge_shifts_deg",
]

#: Codes (g1 g0 as a 2-bit integer) of quadrants 0, 1, 2, 3 in forward order: the 2-bit
#: reflected binary code of F. Gray, "Pulse code communication", US patent 2,632,058 (1953).
GRAY_SEQUENCE = (0b00, 0b01, 0b11, 0b10)

#: Caution carried by every half-turn margin result.
LOST_POSITION_CAUTION = (
    "Caution: a 180° misread or a lost quarter-turn count moves the actuator to the wrong "
    "place, which can trap or crush. These numbers are design estimates; verify on hardware, "
    "re-home after any battery event, and follow local codes, functional-safety standards "
    "(e.g. IEC 61508, ISO 13849) and licensed practice."
)

#: How the latches are supplied: only around each poll, or continuously.
LATCH_POWER_MODES = ("during_polls", "always")

# Nominal centre of each latch's "low -> high" edge (mech deg): g1 then g0.
_LATCH_BASE_DEG = (180.0, 90.0)


def gray_to_quadrant(code) -> np.ndarray:
    """Quadrant index 0..3 from the 2-bit Gray code ``g1 g0`` (int or array of ints)."""
    c = np.asarray(code)
    if c.size and (np.any(c < 0) or np.any(c > 3)):
        raise DesignValueError("code", code, "2-bit codes in 0..3")
    c = c.astype(np.int64)
    g1 = c >> 1
    return (g1 << 1) | (g1 ^ (c & 1))


def quadrant_to_gray(quadrant) -> np.ndarray:
    """2-bit Gray code ``g1 g0`` of quadrant index 0..3 (int or array)."""
    q = np.asarray(quadrant)
    if q.size and (np.any(q < 0) or np.any(q > 3)):
        raise DesignValueError("quadrant", quadrant, "integers in 0..3")
    q = q.astype(np.int64)
    return q ^ (q >> 1)


def combine_half_turn_deg(fine_deg, code, *, dtype=np.float64) -> np.ndarray:
    """Join the 180°-periodic fine angle with the latch code into 0–360°.

    Parameters
    ----------
    fine_deg : array_like
        Mechanical angle modulo 180° from the AMR bridges (deg); other values
        are reduced modulo 180° first.
    code : array_like of int
        Latch Gray code ``g1 g0`` (0..3) for the same samples.
    dtype : numpy.float64 or numpy.float32
        Working and result precision (see :func:`turnkit.sensor.decode_deg`).

    Returns
    -------
    numpy.ndarray
        Mechanical angle in [0, 360) (deg): of the candidates a and a + 180°
        (a = fine mod 180°) the one within 90° of the reported quadrant's
        centre (at an exact tie, the half-turn reported by latch g1).
    """
    dt = _work_dtype(dtype)
    fine, code = _broadcast_codes(_float_input(fine_deg), code)
    out = np.empty(fine.shape, dtype=dt)
    ff, cf, of = fine.ravel(), code.ravel(), out.reshape(-1)
    scratch = np.empty((_SCRATCH_ROWS, min(_BLOCK, of.size)), dtype=np.uint8)
    cap = _FINE_MAX_DEG[dt]
    for start in range(0, of.size, _BLOCK):
        stop = min(of.size, start + _BLOCK)
        f, o = ff[start:stop], of[start:stop]
        np.copyto(o, f, casting="same_kind")
        # Fine angles straight from decode_deg are in range already; fold only blocks that
        # are not (NaN also takes the folding branch and stays NaN).
        if not (o.min() >= 0.0 and o.max() <= cap):
            _fold_half_turn(f, o, scratch[0, :stop - start])
        _pick_half_block(o, cf[start:stop], scratch)
    return out


def _fold_half_turn(fine, out, scratch):
    """out = fine mod 180° in [0, 180): exact remainder, a rounding to 180 folded back
    to 0, and a value just below 180 capped so that out + 180° stays below 360°."""
    np.remainder(fine, 180.0, out=out)
    wrapped = scratch
    np.greater_equal(out, 180.0, out=wrapped.view(np.bool_))
    np.multiply(wrapped, 180, out=wrapped)
    np.subtract(out, wrapped, out=out)
    np.minimum(out, _FINE_MAX_DEG[out.dtype], out=out)


def decode_full_turn_deg(x_mV, y_mV, code, *, dtype=np.float64) -> np.ndarray:
    """Shaft angle in [0, 360) from raw bridge samples and the latch code in one pass.

    Same result as ``combine_half_turn_deg(decode_deg(x_mV, y_mV, dtype=dtype),
    code, dtype=dtype)``, computed block by block in cache-sized buffers.

    Parameters
    ----------
    x_mV, y_mV : array_like
        cos and sin bridge samples (mV, or any common unit).
    code : array_like of int
        Latch Gray codes ``g1 g0`` (0..3).
    dtype : numpy.float64 or numpy.float32
        Working and result precision. float64 (default) agrees with
        ``math.atan2`` to about 1e-13 deg; float32 is about 1.5 times faster
        from float64 samples and within 3.1e-5 deg of float64 (one float32
        step of a 0-360° value), see :func:`turnkit.sensor.decode_deg`.
        Only where the fine angle lies within that accuracy of an exact tie
        of the half-turn pick (the latch code 90° away from both candidates,
        i.e. a unit far outside its half-turn margin) can the two precisions
        pick different halves.

    Returns
    -------
    numpy.ndarray
        Mechanical angle in [0, 360) (deg), of the chosen dtype.
    """
    dt = _work_dtype(dtype)
    x, y = np.broadcast_arrays(_float_input(x_mV), _float_input(y_mV))
    x, code = _broadcast_codes(x, code)
    y = np.broadcast_to(y, x.shape)
    out = np.empty(x.shape, dtype=dt)
    xf, yf, cf, of = x.ravel(), y.ravel(), code.ravel(), out.reshape(-1)
    n_block = min(_BLOCK, of.size)
    buf = np.empty(n_block, dtype=dt)
    scratch = np.empty((_SCRATCH_ROWS, n_block), dtype=np.uint8)
    for start in range(0, of.size, _BLOCK):
        stop = min(of.size, start + _BLOCK)
        o = of[start:stop]
        decode_block_deg(xf[start:stop], yf[start:stop], o, buf[:stop - start])
        _pick_half_block(o, cf[start:stop], scratch)
    return out


_BLOCK = _SENSOR_BLOCK   # same blocks as turnkit.sensor
_SCRATCH_ROWS = 4


def _broadcast_codes(values, code):
    c = np.asarray(code)
    if c.dtype.kind not in "iu":
        if c.dtype.kind == "f" and c.size and np.all(np.floor(c) == c):
            c = c.astype(np.int64)
        else:
            raise DesignValueError("code", code, "2-bit integer codes in 0..3")
    if c.size and ((c.dtype.kind == "i" and int(c.min()) < 0) or int(c.max()) > 3):
        raise DesignValueError("code", code, "2-bit codes in 0..3")
    values, c = np.broadcast_arrays(values, c)
    return values, c


def _pick_half_block(a, code, scratch):
    """In place: a in [0, 180) -> a or a + 180° as the latch code says.

    The candidate a lies within 90° of the quadrant centre 90°·q + 45° unless
    a > 135° (even quadrants) or a < 45° (odd quadrants); the latch bit g1
    says which half the quadrant is in, so the half to take is

        k = g1 XOR (odd ? a < 45° : a > 135°),   result a + 180°·k.

    At an exact tie (a = 45° or 135°, both candidates 90° from the centre)
    the half reported by g1 wins. Two float compares and one add; the rest
    is byte-wide integer work on the code. ``scratch`` is uint8 of shape
    (4, m), m >= a.size.
    """
    n = a.size
    high, low, g1, odd = scratch[0, :n], scratch[1, :n], scratch[2, :n], scratch[3, :n]
    if code.dtype != np.uint8:
        np.copyto(odd, code, casting="unsafe")  # codes already checked to lie in 0..3
        code = odd
    np.greater(a, 135.0, out=high.view(np.bool_))
    np.less(a, 45.0, out=low.view(np.bool_))
    np.right_shift(code, 1, out=g1)
    np.bitwise_xor(code, g1, out=odd)        # bit 0: g1 XOR g0, set in the odd quadrants
    # odd ? low : high == high ^ ((high ^ low) & odd); high and low are 0/1, so the
    # AND keeps only bit 0 of odd.
    np.bitwise_xor(high, low, out=low)
    np.bitwise_and(low, odd, out=low)
    np.bitwise_xor(high, low, out=high)
    np.bitwise_xor(high, g1, out=high)
    np.multiply(high, 180, out=high)         # 0 or 180 fits a byte
    # An unmasked mixed-type add stays fast when the picks are scattered (a masked one does not).
    np.add(a, high, out=a)
    return a


def _nonneg(value, field: str, upper: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise DesignValueError(field, value, f"a number in [0, {upper:g})", unit="deg")
    value = float(value)
    if not (math.isfinite(value) and 0.0 <= value < upper):
        raise DesignValueError(field, value, f"in [0, {upper:g})", unit="deg")
    return value


@dataclass(frozen=True, slots=True)
class QuadrantLatches:
    """Two Hall latches 90° apart on a two-pole magnet (mechanical degrees).

    Parameters
    ----------
    switch_point_tolerance_deg : float
        Worst-case shift of any latch edge from its nominal place, either
        way (deg), in [0, 90). Covers the latch's operate-point spread and
        its placement on the board.
    hysteresis_deg : float
        Full width between a latch's operate and release points (deg), in
        [0, 90). Each edge moves by half of it in the direction of travel.
    magnet_misalignment_deg : float
        Rotation of the latch pair against the AMR zero, e.g. magnet pole
        axis or board rotation (deg, signed), size below 90. Shifts all
        edges alike.
    powered : {"during_polls", "always"}
        "during_polls": the latches are switched on only around each poll,
        so at each read a latch inside its hysteresis band may show either
        state; "always": powered continuously, a latch keeps its state
        inside the band (see :func:`quadrant_widths`).
    """

    switch_point_tolerance_deg: float = 5.0
    hysteresis_deg: float = 2.0
    magnet_misalignment_deg: float = 0.0
    powered: str = "during_polls"

    def __post_init__(self):
        name = type(self).__name__
        object.__setattr__(self, "switch_point_tolerance_deg",
                           _nonneg(self.switch_point_tolerance_deg,
                                   f"{name}.switch_point_tolerance_deg", 90.0))
        object.__setattr__(self, "hysteresis_deg",
                           _nonneg(self.hysteresis_deg, f"{name}.hysteresis_deg", 90.0))
        mis = self.magnet_misalignment_deg
        if isinstance(mis, bool) or not isinstance(mis, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(mis)) or abs(float(mis)) >= 90.0:
            raise DesignValueError(f"{name}.magnet_misalignment_deg", mis, "in (-90, 90)", unit="deg")
        object.__setattr__(self, "magnet_misalignment_deg", float(mis))
        if self.powered not in LATCH_POWER_MODES:
            raise DesignValueError(f"{name}.powered", self.powered, "one of " + ", ".join(
                repr(m) for m in LATCH_POWER_MODES))

    def code(self, angle_path_deg, switch_shift_deg=(0.0, 0.0)) -> np.ndarray:
        """Latch Gray codes along a path of mechanical angles, with hysteresis.

        Parameters
        ----------
        angle_path_deg : array_like
            Shaft angles in time order (deg, not wrapped); the latches hold
            their state inside the hysteresis band, so the order matters.
        switch_shift_deg : (float, float)
            Actual edge shift of latch g1 and latch g0 of one particular unit
            (deg, signed), on top of ``magnet_misalignment_deg``. Not limited to the
            tolerance, so that a failing unit can be simulated.

        Returns
        -------
        numpy.ndarray of uint8
            Codes ``g1 g0`` (0..3), same length as the path.
        """
        theta = np.ravel(np.asarray(angle_path_deg, dtype=float))
        shifts = tuple(float(s) for s in switch_shift_deg)
        if len(shifts) != 2 or not all(math.isfinite(s) for s in shifts):
            raise DesignValueError("switch_shift_deg", switch_shift_deg, "two finite numbers",
                                   unit="deg")
        threshold = math.sin(math.radians(0.5 * self.hysteresis_deg))
        bits = []
        for base, shift in zip(_LATCH_BASE_DEG, shifts):
            field = np.sin(np.radians(theta - base - shift - self.magnet_misalignment_deg))
            bits.append(_hysteretic(field, threshold))
        return (bits[0].astype(np.uint8) << 1) | bits[1].astype(np.uint8)


def _hysteretic(field: np.ndarray, threshold: float) -> np.ndarray:
    """Latch output: on above +threshold, off below -threshold, else hold (vectorised)."""
    on = field > threshold
    defined = on | (field < -threshold)
    idx = np.where(defined, np.arange(field.size), -1)
    idx = np.maximum.accumulate(idx) if field.size else idx
    # Before the first definite reading the latch is taken to sit on its nominal side.
    return np.where(idx >= 0, on[np.maximum(idx, 0)], field >= 0.0)


@dataclass(frozen=True, slots=True)
class HalfTurnMargin:
    """How far the latch edges may drift before the 0–360° angle jumps by 180°.

    Attributes
    ----------
    margin_deg : float
        45° minus everything that eats it (deg). Positive means no unit inside
        the tolerances can read 180° wrong.
    ok : bool
        True when ``margin_deg`` is positive and at least ``required_margin_deg``.
    consumed_deg : float
        tolerance + hysteresis/2 + abs(misalignment) + fine error (deg).
    available_deg : float
        45°, the most a pair of latches 90° apart can tolerate.
    switch_point_tolerance_deg, hysteresis_half_deg, magnet_misalignment_deg, fine_error_deg : float
        The parts of ``consumed_deg`` (deg).
    required_margin_deg : float
        The margin asked for (deg).
    fail_zones_deg : tuple of (float, float)
        Shaft-angle intervals (start, end) in deg, start in [0, 360) and end
        possibly past 360 across the wrap, next to the four latch edges where
        a worst-case unit reads 180° wrong; empty when ``margin_deg`` >= 0.
    caution : str
        Safety caution about lost position.
    """

    margin_deg: float
    ok: bool
    consumed_deg: float
    available_deg: float
    switch_point_tolerance_deg: float
    hysteresis_half_deg: float
    magnet_misalignment_deg: float
    fine_error_deg: float
    required_margin_deg: float
    fail_zones_deg: tuple
    caution: str = LOST_POSITION_CAUTION


def half_turn_margin(latches: QuadrantLatches, fine_error_deg: float = 0.0,
                     required_margin_deg: float = 0.0) -> HalfTurnMargin:
    """Margin of the half-turn decision and where on the turn it fails.

    Parameters
    ----------
    latches : QuadrantLatches
        Latch tolerances.
    fine_error_deg : float
        Peak mechanical error of the fine (AMR) angle (deg), >= 0, e.g.
        ``error_summary(sensor, calibrated=True).peak_error_deg``.
    required_margin_deg : float
        Design margin to keep in reserve (deg), >= 0.

    Returns
    -------
    HalfTurnMargin
    """
    if not isinstance(latches, QuadrantLatches):
        raise DesignValueError("latches", latches, "a QuadrantLatches")
    fine = _nonneg(fine_error_deg, "fine_error_deg", 90.0)
    required = _nonneg(required_margin_deg, "required_margin_deg", 45.0)
    edge = (latches.switch_point_tolerance_deg + 0.5 * latches.hysteresis_deg
            + abs(latches.magnet_misalignment_deg))
    consumed = edge + fine
    available = 45.0
    margin = available - consumed
    zones = []
    if margin < 0:
        inner, outer = available - fine, edge
        for e in (0.0, 90.0, 180.0, 270.0):
            for lo, hi in ((e - outer, e - inner), (e + inner, e + outer)):
                start = lo % 360.0
                zones.append((start, start + (hi - lo)))
        zones.sort()
    return HalfTurnMargin(
        margin_deg=margin,
        ok=bool(margin > 0 and margin >= required),
        consumed_deg=consumed,
        available_deg=available,
        switch_point_tolerance_deg=latches.switch_point_tolerance_deg,
        hysteresis_half_deg=0.5 * latches.hysteresis_deg,
        magnet_misalignment_deg=abs(latches.magnet_misalignment_deg),
        fine_error_deg=fine,
        required_margin_deg=required,
        fail_zones_deg=tuple(zones),
    )


@dataclass(frozen=True, slots=True)
class HalfTurnTrace:
    """A simulated path through the latches and the half-turn combine.

    Attributes
    ----------
    angle_deg : numpy.ndarray
        True shaft angle along the path (deg, unwrapped).
    code : numpy.ndarray
        Latch Gray codes (0..3).
    combined_deg : numpy.ndarray
        Combined angle in [0, 360) (deg).
    error_deg : numpy.ndarray
        combined − true, wrapped to [-180, 180) (deg).
    wrong : numpy.ndarray of bool
        Samples where the combined angle is off by more than 90° (a half-turn slip).
    """

    angle_deg: np.ndarray
    code: np.ndarray
    combined_deg: np.ndarray
    error_deg: np.ndarray
    wrong: np.ndarray

    @property
    def wrong_angles_deg(self) -> np.ndarray:
        """True shaft angles (mod 360°, deg) where the combine slipped by a half turn."""
        return np.mod(self.angle_deg[self.wrong], 360.0)


def simulate_half_turn(latches: QuadrantLatches, angle_path_deg, fine_deg=None,
                       switch_shift_deg=(0.0, 0.0)) -> HalfTurnTrace:
    """Run a path of shaft angles through the latches and the combine.

    Parameters
    ----------
    latches : QuadrantLatches
    angle_path_deg : array_like
        True shaft angles in time order (deg).
    fine_deg : array_like, optional
        Fine angle from the AMR decode (deg, mod 180); default the exact
        ``angle mod 180``.
    switch_shift_deg : (float, float)
        Actual latch edge shifts of the simulated unit (deg), see
        :meth:`QuadrantLatches.code`.
    """
    theta = np.ravel(np.asarray(angle_path_deg, dtype=float))
    fine = np.mod(theta, 180.0) if fine_deg is None else np.ravel(np.asarray(fine_deg, dtype=float))
    if fine.shape != theta.shape:
        raise DesignValueError("fine_deg", f"{fine.size} samples",
                               f"as many samples as angle_path_deg ({theta.size})")
    code = latches.code(theta, switch_shift_deg)
    combined = combine_half_turn_deg(fine, code)
    err = np.mod(combined - theta + 180.0, 360.0) - 180.0
    return HalfTurnTrace(theta, code, combined, err, np.abs(err) > 90.0)


# ---------------------------------------------------------------------------
# quadrant widths: what the counter's speed bounds rest on
# ---------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class QuadrantWidths:
    """The narrowest quadrants a unit inside the latch tolerances can have.

    The four latch edges sit nominally at 0°, 90°, 180° and 270° of the
    motor shaft. Each may be shifted by up to ``edge_spread_deg`` either way
    (derived, shown in docs/counter.md §6).

    Attributes
    ----------
    narrowest_quadrant_deg : float
        Narrowest distance between two neighbouring edges, 90° − 2·spread
        (deg). Every read is decoded right while the shaft moves at most this
        far from where it was at the previous read (inclusive).
    narrowest_two_quadrants_deg : float
        Narrowest distance between an edge and the next-but-one,
        180° − 2·spread (deg). A read can be silently wrong only when the
        shaft moves strictly more than this between reads.
    edge_spread_deg : float
        Largest shift of one edge from its nominal place (deg):
        switch-point tolerance, plus half the hysteresis when the latches
        are powered only around each poll.
    switch_point_tolerance_deg, hysteresis_counted_deg : float
        The two parts of ``edge_spread_deg`` (deg).
    powered : str
        "during_polls" or "always".
    """

    narrowest_quadrant_deg: float
    narrowest_two_quadrants_deg: float
    edge_spread_deg: float
    switch_point_tolerance_deg: float
    hysteresis_counted_deg: float
    powered: str


def quadrant_widths(latches: QuadrantLatches) -> QuadrantWidths:
    """Narrowest quadrant and two-quadrant span of any unit inside the latch tolerances.

    Each of the four edges may sit anywhere within ±spread of its nominal
    place, independently (the switch-point tolerance covers the operate- and
    release-point spread of each edge as well as placement), so two
    neighbouring edges can close in by 2·spread:

        spread = tolerance + (hysteresis / 2 if powered only around polls else 0)
        narrowest quadrant = 90° − 2·spread
        narrowest two quadrants = 180° − 2·spread

    A latch powered only around each poll wakes up inside its hysteresis band
    in either state, so each read may place an edge anywhere within ±h/2 of
    its centre. A latch powered all the time switches at +h/2 going forward
    and −h/2 going back: to show two steps the shaft must still reach one
    full quadrant width past the position where the first edge was last
    seen, so its hysteresis does not narrow the quadrant. Magnet
    misalignment turns all four edges alike and changes no width (it matters
    to the half-turn decision, :func:`half_turn_margin`).

    Parameters
    ----------
    latches : QuadrantLatches

    Returns
    -------
    QuadrantWidths

    Raises
    ------
    DesignValueError
        When the spread reaches 45° (neighbouring edges could meet: no
        quadrant is left to count).

    References
    ----------
    Derived, shown in docs/counter.md §6; it is the minimum state width of a
    quadrature decoder applied to the latch edges.

    Examples
    --------
    >>> w = quadrant_widths(QuadrantLatches(10.0, 4.0, powered="during_polls"))
    >>> w.narrowest_quadrant_deg, w.narrowest_two_quadrants_deg
    (66.0, 156.0)
    >>> quadrant_widths(QuadrantLatches(10.0, 4.0, powered="always")).narrowest_quadrant_deg
    70.0
    """
    if not isinstance(latches, QuadrantLatches):
        raise DesignValueError("latches", latches, "a QuadrantLatches")
    hyst = 0.5 * latches.hysteresis_deg if latches.powered == "during_polls" else 0.0
    spread = latches.switch_point_tolerance_deg + hyst
    if spread >= 45.0:
        what = "switch_point_tolerance + hysteresis/2" if hyst else "switch_point_tolerance"
        raise DesignValueError(f"latches.{what}", spread, "less than 45 (a quarter turn between edges, "
                               "less twice the shift of each edge)", unit="deg",
                               hint="tighten the latch tolerance" + (
                                   ", or keep the latches powered (powered = 'always')" if hyst else ""))
    return QuadrantWidths(
        narrowest_quadrant_deg=90.0 - 2.0 * spread,
        narrowest_two_quadrants_deg=180.0 - 2.0 * spread,
        edge_spread_deg=spread,
        switch_point_tolerance_deg=latches.switch_point_tolerance_deg,
        hysteresis_counted_deg=hyst,
        powered=latches.powered,
    )


def _edge_shifts(edge_shifts_deg, field: str = "edge_shifts_deg") -> np.ndarray:
    s = np.asarray(edge_shifts_deg, dtype=float)
    if s.shape[-1:] != (4,) or not np.all(np.isfinite(s)) or np.any(np.abs(s) >= 45.0):
        raise DesignValueError(field, edge_shifts_deg,
                               "four finite shifts (edges at 0, 90, 180, 270 deg), each within ±45", unit="deg")
    return s


def edge_set_widths(edge_shifts_deg) -> tuple[float, float]:
    """Narrowest quadrant and two-quadrant span of one unit's edges, deg.

    Parameters
    ----------
    edge_shifts_deg : sequence of 4 floats
        Shift of the edges at 0°, 90°, 180° and 270° (deg, signed, each within ±45°).

    Returns
    -------
    (narrowest_quadrant_deg, narrowest_two_quadrants_deg) : (float, float)
    """
    s = _edge_shifts(edge_shifts_deg)
    edges = np.arange(4) * 90.0 + s
    nxt = np.roll(edges, -1) + np.array([0, 0, 0, 360.0])
    nxt2 = np.roll(edges, -2) + np.array([0, 0, 360.0, 360.0])
    return float(np.min(nxt - edges)), float(np.min(nxt2 - edges))


def worst_case_edge_shifts_deg(latches: QuadrantLatches) -> tuple[float, float, float, float]:
    """Edge shifts of a unit at its tolerance limits with both narrowest spans, deg.

    The pattern (+a, −a, −a, +a) for the edges at 0°, 90°, 180° and 270°
    (a = :attr:`QuadrantWidths.edge_spread_deg`) makes the quadrant from 0°
    to 90° 90° − 2a wide and the spans 270°→450° and 0°→180° 180° − 2a wide,
    so one simulated unit shows both the ambiguous and the silent onset of
    :func:`quadrant_widths`.
    """
    a = quadrant_widths(latches).edge_spread_deg
    return (a, -a, -a, a)


def random_edge_shifts_deg(latches: QuadrantLatches, rng: np.random.Generator, n: int) -> np.ndarray:
    """Edge shifts of ``n`` units drawn uniformly inside the tolerances, deg (shape (n, 4)).

    Each edge is drawn independently within ±spread
    (:attr:`QuadrantWidths.edge_spread_deg`); a uniform draw is a plain
    stand-in for an unknown spread (common practice for Monte Carlo yield
    when only limits are given).
    """
    a = quadrant_widths(latches).edge_spread_deg
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise DesignValueError("n", n, "an integer >= 1")
    return rng.uniform(-a, a, size=(int(n), 4))
