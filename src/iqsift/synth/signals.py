"""One-shot test-bench signals: tone messages, AM/DSB/SSB signals, white noise and fading gains as arrays.

These are the same formulas the scenarios use (the tone messages, the one-sided
band-pass analytic signal and the Clarke fading model are shared with
:mod:`iqsift.synth.sources`), offered for tests that build signals directly.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np
from scipy import signal as _signal

from ..errors import ParameterError
from .sources import PASS_FRACTION, ToneMessage, band_fir, clarke_fading, message_transition_hz, rate_ratio

__all__ = [
    "tone_message",
    "multitone_message",
    "am_signal",
    "dsb_signal",
    "ssb_signal",
    "ssb_tones",
    "analytic_message",
    "awgn",
    "fading_gain",
]


def tone_message(freq_hz: float, rate_hz: float, n: int, *, amplitude: float = 1.0, phase_deg: float = 0.0,
                 start: int = 0) -> np.ndarray:
    """``amplitude cos(2 pi freq_hz k / rate_hz + phase)`` for k = start .. start + n - 1 (float64)."""
    return multitone_message([freq_hz], rate_hz, n, amplitudes=[amplitude], phases_deg=[phase_deg],
                             normalise=False, start=start)


def multitone_message(freqs_hz: Sequence[float], rate_hz: float, n: int, *,
                      amplitudes: Sequence[float] | None = None, phases_deg: Sequence[float] | None = None,
                      normalise: bool = True, start: int = 0) -> np.ndarray:
    """Sum of cosines (float64); with ``normalise`` the amplitudes are scaled so ``sum(|a|) = 1`` (peak 1).

    This is exactly the ``tones`` message of a scenario.
    """
    rec = _tone_record(freqs_hz, amplitudes, phases_deg, normalise)
    return ToneMessage(rec, rate_hz).real(int(start), int(start) + int(n))


def _carrier(n: int, carrier_hz: float, rate_hz: float | None, phase_deg: float) -> np.ndarray | complex:
    if carrier_hz == 0:
        return complex(np.exp(1j * math.radians(phase_deg)))
    if not rate_hz:
        raise ParameterError("rate_hz: needed when carrier_hz is not 0")
    cycles = carrier_hz * np.arange(n, dtype=np.float64) / rate_hz
    cycles -= np.floor(cycles)
    return np.exp(1j * (2 * np.pi * cycles + math.radians(phase_deg)))


def am_signal(message: np.ndarray, depth: float, *, level_dbfs: float = 0.0, carrier_hz: float = 0.0,
              rate_hz: float | None = None, phase_deg: float = 0.0) -> np.ndarray:
    """Full-carrier AM ``A (1 + depth msg) exp(j(2 pi carrier_hz t + phase))`` (Haykin ch. 3), complex64.

    ``level_dbfs`` is the carrier power (A = 10^(level/20)); ``message`` is
    used as given (peak 1 makes ``depth`` the modulation depth).
    """
    msg = np.asarray(message, dtype=np.float64)
    a = 10 ** (level_dbfs / 20)
    return (a * (1 + depth * msg) * _carrier(msg.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def dsb_signal(message: np.ndarray, *, level_dbfs: float = 0.0, carrier_hz: float = 0.0,
               rate_hz: float | None = None, phase_deg: float = 0.0) -> np.ndarray:
    """Suppressed-carrier DSB ``A msg exp(j...)`` scaled to average power ``level_dbfs`` (complex64)."""
    msg = np.asarray(message, dtype=np.float64)
    power = float(np.mean(msg ** 2)) if msg.size else 0.0
    if power <= 0:
        raise ParameterError("message: is silent (zero power); cannot set a DSB level")
    a = math.sqrt(10 ** (level_dbfs / 10) / power)
    return (a * msg * _carrier(msg.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def _sideband(sideband: str) -> str:
    if sideband not in ("usb", "lsb"):
        raise ParameterError(f"sideband: must be 'usb' or 'lsb', got {sideband!r}")
    return sideband


def _tone_record(freqs_hz: Sequence[float], amplitudes: Sequence[float] | None,
                 phases_deg: Sequence[float] | None, normalise: bool) -> dict[str, list[float]]:
    freqs = [float(f) for f in freqs_hz]
    amps = [1.0] * len(freqs) if amplitudes is None else [float(a) for a in amplitudes]
    phases = [0.0] * len(freqs) if phases_deg is None else [float(p) for p in phases_deg]
    if not freqs or len(amps) != len(freqs) or len(phases) != len(freqs):
        raise ParameterError("freqs_hz: give one or more frequencies, with as many amplitudes and phases")
    if normalise:
        total = sum(abs(a) for a in amps)
        if total == 0:
            raise ParameterError("amplitudes: must not all be 0")
        amps = [a / total for a in amps]
    return {"frequencies_hz": freqs, "amplitudes": amps, "phases_deg": phases}


def ssb_tones(freqs_hz: Sequence[float], rate_hz: float, n: int, *, amplitudes: Sequence[float] | None = None,
              phases_deg: Sequence[float] | None = None, sideband: str = "usb", level_dbfs: float = 0.0,
              carrier_hz: float = 0.0, phase_deg: float = 0.0) -> np.ndarray:
    """Exact SSB of a tone message: one complex exponential per tone, on one side of the carrier (complex64).

    The message is :func:`multitone_message` (normalised); the result has
    average power ``level_dbfs`` and no opposite sideband (beyond float32 rounding).
    """
    rec = _tone_record(freqs_hz, amplitudes, phases_deg, True)
    z = ToneMessage(rec, rate_hz).analytic(0, int(n))
    if _sideband(sideband) == "lsb":
        z = np.conj(z)
    a = math.sqrt(10 ** (level_dbfs / 10) / sum(x * x for x in rec["amplitudes"]))
    return (a * z * _carrier(int(n), carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def analytic_message(message: np.ndarray, rate_hz: float, *, low_hz: float = 300.0,
                     high_hz: float = 3000.0) -> np.ndarray:
    """Analytic signal ``msg + j H{msg}`` of a real message band-limited to ``low_hz..high_hz`` (complex128).

    Uses the one-sided complex band-pass FIR (Kaiser window, 80 dB; the
    low-pass prototype shifted by ``exp(j w0 n)``, Oppenheim & Schafer ch. 7)
    with its delay removed; negative frequencies are suppressed by at least
    the design attenuation. Unlike ``scipy.signal.hilbert`` it assumes no
    periodicity; the first and last ``taps/2`` samples carry the filter's
    start and end transients.
    """
    if not 0 < low_hz < high_hz < rate_hz / 2:
        raise ParameterError(f"low_hz/high_hz: need 0 < low < high < rate/2, got {low_hz!r}, {high_hz!r}")
    x = np.asarray(message, dtype=np.float64)
    h = 2 * band_fir(rate_hz, low_hz, high_hz, message_transition_hz(low_hz, high_hz), one_sided=True)
    delay = (h.shape[0] - 1) // 2
    return _signal.lfilter(h, [1.0], np.concatenate([x, np.zeros(delay)]))[delay:]


def ssb_signal(message: np.ndarray, rate_hz: float, *, sideband: str = "usb", level_dbfs: float = 0.0,
               carrier_hz: float = 0.0, phase_deg: float = 0.0, low_hz: float = 300.0,
               high_hz: float = 3000.0) -> np.ndarray:
    """SSB (suppressed carrier) of an arbitrary real message via :func:`analytic_message` (complex64).

    Scaled to average power ``level_dbfs``; ``lsb`` is the conjugate of the analytic message.
    """
    z = analytic_message(message, rate_hz, low_hz=low_hz, high_hz=high_hz)
    if _sideband(sideband) == "lsb":
        z = np.conj(z)
    power = float(np.mean(np.abs(z) ** 2)) if z.size else 0.0
    if power <= 0:
        raise ParameterError("message: is silent in the chosen band; cannot set an SSB level")
    a = math.sqrt(10 ** (level_dbfs / 10) / power)
    return (a * z * _carrier(z.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def awgn(n: int, *, rate_hz: float | None = None, density_dbfs_per_hz: float | None = None,
         power_dbfs: float | None = None, seed: int | np.random.Generator | None = 0) -> np.ndarray:
    """Complex white Gaussian noise (complex64), I and Q independent with equal power.

    Give either ``power_dbfs`` (total power) or ``density_dbfs_per_hz`` with
    ``rate_hz`` (power = density + 10 log10(rate)).
    """
    if power_dbfs is not None and density_dbfs_per_hz is None:
        total_dbfs = power_dbfs
    elif density_dbfs_per_hz is not None and power_dbfs is None:
        if not rate_hz or rate_hz <= 0:
            raise ParameterError(f"rate_hz: needed (> 0) with density_dbfs_per_hz, got {rate_hz!r}")
        total_dbfs = density_dbfs_per_hz + 10 * math.log10(rate_hz)
    else:
        raise ParameterError("awgn: give exactly one of power_dbfs or density_dbfs_per_hz")
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    sigma = math.sqrt(10 ** (total_dbfs / 10) / 2)
    return (rng.standard_normal(2 * int(n)).view(np.complex128) * sigma).astype(np.complex64)


def fading_gain(n: int, rate_hz: float, doppler_hz: float, *, seed: int = 0, paths: int = 32,
                k_db: float | None = None) -> np.ndarray:
    """Flat-fading complex gain (complex128, mean power 1): Rayleigh, or Rician with ``k_db``.

    The same Clarke sum-of-sinusoids model the scenarios use, with theta and
    the path phases drawn from ``numpy.random.default_rng(seed)``.
    """
    if not doppler_hz > 0 or not 8 <= int(paths) <= 256:
        raise ParameterError(f"doppler_hz/paths: need doppler > 0 and 8..256 paths, got {doppler_hz!r}, {paths!r}")
    rng = np.random.default_rng(seed)
    ratio = rate_ratio(rate_hz, doppler_hz / PASS_FRACTION)
    rec = {"kind": "rayleigh" if k_db is None else "rician", "doppler_hz": float(doppler_hz), "k_db": k_db,
           "paths": int(paths), "theta_rad": float(rng.uniform(-np.pi, np.pi)),
           "phases_rad": rng.uniform(-np.pi, np.pi, int(paths)), "rate_hz": rate_hz / ratio}
    return clarke_fading(rec, rate_hz).take(0, int(n))
