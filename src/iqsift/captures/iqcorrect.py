"""Removing a receiver's IQ gain and phase imbalance and DC offset from the samples.

The imbalance is estimated blindly from second-order moments, by the same
:class:`~iqsift.captures.stats.StatsAccumulator` that ``iqsift info`` reports from: with the
DC-free I and Q variances σI², σQ² and covariance c (ρ = c / (σI·σQ)), a circular signal
(noise, several signals spread over the band) has σI = σQ and c = 0, so any difference is the
receiver's. The correction makes it so again, by Gram-Schmidt orthogonalisation of Q against I
and equalisation of the two powers:

    I' = I − μI
    Q' = ((Q − μQ) − (c / σI²)·(I − μI)) · σI / (σQ·sqrt(1 − ρ²))

(Churchill, Ogar & Thompson, "The correction of I and Q errors in a coherent processor",
IEEE Trans. Aerospace and Electronic Systems AES-17(1), 1981; the moment estimates as in
Tarighat, Bagheri & Sayed, IEEE Trans. Signal Processing 53(8), 2005.) Afterwards
E[I'Q'] = 0 and E[I'²] = E[Q'²], so the estimate of the corrected samples reads 0 dB, 0°.

Two ways to get the moments: a first pass over the capture (:func:`estimate_correction`, used
for files: the whole capture gets one correction, so chunked output equals one-shot output),
or a running estimate (:class:`RunningCorrection`, for standard input, which cannot be read
twice: each block is corrected with the moments of everything read up to and including it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np

from .stats import StatsAccumulator

__all__ = ["IQCorrection", "RunningCorrection", "estimate_correction"]


@dataclass(frozen=True)
class IQCorrection:
    """A fixed DC, gain and phase correction (see the module docstring for the formulas).

    Attributes
    ----------
    method : str
        ``"first-pass"`` (moments of the whole capture) or ``"running"``.
    dc_i, dc_q : float
        DC offset removed (full scale 1.0).
    gain_imbalance_db, phase_imbalance_deg : float
        Imbalance removed: 10·log10(σI²/σQ²) and asin(ρ) in degrees.
    image_rejection_db : float or None
        Image rejection of the capture before correction (dB).
    samples : int
        Samples the estimate rests on.
    """

    method: str
    dc_i: float
    dc_q: float
    gain_imbalance_db: float
    phase_imbalance_deg: float
    image_rejection_db: float | None
    samples: int

    @classmethod
    def from_stats(cls, stats: StatsAccumulator, method: str) -> "IQCorrection":
        """The correction that undoes the imbalance and DC offset ``stats`` measured."""
        result = stats.result()
        return cls(method=method, dc_i=result.dc_i, dc_q=result.dc_q,
                   gain_imbalance_db=result.gain_imbalance_db or 0.0,
                   phase_imbalance_deg=result.phase_imbalance_deg or 0.0,
                   image_rejection_db=result.image_rejection_db, samples=result.samples)

    def apply(self, block: np.ndarray) -> np.ndarray:
        """``block`` (complex64) with the DC offset, gain and phase imbalance removed."""
        if block.shape[0] == 0:
            return block
        phi = math.radians(self.phase_imbalance_deg)
        g = 10 ** (self.gain_imbalance_db / 20)  # σI / σQ
        # Q' = (Q − tan φ·(σQ/σI)·I)·... written with ρ = sin φ: c/σI² = ρ·σQ/σI
        cross = math.sin(phi) / g
        scale = g / math.cos(phi)
        i = block.real - np.float32(self.dc_i)
        q = block.imag - np.float32(self.dc_q)
        out = np.empty(block.shape, np.complex64)
        out.real = i
        out.imag = (q - np.float32(cross) * i) * np.float32(scale)
        return out

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready view (the ``iq_correction`` key of a report's ``capture``)."""
        return dict(self.__dict__)


def estimate_correction(blocks: Iterable[np.ndarray], clip_high: float = 1.0) -> IQCorrection:
    """The first-pass correction: moments of all ``blocks`` (non-finite samples left out)."""
    stats = StatsAccumulator(True, clip_high)
    for block in blocks:
        stats.update(block)
    return IQCorrection.from_stats(stats, "first-pass")


class RunningCorrection:
    """A running estimate for a stream that cannot be read twice: each block is corrected with the
    moments of every sample up to and including it (the first blocks thus less well than later ones)."""

    def __init__(self) -> None:
        self._stats = StatsAccumulator(True)
        self.current: IQCorrection | None = None

    def apply(self, block: np.ndarray) -> np.ndarray:
        """Update the estimate with ``block`` and return it corrected."""
        self._stats.update(block)
        if self._stats.n < 2:
            return block
        self.current = IQCorrection.from_stats(self._stats, "running")
        return self.current.apply(block)

    def to_dict(self) -> dict[str, Any]:
        """The last estimate used (None before any)."""
        if self.current is None:
            return {"method": "running", "samples": 0}
        return self.current.to_dict()
