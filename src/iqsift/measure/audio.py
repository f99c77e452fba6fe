"""Audio quality with a test tone: SNR, SINAD and THD (IEEE Std 1241), receiver SINAD, weighted.

Method: IEEE Std 1241 (four-parameter sine fit; SINAD, SNR, THD); receiver SINAD (S+N+D)/(N+D) as
radio practice uses it (common practice); noise weighting by ITU-T O.41 (psophometric) or IEC 61672-1
(A-weighting), :mod:`iqsift.measure.weighting`.
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
from .sinefit import four_param_fit
from .weighting import check_weighting, weight_db

__all__ = ["AudioQualityResult", "audio_quality"]


@dataclass(frozen=True)
class AudioQualityResult(Reportable):
    """Audio quality with a test tone (report section ``audio``).

    Attributes
    ----------
    snr_db : float
        Signal over noise, harmonics excluded (IEEE 1241), dB.
    sinad_db : float
        Signal over noise-and-distortion, S/(N+D) (IEEE 1241), dB.
    thd_percent, thd_db : float
        Total harmonic distortion rss(harmonics)/rms(fundamental), % and dB.
    receiver_sinad_db : float
        (S+N+D)/(N+D) as radio receiver practice reads SINAD, dB.
    tone_hz : float
        Fitted tone frequency (Hz).
    weighting : str
        Weighting applied to signal, harmonics and noise: "none", "psophometric" or "a".
    """

    snr_db: float
    sinad_db: float
    thd_percent: float
    thd_db: float
    receiver_sinad_db: float
    tone_hz: float
    weighting: str

    SECTION: ClassVar[str] = "audio"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
        "snr_db", "sinad_db", "thd_percent", "thd_db", "receiver_sinad_db", "tone_hz", "weighting",
    )


_BH_HALF_LOBE = 4.5  # bins: the 4-term Blackman-Harris main lobe is ±4 bins wide


def audio_quality(
    x: Any,
    rate_hz: float,
    tone_hz: float | None = None,
    weighting: str = "none",
    harmonics: int = 10,
    band: tuple[float, float] | None = None,
) -> AudioQualityResult:
    """SNR, SINAD and THD of a recorded test tone (IEEE Std 1241 definitions).

    Parameters
    ----------
    x : array_like of float
        Audio record holding a steady test tone.
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float or None
        Tone frequency (Hz), used as the fit's starting point; None finds the strongest
        line in the band.
    weighting : {"none", "psophometric", "a"}
        Weighting curve (ITU-T O.41 / IEC 61672-1) applied, as a meter behind a
        weighting filter would see them, to the tone, the harmonics and the noise.
    harmonics : int, default 10
        Highest harmonic order counted in the distortion (orders 2..harmonics that fall
        inside the band and below rate/2; aliased harmonics are not folded back).
    band : (float, float) or None
        Measurement band (Hz) for noise and harmonics; None: DC excluded up to rate/2.

    Returns
    -------
    AudioQualityResult

    Notes
    -----
    1. The fundamental and the DC offset come from the IEEE 1241 four-parameter sine
       fit (started at the interpolated Blackman-Harris peak); S = A²/2 (weighted by
       the curve at the tone frequency).
    2. The fit residual (noise + distortion) is analysed in the frequency domain with a
       4-term Blackman-Harris window (harris 1978; sidelobes −92 dB, so leakage is
       known and negligible), scaled so that the bins sum to the mean power.
    3. Each harmonic's power is the sum of the bins within ±4.5 bins of h·f0 minus the
       noise expected there (the mean of the 12 bins on either side).
    4. Noise is the sum of the in-band bins outside the harmonic lobes, each weighted,
       plus the expected noise inside those lobes.
    SINAD = S/(N+D), SNR = S/N, THD = √(D/S) (IEEE 1241); receiver SINAD = (S+N+D)/(N+D).
    """
    rate = checks.positive("rate_hz", rate_hz)
    data = as_samples("x", x, np.float64, min_len=256)
    check_weighting(weighting)
    nyq = rate / 2.0
    if band is None:
        lo, hi = 0.0, nyq
    else:
        lo, hi = checks.nonnegative("band[0]", band[0]), checks.positive("band[1]", band[1])
        if not lo < hi <= nyq:
            raise ParameterError(f"band: {band!r} Hz; it needs 0 <= low < high <= rate/2 = {nyq:g} Hz")
    if int(harmonics) < 1:
        raise ParameterError(f"harmonics: {harmonics!r}; it must be an integer >= 1")
    n = data.size
    df = rate / n
    f_start = (
        interpolated_peak_hz(data, rate, max(lo, 6.0 * df), hi) if tone_hz is None else checks.positive("tone_hz", tone_hz)
    )
    f0, a, b, _, model = four_param_fit(data, rate, f_start)
    if not (lo <= f0 <= hi):
        raise ParameterError(f"tone_hz: fitted tone at {f0:g} Hz lies outside the band {lo:g}..{hi:g} Hz")

    def g(f: Any) -> Any:
        return 10.0 ** (np.asarray(weight_db(f, weighting)) / 10.0)

    signal_power = 0.5 * (a * a + b * b) * float(g(f0))

    resid = data - model
    from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
    win = _signal.windows.blackmanharris(n, sym=False)
    spec = np.fft.rfft(resid * win)
    pbin = (np.abs(spec) ** 2) / (n * np.sum(win**2))
    pbin[1 : (n + 1) // 2] *= 2.0  # one-sided: fold negative frequencies (not DC, not Nyquist)
    freqs = np.arange(pbin.size) * df
    inband = (freqs >= lo) & (freqs <= hi)
    inband[0] = False  # DC excluded
    gain = np.where(inband, g(np.where(freqs > 0, freqs, 1.0)), 0.0)

    lobes = np.zeros(pbin.size, dtype=bool)
    harmonic_list: list[tuple[float, np.ndarray]] = []
    for h in range(2, int(harmonics) + 1):
        fh = h * f0
        if fh > hi or fh >= nyq - _BH_HALF_LOBE * df:
            break
        k = np.nonzero(np.abs(freqs / df - fh / df) <= _BH_HALF_LOBE)[0]
        harmonic_list.append((fh, k))
        lobes[k] = True

    distortion = 0.0
    fill = 0.0
    for fh, k in harmonic_list:
        flank = np.r_[np.arange(k[0] - 12, k[0]), np.arange(k[-1] + 1, k[-1] + 13)]
        flank = flank[(flank > 0) & (flank < pbin.size)]
        flank = flank[~lobes[flank]]
        noise_density = float(np.mean(pbin[flank])) if flank.size else 0.0
        expected_noise = noise_density * k.size
        distortion += max(float(np.sum(pbin[k])) - expected_noise, 0.0) * float(g(fh))
        fill += float(np.sum(noise_density * gain[k]))
    noise = float(np.sum(pbin[inband & ~lobes] * gain[inband & ~lobes])) + fill

    nd = noise + distortion
    sinad = 10.0 * math.log10(signal_power / max(nd, TINY_POWER))
    return AudioQualityResult(
        snr_db=10.0 * math.log10(signal_power / max(noise, TINY_POWER)),
        sinad_db=sinad,
        thd_percent=100.0 * math.sqrt(distortion / signal_power),
        thd_db=10.0 * math.log10(max(distortion, TINY_POWER) / signal_power),
        receiver_sinad_db=10.0 * math.log10((signal_power + nd) / max(nd, TINY_POWER)),
        tone_hz=float(f0),
        weighting=weighting,
    )

