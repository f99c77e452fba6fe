"""AM modulation depth from the envelope, and first-order sideband levels.

Definitions from S. Haykin, *Communication Systems* (4th ed.), amplitude modulation:
m = (Emax − Emin)/(Emax + Emin), positive (Emax − Ec)/Ec, negative (Ec − Emin)/Ec, Ec the mean
envelope; for single-tone AM of depth m each first-order sideband lies 20·log10(m/2) dB below the
carrier.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from .. import checks
from ..errors import ParameterError
from .peaks import interpolated_peak_hz
from .results import Reportable
from .samples import TINY_POWER, as_samples
from .sinefit import LS_CHUNK, chunked_lstsq, four_param_fit

__all__ = ["ModulationResult", "measure_depth", "sideband_levels_dbc"]


@dataclass(frozen=True)
class ModulationResult(Reportable):
    """AM modulation depth (report section ``modulation``).

    Attributes
    ----------
    depth_percent : float
        100·(Emax − Emin)/(Emax + Emin) (Haykin).
    depth_positive_percent : float
        100·(Emax − Ec)/Ec.
    depth_negative_percent : float
        100·(Ec − Emin)/Ec.
    tone_hz : float or None
        Dominant modulating frequency (Hz); None for program material (no dominant tone).
    carrier_level : float
        Ec, the mean envelope (same unit as the envelope).
    method : str
        ``"tone-fit"`` or ``"cycle-peaks"`` (see :func:`measure_depth`).
    """

    depth_percent: float
    depth_positive_percent: float
    depth_negative_percent: float
    tone_hz: float | None
    carrier_level: float
    method: str

    SECTION: ClassVar[str] = "modulation"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
        "depth_percent", "depth_positive_percent", "depth_negative_percent", "tone_hz", "method",
    )


def _harmonic_design(t: np.ndarray, freq_hz: float, orders: int) -> np.ndarray:
    cols = [np.ones_like(t)]
    for h in range(1, orders + 1):
        arg = 2.0 * np.pi * h * freq_hz * t
        cols.append(np.cos(arg))
        cols.append(np.sin(arg))
    return np.column_stack(cols)


def measure_depth(
    envelope: Any,
    rate_hz: float,
    *,
    tone_hz: float | None = None,
    method: str = "auto",
    audio_band_hz: tuple[float, float] = (30.0, 4000.0),
    harmonics: int = 10,
) -> ModulationResult:
    """Modulation depth of full-carrier AM from its envelope.

    Parameters
    ----------
    envelope : array_like of float
        Envelope |z| of the filtered channel (any linear amplitude unit), ideally
        without the filter's start-up transient.
    rate_hz : float
        Sample rate of the envelope (samples/s).
    tone_hz : float or None
        Modulating frequency if known (Hz); None finds the dominant one.
    method : {"auto", "tone-fit", "cycle-peaks"}
        ``"tone-fit"``: least-squares fit of DC plus the tone and its harmonics (up to
        ``harmonics`` and the band top) at the tone frequency refined by the IEEE 1241
        four-parameter sine fit; Emax and Emin are the extremes of the fitted
        waveform over one period. Noise averages out over the whole record instead of
        riding on the peaks.
        ``"cycle-peaks"``: the envelope is low-passed to the audio band (zero-phase
        windowed-sinc FIR), interpolated (scipy.signal.resample_poly) to at least 64
        samples a cycle, cut into cycles of the dominant frequency, and Emax/Emin are
        the medians of the per-cycle maxima/minima: a spike touches only the few
        cycles it falls in. Noise riding on the peaks biases this method outward a
        little (about half the envelope noise rms).
        ``"auto"``: tone-fit when the fit explains at least half of the audio-band
        envelope variance (a steady test tone), else cycle-peaks.
        Before either method, impulsive spikes are blanked: samples whose residual from
        the harmonic fit exceeds 6 robust standard deviations (σ = 1.4826·MAD) are
        replaced by linear interpolation between their neighbours (a noise blanker,
        common practice), so they move neither the extremes nor Ec.
    audio_band_hz : (float, float)
        Band (Hz) in which the modulating frequency is sought; the top is also the
        low-pass edge and the highest harmonic fitted.
    harmonics : int
        Highest harmonic order used by the tone fit.

    Returns
    -------
    ModulationResult

    Notes
    -----
    Definitions from S. Haykin, *Communication Systems*: m = (Emax − Emin)/(Emax + Emin);
    positive peak (Emax − Ec)/Ec; negative peak (Ec − Emin)/Ec, with Ec the carrier
    level, taken as the mean envelope.
    """
    rate = checks.positive("rate_hz", rate_hz)
    e = as_samples("envelope", envelope, np.float64, min_len=64)
    if method not in ("auto", "tone-fit", "cycle-peaks"):
        raise ParameterError(f"method: {method!r} is not known; it must be 'auto', 'tone-fit' or 'cycle-peaks'")
    lo, hi = (checks.nonnegative("audio_band_hz[0]", audio_band_hz[0]), checks.positive("audio_band_hz[1]", audio_band_hz[1]))
    hi = min(hi, 0.5 * rate)
    if lo >= hi:
        raise ParameterError(f"audio_band_hz: {audio_band_hz!r} is empty at {rate:g} samples/s; it needs low < high <= rate/2")
    if int(harmonics) < 1:
        raise ParameterError(f"harmonics: {harmonics!r}; it must be an integer >= 1")
    if float(np.mean(e)) <= 0.0:
        raise ParameterError(f"envelope: mean {float(np.mean(e)):g}; an AM envelope must have a positive mean (the carrier)")
    n = e.size
    floor_hz = max(lo, 6.0 * rate / n)
    if tone_hz is None:
        f0 = interpolated_peak_hz(e, rate, floor_hz, hi)
    else:
        f0 = checks.positive("tone_hz", tone_hz)
    f0 = four_param_fit(e, rate, f0)[0]
    if not (0.0 < f0 < 0.5 * rate):
        raise ParameterError(f"tone_hz: fitted {f0:g} Hz lies outside 0..{rate / 2:g} Hz")
    if n * f0 / rate < 2.0:
        raise ParameterError(f"envelope: {n} samples hold {n * f0 / rate:.2f} cycles of {f0:g} Hz; at least 2 are needed")

    # harmonic least-squares fit; samples far off it (impulsive spikes) are blanked and
    # bridged by linear interpolation, then the fit is repeated on the cleaned envelope
    orders = max(1, min(int(harmonics), int(hi // f0)))

    def columns(start: int, stop: int) -> np.ndarray:
        return _harmonic_design((np.arange(start, stop) - (n - 1) / 2.0) / rate, f0, orders)

    def model(c: np.ndarray) -> np.ndarray:
        out = np.empty(n)
        for start in range(0, n, LS_CHUNK):
            stop = min(n, start + LS_CHUNK)
            out[start:stop] = columns(start, stop) @ c
        return out

    coef = chunked_lstsq(columns, e)
    resid = e - model(coef)
    sigma = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    # a floor for the spread: on a clean (float) capture the residual is ~1e-7 of the carrier and tiny
    # numerical steps would otherwise count as "spikes"; nothing below 1e-3 of the carrier is a spike
    sigma = max(sigma, 1e-3 * abs(float(coef[0])) / 6.0)
    bad = np.abs(resid) > 6.0 * sigma if sigma > 0.0 else np.zeros(n, dtype=bool)
    del resid
    if np.any(bad) and np.count_nonzero(~bad) > 4 * (2 * orders + 1):
        # blanked samples are filled from the harmonic model (not straight lines, which shave peaks)
        idx = np.nonzero(bad)[0]
        e = e.copy()
        filled = np.empty(idx.size)
        for start in range(0, idx.size, LS_CHUNK):
            part = idx[start:start + LS_CHUNK]
            filled[start:start + part.size] = _harmonic_design((part - (n - 1) / 2.0) / rate, f0, orders) @ coef
        e[idx] = filled
        coef = chunked_lstsq(columns, e)
    ec = float(np.mean(e))
    lp = _lowpass_zero_phase(e, rate, hi)
    ac_var = float(np.var(lp))
    fit_var = 0.5 * float(np.sum(coef[1:] ** 2))  # power of the fitted harmonics
    explained = fit_var / ac_var if ac_var > 0 else 0.0
    chosen = method if method != "auto" else ("tone-fit" if explained >= 0.5 else "cycle-peaks")

    if chosen == "tone-fit":
        phase = np.linspace(0.0, 1.0 / f0, 4096, endpoint=False)
        wave = _harmonic_design(phase, f0, orders) @ coef
        emax, emin = float(wave.max()), float(wave.min())
    else:
        emax, emin = _cycle_extremes(lp, rate, f0, _lowpass_numtaps(rate, hi) // 2)
    return ModulationResult(
        depth_percent=100.0 * (emax - emin) / (emax + emin),
        depth_positive_percent=100.0 * (emax - ec) / ec,
        depth_negative_percent=100.0 * (ec - emin) / ec,
        tone_hz=float(f0),
        carrier_level=ec,
        method=chosen,
    )


def _cycle_extremes(lp: np.ndarray, rate_hz: float, f0: float, edge: int) -> tuple[float, float]:
    """Medians of the per-cycle maxima and minima of a low-passed envelope.

    The record (less ``edge`` samples at each end, the filter's start-up) is taken in
    chunks; each chunk is interpolated (scipy.signal.resample_poly, band-limited) to at
    least 64 samples a cycle so sampling does not clip the peaks, then cut into
    consecutive windows one period long, each holding one maximum and one minimum.
    """
    up = int(min(16, max(1, math.ceil(64.0 * f0 / rate_hz))))
    cycle_up = max(4, int(round(up * rate_hz / f0)))
    n = lp.size
    if n - 2 * edge < 2 * cycle_up / up:
        edge = 0
    pad = 32  # resample_poly's filter reaches about 10 input samples either side
    chunk = max(1 << 14, int(math.ceil(8 * cycle_up / up)))
    maxima: list[np.ndarray] = []
    minima: list[np.ndarray] = []
    for start in range(edge, n - edge, chunk):
        stop = min(n - edge, start + chunk)
        lo, hi = max(0, start - pad), min(n, stop + pad)
        piece = lp[lo:hi]
        from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
        fine = _signal.resample_poly(piece - piece.mean(), up, 1) + piece.mean() if up > 1 else piece
        fine = fine[(start - lo) * up : (stop - lo) * up]
        ncyc = fine.size // cycle_up
        if ncyc == 0:
            continue
        cycles = fine[: ncyc * cycle_up].reshape(ncyc, cycle_up)
        maxima.append(cycles.max(axis=1))
        minima.append(cycles.min(axis=1))
    if not maxima:
        raise ParameterError(f"envelope: {n} samples hold no whole cycle of {f0:g} Hz after the filter edges")
    return float(np.median(np.concatenate(maxima))), float(np.median(np.concatenate(minima)))


def _lowpass_numtaps(rate_hz: float, cutoff_hz: float) -> int:
    # transition width 10 % of the cutoff (at least 1 % of the rate); Kaiser 60 dB
    width = max(0.1 * cutoff_hz, 0.01 * rate_hz)
    from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
    numtaps, _ = _signal.kaiserord(60.0, width / (0.5 * rate_hz))
    return int(numtaps) | 1


def _lowpass_zero_phase(x: np.ndarray, rate_hz: float, cutoff_hz: float) -> np.ndarray:
    """Zero-phase low-pass: odd-length linear-phase FIR applied centred (mode 'same').

    The mean is taken out before filtering and put back after, so the zero padding at
    the ends does not pull the edges towards 0.
    """
    mean = float(np.mean(x))
    if cutoff_hz >= 0.45 * rate_hz:
        return x.copy()
    numtaps = _lowpass_numtaps(rate_hz, cutoff_hz)
    width = max(0.1 * cutoff_hz, 0.01 * rate_hz)
    from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
    _, beta = _signal.kaiserord(60.0, width / (0.5 * rate_hz))
    taps = _signal.firwin(numtaps, cutoff_hz + width / 2.0, window=("kaiser", beta), fs=rate_hz)
    return _signal.fftconvolve(x - mean, taps, mode="same") + mean


def sideband_levels_dbc(
    z: Any, rate_hz: float, tone_hz: float, carrier_hz: float | None = None
) -> tuple[float, float]:
    """Lower and upper first-order sideband levels relative to the carrier (dBc).

    Parameters
    ----------
    z : array_like of complex
        Complex baseband holding the AM signal.
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float
        Modulating frequency (Hz): the sidebands are read at carrier ± tone.
    carrier_hz : float or None
        Carrier frequency (Hz); None takes the strongest line.

    Returns
    -------
    (lower_dbc, upper_dbc) : tuple of float
        For single-tone AM of depth m both are 20·log10(m/2) dBc (Haykin).

    Notes
    -----
    One FFT over the whole record with a flat-top window (scipy.signal.windows.flattop,
    scalloping loss below 0.02 dB, so the peak bin reads the line amplitude); each line
    is the largest bin within ±2 bins of where it should be. The tone must lie at least
    8 bins (8·rate/N Hz) from the carrier for the flat-top main lobes to separate.
    """
    rate = checks.positive("rate_hz", rate_hz)
    x = as_samples("z", z, np.complex128, min_len=64)
    fm = checks.positive("tone_hz", tone_hz)
    n = x.size
    df = rate / n
    if fm < 8.0 * df:
        raise ParameterError(
            f"tone_hz: {fm:g} Hz is closer than 8 bins ({8 * df:g} Hz) to the carrier for a {n}-sample record; use a longer record"
        )
    from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
    w = _signal.windows.flattop(n, sym=False)
    amp = np.abs(np.fft.fft(x * w)) / np.sum(w)

    def line(f_hz: float) -> tuple[float, int]:
        k = int(round(f_hz / df))
        ks = np.arange(k - 2, k + 3) % n
        j = int(ks[np.argmax(amp[ks])])
        return float(amp[j]), j

    if carrier_hz is None:
        kc = int(np.argmax(amp))
    else:
        _, kc = line(checks.finite("carrier_hz", carrier_hz))
    fc = (kc if kc < n // 2 else kc - n) * df
    a_c = float(amp[kc])
    a_lo, _ = line(fc - fm)
    a_hi, _ = line(fc + fm)
    return 20.0 * math.log10(max(a_lo, TINY_POWER) / a_c), 20.0 * math.log10(max(a_hi, TINY_POWER) / a_c)

