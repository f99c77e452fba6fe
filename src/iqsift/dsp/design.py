"""Filter design from bandwidths: low-pass FIR filters, multistage decimation plans, resamplers.

Everything here is design-time work (no streaming): it turns a channel's
bandwidth, the sample rates and a ripple/attenuation specification into tap
sets, then *measures* what the taps achieve and lengthens the filter until the
measurement meets the specification. The streaming stages (``stages.py``) and
the FFT channelizer only consume the taps.

Conventions
-----------
* Frequencies in Hz, rates in samples/s. A low-pass is described by its
  passband edge ``passband_hz`` (gain within the ripple from 0 Hz up to here)
  and its stopband edge ``stopband_hz`` (attenuation at least ``atten_db``
  from here up to half the rate).
* ``ripple_db`` is the passband ripple **peak to peak** in dB,
  ``20*log10(max|H| / min|H|)`` over ``[0, passband_hz]``.
* ``atten_db`` is the stopband attenuation relative to the DC gain,
  ``-20*log10(max|H| / |H(0)|)`` over ``[stopband_hz, rate_hz/2]``.
  Designed taps are scaled to unity DC gain, so it is relative to the nominal
  passband gain 1.
* A peak-to-peak ripple ``r`` dB is the band ``1 +- dp`` with
  ``dp = (10**(r/20) - 1) / (10**(r/20) + 1)``; an attenuation ``A`` dB is
  ``ds = 10**(-A/20)`` (Oppenheim & Schafer, *Discrete-Time Signal
  Processing*, sec. 7.2 tolerance scheme).
* MACs are real multiply-accumulates for **complex** samples through real
  taps: one complex output sample of an N-tap filter costs ``2*N`` MACs. A
  polyphase decimator by ``D`` computes only the kept outputs, so it costs
  ``2*N/D`` MACs per input sample. Tap symmetry is not exploited in the count.

References
----------
* J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
  function", Proc. IEEE ISCAS 1974; A. V. Oppenheim & R. W. Schafer,
  *Discrete-Time Signal Processing*, sec. 7.5 (Kaiser window design formulas).
* J. H. McClellan, T. W. Parks, L. R. Rabiner, "A computer program for
  designing optimum FIR linear phase digital filters", IEEE Trans. Audio
  Electroacoust. 21 (1973) (the Remez exchange, as ``scipy.signal.remez``).
* f. harris, *Multirate Signal Processing for Communication Systems* (2004):
  length estimate ``N ~ (fs/df)*(A/22)``; polyphase filters.
* R. E. Crochiere & L. R. Rabiner, *Multirate Digital Signal Processing*
  (1983), ch. 5: multistage decimation, stopband placement per stage.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from fractions import Fraction
from functools import lru_cache
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
from scipy import fft as sp_fft
from scipy import signal

from .. import checks
from ..errors import IqsiftError, ParameterError

__all__ = [
    "DEFAULT_RIPPLE_DB",
    "DEFAULT_ATTEN_DB",
    "MAX_EQUIRIPPLE_TAPS",
    "MAX_TAPS",
    "passband_deviation",
    "stopband_deviation",
    "kaiser_length",
    "kaiser_beta",
    "harris_length",
    "LowpassDesign",
    "design_lowpass",
    "measure_lowpass",
    "StageDesign",
    "DecimationPlan",
    "plan_decimation",
    "choose_decimation",
    "ResamplerDesign",
    "design_resampler",
    "format_design",
]

DEFAULT_RIPPLE_DB = 0.1
"""Default passband ripple, dB peak to peak."""

DEFAULT_ATTEN_DB = 80.0
"""Default stopband attenuation, dB."""

MAX_EQUIRIPPLE_TAPS = 1500
"""Longest filter handed to the Remez exchange; beyond it the Kaiser design is used."""

MAX_TAPS = 262_143
"""Longest filter designed at all (a transition this narrow is almost certainly a mistake)."""

_GRID_POINTS_PER_TAP = 32  # ~16 grid points per sidelobe; the parabolic refinement finds the peaks between them
"""Measurement grid density: FFT length >= this many points per tap (spacing rate/(128 N))."""

_CASCADE_GRID_POINTS_PER_TAP = 32
_CASCADE_MAX_GRID = 1 << 24


# --------------------------------------------------------------------------- helpers


def _check_finite_positive(value: float, name: str) -> float:
    return checks.positive(name, value)


def _check_spec(ripple_db: float, atten_db: float) -> tuple[float, float]:
    ripple = _check_finite_positive(ripple_db, "ripple_db")
    atten = _check_finite_positive(atten_db, "atten_db")
    if atten < 10.0:
        raise ParameterError(f"atten_db: must be >= 10 dB for these design formulas, got {atten_db!r}")
    if ripple > 10.0:
        raise ParameterError(f"ripple_db: must be <= 10 dB peak to peak, got {ripple_db!r}")
    return ripple, atten


def _check_edges(rate_hz: float, passband_hz: float, stopband_hz: float) -> tuple[float, float, float]:
    rate = _check_finite_positive(rate_hz, "rate_hz")
    try:
        fp = float(passband_hz)
        fs = float(stopband_hz)
    except (TypeError, ValueError):
        raise ParameterError(
            f"passband_hz/stopband_hz: expected numbers, got {passband_hz!r} and {stopband_hz!r}"
        ) from None
    if not (math.isfinite(fp) and math.isfinite(fs) and 0 < fp < fs <= rate / 2):
        raise ParameterError(
            f"passband_hz={passband_hz!r}, stopband_hz={stopband_hz!r} at rate_hz={rate_hz!r}: "
            f"need 0 < passband_hz < stopband_hz <= rate_hz/2 ({rate / 2:g} Hz)"
        )
    return rate, fp, fs


def _odd_at_least(n: float) -> int:
    k = max(3, int(math.ceil(n)))
    return k if k % 2 else k + 1


def _json_float(value: float) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


def passband_deviation(ripple_db: float) -> float:
    """Passband deviation ``dp`` for a peak-to-peak ripple in dB.

    The passband gain lies in ``[1 - dp, 1 + dp]``, whose ratio in dB is the
    peak-to-peak ripple: ``ripple_db = 20*log10((1 + dp)/(1 - dp))``, hence
    ``dp = (10**(ripple_db/20) - 1) / (10**(ripple_db/20) + 1)``
    (tolerance scheme of Oppenheim & Schafer, sec. 7.2). 0.1 dB gives 0.005756.
    """
    g = 10.0 ** (float(ripple_db) / 20.0)
    return (g - 1.0) / (g + 1.0)


def stopband_deviation(atten_db: float) -> float:
    """Stopband deviation ``ds = 10**(-atten_db/20)`` (80 dB gives 1e-4)."""
    return 10.0 ** (-float(atten_db) / 20.0)


def kaiser_beta(atten_db: float) -> float:
    """Kaiser window shape parameter for a stopband attenuation (Kaiser 1974).

    ``beta = 0.1102 (A - 8.7)`` for A > 50; ``0.5842 (A - 21)**0.4 + 0.07886 (A - 21)``
    for 21 <= A <= 50; 0 below 21 (Oppenheim & Schafer eq. 7.62).

    Parameters
    ----------
    atten_db : float
        Attenuation A in dB (``-20*log10(delta)``).

    Returns
    -------
    float
        The window parameter beta (dimensionless).
    """
    a = float(atten_db)
    if not math.isfinite(a):
        raise ParameterError(f"atten_db: must be finite, got {atten_db!r}")
    if a > 50:
        return 0.1102 * (a - 8.7)
    if a >= 21:
        return 0.5842 * (a - 21) ** 0.4 + 0.07886 * (a - 21)
    return 0.0


def kaiser_length(atten_db: float, transition_hz: float, rate_hz: float) -> int:
    """Number of taps from Kaiser's formula (Kaiser 1974; Oppenheim & Schafer eq. 7.63).

    ``N - 1 = (A - 7.95) / (2.285 * dw)`` with ``dw = 2*pi*transition_hz/rate_hz``
    (rad/sample); returns ``ceil`` of N. This is what ``scipy.signal.kaiserord``
    computes, with ``width = transition_hz / (rate_hz/2)``.

    Parameters
    ----------
    atten_db : float
        Attenuation A (dB); the formula needs A >= 8.
    transition_hz : float
        Transition width ``stopband - passband`` (Hz).
    rate_hz : float
        Sample rate (samples/s).

    Returns
    -------
    int
        Filter length in taps (not forced odd; :func:`design_lowpass` rounds up to odd).
    """
    a = float(atten_db)
    if not math.isfinite(a) or a < 8:
        raise ParameterError(f"atten_db: Kaiser's length formula needs A >= 8 dB, got {atten_db!r}")
    rate = _check_finite_positive(rate_hz, "rate_hz")
    width = _check_finite_positive(transition_hz, "transition_hz")
    if width > rate / 2:
        raise ParameterError(
            f"transition_hz: must be <= rate_hz/2 ({rate / 2:g} Hz), got {transition_hz!r}"
        )
    # Same operation order as scipy.signal.kaiserord, so ceil() agrees at the boundaries:
    # dw = pi * (width in units of the Nyquist frequency).
    width_nyq = width / (rate / 2.0)
    return int(math.ceil((a - 7.95) / 2.285 / (math.pi * width_nyq) + 1.0))


def harris_length(atten_db: float, transition_hz: float, rate_hz: float) -> int:
    """Equiripple length estimate ``N ~ (fs/df)(A/22)`` (harris 2004), rounded up.

    A starting point for the Remez search, not a guarantee: the design loop
    measures and adjusts.
    """
    rate = _check_finite_positive(rate_hz, "rate_hz")
    width = _check_finite_positive(transition_hz, "transition_hz")
    a = _check_finite_positive(atten_db, "atten_db")
    return int(math.ceil(rate / width * a / 22.0))


# --------------------------------------------------------------------------- measurement


def _dtft_mag(taps: np.ndarray, freqs_hz: Iterable[float] | np.ndarray, rate_hz: float) -> np.ndarray:
    """|H(f)| at given frequencies by the direct DTFT sum (float64, in bounded chunks)."""
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=np.float64))
    n = np.arange(taps.size, dtype=np.float64)
    out = np.empty(f.size)
    step = max(1, (1 << 21) // max(1, taps.size))
    for k in range(0, f.size, step):
        phase = np.exp(-2j * np.pi * np.outer(f[k : k + step] / rate_hz, n))
        out[k : k + step] = np.abs(phase @ taps)
    return out


def _grid_size(num_taps: int, points_per_tap: int, minimum: int = 4096) -> int:
    return int(sp_fft.next_fast_len(max(minimum, points_per_tap * num_taps), real=True))


_REFINE_WITHIN_DB = 0.5
_REFINE_MAX_CANDIDATES = 64  # the extreme lies next to one of the largest grid values


def _band_extreme(mag: np.ndarray, spacing_hz: float, lo_hz: float, hi_hz: float,
                  evaluate: Callable[[np.ndarray], np.ndarray], largest: bool) -> float:
    """Largest (or smallest) |H| over [lo_hz, hi_hz] from a uniform grid, refined.

    Grid points closer than 0.5 dB to the grid extreme that are local extremes
    are refined by a parabola through their neighbours; the response is then
    evaluated exactly at the vertex frequency (clamped to the band). The result
    is the extreme of the grid values and these exact values, so a peak falling
    between grid points is found to within a tiny fraction of a dB.
    """
    freqs = np.arange(mag.size) * spacing_hz
    inside = np.flatnonzero((freqs >= lo_hz) & (freqs <= hi_hz))
    if inside.size == 0:
        return float("-inf") if largest else float("inf")
    vals = mag[inside]
    sign = 1.0 if largest else -1.0
    best = vals.max() if largest else vals.min()
    i = inside[(inside > 0) & (inside < mag.size - 1)]
    y0, y1, y2 = mag[i - 1], mag[i], mag[i + 1]
    is_ext = (sign * (y1 - y0) >= 0) & (sign * (y1 - y2) >= 0)
    ratio = 10 ** (-_REFINE_WITHIN_DB / 20)
    near = (y1 >= best * ratio) if largest else (y1 <= best / ratio)
    keep = np.flatnonzero(is_ext & near)
    if keep.size == 0:
        return float(best)
    if keep.size > _REFINE_MAX_CANDIDATES:
        keep = keep[np.argsort(-sign * y1[keep])[:_REFINE_MAX_CANDIDATES]]
    a, b, c = y0[keep], y1[keep], y2[keep]
    den = a - 2 * b + c
    with np.errstate(divide="ignore", invalid="ignore"):
        off = np.where(den != 0, 0.5 * (a - c) / den, 0.0)
    off = np.clip(np.nan_to_num(off), -0.5, 0.5)
    f = np.clip((i[keep] + off) * spacing_hz, lo_hz, hi_hz)
    exact = evaluate(f)
    # second pass: a parabola through exact values a quarter of a grid step either side of each vertex
    h = 0.25 * spacing_hz
    fl, fr = np.clip(f - h, lo_hz, hi_hz), np.clip(f + h, lo_hz, hi_hz)
    el, er = evaluate(fl), evaluate(fr)
    den2 = el - 2 * exact + er
    with np.errstate(divide="ignore", invalid="ignore"):
        off2 = np.where(den2 != 0, 0.5 * (el - er) / den2, 0.0)
    f2 = np.clip(f + np.clip(np.nan_to_num(off2), -1.0, 1.0) * h, lo_hz, hi_hz)
    exact = np.concatenate([exact, el, er, evaluate(f2)])
    return float(max(best, exact.max()) if largest else min(best, exact.min()))


def measure_lowpass(
    taps: np.ndarray, rate_hz: float, passband_hz: float, stopband_hz: float
) -> tuple[float, float]:
    """Measure a low-pass filter's passband ripple and stopband attenuation.

    The magnitude response is evaluated on a uniform grid (zero-padded real
    FFT, at least 32 points per tap), at the exact band edges, and exactly at
    the vertex of a parabola through each grid extreme near the worst one, so
    that peaks between grid points are not missed.

    Parameters
    ----------
    taps : array_like
        Real FIR taps.
    rate_hz : float
        Sample rate of the taps (samples/s).
    passband_hz, stopband_hz : float
        Band edges (Hz), ``0 < passband_hz < stopband_hz <= rate_hz/2``.

    Returns
    -------
    ripple_db : float
        Peak-to-peak passband ripple ``20*log10(max|H|/min|H|)`` over ``[0, passband_hz]`` (dB).
    atten_db : float
        Stopband attenuation ``-20*log10(max|H| / |H(0)|)`` over ``[stopband_hz, rate_hz/2]`` (dB);
        ``inf`` if the stopband response is exactly zero.
    """
    rate, fp, fs = _check_edges(rate_hz, passband_hz, stopband_hz)
    h = np.asarray(taps, dtype=np.float64)
    if h.ndim != 1 or h.size == 0 or not np.all(np.isfinite(h)):
        raise ParameterError(f"taps: need a non-empty 1-D array of finite values, got shape {h.shape}")
    nfft = _grid_size(h.size, _GRID_POINTS_PER_TAP)
    mag = np.abs(sp_fft.rfft(h, nfft))
    edges = _dtft_mag(h, [0.0, fp, fs], rate)
    dc = edges[0]
    if dc <= 0:
        raise ParameterError("taps: the DC gain is zero, this is not a low-pass filter")

    def evaluate(f: np.ndarray) -> np.ndarray:
        return _dtft_mag(h, f, rate)

    return _ripple_atten(mag, rate / nfft, fp, fs, rate / 2, edges, evaluate)


def _ripple_atten(mag: np.ndarray, spacing: float, fp: float, fs: float, top: float, edges: np.ndarray,
                  evaluate: Callable[[np.ndarray], np.ndarray]) -> tuple[float, float]:
    """Ripple (dB p-p) and attenuation (dB re DC) from a grid; ``edges`` = exact |H| at 0, fp, fs."""
    dc = edges[0]
    pmax = max(_band_extreme(mag, spacing, 0.0, fp, evaluate, True), edges[0], edges[1])
    pmin = min(_band_extreme(mag, spacing, 0.0, fp, evaluate, False), edges[0], edges[1])
    smax = max(_band_extreme(mag, spacing, fs, top, evaluate, True), edges[2])
    ripple = math.inf if pmin <= 0 else 20.0 * math.log10(pmax / pmin)
    atten = math.inf if smax <= 0 else -20.0 * math.log10(smax / dc)
    return float(ripple), float(atten)


# --------------------------------------------------------------------------- low-pass design


@dataclass(frozen=True, eq=False)
class LowpassDesign:
    """A linear-phase low-pass FIR filter with its specification and measured performance.

    Attributes
    ----------
    taps : numpy.ndarray
        float64 taps, odd length, symmetric (linear phase), sum 1 (unity DC gain). Read-only.
    rate_hz : float
        Sample rate the taps run at (samples/s).
    passband_hz, stopband_hz : float
        Band edges (Hz).
    ripple_db : float
        Specified passband ripple, dB peak to peak.
    atten_db : float
        Specified stopband attenuation, dB.
    method : str
        ``"kaiser"`` (windowed sinc) or ``"equiripple"`` (Remez exchange).
    measured_ripple_db, measured_atten_db : float
        What the taps achieve, measured by :func:`measure_lowpass`.
    kaiser_beta : float or None
        The Kaiser window parameter (None for equiripple designs).
    """

    taps: np.ndarray = field(repr=False)
    rate_hz: float
    passband_hz: float
    stopband_hz: float
    ripple_db: float
    atten_db: float
    method: str
    measured_ripple_db: float
    measured_atten_db: float
    kaiser_beta: float | None = None

    @property
    def num_taps(self) -> int:
        """Filter length (taps)."""
        return int(self.taps.size)

    @property
    def group_delay_samples(self) -> float:
        """Group delay ``(N - 1)/2`` in samples at ``rate_hz`` (an integer value: N is odd)."""
        return (self.num_taps - 1) / 2.0

    @property
    def group_delay_s(self) -> float:
        """Group delay in seconds."""
        return self.group_delay_samples / self.rate_hz

    @property
    def meets_spec(self) -> bool:
        """True when the measured ripple and attenuation meet the specification."""
        return self.measured_ripple_db <= self.ripple_db and self.measured_atten_db >= self.atten_db

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        """JSON-ready description (taps only when ``include_taps``)."""
        out: dict[str, Any] = {
            "kind": "fir_lowpass",
            "method": self.method,
            "rate_hz": self.rate_hz,
            "passband_hz": self.passband_hz,
            "stopband_hz": self.stopband_hz,
            "ripple_db": self.ripple_db,
            "atten_db": self.atten_db,
            "measured_ripple_db": _json_float(self.measured_ripple_db),
            "measured_atten_db": _json_float(self.measured_atten_db),
            "num_taps": self.num_taps,
            "group_delay_samples": self.group_delay_samples,
            "group_delay_s": self.group_delay_s,
            "kaiser_beta": self.kaiser_beta,
        }
        if include_taps:
            out["taps"] = [float(v) for v in self.taps]
        return out


def filter_summary(lp: LowpassDesign) -> dict[str, Any]:
    """A filter's main figures as stage-table fields (method, taps, edges, ripple, attenuation, delay)."""
    return {
        "method": lp.method,
        "num_taps": lp.num_taps,
        "passband_hz": lp.passband_hz,
        "stopband_hz": lp.stopband_hz,
        "ripple_db": lp.ripple_db,
        "atten_db": lp.atten_db,
        "measured_ripple_db": _json_float(lp.measured_ripple_db),
        "measured_atten_db": _json_float(lp.measured_atten_db),
        "group_delay_s": lp.group_delay_s,
    }


