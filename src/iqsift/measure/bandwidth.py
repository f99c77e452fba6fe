"""Occupied and x-dB bandwidth of a spectrum (ITU Radio Regulations No. 1.153, ITU-R SM.328)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from .. import checks
from ..errors import ParameterError
from .results import Reportable
from .samples import TINY_POWER, as_samples

__all__ = ["BandwidthResult", "occupied_bandwidth", "x_db_bandwidth", "measure_bandwidth"]


def _check_spectrum(freqs_hz: Any, psd: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    f = as_samples("freqs_hz", freqs_hz, np.float64, min_len=2)
    p = as_samples("psd", psd, np.float64, min_len=2)
    if f.size != p.size:
        raise ParameterError(f"psd: {p.size} values for {f.size} frequencies; the lengths must match")
    if np.any(np.diff(f) <= 0.0):
        raise ParameterError("freqs_hz: not strictly increasing; sort the spectrum (e.g. numpy.fft.fftshift) first")
    if np.any(p < 0.0):
        raise ParameterError("psd: negative values; it must be a power spectrum (linear power per bin)")
    if not np.any(p > 0.0):
        raise ParameterError("psd: all zero; there is no power to measure")
    mid = 0.5 * (f[1:] + f[:-1])
    edges = np.concatenate([[f[0] - (mid[0] - f[0])], mid, [f[-1] + (f[-1] - mid[-1])]])
    return f, p, edges


def occupied_bandwidth(freqs_hz: Any, psd: Any, fraction: float = 0.99) -> tuple[float, float, float]:
    """Occupied bandwidth: the band holding ``fraction`` of the power, the rest split evenly outside.

    Parameters
    ----------
    freqs_hz : array_like
        Bin centre frequencies (Hz), strictly increasing.
    psd : array_like
        Power per bin (linear; a density on uniform bins works the same).
    fraction : float, default 0.99
        Power fraction inside the band (ITU: β/2 = 0.5 % below and above).

    Returns
    -------
    (bw_hz, lo_hz, hi_hz) : tuple of float

    Notes
    -----
    ITU Radio Regulations No. 1.153 and ITU-R SM.328: the lower edge has (1 − fraction)/2
    of the total mean power below it, the upper edge as much above it. Each bin's power
    is taken as spread evenly over the bin (edges halfway between centres), so the
    edges are interpolated inside bins rather than snapped to them.
    """
    frac = checks.finite("fraction", fraction)
    if not 0.0 < frac < 1.0:
        raise ParameterError(f"fraction: {fraction!r}; it must lie strictly between 0 and 1")
    _, p, edges = _check_spectrum(freqs_hz, psd)
    cum = np.concatenate([[0.0], np.cumsum(p)])
    total = cum[-1]
    tail = 0.5 * (1.0 - frac) * total

    def locate(target: float) -> float:
        j = int(np.searchsorted(cum, target, side="left"))
        j = min(max(j, 1), p.size)
        i = j - 1
        while p[i] <= 0.0 and i > 0:  # cannot happen for cum[i] < target <= cum[j], kept for safety
            i -= 1
        share = (target - cum[i]) / p[i] if p[i] > 0 else 0.0
        return float(edges[i] + min(max(share, 0.0), 1.0) * (edges[i + 1] - edges[i]))

    lo = locate(tail)
    hi = locate(total - tail)
    return hi - lo, lo, hi


def x_db_bandwidth(freqs_hz: Any, psd: Any, x_db: float = 26.0) -> tuple[float, float, float]:
    """x-dB bandwidth: between the outermost points where the spectrum is x dB below its peak.

    Parameters
    ----------
    freqs_hz : array_like
        Bin centre frequencies (Hz), strictly increasing.
    psd : array_like
        Power per bin (linear).
    x_db : float, default 26.0
        Level below the reference (the spectrum's peak), dB.

    Returns
    -------
    (bw_hz, lo_hz, hi_hz) : tuple of float

    Notes
    -----
    ITU-R SM.328 (x-dB bandwidth): beyond the band every discrete component and the
    continuous density lie at least x dB below the 0 dB reference, here the peak bin.
    The outermost bins at or above the threshold are found, and each edge is placed by
    linear interpolation in dB between that bin and its outer neighbour. If the
    spectrum never falls x dB below the peak at an end, that end's bin centre is used.
    """
    x = checks.positive("x_db", x_db)
    f, p, _ = _check_spectrum(freqs_hz, psd)
    level = 10.0 * np.log10(np.maximum(p, TINY_POWER))
    thr = float(level.max()) - x
    above = np.nonzero(level >= thr)[0]
    i_lo, i_hi = int(above[0]), int(above[-1])

    def cross(i_in: int, i_out: int) -> float:
        l_in, l_out = level[i_in], level[i_out]
        share = (l_in - thr) / (l_in - l_out) if l_in > l_out else 0.0
        return float(f[i_in] + share * (f[i_out] - f[i_in]))

    lo = cross(i_lo, i_lo - 1) if i_lo > 0 else float(f[0])
    hi = cross(i_hi, i_hi + 1) if i_hi < f.size - 1 else float(f[-1])
    return hi - lo, lo, hi


@dataclass(frozen=True)
class BandwidthResult(Reportable):
    """Occupied and x-dB bandwidths (report section ``bandwidth``); edges in Hz on the input axis."""

    occupied_hz: float
    occupied_lo_hz: float
    occupied_hi_hz: float
    x_db_hz: float
    x_db: float
    x_db_lo_hz: float
    x_db_hi_hz: float
    fraction: float

    SECTION: ClassVar[str] = "bandwidth"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
        "occupied_hz", "x_db_hz", "x_db", "occupied_lo_hz", "occupied_hi_hz", "x_db_lo_hz", "x_db_hi_hz", "fraction",
    )


def measure_bandwidth(freqs_hz: Any, psd: Any, fraction: float = 0.99, x_db: float = 26.0) -> BandwidthResult:
    """Both ITU-R SM.328 bandwidths of one spectrum (see :func:`occupied_bandwidth`, :func:`x_db_bandwidth`)."""
    bw, lo, hi = occupied_bandwidth(freqs_hz, psd, fraction)
    xbw, xlo, xhi = x_db_bandwidth(freqs_hz, psd, x_db)
    return BandwidthResult(bw, lo, hi, xbw, float(x_db), xlo, xhi, float(fraction))

