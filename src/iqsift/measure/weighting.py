"""Noise-weighting curves for audio measurements: ITU-T O.41 psophometric and IEC 61672-1 A-weighting.

A weighting curve gives the gain (dB) a meter's weighting filter applies at each frequency; the audio
quality figures apply it to the tone, the harmonics and the noise (:func:`iqsift.measure.audio_quality`).
"""

from __future__ import annotations

from typing import Any, Literal, get_args

import numpy as np

from ..errors import ParameterError
from .samples import TINY_POWER

__all__ = ["Weighting", "WEIGHTINGS", "check_weighting", "psophometric_weight_db", "a_weight_db", "weight_db"]

Weighting = Literal["none", "psophometric", "a"]
"""A weighting curve's name: none (flat, 0 dB), psophometric (ITU-T O.41) or a (IEC 61672-1)."""

WEIGHTINGS: tuple[Weighting, ...] = get_args(Weighting)
"""Every weighting name."""


def check_weighting(weighting: Any) -> Weighting:
    """``weighting`` if it names a curve of :data:`WEIGHTINGS`, else :class:`~iqsift.errors.ParameterError`."""
    if weighting not in WEIGHTINGS:
        raise ParameterError(f"weighting: {weighting!r} is not known; it must be 'none', 'psophometric' or 'a'")
    return weighting


# Psophometric weighting, ITU-T O.41 (0 dB at 800 Hz), dB. Values as listed in the project's
# REFERENCES.md (read there in a secondary copy of the O.41 table); 16.66 Hz −85 dB from a
# secondary description of O.41 (memory-grade). Between points: linear in dB against
# log-frequency (a tabulated interpolation, not the standard's network).
_O41_TABLE = np.array(
    [
        (16.66, -85.0), (50.0, -63.0), (100.0, -41.0), (200.0, -21.0), (300.0, -10.6), (400.0, -6.3),
        (500.0, -3.6), (600.0, -2.0), (700.0, -0.9), (800.0, 0.0), (900.0, 0.6), (1000.0, 1.0),
        (1200.0, 0.0), (1400.0, -0.9), (1600.0, -1.7), (1800.0, -2.4), (2000.0, -3.0), (2500.0, -4.2),
        (3000.0, -5.6), (3500.0, -8.5), (4000.0, -15.0), (4500.0, -25.0), (5000.0, -36.0), (6000.0, -43.0),
    ]
)


def psophometric_weight_db(f_hz: Any) -> Any:
    """Psophometric weighting (dB) after ITU-T O.41, 0 dB at 800 Hz.

    Parameters
    ----------
    f_hz : float or array_like
        Frequency (Hz).

    Returns
    -------
    float or ndarray
        Weight (dB). Interpolated linearly in dB against log-frequency between the
        tabulated points of O.41 (16.66 Hz to 6 kHz); outside the table the end
        segments' slopes are extended; f <= 0 gives −inf.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    lf = np.log10(np.maximum(f, TINY_POWER))
    tf, tw = np.log10(_O41_TABLE[:, 0]), _O41_TABLE[:, 1]
    out = np.interp(lf, tf, tw)
    lo_slope = (tw[1] - tw[0]) / (tf[1] - tf[0])
    hi_slope = (tw[-1] - tw[-2]) / (tf[-1] - tf[-2])
    out = np.where(lf < tf[0], tw[0] + lo_slope * (lf - tf[0]), out)
    out = np.where(lf > tf[-1], tw[-1] + hi_slope * (lf - tf[-1]), out)
    out = np.where(f > 0.0, out, -np.inf)
    return float(out) if out.ndim == 0 else out


def a_weight_db(f_hz: Any) -> Any:
    """A-weighting (dB) from the closed form of IEC 61672-1.

    A(f) = 20·log10[12194²·f⁴ / ((f² + 20.6²)·√((f² + 107.7²)(f² + 737.9²))·(f² + 12194²))] + 2.00 dB.

    Parameters
    ----------
    f_hz : float or array_like
        Frequency (Hz).

    Returns
    -------
    float or ndarray
        Weight (dB); f <= 0 gives −inf.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    f2 = f * f
    with np.errstate(divide="ignore", invalid="ignore"):
        ra = (12194.0**2 * f2**2) / (
            (f2 + 20.6**2) * np.sqrt((f2 + 107.7**2) * (f2 + 737.9**2)) * (f2 + 12194.0**2)
        )
        out = np.where(f > 0.0, 20.0 * np.log10(np.maximum(ra, TINY_POWER)) + 2.00, -np.inf)
    return float(out) if out.ndim == 0 else out



def weight_db(f_hz: Any, weighting: str) -> Any:
    """Weighting curve by name: ``"none"`` (0 dB), ``"psophometric"`` (ITU-T O.41) or ``"a"`` (IEC 61672-1)."""
    name = check_weighting(weighting)
    if name == "psophometric":
        return psophometric_weight_db(f_hz)
    if name == "a":
        return a_weight_db(f_hz)
    f = np.asarray(f_hz, dtype=np.float64)
    out = np.zeros_like(f)
    return float(out) if out.ndim == 0 else out