def _kaiser_taps(num_taps: int, cutoff_hz: float, rate_hz: float, beta: float) -> np.ndarray:
    """Windowed ideal low-pass ``(wc/pi) sinc(wc n/pi)`` times a Kaiser window, unity DC gain."""
    n = np.arange(num_taps, dtype=np.float64) - (num_taps - 1) / 2.0
    fc = 2.0 * cutoff_hz / rate_hz  # wc/pi
    h = fc * np.sinc(fc * n) * np.kaiser(num_taps, beta)
    return h / h.sum()


def _finish(taps: np.ndarray, **kwargs: Any) -> LowpassDesign:
    taps = np.ascontiguousarray(taps, dtype=np.float64)
    taps.flags.writeable = False
    return LowpassDesign(taps=taps, **kwargs)


def _design_kaiser(rate: float, fp: float, fs: float, ripple: float, atten: float) -> LowpassDesign:
    delta = min(passband_deviation(ripple), stopband_deviation(atten))
    a_design = -20.0 * math.log10(delta)
    beta = kaiser_beta(a_design)
    n_formula = kaiser_length(a_design, fs - fp, rate)
    n = _odd_at_least(n_formula)
    cutoff = 0.5 * (fp + fs)
    for _ in range(60):
        if n > MAX_TAPS:
            break
        taps = _kaiser_taps(n, cutoff, rate, beta)
        r, a = measure_lowpass(taps, rate, fp, fs)
        if r <= ripple and a >= atten:
            return _finish(
                taps, rate_hz=rate, passband_hz=fp, stopband_hz=fs, ripple_db=ripple, atten_db=atten,
                method="kaiser", measured_ripple_db=r, measured_atten_db=a, kaiser_beta=beta,
            )
        # Kaiser's formula runs a few per cent short at high attenuation: grow in 3 % steps (a few rounds)
        n = _odd_at_least(n + max(2, 0.03 * n))
    raise ParameterError(
        f"stopband_hz - passband_hz = {fs - fp:g} Hz at rate_hz={rate:g}: the transition is too narrow "
        f"for ripple_db={ripple:g}/atten_db={atten:g} within {MAX_TAPS} taps (Kaiser's formula: {n_formula})"
    )


