"""Published spectrum formulas the survey rests on: Welch degrees of freedom, noise-floor median bias,
the Hann window's response and Grandke's interpolation.

References: P. D. Welch, IEEE Trans. AU-15, 1967; D. B. Percival & A. T. Walden,
*Spectral Analysis for Physical Applications*, 1993; F. J. harris, Proc. IEEE 66(1),
1978; T. Grandke, IEEE Trans. IM-32(2), 1983.
"""

from __future__ import annotations

import numpy as np
import scipy.special

from ..errors import ParameterError

__all__ = ["floor_median_bias", "grandke_offset", "hann_response", "welch_dof"]


def welch_dof(window: np.ndarray, step: int, segments: int) -> float:
    """Equivalent degrees of freedom ν of a Welch (WOSA) average.

    ν = 2K / (1 + 2 Σ_{m=1}^{K−1} (1 − m/K)·ρ(m)²), ρ(m) = Σ_n w[n]·w[n + m·step] / Σ_n w[n]²
    (Welch 1967; Percival & Walden 1993). Each bin of the average is then
    distributed as (mean)·χ²_ν/ν for Gaussian noise.

    Parameters
    ----------
    window : array_like
        Window weights (length nperseg).
    step : int
        Samples between segment starts (nperseg − noverlap).
    segments : int
        Number K of segments averaged (>= 1).
    """
    w = np.asarray(window, dtype=np.float64)
    k = int(segments)
    if k < 1:
        raise ParameterError(f"segments: must be >= 1, got {segments!r}")
    if step < 1:
        raise ParameterError(f"step: must be >= 1 sample, got {step!r}")
    s2 = float(np.sum(w * w))
    acc = 0.0
    for m in range(1, k):
        lag = m * step
        if lag >= w.size:
            break
        rho = float(np.sum(w[: w.size - lag] * w[lag:])) / s2
        acc += (1.0 - m / k) * rho * rho
    return 2.0 * k / (1.0 + 2.0 * acc)


def floor_median_bias(dof: float) -> float:
    """Median of χ²_ν/ν (the median of an averaged noise bin over its mean), linear.

    A noise floor read as the median of averaged bins is divided by this to give
    the mean. ν = 2 (one periodogram) gives ln 2 = 0.693 (−1.59 dB); it tends to 1
    as ν grows (Wilson-Hilferty: about (1 − 2/(9ν))³). Exact value from
    :func:`scipy.stats.chi2.median`.
    """
    nu = float(dof)
    # = scipy.stats.chi2.median(nu) / nu: the chi-square quantile 2·P⁻¹(ν/2, q) (regularised incomplete
    # gamma inverse), the formula scipy.stats uses, without importing scipy.stats (about 1 s of start-up)
    return float(2 * scipy.special.gammaincinv(nu / 2, 0.5) / nu)


def hann_response(delta: float | np.ndarray) -> float | np.ndarray:
    """Hann window amplitude response relative to its peak, at ``delta`` bins from a tone.

    |W(δ)/W(0)| = |sinc(δ) / (1 − δ²)| (harris 1978; the periodic Hann of a long
    segment); 1 at δ = 0, 0.8488 (−1.42 dB, the scalloping loss) at δ = 0.5,
    0.5 at δ = 1, 0 at δ = 2, 3 ...
    """
    d = np.asarray(delta, dtype=np.float64)
    den = 1.0 - d * d
    near_one = np.abs(den) < 1e-9
    out = np.where(near_one, 0.5, np.sinc(d) / np.where(near_one, 1.0, den))
    out = np.abs(out)
    return float(out) if np.ndim(delta) == 0 else out


def grandke_offset(a_left: float, a_peak: float, a_right: float) -> float:
    """Offset (bins, in [−0.5, 0.5]) of a tone from the peak bin of a Hann-windowed spectrum.

    Grandke (IEEE Trans. IM-32, 1983): α = A_neighbour/A_peak with the larger of
    the two neighbours, δ = ±(2α − 1)/(α + 1), towards that neighbour. Inputs are
    amplitudes (square roots of noise-subtracted powers), >= 0.
    """
    if not (a_peak > 0.0):
        return 0.0
    if a_right >= a_left:
        alpha, sign = a_right / a_peak, 1.0
    else:
        alpha, sign = a_left / a_peak, -1.0
    alpha = min(max(alpha, 0.0), 1.0)
    delta = sign * (2.0 * alpha - 1.0) / (alpha + 1.0)
    return float(min(max(delta, -0.5), 0.5))
