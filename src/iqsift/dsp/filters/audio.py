"""Audio-rate filter design: voice band-pass, one-sided sideband band-pass, carrier low-pass, DC blocker, fractional delay.

The low-pass filters of the channel front end come from :mod:`.lowpass`; the
filters here serve the detectors and the audio post-processing. All are
Kaiser-window designs (J. F. Kaiser, "Nonrecursive digital filter design
using the I0-sinh window function", Proc. IEEE ISCAS 1974; Oppenheim &
Schafer, *Discrete-Time Signal Processing*, ch. 7) except the first-order DC
blocker.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np

from ... import checks
from ...errors import ParameterError
from .kaiser import frequency_response, kaiser_fir, kaiser_order

__all__ = [
    "BandpassDesign",
    "design_audio_bandpass",
    "sideband_bandpass_taps",
    "carrier_lowpass_taps",
    "dc_block_coefficient",
    "fractional_delay_taps",
]

_TWO_PI = 2.0 * math.pi


# ----------------------------------------------------------------------------- voice band-pass
@dataclass(frozen=True, eq=False)
class BandpassDesign:
    """A linear-phase Kaiser-window band-pass and what its taps achieve.

    Attributes
    ----------
    taps : numpy.ndarray
        float64 taps, odd length (type I), read-only.
    rate_hz : float
        Sample rate (samples/s).
    low_hz, high_hz : float
        Pass-band edges (Hz).
    atten_db : float
        Specified stop-band attenuation (dB).
    transition_hz : float
        Transition width on each side (Hz).
    kaiser_beta : float
        The Kaiser window parameter.
    design_atten_db : float
        Attenuation given to ``kaiserord`` (``atten_db`` plus any margin the check added), dB.
    measured_stopband_db : float
        Highest stop-band gain measured on the taps (freqz), dB (<= -atten_db).
    measured_ripple_db : float
        Largest pass-band deviation from 0 dB measured on the taps, dB.
    """

    taps: np.ndarray = field(repr=False)
    rate_hz: float
    low_hz: float
    high_hz: float
    atten_db: float
    transition_hz: float
    kaiser_beta: float
    design_atten_db: float
    measured_stopband_db: float
    measured_ripple_db: float


def _kaiser_bandpass(fs: float, lo: float, hi: float, tw: float, a: float) -> tuple[np.ndarray, float]:
    numtaps, beta = kaiser_order(a, tw / (0.5 * fs))
    if numtaps % 2 == 0:
        numtaps += 1
    taps = kaiser_fir(numtaps, [lo - tw / 2.0, hi + tw / 2.0], beta, fs, pass_zero=False)
    return taps, beta


def _measure_bandpass(taps: np.ndarray, fs: float, lo: float, hi: float, tw: float) -> tuple[float, float]:
    """(max stop-band gain dB, max |pass-band deviation| dB) on the freqz grid (zero-padded FFT)."""
    w, hresp = frequency_response(taps, max(8192, 16 * taps.size), fs)
    mag = np.abs(hresp)
    pb = (w >= lo) & (w <= hi)
    sb = (w <= lo - tw) | (w >= hi + tw)
    stop = 20.0 * np.log10(max(float(mag[sb].max()), 1e-300))
    ripple = float(np.max(np.abs(20.0 * np.log10(mag[pb]))))
    return stop, ripple


@functools.lru_cache(maxsize=32)
def _audio_bandpass_cached(
    fs: float, lo: float, hi: float, tw: float, a: float
) -> tuple[np.ndarray, float, float, float, float]:
    """Kaiser's formulas are approximate: design, measure, raise the design attenuation by 0.5 dB
    until the measured stop band meets ``a``. Cached: every channel of a plan usually asks the same."""
    a_design = a
    for _ in range(20):
        taps, beta = _kaiser_bandpass(fs, lo, hi, tw, a_design)
        stop_db, ripple_db = _measure_bandpass(taps, fs, lo, hi, tw)
        if stop_db <= -a:
            break
        a_design += 0.5
    taps.setflags(write=False)
    return taps, beta, a_design, stop_db, ripple_db


def design_audio_bandpass(
    rate_hz: float,
    low_hz: float = 300.0,
    high_hz: float = 3000.0,
    atten_db: float = 60.0,
    transition_hz: float | None = None,
) -> BandpassDesign:
    """Linear-phase Kaiser-window band-pass FIR for the voice band, verified on its taps.

    Designed with :func:`.kaiser.kaiser_order` (as ``scipy.signal.kaiserord``; Kaiser 1974;
    Oppenheim & Schafer, DTSP, §7.6: β and N from the attenuation A and the transition width) and
    :func:`.kaiser.kaiser_fir` (as ``scipy.signal.firwin``): pass band [low_hz, high_hz], stop bands below
    low_hz − transition_hz and above high_hz + transition_hz (firwin's cutoffs
    sit mid-transition, at low − tw/2 and high + tw/2; N made odd, type I).
    Ripple δ ≈ 10^(−A/20) in both bands (window method). Kaiser's length
    formula is approximate (at A = 60 dB it gave −58.8 dB measured), so the
    taps are checked on the ``freqz`` grid (:func:`.kaiser.frequency_response`) and the design attenuation is
    raised in 0.5 dB steps until the measured stop band is at or below
    −atten_db.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    low_hz, high_hz : float
        Pass-band edges, Hz.
    atten_db : float
        Stop-band attenuation A, dB (> 0).
    transition_hz : float, optional
        Transition width, Hz; default min(200, low_hz/2, (rate/2 − high_hz)/2).

    Returns
    -------
    BandpassDesign
    """
    fs = checks.positive("rate_hz", rate_hz)
    lo = checks.finite("low_hz", low_hz)
    hi = checks.finite("high_hz", high_hz)
    a = checks.finite("atten_db", atten_db)
    if a <= 0.0:
        raise ParameterError(f"atten_db: must be > 0 dB, got {atten_db!r}")
    if not (0.0 < lo < hi < fs / 2.0):
        raise ParameterError(
            f"low_hz/high_hz: need 0 < low < high < rate/2 = {fs / 2:g} Hz, got {low_hz!r}, {high_hz!r}"
        )
    if transition_hz is None:
        tw = min(200.0, lo / 2.0, (fs / 2.0 - hi) / 2.0)
    else:
        tw = checks.finite("transition_hz", transition_hz)
    if not (0.0 < tw < lo and hi + tw < fs / 2.0):
        raise ParameterError(
            f"transition_hz: need 0 < tw < low_hz and high_hz + tw < rate/2, got {tw!r}"
        )
    taps, beta, a_design, stop_db, ripple_db = _audio_bandpass_cached(fs, lo, hi, tw, a)
    return BandpassDesign(taps=taps, rate_hz=fs, low_hz=lo, high_hz=hi, atten_db=a, transition_hz=tw,
                          kaiser_beta=float(beta), design_atten_db=a_design, measured_stopband_db=stop_db,
                          measured_ripple_db=ripple_db)


# ----------------------------------------------------------------------------- detector filters
def sideband_bandpass_taps(
    rate_hz: float,
    sideband: str = "usb",
    low_hz: float = 300.0,
    high_hz: float = 3000.0,
    transition_hz: float | None = None,
    atten_db: float = 60.0,
) -> np.ndarray:
    """One-sided complex band-pass selecting one sideband of a carrier at 0 Hz.

    A Kaiser-window low-pass prototype ``h[n]`` (windowed ideal low-pass,
    Kaiser 1974; length and β from :func:`.kaiser.kaiser_order`) is shifted to
    the band centre ``f0 = ±(low_hz + high_hz)/2``: ``h_c[n] = e^{j 2π f0 (n - D)/fs}·h[n]``
    ("one-sided complex band-pass = e^{jω0 n}·low-pass", Oppenheim & Schafer,
    *Discrete-Time Signal Processing*, ch. 7), with the index counted from the
    centre tap ``D = (L-1)/2`` so that the filter is a pure delay of ``D``
    samples in its passband (no constant phase rotation).

    Parameters
    ----------
    rate_hz : float
        Channel sample rate in Hz.
    sideband : {"usb", "lsb"}
        ``usb`` passes ``[low_hz, high_hz]``, ``lsb`` passes ``[-high_hz, -low_hz]``.
    low_hz, high_hz : float
        Audio passband edges in Hz (0 <= low_hz < high_hz < rate_hz/2).
    transition_hz : float, optional
        Transition width in Hz.  Default ``2·low_hz`` (so the opposite sideband's
        edge at ``-low_hz`` is already in the stopband), at least 200 Hz.
    atten_db : float
        Stopband attenuation in dB designed for (default 60 dB).

    Returns
    -------
    numpy.ndarray
        complex128 taps, odd length.
    """
    rate = checks.positive("rate_hz", rate_hz)
    side = str(sideband).lower()
    if side not in ("usb", "lsb"):
        raise ParameterError(f"sideband: got {sideband!r}; it must be 'usb' or 'lsb'")
    lo = checks.finite("low_hz", low_hz)
    hi = checks.finite("high_hz", high_hz)
    if lo < 0.0 or hi <= lo or hi >= rate / 2.0:
        raise ParameterError(
            f"low_hz/high_hz: got {lo!r}/{hi!r} Hz; need 0 <= low_hz < high_hz < rate/2 = {rate / 2.0:g} Hz"
        )
    tw = max(2.0 * lo, 200.0) if transition_hz is None else checks.positive("transition_hz", transition_hz)
    atten = checks.positive("atten_db", atten_db)
    half = (hi - lo) / 2.0
    if half + tw >= rate / 2.0:
        raise ParameterError(
            f"transition_hz: got {tw:g} Hz; half-bandwidth + transition must stay below rate/2 = {rate / 2.0:g} Hz"
        )
    numtaps, beta = kaiser_order(atten, tw / (rate / 2.0))
    numtaps |= 1  # odd: integer delay
    cutoff = half + tw / 2.0  # Kaiser design: passband edge = cutoff - tw/2
    proto = kaiser_fir(numtaps, cutoff, beta, rate)
    f0 = (lo + hi) / 2.0 * (1.0 if side == "usb" else -1.0)
    n = np.arange(numtaps) - (numtaps - 1) // 2
    return proto * np.exp(1j * _TWO_PI * f0 * n / rate)


def _kaiser_window_peak_sidelobe(beta: float, probe: int = 256, nfft: int = 1 << 15) -> tuple[float, float]:
    """(peak sidelobe in dB, first null in cycles/sample × length) of a Kaiser window."""
    w = np.kaiser(probe, beta)
    mag = np.abs(np.fft.rfft(w, nfft))
    mag /= mag[0]
    rising = np.nonzero(np.diff(mag) > 0.0)[0]
    null = int(rising[0]) if rising.size else len(mag) - 1
    side = float(np.max(mag[null:])) if null < len(mag) else 0.0
    return 20.0 * math.log10(max(side, 1e-300)), null / nfft * probe


@functools.lru_cache(maxsize=32)
def _kaiser_window_shape(atten_db: float) -> tuple[float, float]:
    """Smallest Kaiser β (bisection) whose window sidelobes are all <= -atten_db; and its null factor."""
    lo, hi = 0.5, 40.0
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        if _kaiser_window_peak_sidelobe(mid)[0] <= -atten_db:
            hi = mid
        else:
            lo = mid
    return hi, _kaiser_window_peak_sidelobe(hi)[1]


def carrier_lowpass_taps(rate_hz: float, stop_hz: float = 120.0, atten_db: float = 70.0) -> np.ndarray:
    """Narrow non-negative linear-phase low-pass used to extract the carrier phasor.

    The taps are a Kaiser window used as the impulse response (normalised to
    unit DC gain).  Its β is the smallest whose sidelobes are all at least
    ``atten_db`` below the main lobe, and its length puts the first null of the
    main lobe at ``stop_hz``, so everything at or beyond ``stop_hz`` from the
    carrier is attenuated by at least ``atten_db``.  (Kaiser window: J. F.
    Kaiser 1974; Oppenheim & Schafer, ch. 7.)  Why a window rather than a
    windowed sinc: all taps are >= 0, so the filtered squared signal of a DSB
    carrier, ``LPF(p(t))·e^{j2θ}`` with ``p >= 0``, never changes sign (a sign
    change would slip the recovered carrier by 180°), and an AM carrier phasor
    is never rotated by a negative lobe.  Only the phase of the filtered
    phasor is used, so passband flatness does not matter; the filter is
    symmetric, so a residual frequency error ``δf`` (with ``H(δf) > 0``) gives no
    phase error once the signal path is delayed by the same ``(L-1)/2`` samples.

    Returns
    -------
    numpy.ndarray
        float64 taps, odd length >= 3, symmetric, non-negative, sum 1.
    """
    rate = checks.positive("rate_hz", rate_hz)
    stop = checks.positive("carrier_stop_hz", stop_hz)
    atten = checks.positive("carrier_atten_db", atten_db)
    if stop >= rate / 4.0:
        raise ParameterError(f"carrier_stop_hz: got {stop:g} Hz; it must be below rate/4 = {rate / 4.0:g} Hz")
    if atten > 150.0:
        raise ParameterError(f"carrier_atten_db: got {atten:g} dB; it must be at most 150 dB")
    beta, null_factor = _kaiser_window_shape(round(atten, 6))
    length = max(3, int(math.ceil(null_factor * rate / stop)) | 1)
    # Verify from the actual taps (the null factor scales as 1/L only approximately).
    for _ in range(64):
        w = np.kaiser(length, beta)
        nfft = 1 << max(16, int(math.ceil(math.log2(length * 16))))
        mag = np.abs(np.fft.rfft(w, nfft)) / np.sum(w)
        k_stop = int(math.ceil(stop / rate * nfft))
        if 20.0 * math.log10(max(float(np.max(mag[k_stop:])), 1e-300)) <= -atten + 1e-9:
            break
        length += 2
    return w / np.sum(w)


# ----------------------------------------------------------------------------- DC blocker
def dc_block_coefficient(rate_hz: float, cutoff_hz: float) -> float:
    """Pole ``a`` of y[n] = x[n] − x[n−1] + a·y[n−1] with |H| = 1/√2 (−3.01 dB) at ``cutoff_hz``.

    |H(e^{jω})|² = 2(1 − cos ω)/(1 − 2a cos ω + a²) = 1/2 gives
    a = c − sqrt((1 − c)(3 − c)), c = cos(2π cutoff/rate) (the root below 1);
    for small cutoffs a ≈ 1 − 2π cutoff/rate.
    """
    c = math.cos(2.0 * math.pi * cutoff_hz / rate_hz)
    return c - math.sqrt((1.0 - c) * (3.0 - c))


# ----------------------------------------------------------------------------- fractional delay
def fractional_delay_taps(delay_samples: float, half_length: int = 24, beta: float = 8.0) -> np.ndarray:
    """Taps delaying a signal by a non-integer number of samples: a Kaiser-windowed sinc.

    The interpolator is the ideal fractional delay ``sinc(n − c)`` (Laakso et
    al., "Splitting the unit delay", IEEE Signal Processing Magazine, Jan. 1996)
    under a Kaiser window centred on the same point ``c``; it is flat and delays
    exactly, to better than 0.01 dB and 1e-3 samples, below ``0.4·fs``.

    Parameters
    ----------
    delay_samples : float
        The delay ``c`` (samples); at least ``half_length``.
    half_length : int
        Taps on each side of the centre.
    beta : float
        Kaiser window parameter.

    Returns
    -------
    numpy.ndarray
        float64 taps ``h[0 .. ceil(c + half_length)]``, sum 1.
    """
    if not delay_samples >= half_length:
        raise ValueError(f"delay_samples: must be >= half_length {half_length}, got {delay_samples!r}")
    centre = float(delay_samples)
    k = np.arange(int(np.ceil(centre + half_length)) + 1)
    arg = (k - centre) / (half_length + 1)
    window = np.i0(beta * np.sqrt(np.clip(1 - arg**2, 0.0, None))) / np.i0(beta)
    window[np.abs(arg) >= 1] = 0.0
    taps = np.sinc(k - centre) * window
    taps /= taps.sum()
    return taps