def _remez_try(n: int, rate: float, fp: float, fs: float, weight_stop: float,
               ripple: float, atten: float) -> tuple[np.ndarray, float, float] | None:
    try:
        taps = signal.remez(n, [0.0, fp, fs, rate / 2.0], [1.0, 0.0], weight=[1.0, weight_stop], fs=rate)
    except ValueError:  # "Failure to converge": treat as not meeting the spec
        return None
    taps = np.asarray(taps, dtype=np.float64)
    dc = taps.sum()
    if not np.all(np.isfinite(taps)) or dc <= 0:
        return None
    taps = taps / dc
    r, a = measure_lowpass(taps, rate, fp, fs)
    return taps, r, a


def _design_equiripple(rate: float, fp: float, fs: float, ripple: float, atten: float,
                       max_taps: int) -> LowpassDesign | None:
    """Shortest odd-length Remez design meeting the spec, or None within ``max_taps``."""
    if fs >= rate / 2.0 * (1 - 1e-12):
        return None  # zero-width stopband band: nothing for the exchange to work on
    weight_stop = passband_deviation(ripple) / stopband_deviation(atten)
    results: dict[int, tuple[np.ndarray, float, float] | None] = {}

    def ok(n: int) -> bool:
        if n not in results:
            results[n] = _remez_try(n, rate, fp, fs, weight_stop, ripple, atten)
        res = results[n]
        return res is not None and res[1] <= ripple and res[2] >= atten

    start = _odd_at_least(harris_length(atten, fs - fp, rate))
    if start > max_taps:
        return None
    # Bracket the shortest passing odd length: lo fails (1 = nothing shorter), hi passes.
    if ok(start):
        lo, hi = 1, start
        while True:
            n = _odd_at_least(0.85 * hi)
            if n >= hi:
                break
            if not ok(n):
                lo = n
                break
            hi = n
    else:
        lo, hi = start, 0
        while not hi:
            n = _odd_at_least(1.15 * lo + 2)
            if n > max_taps:
                n = max_taps if max_taps % 2 else max_taps - 1
                if n <= lo or not ok(n):
                    return None
            if ok(n):
                hi = n
            else:
                lo = n
    while hi - lo > 2:
        mid = (lo + hi) // 2
        mid = mid if mid % 2 else mid + 1
        if ok(mid):
            hi = mid
        else:
            lo = mid
    taps, r, a = results[hi]  # type: ignore[misc]
    return _finish(
        taps, rate_hz=rate, passband_hz=fp, stopband_hz=fs, ripple_db=ripple, atten_db=atten,
        method="equiripple", measured_ripple_db=r, measured_atten_db=a, kaiser_beta=None,
    )


