"""Kaiser-window FIR design and frequency response in numpy alone.

The window method with Kaiser's empirical formulas (J. F. Kaiser, "Nonrecursive
digital filter design using the I0-sinh window function", Proc. IEEE ISCAS
1974; Oppenheim & Schafer, *Discrete-Time Signal Processing*, 3rd ed., §7.6):

* :func:`kaiser_order` -- length N and shape β for an attenuation A and a
  transition width (the computation of ``scipy.signal.kaiserord``);
* :func:`kaiser_fir` -- the windowed ideal low-pass or band-pass, scaled to
  unity gain at the centre of its first pass band (as ``scipy.signal.firwin``
  with ``window=("kaiser", beta)``);
* :func:`frequency_response` -- H(e^{jω}) of FIR taps on a uniform grid
  (zero-padded FFT) or at given frequencies (direct DTFT sum), as
  ``scipy.signal.freqz``.

These serve the detectors and the audio chain, so that demodulating does not
import ``scipy.signal`` (about 0.45 s of start-up: it loads ``scipy.stats``).
The tests hold each function to the scipy.signal routine it stands for.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np
import scipy.fft as sfft

from ... import checks
from ...errors import ParameterError

__all__ = ["kaiser_beta", "kaiser_length", "kaiser_order", "kaiser_fir", "frequency_response"]


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
    rate = checks.positive("rate_hz", rate_hz)
    width = checks.positive("transition_hz", transition_hz)
    if width > rate / 2:
        raise ParameterError(
            f"transition_hz: must be <= rate_hz/2 ({rate / 2:g} Hz), got {transition_hz!r}"
        )
    # Same operation order as scipy.signal.kaiserord, so ceil() agrees at the boundaries:
    # dw = pi * (width in units of the Nyquist frequency).
    width_nyq = width / (rate / 2.0)
    return int(math.ceil((a - 7.95) / 2.285 / (math.pi * width_nyq) + 1.0))


def kaiser_order(atten_db: float, width_nyquist: float) -> tuple[int, float]:
    """Kaiser window length and β for a low-pass of attenuation ``atten_db`` and a given transition.

    ``N = ceil((A − 7.95) / (2.285 · π · width) + 1)``, β from A (Kaiser 1974;
    Oppenheim & Schafer eqs. 7.62-7.63), computed in the order
    ``scipy.signal.kaiserord`` uses so that the ceiling agrees at boundaries.

    Parameters
    ----------
    atten_db : float
        Ripple/attenuation A in dB (its absolute value is used); at least 8 dB.
    width_nyquist : float
        Transition width as a fraction of the Nyquist frequency (rate/2).

    Returns
    -------
    (int, float)
        Number of taps N and the window parameter β.
    """
    a = abs(float(atten_db))
    # a transition of width·(rate/2) Hz at a rate of 2 Hz: the width itself, in units of Nyquist
    return kaiser_length(a, width_nyquist, 2.0), kaiser_beta(a)


def kaiser_fir(numtaps: int, cutoff_hz: float | Sequence[float], beta: float, rate_hz: float,
               pass_zero: bool = True) -> np.ndarray:
    """Windowed-sinc FIR with a Kaiser window: a low-pass (one cutoff) or a band-pass (two).

    The ideal response is a sum of band-pass sinc pairs
    ``h[n] = Σ_bands r·sinc(r·m) − l·sinc(l·m)``, ``m = n − (N−1)/2``, edges
    ``l, r`` in units of the Nyquist frequency (Oppenheim & Schafer §7.5),
    times the symmetric Kaiser window, scaled so the gain is exactly 1 at
    DC (low-pass) or at the centre of the pass band (band-pass), as
    ``scipy.signal.firwin(numtaps, cutoff, window=("kaiser", beta), pass_zero=..., fs=rate_hz)``.

    Parameters
    ----------
    numtaps : int
        Filter length N.
    cutoff_hz : float or pair of float
        The -6 dB edge(s), Hz: one value with ``pass_zero=True`` (low-pass), two with
        ``pass_zero=False`` (band-pass between them).
    beta : float
        Kaiser window parameter.
    rate_hz : float
        Sample rate, Hz.
    pass_zero : bool
        True for a low-pass, False for a band-pass.

    Returns
    -------
    numpy.ndarray
        float64 taps, length N.
    """
    nyq = 0.5 * float(rate_hz)
    edges = np.atleast_1d(np.asarray(cutoff_hz, dtype=np.float64)) / nyq
    if pass_zero != (edges.size == 1) or edges.size > 2 or np.any(edges <= 0.0) or np.any(edges >= 1.0):
        raise ParameterError(f"cutoff_hz: need one edge (low-pass) or two (band-pass) inside (0, {nyq:g}) Hz, "
                             f"got {cutoff_hz!r}")
    left, right = (0.0, float(edges[0])) if pass_zero else (float(edges[0]), float(edges[1]))
    m = np.arange(numtaps, dtype=np.float64) - 0.5 * (numtaps - 1)
    h = right * np.sinc(right * m) - left * np.sinc(left * m)
    h *= np.kaiser(numtaps, beta)
    centre = 0.0 if left == 0.0 else 0.5 * (left + right)
    h /= np.sum(h * np.cos(np.pi * m * centre))
    return h


def frequency_response(taps: np.ndarray, points: int | np.ndarray, rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Frequency response of FIR taps: ``(freqs_hz, H)``, as ``scipy.signal.freqz(taps, 1, worN, fs=rate_hz)``.

    With an integer ``points`` the grid is ``k·rate/(2·points)``, k = 0 .. points−1 (0 up to, not
    including, rate/2), evaluated by one zero-padded FFT of length 2·points (real taps: ``rfft``).
    With an array of frequencies (Hz, any sign) the DTFT ``Σ h[k] e^{−j2πfk/rate}`` is summed
    directly, in bounded pieces.
    """
    h = np.asarray(taps)
    fs = float(rate_hz)
    if isinstance(points, (int, np.integer)):
        n = int(points)
        freqs = np.arange(n) * (fs / (2.0 * n))
        if h.dtype.kind == "c":
            resp = sfft.fft(h, max(2 * n, h.size))[:n] if h.size <= 2 * n else _dtft(h, freqs, fs)
        else:
            resp = sfft.rfft(h, 2 * n)[:n] if h.size <= 2 * n else _dtft(h, freqs, fs)
        return freqs, resp
    freqs = np.asarray(points, dtype=np.float64)
    return freqs, _dtft(h, freqs.ravel(), fs).reshape(freqs.shape)


def _dtft(h: np.ndarray, freqs_hz: np.ndarray, rate_hz: float) -> np.ndarray:
    k = np.arange(h.size, dtype=np.float64)
    out = np.empty(freqs_hz.size, np.complex128)
    step = max(1, (1 << 20) // max(1, h.size))
    for a in range(0, freqs_hz.size, step):
        out[a : a + step] = np.exp(-2j * np.pi * np.outer(freqs_hz[a : a + step] / rate_hz, k)) @ h
    return out
