"""Least-squares sine fitting with bounded memory: the IEEE Std 1241 four-parameter fit.

:func:`sine_fit` fits x ≈ A·cos(2π·f·t + φ) + C to a record (IEEE Std 1241, four-parameter fit by
Gauss-Newton); the modulation and audio-quality measurements start from it. The normal equations are
summed over chunks of samples (:func:`chunked_lstsq`), so memory stays bounded whatever the record
length.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import checks
from .peaks import interpolated_peak_hz
from .samples import as_samples

__all__ = ["SineFitResult", "sine_fit", "four_param_fit", "chunked_lstsq", "LS_CHUNK"]


LS_CHUNK = 1 << 16
"""Samples per chunk of the design matrix in :func:`chunked_lstsq`."""


def chunked_lstsq(make_columns: Any, y: np.ndarray, keep: np.ndarray | None = None) -> np.ndarray:
    """Least squares through normal equations summed over chunks of samples.

    ``make_columns(start, stop)`` returns the design rows for samples start..stop-1; the
    memory used is one chunk of the design matrix whatever the record length. The
    columns used here (a constant, harmonics over many cycles, a centred and scaled
    time ramp) are close to orthogonal, so forming AᵀA loses no useful precision.
    """
    ata: Any = None
    aty: Any = None
    for start in range(0, y.size, LS_CHUNK):
        stop = min(y.size, start + LS_CHUNK)
        a = make_columns(start, stop)
        yy = y[start:stop]
        if keep is not None:
            k = keep[start:stop]
            a, yy = a[k], yy[k]
        ata = a.T @ a if ata is None else ata + a.T @ a
        aty = a.T @ yy if aty is None else aty + a.T @ yy
    coef, *_ = np.linalg.lstsq(ata, aty, rcond=None)
    return coef



@dataclass(frozen=True)
class SineFitResult:
    """IEEE 1241 four-parameter sine fit: x ≈ amplitude·cos(2π·f·t + phase) + offset.

    Attributes
    ----------
    frequency_hz, amplitude, phase_rad, offset : float
        Fitted parameters; ``t`` is measured from the record's centre.
    residual_rms : float
        rms of x minus the fitted sine (noise + distortion), same unit as x.
    """

    frequency_hz: float
    amplitude: float
    phase_rad: float
    offset: float
    residual_rms: float


def four_param_fit(
    x: np.ndarray, rate_hz: float, f_init: float, max_iter: int = 30
) -> tuple[float, float, float, float, np.ndarray]:
    """Four-parameter sine fit (IEEE Std 1241, 4.1.4.3 (memory for the clause number)).

    Returns (frequency, a, b, c, model) with model = a·cos(ωt) + b·sin(ωt) + c, t measured
    from the record's centre. Gauss-Newton as the standard describes it: at each step
    the columns cos, sin, 1 and t·(−a·sin + b·cos) are solved by least squares and ω is
    corrected by the fourth coefficient; a final three-parameter fit at the converged ω
    gives a, b, c. Normal equations are summed over chunks (bounded memory).
    """
    n = x.size
    half = (n - 1) / 2.0
    span = max(n - 1, 1) / rate_hz

    def times(start: int, stop: int) -> np.ndarray:
        return (np.arange(start, stop) - half) / rate_hz

    def three(w: float) -> np.ndarray:
        def cols(start: int, stop: int) -> np.ndarray:
            t = times(start, stop)
            return np.column_stack([np.cos(w * t), np.sin(w * t), np.ones(t.size)])

        return chunked_lstsq(cols, x)

    w = 2.0 * np.pi * f_init
    a, b, c = three(w)
    for _ in range(max_iter):

        def cols4(start: int, stop: int, w: float = w, a: float = a, b: float = b) -> np.ndarray:
            t = times(start, stop)
            cw, sw = np.cos(w * t), np.sin(w * t)
            return np.column_stack([cw, sw, np.ones(t.size), (t / span) * (-a * sw + b * cw)])

        a, b, c, dw = chunked_lstsq(cols4, x)
        dw = float(dw) / span
        # a step beyond a quarter of a resolution bin means a wrong start or no tone: clamp it
        dw = float(np.clip(dw, -0.5 * np.pi / span, 0.5 * np.pi / span))
        w += dw
        if abs(dw) * span < 1e-9:
            break
    a, b, c = three(w)
    t = times(0, n)
    model = a * np.cos(w * t) + b * np.sin(w * t) + c
    return w / (2.0 * np.pi), float(a), float(b), float(c), model


def sine_fit(x: Any, rate_hz: float, tone_hz: float | None = None) -> SineFitResult:
    """Four-parameter least-squares sine fit (IEEE Std 1241).

    Parameters
    ----------
    x : array_like of float
        Record (real).
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float or None
        Starting frequency (Hz); None takes the interpolated peak of a Blackman-Harris
        spectrum.

    Returns
    -------
    SineFitResult
    """
    rate = checks.positive("rate_hz", rate_hz)
    data = as_samples("x", x, np.float64, min_len=16)
    f0 = interpolated_peak_hz(data, rate, 0.0, rate / 2.0) if tone_hz is None else checks.positive("tone_hz", tone_hz)
    f, a, b, c, model = four_param_fit(data, rate, f0)
    return SineFitResult(
        frequency_hz=float(f),
        amplitude=float(math.hypot(a, b)),
        phase_rad=float(math.atan2(-b, a)),
        offset=float(c),
        residual_rms=float(np.sqrt(np.mean((data - model) ** 2))),
    )