@lru_cache(maxsize=64)
def _design_lowpass_cached(rate: float, fp: float, fs: float, ripple: float, atten: float,
                           method: str, max_eq: int) -> LowpassDesign:
    if method == "kaiser":
        return _design_kaiser(rate, fp, fs, ripple, atten)
    if method == "equiripple":
        design = _design_equiripple(rate, fp, fs, ripple, atten, max_eq)
        if design is None:
            raise ParameterError(
                f"method='equiripple': the Remez exchange did not meet ripple_db={ripple:g}/atten_db={atten:g} "
                f"for passband_hz={fp:g}, stopband_hz={fs:g}, rate_hz={rate:g} within {max_eq} taps; "
                "use method='kaiser' or 'auto'"
            )
        return design
    kaiser = _design_kaiser(rate, fp, fs, ripple, atten)
    equi = _design_equiripple(rate, fp, fs, ripple, atten, min(max_eq, kaiser.num_taps - 2))
    if equi is not None and equi.num_taps < kaiser.num_taps:
        return equi
    return kaiser


def design_lowpass(
    rate_hz: float,
    passband_hz: float,
    stopband_hz: float,
    ripple_db: float = DEFAULT_RIPPLE_DB,
    atten_db: float = DEFAULT_ATTEN_DB,
    method: str = "auto",
    max_equiripple_taps: int = MAX_EQUIRIPPLE_TAPS,
) -> LowpassDesign:
    """Design a linear-phase low-pass FIR filter and verify it against its specification.

    ``"kaiser"``: ideal low-pass ``(wc/pi) sinc(wc n/pi)`` with the cutoff at the
    centre of the transition band, ``(passband + stopband)/2``, times a Kaiser
    window (Kaiser 1974; Oppenheim & Schafer sec. 7.5). The window is designed
    for ``delta = min(dp, ds)`` since a window design has (nearly) equal
    deviations in both bands; length from :func:`kaiser_length`, rounded up to odd.

    ``"equiripple"``: Parks-McClellan / Remez exchange (``scipy.signal.remez``)
    with band weights 1 (passband) and ``dp/ds`` (stopband), so both bands reach
    their own deviation. The search starts at harris' estimate and bisects to
    the shortest odd length that meets the specification, up to
    ``max_equiripple_taps`` (the exchange becomes unreliable for longer filters).

    ``"auto"``: both; the equiripple design is used only when it has strictly
    fewer taps than the Kaiser design, else Kaiser.

    Every candidate is measured with :func:`measure_lowpass`; a Kaiser design
    that misses the specification is lengthened and redesigned (bounded loop).
    Taps are scaled to unity DC gain.

    Parameters
    ----------
    rate_hz : float
        Sample rate (samples/s).
    passband_hz, stopband_hz : float
        Band edges (Hz), ``0 < passband_hz < stopband_hz <= rate_hz/2``.
    ripple_db : float
        Passband ripple, dB peak to peak (default 0.1 dB).
    atten_db : float
        Stopband attenuation, dB (default 80 dB).
    method : {"auto", "kaiser", "equiripple"}
    max_equiripple_taps : int
        Longest Remez design tried (default :data:`MAX_EQUIRIPPLE_TAPS`).

    Returns
    -------
    LowpassDesign

    Raises
    ------
    ParameterError
        Bad edges, specification or method; a forced equiripple design that
        cannot meet the specification within ``max_equiripple_taps``; or a
        transition needing more than :data:`MAX_TAPS` taps.
    """
    rate, fp, fs = _check_edges(rate_hz, passband_hz, stopband_hz)
    ripple, atten = _check_spec(ripple_db, atten_db)
    if method not in ("auto", "kaiser", "equiripple"):
        raise ParameterError(f"method: must be 'auto', 'kaiser' or 'equiripple', got {method!r}")
    if isinstance(max_equiripple_taps, bool) or int(max_equiripple_taps) != max_equiripple_taps \
            or max_equiripple_taps < 3:
        raise ParameterError(f"max_equiripple_taps: must be an integer >= 3, got {max_equiripple_taps!r}")
    return _design_lowpass_cached(rate, fp, fs, ripple, atten, method, int(max_equiripple_taps))


# --------------------------------------------------------------------------- multistage decimation


