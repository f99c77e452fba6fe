"""Low-pass FIR design from a specification, verified by measuring the taps.

Design-time work (no streaming): a sample rate, band edges and a
ripple/attenuation specification become a tap set (Kaiser window or
equiripple), then the taps are *measured* and the filter is lengthened until
the measurement meets the specification. The multistage decimation plans
(:mod:`.multistage`) and resamplers (:mod:`.resampler`) are built from these
low-pass filters; the streaming stages and the FFT channelizer only consume
the taps.

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

References
----------
* J. F. Kaiser, "Nonrecursive digital filter design using the I0-sinh window
  function", Proc. IEEE ISCAS 1974; A. V. Oppenheim & R. W. Schafer,
  *Discrete-Time Signal Processing*, sec. 7.5 (Kaiser window design formulas).
* J. H. McClellan, T. W. Parks, L. R. Rabiner, "A computer program for
  designing optimum FIR linear phase digital filters", IEEE Trans. Audio
  Electroacoust. 21 (1973) (the Remez exchange, as ``scipy.signal.remez``).
* f. harris, *Multirate Signal Processing for Communication Systems* (2004):
  length estimate ``N ~ (fs/df)*(A/22)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any, Callable, Iterable

import numpy as np
from scipy import fft as sp_fft

from ... import checks
from ...errors import ParameterError
from .kaiser import kaiser_beta, kaiser_fir, kaiser_length

__all__ = [
    "FilterTooLongError",
    "DEFAULT_RIPPLE_DB",
    "DEFAULT_ATTEN_DB",
    "MAX_EQUIRIPPLE_TAPS",
    "MAX_TAPS",
    "passband_deviation",
    "stopband_deviation",
    "kaiser_length",
    "kaiser_beta",
    "harris_length",
    "checked_spec",
    "dtft_magnitude",
    "ripple_and_atten",
    "finite_or_none",
    "LowpassDesign",
    "filter_summary",
    "design_lowpass",
    "measure_lowpass",
]

DEFAULT_RIPPLE_DB = 0.1
"""Default passband ripple, dB peak to peak."""

DEFAULT_ATTEN_DB = 80.0
"""Default stopband attenuation, dB."""

MAX_EQUIRIPPLE_TAPS = 1500
"""Longest filter handed to the Remez exchange; beyond it the Kaiser design is used."""

MAX_TAPS = 262_143
"""Longest filter designed at all (a transition this narrow is almost certainly a mistake)."""


class FilterTooLongError(ParameterError):
    """A filter specification whose transition band is too narrow for the longest filter iqsift designs."""


_GRID_POINTS_PER_TAP = 32  # ~16 grid points per sidelobe; the parabolic refinement finds the peaks between them
"""Measurement grid density: FFT length >= this many points per tap (spacing rate/(128 N))."""


# --------------------------------------------------------------------------- helpers


def checked_spec(ripple_db: float, atten_db: float) -> tuple[float, float]:
    """The specification ``(ripple_db, atten_db)`` as floats, refused unless the design formulas hold.

    Raises
    ------
    ParameterError
        A value not finite and positive, ``atten_db`` below 10 dB or ``ripple_db`` above 10 dB.
    """
    ripple = checks.positive("ripple_db", ripple_db)
    atten = checks.positive("atten_db", atten_db)
    if atten < 10.0:
        raise ParameterError(f"atten_db: must be >= 10 dB for these design formulas, got {atten_db!r}")
    if ripple > 10.0:
        raise ParameterError(f"ripple_db: must be <= 10 dB peak to peak, got {ripple_db!r}")
    return ripple, atten


def _check_edges(rate_hz: float, passband_hz: float, stopband_hz: float) -> tuple[float, float, float]:
    rate = checks.positive("rate_hz", rate_hz)
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


def finite_or_none(value: float) -> float | None:
    """``value`` as a float, or None when it is infinite or NaN (JSON has no infinity)."""
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


def harris_length(atten_db: float, transition_hz: float, rate_hz: float) -> int:
    """Equiripple length estimate ``N ~ (fs/df)(A/22)`` (harris 2004), rounded up.

    A starting point for the Remez search, not a guarantee: the design loop
    measures and adjusts.
    """
    rate = checks.positive("rate_hz", rate_hz)
    width = checks.positive("transition_hz", transition_hz)
    a = checks.positive("atten_db", atten_db)
    return int(math.ceil(rate / width * a / 22.0))


# --------------------------------------------------------------------------- measurement


def dtft_magnitude(taps: np.ndarray, freqs_hz: Iterable[float] | np.ndarray, rate_hz: float) -> np.ndarray:
    """|H(f)| of real taps at the given frequencies (Hz) by the direct DTFT sum (float64, in bounded chunks)."""
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
    edges = dtft_magnitude(h, [0.0, fp, fs], rate)
    dc = edges[0]
    if dc <= 0:
        raise ParameterError("taps: the DC gain is zero, this is not a low-pass filter")

    def evaluate(f: np.ndarray) -> np.ndarray:
        return dtft_magnitude(h, f, rate)

    return ripple_and_atten(mag, rate / nfft, fp, fs, rate / 2, edges, evaluate)


def ripple_and_atten(mag: np.ndarray, spacing: float, fp: float, fs: float, top: float, edges: np.ndarray,
                     evaluate: Callable[[np.ndarray], np.ndarray]) -> tuple[float, float]:
    """Ripple (dB p-p) over [0, fp] and attenuation (dB re DC) over [fs, top] of a magnitude response.

    ``mag`` is |H| on a uniform grid from 0 Hz with ``spacing`` Hz between points, ``edges`` the exact
    |H| at 0, fp and fs, ``evaluate`` gives the exact |H| at any frequencies (used to refine the band
    extremes between grid points, see :func:`measure_lowpass`).
    """
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
            "measured_ripple_db": finite_or_none(self.measured_ripple_db),
            "measured_atten_db": finite_or_none(self.measured_atten_db),
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
        "measured_ripple_db": finite_or_none(lp.measured_ripple_db),
        "measured_atten_db": finite_or_none(lp.measured_atten_db),
        "group_delay_s": lp.group_delay_s,
    }


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
        taps = kaiser_fir(n, cutoff, beta, rate)
        r, a = measure_lowpass(taps, rate, fp, fs)
        if r <= ripple and a >= atten:
            return _finish(
                taps, rate_hz=rate, passband_hz=fp, stopband_hz=fs, ripple_db=ripple, atten_db=atten,
                method="kaiser", measured_ripple_db=r, measured_atten_db=a, kaiser_beta=beta,
            )
        # Kaiser's formula runs a few per cent short at high attenuation: grow in 3 % steps (a few rounds)
        n = _odd_at_least(n + max(2, 0.03 * n))
    need = f"Kaiser's formula asks for {n_formula} taps" if n_formula > MAX_TAPS else \
        f"the design grew past {MAX_TAPS} taps from Kaiser's {n_formula}"
    raise FilterTooLongError(
        f"stopband_hz - passband_hz = {fs - fp:g} Hz at rate_hz={rate:g}: the transition is too narrow for "
        f"ripple_db={ripple:g}/atten_db={atten:g}: {need}, and iqsift designs at most {MAX_TAPS}",
        parameters=("stopband_hz", "passband_hz"))


def _remez_try(n: int, rate: float, fp: float, fs: float, weight_stop: float,
               ripple: float, atten: float) -> tuple[np.ndarray, float, float] | None:
    from scipy import signal  # here only: equiripple is not the default design (start-up stays light)

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
    best = results[hi]
    assert best is not None  # ok(hi) held: the design of length hi exists
    taps, r, a = best
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
    ripple, atten = checked_spec(ripple_db, atten_db)
    if method not in ("auto", "kaiser", "equiripple"):
        raise ParameterError(f"method: must be 'auto', 'kaiser' or 'equiripple', got {method!r}")
    if isinstance(max_equiripple_taps, bool) or int(max_equiripple_taps) != max_equiripple_taps \
            or max_equiripple_taps < 3:
        raise ParameterError(f"max_equiripple_taps: must be an integer >= 3, got {max_equiripple_taps!r}")
    return _design_lowpass_cached(rate, fp, fs, ripple, atten, method, int(max_equiripple_taps))
