"""Test captures with a receiver's IQ imbalance and DC offset, built with numpy (the synthesiser has neither).

Imbalance model (the textbook quadrature-imbalance model, e.g. Tarighat, Bagheri & Sayed, IEEE Trans.
Signal Processing 53(8), 2005): from the ideal samples x = xI + j·xQ the receiver records
I = a·xI + dc_i and Q = sin(φ)·xI + cos(φ)·xQ + dc_q, with amplitude ratio a = 10^(gain_db/20) and
phase error φ; then 10·log10(σI²/σQ²) = gain_db and asin(ρ) = φ for a circular x, as `iqsift info`
estimates them.
"""

from __future__ import annotations

import math

import numpy as np

RATE_HZ = 1_000_000.0
CENTER_HZ = 127_000_000.0
CARRIERS_HZ = (127_309_333.0, 126_850_000.0, 127_125_000.0, 126_575_000.0)
"""Four AM carriers; none sits on another's mirror image about 127 MHz."""
LEVELS_DBFS = (-20.0, -26.0, -23.0, -29.0)


def apply_imbalance(x: np.ndarray, gain_db: float, phase_deg: float, dc: complex = 0j) -> np.ndarray:
    """``x`` as a receiver with this gain and phase imbalance and DC offset records it (see module docstring)."""
    a = 10 ** (gain_db / 20)
    phi = math.radians(phase_deg)
    i = a * x.real + dc.real
    q = math.sin(phi) * x.real + math.cos(phi) * x.imag + dc.imag
    return (i + 1j * q).astype(np.complex64)


def four_carriers(duration_s: float = 0.5, *, gain_db: float = -0.5, phase_deg: float = 3.0,
                  dc: complex = 0.002 - 0.001j, noise_dbfs_per_hz: float = -110.0, seed: int = 1) -> np.ndarray:
    """Four AM carriers (tones of 400-1000 Hz, 50 % depth) plus white noise, through an imbalanced receiver."""
    rng = np.random.default_rng(seed)
    n = int(round(duration_s * RATE_HZ))
    t = np.arange(n) / RATE_HZ
    x = np.zeros(n, np.complex128)
    for k, (freq, level) in enumerate(zip(CARRIERS_HZ, LEVELS_DBFS)):
        amp = 10 ** (level / 20)
        tone = 400.0 + 200.0 * k
        message = 1 + 0.5 * np.cos(2 * np.pi * tone * t)
        x += amp * message * np.exp(2j * np.pi * ((freq - CENTER_HZ) * t + rng.random()))
    noise_power = 10 ** (noise_dbfs_per_hz / 10) * RATE_HZ
    x += math.sqrt(noise_power / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    return apply_imbalance(x, gain_db, phase_deg, dc)