@dataclass(frozen=True, eq=False)
class StageDesign:
    """One FIR decimation stage of a :class:`DecimationPlan`.

    Attributes
    ----------
    index : int
        Position in the chain, 0 first.
    kind : str
        ``"fir_decimator"`` (polyphase FIR, keeps every ``down``-th output).
    rate_in_hz, rate_out_hz : float
        Rates at the stage's input and output (samples/s).
    down, up : int
        Decimation factor; ``up`` is 1.
    lowpass : LowpassDesign
        The stage's filter, running at ``rate_in_hz``.
    macs_per_input_sample : float
        Real MACs per complex sample entering **this stage**: ``2 * taps / down``.
    macs_per_chain_input_sample : float
        The same cost per sample entering the **chain** (what the plan total sums):
        ``macs_per_input_sample * rate_in_hz / chain rate_in_hz``.
    """

    index: int
    kind: str
    rate_in_hz: float
    rate_out_hz: float
    down: int
    up: int
    lowpass: LowpassDesign
    macs_per_input_sample: float
    macs_per_chain_input_sample: float

    @property
    def num_taps(self) -> int:
        return self.lowpass.num_taps

    @property
    def group_delay_s(self) -> float:
        """Group delay of the stage's filter (s)."""
        return self.lowpass.group_delay_s

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        """JSON-ready; the filter's main figures are repeated at top level for :func:`format_design`."""
        lp = self.lowpass
        return {
            "name": f"FIR /{self.down}",
            "index": self.index,
            "kind": self.kind,
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "down": self.down,
            "up": self.up,
            **filter_summary(lp),
            "macs_per_input_sample": self.macs_per_input_sample,
            "macs_per_chain_input_sample": self.macs_per_chain_input_sample,
            "lowpass": lp.to_dict(include_taps=include_taps),
        }


@dataclass(frozen=True, eq=False)
class DecimationPlan:
    """A chain of FIR decimators taking a centred channel from ``rate_in_hz`` to ``rate_out_hz``.

    Attributes
    ----------
    stages : tuple of StageDesign
    rate_in_hz, rate_out_hz : float
        Chain input and output rates (samples/s), ``rate_out = rate_in / decimation``.
    decimation : int
        Total decimation, the product of the stages' ``down``.
    passband_hz, stopband_hz : float
        The channel's one-sided passband half width and the stopband edge (Hz).
    ripple_db, atten_db : float
        Specification for the whole chain (dB peak to peak; dB).
    macs_per_input_sample : float
        Real MACs per complex chain-input sample, summed over the stages.
    measured_ripple_db, measured_atten_db : float
        Ripple over ``[0, passband_hz]`` and worst attenuation over
        ``[stopband_hz, rate_in_hz/2]`` of the whole cascade, measured on its
        equivalent single-rate response (noble identity, see :func:`plan_decimation`).
    """

    stages: tuple[StageDesign, ...]
    rate_in_hz: float
    rate_out_hz: float
    decimation: int
    passband_hz: float
    stopband_hz: float
    ripple_db: float
    atten_db: float
    macs_per_input_sample: float
    measured_ripple_db: float
    measured_atten_db: float

    @property
    def factors(self) -> tuple[int, ...]:
        """Decimation factor of each stage, in order."""
        return tuple(s.down for s in self.stages)

    @property
    def num_stages(self) -> int:
        return len(self.stages)

    @property
    def total_taps(self) -> int:
        return sum(s.num_taps for s in self.stages)

    @property
    def group_delay_s(self) -> float:
        """Group delay of the chain (s): the stages' delays add."""
        return sum(s.group_delay_s for s in self.stages)

    @property
    def macs_per_output_sample(self) -> float:
        return self.macs_per_input_sample * self.decimation

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        """JSON-ready description of the chain (``stages`` is a list of stage dicts)."""
        return {
            "kind": "decimation_plan",
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "decimation": self.decimation,
            "factors": list(self.factors),
            "passband_hz": self.passband_hz,
            "stopband_hz": self.stopband_hz,
            "ripple_db": self.ripple_db,
            "atten_db": self.atten_db,
            "measured_ripple_db": _json_float(self.measured_ripple_db),
            "measured_atten_db": _json_float(self.measured_atten_db),
            "macs_per_input_sample": self.macs_per_input_sample,
            "macs_per_output_sample": self.macs_per_output_sample,
            "total_taps": self.total_taps,
            "group_delay_s": self.group_delay_s,
            "stages": [s.to_dict(include_taps=include_taps) for s in self.stages],
        }


def _prime_factors(n: int) -> list[int]:
    out, p = [], 2
    while p * p <= n:
        while n % p == 0:
            out.append(p)
            n //= p
        p += 1
    if n > 1:
        out.append(n)
    return out


