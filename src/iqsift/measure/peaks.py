"""Where a spectral line lies, finer than an FFT bin: zero-padded FFT and quadratic peak interpolation."""

from __future__ import annotations

import math

import numpy as np

from ..errors import ParameterError
from .samples import TINY_POWER

__all__ = ["next_pow2", "parabolic_vertex", "interpolated_peak_hz"]


def next_pow2(n: int) -> int:
    """The smallest power of two >= ``n`` (1 for n <= 1)."""
    return 1 << max(0, int(math.ceil(math.log2(max(1, n)))))


def parabolic_vertex(ym1: float, y0: float, yp1: float) -> tuple[float, float]:
    """Vertex (offset in bins, value) of the parabola through three equally spaced points.

    Quadratic interpolation of a spectral peak (Smith & Serra 1987); on log power it is
    exact for a Gaussian main lobe and very nearly so for a zero-padded Hann lobe.
    """
    den = ym1 - 2.0 * y0 + yp1
    if den >= 0.0 or not math.isfinite(den):
        return 0.0, y0
    delta = 0.5 * (ym1 - yp1) / den
    delta = max(-1.0, min(1.0, delta))
    return delta, y0 - 0.25 * (ym1 - yp1) * delta


def interpolated_peak_hz(x: np.ndarray, rate_hz: float, lo_hz: float, hi_hz: float) -> float:
    """Frequency (Hz) of the largest spectral line of real ``x`` between ``lo_hz`` and ``hi_hz``.

    4-term Blackman-Harris window (harris 1978), FFT zero-padded to at least twice the
    length, quadratic interpolation of the log power around the peak bin.
    """
    n = x.size
    nfft = next_pow2(2 * n)
    from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
    w = _signal.windows.blackmanharris(n, sym=False)
    p = np.abs(np.fft.rfft((x - x.mean()) * w, nfft)) ** 2
    f = np.arange(p.size) * rate_hz / nfft
    sel = np.nonzero((f >= lo_hz) & (f <= hi_hz))[0]
    if sel.size == 0:
        raise ParameterError(f"band: {lo_hz:g}..{hi_hz:g} Hz holds no FFT bin at {rate_hz:g} samples/s; widen it")
    k = int(sel[np.argmax(p[sel])])
    if 0 < k < p.size - 1:
        lp = np.log(np.maximum(p[k - 1 : k + 2], TINY_POWER))
        delta, _ = parabolic_vertex(lp[0], lp[1], lp[2])
    else:
        delta = 0.0
    return (k + delta) * rate_hz / nfft
