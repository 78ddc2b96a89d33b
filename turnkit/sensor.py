"""AMR bridge pair: the two output signals and the angle decoded from them.

An anisotropic magnetoresistive (AMR) angle sensor has two Wheatstone bridges
rotated 45° against each other. Their outputs go as cos 2θ and sin 2θ of the
mechanical field angle θ, so the electrical angle is φ = 2θ and the decoded
shaft angle repeats every 180°. This module models the real signals and
decodes them; the error analysis lives in :mod:`turnkit.angle_error`, the
fit that removes offset, gain and phase errors in :mod:`turnkit.calibration`.

Signal model (``A`` = ``amplitude_mV``, φ = 2θ)::

    w(u)  = sin u + h2·sin 2u + h3·sin 3u          (waveform of one bridge)
    x_mV  = A·w(φ + 90°)                 + offset_x_mV + noise     ("cos" bridge)
    y_mV  = A·(1 + g)·w(φ + δ)           + offset_y_mV + noise     ("sin" bridge)

then, when ``adc_bits`` is set, both are rounded to the ADC step
``adc_full_scale_mV / 2**adc_bits`` and clipped to the ADC range
±adc_full_scale_mV/2 (the full scale is the peak-to-peak span, centred on
the bridge midpoint). ``g`` is
``gain_mismatch`` and δ is ``phase_error_deg`` (electrical degrees, all of it
on the sin bridge). With h2 = h3 = 0 this is the usual sin/cos error model
x = cos φ + o_x, y = k·sin(φ + δ) + o_y.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import DesignValueError

__all__ = [
    "BridgeSensor",
    "decode_block_deg",
    "bridge_amplitude_fraction",
    "decode_deg",
    "electrical_deg",
    "make_rng",
]


def make_rng(rng=None) -> np.random.Generator:
    """Return a numpy Generator from ``None`` (fixed seed 0), an int seed or a Generator.

    ``None`` gives the same stream every call so that results repeat; pass a
    Generator to draw independent noise across calls.
    """
    if rng is None:
        return np.random.default_rng(0)
    if isinstance(rng, np.random.Generator):
        return rng
    if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool):
        return np.random.default_rng(int(rng))
    raise DesignValueError("rng", rng, "None, an int seed or a numpy.random.Generator")


def bridge_amplitude_fraction(resistance_change_ratio: float) -> float:
    """Output amplitude of one AMR bridge as a fraction of its supply voltage.

    Two half-bridges with elements along and across the current give
    ``V_out/V_s = r·cos 2θ/(2 + r)`` with ``r = ΔR/R₀``, so the amplitude is
    ``r/(2 + r)`` (about r/2).

    Parameters
    ----------
    resistance_change_ratio : float
        ΔR/R₀, the AMR ratio of the film (dimensionless, thin permalloy
        ≈ 0.02–0.04).

    Returns
    -------
    float
        Amplitude / supply voltage (dimensionless).
    """
    r = _finite(resistance_change_ratio, "resistance_change_ratio")
    if not 0.0 < r < 1.0:
        raise DesignValueError("resistance_change_ratio", r, "in (0, 1)",
                               hint="AMR films give a few percent, e.g. 0.03")
    return r / (2.0 + r)


def electrical_deg(x_mV, y_mV) -> np.ndarray:
    """Electrical angle atan2(y, x) in degrees, in [0, 360)."""
    phi = np.degrees(np.arctan2(np.asarray(y_mV, dtype=float), np.asarray(x_mV, dtype=float)))
    return np.mod(phi, 360.0)


def decode_deg(x_mV, y_mV, *, dtype=np.float64) -> np.ndarray:
    """Mechanical angle modulo 180° from the cos bridge ``x`` and the sin bridge ``y``.

    θ = ½·atan2(y, x) mod 180°. Units of ``x`` and ``y`` only need to agree.

    Parameters
    ----------
    x_mV, y_mV : array_like
        cos and sin bridge samples (mV, or any common unit).
    dtype : numpy.float64 or numpy.float32
        Working and result precision. The default float64 agrees with
        ``math.atan2`` to about 1e-13 deg. float32 is meant for long ADC
        recordings: about 1.5-2 times faster from float64 samples (more from
        float32 samples, which skip the casts) and within 3.1e-5 deg of the
        float64 result (two float32 steps near 180°), far below the angle
        step of a 16-bit ADC (about 0.0009 deg of shaft angle for a
        full-scale signal, more for smaller ones). Inputs are
        rounded to float32, so magnitudes outside about 1e-38..3e38 lose
        their angle.

    Returns
    -------
    numpy.ndarray
        Mechanical angle in degrees, in [0, 180), of the chosen dtype.
    """
    dt = _work_dtype(dtype)
    x, y = np.broadcast_arrays(_float_input(x_mV), _float_input(y_mV))
    out = np.empty(x.shape, dtype=dt)
    xf, yf, of = x.ravel(), y.ravel(), out.reshape(-1)
    buf = np.empty(min(_BLOCK, of.size), dtype=dt)
    for start in range(0, of.size, _BLOCK):
        stop = min(of.size, start + _BLOCK)
        decode_block_deg(xf[start:stop], yf[start:stop], of[start:stop], buf[:stop - start])
    return out


# Work in cache-sized blocks with preallocated buffers: on large arrays this is
# several times faster than whole-array temporaries (and than np.mod). 2**16 samples
# (0.5 MB per float64 array) keeps the working set in cache while the fixed cost of
# the dozen or so ufunc calls per block stays small; 2**15 measured 10-15 % slower.
_BLOCK = 1 << 16
_WORK_DTYPES = (np.dtype(np.float64), np.dtype(np.float32))
_RAD_TO_HALF_DEG = 90.0 / math.pi
# Largest decoded angle: two steps below 180°, so that a + 180° still rounds below 360°
# (one step below 180° plus 180° is a tie that rounds up to 360°).
_FINE_MAX_DEG = {dt: np.nextafter(np.nextafter(dt.type(180.0), dt.type(0.0)), dt.type(0.0))
                for dt in _WORK_DTYPES}


def _work_dtype(dtype) -> np.dtype:
    """The working float dtype named by ``dtype`` (float64 or float32), else DesignValueError."""
    # np.dtype(None) means float64 and a dtype compares equal to None, so test for it first.
    if dtype is not None:
        try:
            dt = np.dtype(dtype)
        except TypeError:
            pass
        else:
            for allowed in _WORK_DTYPES:
                if dt == allowed:
                    return allowed
    raise DesignValueError("dtype", dtype, "numpy.float64 or numpy.float32")


def _float_input(values) -> np.ndarray:
    """``values`` as a float32 or float64 array (other types become float64), without copying floats."""
    arr = np.asarray(values)
    if arr.dtype not in _WORK_DTYPES:
        arr = arr.astype(np.float64)
    return arr


def decode_block_deg(x, y, out, buf):
    """Write ½·atan2(y, x) mod 180° (deg, in [0, 180)) into ``out``.

    ``out`` (float32 or float64) sets the working precision; ``buf`` is
    scratch of the same size and dtype. Building block of :func:`decode_deg`
    for callers that fuse further steps.

    a = ½·atan2(y, x) in [−90°, 90°]; 180° is added where a < 0 and 0 is
    added everywhere else, which also turns a −0° (from y = −0.0) into +0°.
    Results are capped two rounding steps below 180°: a negative angle so
    small that a + 180° rounds up to 180° stays below it, and a + 180° in
    the half-turn combine stays below 360°. atan2 reads the inputs directly
    (they are copied to the working dtype first only when it differs).
    """
    n = out.size
    if x.dtype != out.dtype:
        # A plain copy casts faster than a casting ufunc.
        np.copyto(buf, x, casting="same_kind")
        x = buf
    if y.dtype != out.dtype:
        np.copyto(out, y, casting="same_kind")
        y = out
    np.arctan2(y, x, out=out)
    half_turn = buf.view(np.uint8)[:n]   # buf is free again after atan2
    np.less(out, 0.0, out=half_turn.view(np.bool_))
    np.multiply(half_turn, 180, out=half_turn)
    np.multiply(out, _RAD_TO_HALF_DEG, out=out)
    # An unmasked add of 0 or 180 stays fast on scattered signs and clears -0.0.
    np.add(out, half_turn, out=out)
    # The cap is almost never hit: a compare plus a masked minimum beats a full minimum.
    cap = _FINE_MAX_DEG[out.dtype]
    over = half_turn.view(np.bool_)
    np.greater(out, cap, out=over)
    np.minimum(out, cap, out=out, where=over)
    return out


def _finite(value, field: str, unit: str = "") -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise DesignValueError(field, value, "a finite number", unit=unit)
    value = float(value)
    if not math.isfinite(value):
        raise DesignValueError(field, value, "a finite number", unit=unit)
    return value


@dataclass(frozen=True, slots=True)
class BridgeSensor:
    """The two bridge signals of an AMR angle sensor with their imperfections.

    Parameters
    ----------
    amplitude_mV : float
        Peak output of the cos bridge (mV), > 0.
    offset_x_mV, offset_y_mV : float
        Zero offsets of the cos and sin bridge (mV); each smaller in size than
        half the amplitude.
    gain_mismatch : float
        Relative gain of the sin bridge against the cos bridge minus one
        (fraction; 0.01 means the sin bridge is 1 % larger), in (-0.5, 0.5).
    phase_error_deg : float
        Departure of the two bridges from quadrature in electrical degrees,
        carried by the sin bridge, in (-45, 45).
    harmonic2, harmonic3 : float
        2nd and 3rd harmonic of each bridge's waveform as fractions of its
        amplitude, each in (-0.5, 0.5).
    noise_rms_mV : float
        Standard deviation of independent Gaussian noise on each bridge (mV), >= 0.
    adc_bits : int or None
        ADC resolution in bits (1 to 32), or None for unquantised signals.
    adc_full_scale_mV : float
        Peak-to-peak input span of the ADC, centred on the bridge midpoint
        (mV): it converts -adc_full_scale_mV/2 .. +adc_full_scale_mV/2. The
        signals must fit inside it when ``adc_bits`` is set.
    """

    amplitude_mV: float = 100.0
    offset_x_mV: float = 0.0
    offset_y_mV: float = 0.0
    gain_mismatch: float = 0.0
    phase_error_deg: float = 0.0
    harmonic2: float = 0.0
    harmonic3: float = 0.0
    noise_rms_mV: float = 0.0
    adc_bits: int | None = None
    adc_full_scale_mV: float = 250.0

    def __post_init__(self):
        name = type(self).__name__
        for field, unit in (("amplitude_mV", "mV"), ("offset_x_mV", "mV"), ("offset_y_mV", "mV"),
                            ("gain_mismatch", ""), ("phase_error_deg", "deg"), ("harmonic2", ""),
                            ("harmonic3", ""), ("noise_rms_mV", "mV"), ("adc_full_scale_mV", "mV")):
            object.__setattr__(self, field, _finite(getattr(self, field), f"{name}.{field}", unit))
        if self.amplitude_mV <= 0:
            raise DesignValueError(f"{name}.amplitude_mV", self.amplitude_mV, "> 0", unit="mV")
        for field in ("offset_x_mV", "offset_y_mV"):
            if abs(getattr(self, field)) >= 0.5 * self.amplitude_mV:
                raise DesignValueError(
                    f"{name}.{field}", getattr(self, field),
                    f"smaller in size than half the amplitude ({0.5 * self.amplitude_mV:g} mV)",
                    unit="mV", hint="a larger offset makes the decoded angle meaningless")
        if not -0.5 < self.gain_mismatch < 0.5:
            raise DesignValueError(f"{name}.gain_mismatch", self.gain_mismatch, "in (-0.5, 0.5)",
                                   hint="a fraction: 0.01 means 1 %")
        if not -45.0 < self.phase_error_deg < 45.0:
            raise DesignValueError(f"{name}.phase_error_deg", self.phase_error_deg,
                                   "in (-45, 45)", unit="deg")
        for field in ("harmonic2", "harmonic3"):
            if not -0.5 < getattr(self, field) < 0.5:
                raise DesignValueError(f"{name}.{field}", getattr(self, field), "in (-0.5, 0.5)",
                                       hint="a fraction of the amplitude")
        if self.noise_rms_mV < 0:
            raise DesignValueError(f"{name}.noise_rms_mV", self.noise_rms_mV, ">= 0", unit="mV")
        if self.adc_full_scale_mV <= 0:
            raise DesignValueError(f"{name}.adc_full_scale_mV", self.adc_full_scale_mV, "> 0",
                                   unit="mV")
        if self.adc_bits is not None:
            bits = self.adc_bits
            if isinstance(bits, bool) or not isinstance(bits, (int, np.integer)) or not 1 <= bits <= 32:
                raise DesignValueError(f"{name}.adc_bits", bits, "None or an integer in 1..32")
            object.__setattr__(self, "adc_bits", int(bits))
            peak = self.peak_signal_mV
            if peak > 0.5 * self.adc_full_scale_mV:
                raise DesignValueError(
                    f"{name}.adc_full_scale_mV", self.adc_full_scale_mV,
                    f">= twice the largest signal, {2 * peak:.6g} mV peak to peak", unit="mV",
                    hint="the ADC would clip; raise the full scale or lower the gain")

    @classmethod
    def from_bridge(cls, resistance_change_ratio: float, supply_V: float, **kwargs) -> "BridgeSensor":
        """Build a sensor whose amplitude follows from the film's ΔR/R₀ and the supply.

        ``amplitude_mV = 1000·supply_V·r/(2 + r)``; other fields as keywords.
        """
        supply = _finite(supply_V, "supply_V", "V")
        if supply <= 0:
            raise DesignValueError("supply_V", supply, "> 0", unit="V")
        return cls(amplitude_mV=1000.0 * supply * bridge_amplitude_fraction(resistance_change_ratio),
                   **kwargs)

    @property
    def peak_signal_mV(self) -> float:
        """Largest absolute value either noiseless bridge output can reach (mV, a bound)."""
        shape = 1.0 + abs(self.harmonic2) + abs(self.harmonic3)
        return max(self.amplitude_mV * shape + abs(self.offset_x_mV),
                   self.amplitude_mV * (1 + self.gain_mismatch) * shape + abs(self.offset_y_mV))

    @property
    def adc_step_mV(self) -> float:
        """One ADC code step (mV); 0 when ``adc_bits`` is None."""
        if self.adc_bits is None:
            return 0.0
        return self.adc_full_scale_mV / 2.0 ** self.adc_bits

    def signals(self, angle_deg, rng=None, *, noise: bool = True):
        """The two bridge outputs for mechanical field angles.

        Parameters
        ----------
        angle_deg : array_like
            Mechanical field angles θ (deg).
        rng : None, int or numpy.random.Generator
            Noise source; None uses seed 0 so results repeat.
        noise : bool
            False leaves the noise out (offsets, gains, phase, harmonics and
            ADC rounding stay).

        Returns
        -------
        (x_mV, y_mV) : tuple of numpy.ndarray
            cos bridge and sin bridge outputs (mV), same shape as ``angle_deg``.
        """
        phi = 2.0 * np.radians(np.asarray(angle_deg, dtype=float))
        a = self.amplitude_mV
        delta = math.radians(self.phase_error_deg)
        x = a * self._waveform(phi + 0.5 * math.pi) + self.offset_x_mV
        y = a * (1.0 + self.gain_mismatch) * self._waveform(phi + delta) + self.offset_y_mV
        if noise and self.noise_rms_mV > 0:
            gen = make_rng(rng)
            x = x + gen.normal(0.0, self.noise_rms_mV, size=x.shape)
            y = y + gen.normal(0.0, self.noise_rms_mV, size=y.shape)
        if self.adc_bits is not None:
            x = self.quantize(x)
            y = self.quantize(y)
        return x, y

    def quantize(self, v_mV) -> np.ndarray:
        """Round voltages (mV) to the ADC grid and clip to its range."""
        if self.adc_bits is None:
            return np.asarray(v_mV, dtype=float)
        step = self.adc_step_mV
        half = 2 ** (self.adc_bits - 1)
        code = np.clip(np.rint(np.asarray(v_mV, dtype=float) / step), -half, half - 1)
        return code * step

    def decode_deg(self, x_mV, y_mV, *, dtype=np.float64) -> np.ndarray:
        """Mechanical angle in [0, 180) from raw bridge outputs (see :func:`decode_deg`)."""
        return decode_deg(x_mV, y_mV, dtype=dtype)

    def _waveform(self, u):
        w = np.sin(u)
        if self.harmonic2:
            w = w + self.harmonic2 * np.sin(2.0 * u)
        if self.harmonic3:
            w = w + self.harmonic3 * np.sin(3.0 * u)
        return w