def _ordered_factorizations(n: int, max_parts: int) -> list[tuple[int, ...]]:
    """All ordered tuples of integers >= 2 with product n and at most max_parts entries."""
    if n == 1:
        return [()]
    result: list[tuple[int, ...]] = []

    def rec(rest: int, prefix: tuple[int, ...]) -> None:
        if len(prefix) == max_parts - 1:
            result.append(prefix + (rest,))
            return
        result.append(prefix + (rest,))
        for d in range(2, rest):
            if rest % d == 0:
                rec(rest // d, prefix + (d,))

    rec(n, ())
    return result


def _stage_edges(rate_in: float, factors: Sequence[int], fp: float, fst: float) -> list[tuple[float, float, float]]:
    """(stage input rate, passband, stopband) per stage (Crochiere & Rabiner ch. 5)."""
    out, rate = [], rate_in
    for k, d in enumerate(factors):
        rate_out = rate / d
        stop = fst if k == len(factors) - 1 else rate_out - fst
        out.append((rate, fp, stop))
        rate = rate_out
    return out


def _estimate_taps(rate: float, fp: float, fs: float, ripple: float, atten: float, max_eq: int) -> int:
    delta = min(passband_deviation(ripple), stopband_deviation(atten))
    nk = kaiser_length(-20 * math.log10(delta), fs - fp, rate)
    nh = harris_length(atten, fs - fp, rate)
    return min(nk, nh) if nh <= max_eq else nk


def _cascade_mag(stages: Sequence[tuple[np.ndarray, int]], rate_in: float,
                 extra_freqs: Sequence[float] = ()) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Magnitude of the cascade's equivalent response at the input rate (noble identity).

    ``stages`` holds (taps, down) in chain order. Stage k runs at
    ``rate_in / P_k`` (``P_k`` the product of the earlier factors); seen from
    the input, its response is periodic with that rate: the equivalent filter
    is ``prod_k H_k(f)``. Evaluated on an ``M``-point grid over [0, rate_in/2]
    with ``M`` a multiple of every ``P_k`` (each stage's response is then an
    ``M/P_k``-point FFT, indexed modulo its length), and exactly at ``extra_freqs``.
    """
    prods, p = [], 1
    for _, d in stages:
        prods.append(p)
        p *= d
    p_last = prods[-1]
    need = max(_CASCADE_GRID_POINTS_PER_TAP * taps.size * pk for (taps, _), pk in zip(stages, prods))
    base = 1 << max(12, math.ceil(math.log2(need / p_last)))
    while p_last * base > _CASCADE_MAX_GRID and base > 4096:
        base //= 2
    m = p_last * base
    idx = np.arange(m // 2 + 1)
    mag = np.ones(idx.size)
    for (taps, _), pk in zip(stages, prods):
        size = m // pk
        hk = np.abs(sp_fft.rfft(taps, size))
        j = idx % size
        j = np.minimum(j, size - j)  # |H(-f)| = |H(f)| for real taps
        mag *= hk[j]
    freqs = idx * (rate_in / m)
    extra = np.ones(len(extra_freqs))
    for (taps, _), pk in zip(stages, prods):
        extra *= _dtft_mag(taps, extra_freqs, rate_in / pk)
    return freqs, mag, extra


def _measure_cascade(stages: Sequence[tuple[np.ndarray, int]], rate_in: float, fp: float,
                     fst: float) -> tuple[float, float]:
    freqs, mag, extra = _cascade_mag(stages, rate_in, [0.0, fp, fst])
    rates, p = [], 1
    for _, d in stages:
        rates.append(rate_in / p)
        p *= d

    def evaluate(f: np.ndarray) -> np.ndarray:
        out = np.ones(len(f))
        for (taps, _), r in zip(stages, rates):
            out *= _dtft_mag(taps, f, r)
        return out

    spacing = freqs[1] - freqs[0]
    return _ripple_atten(mag, spacing, fp, fst, rate_in / 2, extra, evaluate)


def _build_plan(rate_in: float, factors: Sequence[int], fp: float, fst: float, ripple: float,
                atten: float, stage_ripple: float, stage_atten: float, method: str,
                max_eq: int) -> DecimationPlan:
    stages: list[StageDesign] = []
    total = 0.0
    rate = rate_in
    for k, (r_in, pb, sb) in enumerate(_stage_edges(rate_in, factors, fp, fst)):
        d = factors[k]
        lp = design_lowpass(r_in, pb, sb, stage_ripple, stage_atten, method, max_eq)
        macs = 2.0 * lp.num_taps / d
        chain = macs * r_in / rate_in
        total += chain
        stages.append(StageDesign(index=k, kind="fir_decimator", rate_in_hz=r_in, rate_out_hz=r_in / d,
                                  down=d, up=1, lowpass=lp, macs_per_input_sample=macs,
                                  macs_per_chain_input_sample=chain))
        rate = r_in / d
    r_meas, a_meas = _measure_cascade([(s.lowpass.taps, s.down) for s in stages], rate_in, fp, fst)
    return DecimationPlan(stages=tuple(stages), rate_in_hz=rate_in, rate_out_hz=rate,
                          decimation=int(np.prod(factors)) if factors else 1, passband_hz=fp,
                          stopband_hz=fst, ripple_db=ripple, atten_db=atten, macs_per_input_sample=total,
                          measured_ripple_db=r_meas, measured_atten_db=a_meas)


def plan_decimation(
    rate_in_hz: float,
    passband_hz: float,
    stopband_hz: float,
    decimation: int,
    ripple_db: float = DEFAULT_RIPPLE_DB,
    atten_db: float = DEFAULT_ATTEN_DB,
    max_stages: int = 4,
    method: str = "auto",
    candidates: int = 4,
) -> DecimationPlan:
    """Plan a multistage polyphase FIR decimation chain for a centred channel.

    The rule (Crochiere & Rabiner 1983, ch. 5). Let ``fp = passband_hz`` (the
    channel's one-sided half width), ``fst = stopband_hz`` and stage k take
    rate ``R_{k-1}`` to ``R_k = R_{k-1}/D_k``. Every stage has passband ``fp``;
    an intermediate stage has stopband ``R_k - fst`` (everything that would
    fold into ``[-fst, fst]`` at ``R_k`` is removed; what folds elsewhere is
    removed by a later stage), the last stage has stopband ``fst`` and carries
    the sharp transition. By induction every input frequency ``|f| >= fst``
    (up to ``rate_in/2``) lies in the stopband of some stage, so

        every input component at ``|f| >= stopband_hz`` reaches the output
        attenuated by at least ``atten_db``; in particular nothing aliases
        into ``[-passband_hz, passband_hz]`` with less attenuation;

    and the cascade's passband ripple is at most the sum of the stages'
    ripples. The output rate must satisfy ``rate_out >= fp + fst`` (the
    stopband edge folds no closer than the passband edge; ``fst`` may exceed
    ``rate_out/2``: the final transition band then folds onto itself).

    Budget: each stage gets ``ripple_db / K`` (K stages) and ``atten_db`` plus
    the other stages' ripple (their passband gain may reach that much above 1).
    The whole cascade is then measured on its equivalent single-rate response
    (noble identity: stage k's response is periodic at its own input rate, the
    cascade response is their product); if it misses the specification the
    budgets are tightened and the chain redesigned (bounded).

    Factorisations: every ordered factorisation of ``decimation`` into 1 to
    ``max_stages`` factors >= 2 is costed from the length formulas; the
    ``candidates`` cheapest are designed and the one with the fewest measured
    MACs per input sample is kept (ties: fewer stages).

    Parameters
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    passband_hz : float
        One-sided passband half width of the centred channel (Hz).
    stopband_hz : float
        Stopband edge (Hz) at the final rate; ``passband_hz < stopband_hz``.
    decimation : int
        Total decimation (>= 1; 1 gives a single filtering stage).
    ripple_db, atten_db : float
        Chain specification (dB peak to peak; dB).
    max_stages : int
        1 to 4 (more only for very large factors).
    method : {"auto", "kaiser", "equiripple"}
        Passed to :func:`design_lowpass` for each stage.
    candidates : int
        How many estimated-cheapest factorisations are designed in full.

    Returns
    -------
    DecimationPlan

    Raises
    ------
    ParameterError
        Bad values, or ``rate_in/decimation < passband_hz + stopband_hz``.
    """
    rate = _check_finite_positive(rate_in_hz, "rate_in_hz")
    fp = _check_finite_positive(passband_hz, "passband_hz")
    fst = _check_finite_positive(stopband_hz, "stopband_hz")
    ripple, atten = _check_spec(ripple_db, atten_db)
    if isinstance(decimation, bool) or not isinstance(decimation, (int, np.integer)) or decimation < 1:
        raise ParameterError(f"decimation: must be an integer >= 1, got {decimation!r}")
    decimation = int(decimation)
    if isinstance(max_stages, bool) or not isinstance(max_stages, (int, np.integer)) or not 1 <= max_stages <= 8:
        raise ParameterError(f"max_stages: must be an integer from 1 to 8, got {max_stages!r}")
    if not isinstance(candidates, (int, np.integer)) or candidates < 1:
        raise ParameterError(f"candidates: must be an integer >= 1, got {candidates!r}")
    if method not in ("auto", "kaiser", "equiripple"):
        raise ParameterError(f"method: must be 'auto', 'kaiser' or 'equiripple', got {method!r}")
    if not fp < fst:
        raise ParameterError(
            f"passband_hz={passband_hz!r}, stopband_hz={stopband_hz!r}: need passband_hz < stopband_hz"
        )
    if fst > rate / 2:
        raise ParameterError(
            f"stopband_hz={stopband_hz!r}: must be <= rate_in_hz/2 ({rate / 2:g} Hz)"
        )
    rate_out = rate / decimation
    if rate_out < (fp + fst) * (1 - 1e-9):
        raise ParameterError(
            f"decimation={decimation}: output rate {rate_out:g} Hz < passband_hz + stopband_hz = "
            f"{fp + fst:g} Hz, so the stopband edge would alias into the passband"
        )
    if decimation == 1:
        factor_sets: list[tuple[int, ...]] = [(1,)]
    else:
        factor_sets = _ordered_factorizations(decimation, max_stages)

    def estimate(factors: tuple[int, ...]) -> float:
        k = len(factors)
        sr = ripple / k
        sa = atten + ripple - sr
        total, p = 0.0, 1
        for (r_in, pb, sb), d in zip(_stage_edges(rate, factors, fp, fst), factors):
            total += 2.0 * _estimate_taps(r_in, pb, sb, sr, sa, MAX_EQUIRIPPLE_TAPS) / d / p
            p *= d
        return total

    ranked = sorted(factor_sets, key=lambda f: (estimate(f), len(f), tuple(-x for x in f)))
    best: DecimationPlan | None = None
    for factors in ranked[: int(candidates)]:
        k = len(factors)
        sr = ripple / k
        sa = atten + ripple - sr
        plan = None
        for _ in range(4):
            plan = _build_plan(rate, factors, fp, fst, ripple, atten, sr, sa, method, MAX_EQUIRIPPLE_TAPS)
            if plan.measured_ripple_db <= ripple and plan.measured_atten_db >= atten:
                break
            sa += max(0.0, atten - plan.measured_atten_db) + 0.1
            if plan.measured_ripple_db > ripple:
                sr *= 0.8
            plan = None
        if plan is None:
            continue
        if best is None or (plan.macs_per_input_sample, plan.num_stages) < (
            best.macs_per_input_sample, best.num_stages
        ):
            best = plan
    if best is None:
        raise IqsiftError(
            f"plan_decimation: no stage factorisation of {decimation} met ripple_db={ripple:g}/atten_db={atten:g}"
        )
    return best


def choose_decimation(
    rate_in_hz: float,
    channel_half_width_hz: float,
    stopband_hz: float,
    min_oversampling: float = 1.0,
    max_prime: int = 7,
) -> int:
    """Choose the channel decimation for a centred channel.

    Rule: ``D`` is the largest integer with

        ``rate_in / D >= min_oversampling * (channel_half_width_hz + stopband_hz)``

    (at the output rate the stopband edge folds to ``rate_out - stopband_hz``,
    which must not lie inside the passband; see :func:`plan_decimation`)
    **and** no prime factor above ``max_prime`` (default 7: factors 2, 3, 5, 7
    make short polyphase stages and fast FFT sizes; common practice). ``D = 1``
    always qualifies. The channel rate is then ``rate_in / D``.

    Parameters
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    channel_half_width_hz : float
        One-sided passband half width (Hz).
    stopband_hz : float
        Stopband edge (Hz), greater than the half width.
    min_oversampling : float
        Extra margin factor >= 1 on ``half_width + stopband``.
    max_prime : int
        Largest prime factor allowed in D (>= 2).

    Returns
    -------
    int
        The decimation D >= 1.
    """
    rate = _check_finite_positive(rate_in_hz, "rate_in_hz")
    fp = _check_finite_positive(channel_half_width_hz, "channel_half_width_hz")
    fst = _check_finite_positive(stopband_hz, "stopband_hz")
    over = _check_finite_positive(min_oversampling, "min_oversampling")
    if over < 1:
        raise ParameterError(f"min_oversampling: must be >= 1, got {min_oversampling!r}")
    if isinstance(max_prime, bool) or not isinstance(max_prime, (int, np.integer)) or max_prime < 2:
        raise ParameterError(f"max_prime: must be an integer >= 2, got {max_prime!r}")
    if not fp < fst:
        raise ParameterError(
            f"channel_half_width_hz={channel_half_width_hz!r}, stopband_hz={stopband_hz!r}: "
            "need channel_half_width_hz < stopband_hz"
        )
    need = over * (fp + fst)
    if need > rate * (1 + 1e-9):
        raise ParameterError(
            f"rate_in_hz={rate_in_hz!r}: must be >= min_oversampling*(channel_half_width_hz + stopband_hz) "
            f"= {need:g} Hz"
        )
    d_max = max(1, int(math.floor(rate / need * (1 + 1e-9))))
    for d in range(d_max, 0, -1):
        if max(_prime_factors(d), default=1) <= max_prime:
            return d
    return 1  # not reached: 1 qualifies


# --------------------------------------------------------------------------- rational resampler


@dataclass(frozen=True, eq=False)
class ResamplerDesign:
    """A rational polyphase resampler ``up/down`` and its anti-alias / anti-image low-pass.

    Attributes
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    rate_out_hz : float
        Achieved output rate, exactly ``rate_in * up / down`` (rounded once to float).
    requested_rate_out_hz : float
        The rate asked for; differs from ``rate_out_hz`` when the ratio had to be approximated.
    up, down : int
        Interpolation and decimation factors (coprime).
    lowpass : LowpassDesign
        Filter at ``rate_in * up`` with unity DC gain.
    macs_per_input_sample : float
        Real MACs per complex input sample for a polyphase implementation: ``2 * taps / down``.
    """

    rate_in_hz: float
    rate_out_hz: float
    requested_rate_out_hz: float
    up: int
    down: int
    lowpass: LowpassDesign
    macs_per_input_sample: float

    @property
    def taps(self) -> np.ndarray:
        """The polyphase taps: the low-pass scaled by ``up`` (DC gain ``up`` restores the level)."""
        return self.lowpass.taps * self.up

    @property
    def ratio(self) -> Fraction:
        return Fraction(self.up, self.down)

    @property
    def rate_error_hz(self) -> float:
        """Achieved minus requested output rate (Hz)."""
        return self.rate_out_hz - self.requested_rate_out_hz

    @property
    def exact(self) -> bool:
        """True when the requested rate is reached exactly."""
        return Fraction(self.requested_rate_out_hz) == Fraction(self.rate_in_hz) * self.ratio

    @property
    def group_delay_s(self) -> float:
        return self.lowpass.group_delay_s

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        lp = self.lowpass
        out = {
            "name": f"FIR x{self.up}/{self.down}",
            "kind": "fir_resampler",
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "requested_rate_out_hz": self.requested_rate_out_hz,
            "rate_error_hz": self.rate_error_hz,
            "up": self.up,
            "down": self.down,
            **filter_summary(lp),
            "macs_per_input_sample": self.macs_per_input_sample,
            "lowpass": lp.to_dict(include_taps=False),
        }
        if include_taps:
            out["taps"] = [float(v) for v in self.taps]
        return out


def design_resampler(
    rate_in_hz: float,
    rate_out_hz: float,
    passband_hz: float,
    ripple_db: float = DEFAULT_RIPPLE_DB,
    atten_db: float = DEFAULT_ATTEN_DB,
    max_denominator: int = 1000,
    stopband_hz: float | None = None,
    method: str = "auto",
) -> ResamplerDesign:
    """Design a rational resampler ``rate_in * up / down``.

    ``up/down`` is ``Fraction(rate_out/rate_in).limit_denominator(max_denominator)``
    computed from the exact binary values of the two rates. The low-pass runs at
    ``rate_in * up`` (after zero-stuffing, before keeping every ``down``-th
    sample; harris 2004 ch. 7) with passband ``passband_hz`` and, by default,
    stopband ``min(rate_in, rate_out)/2``: images of the input (upsampling)
    and components that would alias (downsampling) are all attenuated by
    ``atten_db``. A ``stopband_hz`` up to ``min(rate_in, rate_out) - passband_hz``
    may be given instead: the transition band then folds onto itself, the
    passband stays clean.

    Parameters
    ----------
    rate_in_hz, rate_out_hz : float
        Input rate and requested output rate (samples/s).
    passband_hz : float
        Highest frequency to keep (Hz); must be below both Nyquist frequencies.
    ripple_db, atten_db : float
        Specification (dB peak to peak; dB).
    max_denominator : int
        Largest ``down`` allowed in the rational approximation.
    stopband_hz : float, optional
        Stopband edge (Hz); default ``min(rate_in, rate_out)/2``.
    method : {"auto", "kaiser", "equiripple"}

    Returns
    -------
    ResamplerDesign
        ``rate_out_hz`` is the achieved rate; compare ``requested_rate_out_hz``.
    """
    rin = _check_finite_positive(rate_in_hz, "rate_in_hz")
    rout = _check_finite_positive(rate_out_hz, "rate_out_hz")
    fp = _check_finite_positive(passband_hz, "passband_hz")
    if isinstance(max_denominator, bool) or not isinstance(max_denominator, (int, np.integer)) \
            or max_denominator < 1:
        raise ParameterError(f"max_denominator: must be an integer >= 1, got {max_denominator!r}")
    ratio = (Fraction(rout) / Fraction(rin)).limit_denominator(int(max_denominator))
    if ratio == 0:
        raise ParameterError(
            f"rate_out_hz={rate_out_hz!r}: ratio to rate_in_hz={rate_in_hz!r} rounds to 0 "
            f"with max_denominator={max_denominator}"
        )
    up, down = ratio.numerator, ratio.denominator
    achieved = float(Fraction(rin) * ratio)
    nyq = min(rin, achieved) / 2.0
    if not fp < nyq:
        raise ParameterError(
            f"passband_hz={passband_hz!r}: must be below both Nyquist frequencies "
            f"(min(rate_in, rate_out)/2 = {nyq:g} Hz)"
        )
    if stopband_hz is None:
        fst = nyq
    else:
        fst = _check_finite_positive(stopband_hz, "stopband_hz")
        if not fp < fst <= 2 * nyq - fp:
            raise ParameterError(
                f"stopband_hz={stopband_hz!r}: need passband_hz ({fp:g}) < stopband_hz <= "
                f"min(rate_in, rate_out) - passband_hz ({2 * nyq - fp:g} Hz)"
            )
    lp = design_lowpass(rin * up, fp, fst, ripple_db, atten_db, method)
    return ResamplerDesign(rate_in_hz=rin, rate_out_hz=achieved, requested_rate_out_hz=rout, up=up,
                           down=down, lowpass=lp, macs_per_input_sample=2.0 * lp.num_taps / down)


# --------------------------------------------------------------------------- report table

_COLUMNS: tuple[tuple[str, str, str], ...] = (
    # header, key, format
    ("stage", "name", "s"),
    ("kind", "kind", "s"),
    ("rate in Hz", "rate_in_hz", "hz"),
    ("rate out Hz", "rate_out_hz", "hz"),
    ("taps", "num_taps", "d"),
    ("pass Hz", "passband_hz", "hz"),
    ("stop Hz", "stopband_hz", "hz"),
    ("ripple dB", "measured_ripple_db", ".4f"),
    ("atten dB", "measured_atten_db", ".2f"),
    ("delay ms", "group_delay_s", "ms"),
    ("MACs/in", "macs_per_input_sample", ".3f"),
    ("MACs/chain in", "macs_per_chain_input_sample", ".3f"),
)


def _cell(value: Any, fmt: str) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool) or isinstance(value, str) or fmt == "s":
        return str(value)
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(v):
        return str(v)
    if fmt == "d":
        return f"{int(round(v))}"
    if fmt == "hz":
        if v == int(v) and abs(v) < 1e15:
            return f"{int(v)}"
        return f"{v:.3f}".rstrip("0").rstrip(".") if abs(v) < 1e6 else f"{v:.1f}"
    if fmt == "ms":
        return f"{v * 1e3:.3f}"
    return format(v, fmt)


def format_design(design_dict: Mapping[str, Any] | Sequence[Mapping[str, Any]]) -> str:
    """Render a filter chain as a plain-text table (for the ``design`` command).

    Parameters
    ----------
    design_dict : mapping or sequence of mappings
        A chain dict with a ``"stages"`` list (e.g. ``DecimationPlan.to_dict()``),
        a bare list of stage dicts, or one stage dict. Rows read the keys
        ``name`` (else ``index``), ``kind``, ``rate_in_hz``, ``rate_out_hz``,
        ``num_taps``, ``passband_hz``, ``stopband_hz``, ``measured_ripple_db``,
        ``measured_atten_db``, ``group_delay_s``, ``macs_per_input_sample`` (per
        sample entering that stage) and ``macs_per_chain_input_sample``; a missing
        key shows as ``-``, so FFT or other stage dicts fit too. For a chain dict
        a summary follows (rates, MACs per chain input sample, group delay,
        measured and specified ripple and attenuation).

    Returns
    -------
    str
        The table, lines joined by newlines, no trailing newline.
    """
    if isinstance(design_dict, Mapping):
        chain: Mapping[str, Any] | None = design_dict if "stages" in design_dict else None
        rows_in = list(design_dict["stages"]) if chain is not None else [design_dict]
    elif isinstance(design_dict, Sequence) and not isinstance(design_dict, (str, bytes)):
        chain, rows_in = None, list(design_dict)
    else:
        raise ParameterError(
            f"design_dict: expected a chain dict, a stage dict or a list of stage dicts, got {type(design_dict).__name__}"
        )
    table = [[h for h, _, _ in _COLUMNS]]
    for i, row in enumerate(rows_in):
        if not isinstance(row, Mapping):
            raise ParameterError(f"design_dict: stage {i} is a {type(row).__name__}, expected a dict")
        cells = []
        for _, key, fmt in _COLUMNS:
            value = row.get(key)
            if key == "name" and value is None:
                value = row.get("index", i)
            cells.append(_cell(value, fmt))
        table.append(cells)
    widths = [max(len(r[c]) for r in table) for c in range(len(_COLUMNS))]

    def line(cells: list[str]) -> str:
        parts = [cells[0].ljust(widths[0]), cells[1].ljust(widths[1])]
        parts += [cells[c].rjust(widths[c]) for c in range(2, len(cells))]
        return "  ".join(parts).rstrip()

    out = [line(table[0]), "  ".join("-" * w for w in widths)]
    out += [line(r) for r in table[1:]]
    if chain is not None:
        g = chain.get
        out.append("")
        out.append(
            f"chain: {_cell(g('rate_in_hz'), 'hz')} Hz -> {_cell(g('rate_out_hz'), 'hz')} Hz"
            f" (decimation {_cell(g('decimation'), 'd')}), {len(rows_in)} stage(s)"
        )
        out.append(
            f"cost: {_cell(g('macs_per_input_sample'), '.3f')} real MACs per complex input sample;"
            f" group delay {_cell(g('group_delay_s'), 'ms')} ms"
        )
        out.append(
            f"passband 0-{_cell(g('passband_hz'), 'hz')} Hz: ripple {_cell(g('measured_ripple_db'), '.4f')} dB p-p"
            f" (spec {_cell(g('ripple_db'), 'g')});"
            f" from {_cell(g('stopband_hz'), 'hz')} Hz: attenuation {_cell(g('measured_atten_db'), '.2f')} dB"
            f" (spec {_cell(g('atten_db'), 'g')})"
        )
    return "\n".join(out)
