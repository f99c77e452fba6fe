"""Whole-capture statistics measured in one streaming pass (for ``iqsift info``).

Levels follow DESIGN.md: complex magnitude 1.0 is 0 dBFS and power in dBFS is
10·log10(mean |x|^2). A real capture's RMS level is that of its analytic signal,
10·log10(2·mean x^2), so that a full-scale sine reads 0 dBFS (AES17, IEC 61606)
and a carrier reads the same here as in ``survey``, ``measure`` and ``demod``. IQ imbalance is estimated from second-order statistics
of the DC-free samples: with I and Q variances σI², σQ² and covariance c,

* gain imbalance (dB) = 10·log10(σI² / σQ²)
* phase imbalance (degrees) = asin(c / (σI·σQ))
* image rejection ratio (dB) = 10·log10((1 + 2g·cos φ + g²) / (1 − 2g·cos φ + g²)), g = σI/σQ

(the quadrature-imbalance model of e.g. Tarighat, Bagheri & Sayed, IEEE Trans.
Signal Processing 53(8), 2005, and the textbook image-rejection formula; the
estimate assumes the recorded signal is circular — noise and many signals
spread over the band are; one strong tone is not, and then the figures
describe the tone rather than the receiver).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["CaptureStats", "StatsAccumulator"]


def _db(value: float, scale: float = 10.0) -> float | None:
    return scale * math.log10(value) if value > 0 else None


@dataclass(frozen=True)
class CaptureStats:
    """Statistics of a capture (see module docstring for the formulas).

    Attributes
    ----------
    samples : int
        Samples measured (finite ones).
    nonfinite_samples : int
        Samples with a NaN or infinite component (excluded from the rest).
    peak_dbfs, rms_dbfs : float or None
        Peak of |x|² and mean |x|², in dBFS (None for an all-zero capture).
    dc_i, dc_q : float
        Mean of I and Q (full scale 1.0).
    dc_dbfs : float or None
        Power of the DC offset, 10·log10(dc_i² + dc_q²).
    clipped_fraction : float
        Share of samples with a component at the top or bottom code (integers)
        or at/beyond ±1.0 (floats).
    gain_imbalance_db, phase_imbalance_deg, image_rejection_db : float or None
        IQ imbalance estimates; None for real captures or when undefined.
    """

    samples: int
    nonfinite_samples: int
    peak_dbfs: float | None
    rms_dbfs: float | None
    dc_i: float
    dc_q: float
    dc_dbfs: float | None
    clipped_samples: int
    clipped_fraction: float
    gain_imbalance_db: float | None
    phase_imbalance_deg: float | None
    image_rejection_db: float | None

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready view with stable keys (None becomes null)."""
        return dict(self.__dict__)


_PIECE = 1 << 15  # samples per in-cache piece: four float64 buffers of 256 KiB each


class StatsAccumulator:
    """Accumulate :class:`CaptureStats` over blocks of any size.

    Parameters
    ----------
    is_complex : bool
        IQ capture (imbalance estimated) or real capture.
    clip_high : float
        Largest positive component value of the stored format after scaling
        (e.g. 32767/32768 for 16-bit); the bottom code is -1.0.
    """

    def __init__(self, is_complex: bool, clip_high: float = 1.0) -> None:
        self.is_complex = is_complex
        self.clip_high = float(clip_high)
        self.n = 0
        self.nonfinite = 0
        self.clipped = 0
        self.peak = 0.0
        self.s_i = self.s_q = 0.0
        self.s_ii = self.s_qq = self.s_iq = 0.0
        self._i = np.empty(_PIECE, np.float64)
        self._q = np.empty(_PIECE, np.float64)
        self._p = np.empty(_PIECE, np.float64)
        self._qq = np.empty(_PIECE, np.float64)

    def update(self, block: np.ndarray) -> None:
        """Add a block of complex64 samples (full scale = magnitude 1).

        The block is measured in pieces of 32768 samples converted to float64 in reused buffers
        that stay in the processor's cache (no block-sized temporaries); every sum is a float64
        sum of exact float64 values, so the result depends on the block cut only in the last digits
        of the sums. A piece whose float64 sum is finite holds only finite samples (float32 values
        cannot overflow a float64 sum of 32768 terms), so the finiteness check costs nothing extra.
        """
        block = np.asarray(block)
        if block.dtype != np.complex64:
            block = block.astype(np.complex128, copy=False)
        for first in range(0, block.shape[0], _PIECE):
            self._update_piece(block[first:first + _PIECE])

    def _update_piece(self, piece: np.ndarray) -> None:
        n = piece.shape[0]
        i, q, p = self._i[:n], self._q[:n], self._p[:n]
        np.copyto(i, piece.real)
        np.copyto(q, piece.imag)
        s_i, s_q = float(i.sum()), float(q.sum())
        if not (math.isfinite(s_i) and math.isfinite(s_q)):
            finite = np.isfinite(piece)
            if not finite.all():
                self.nonfinite += int(n - np.count_nonzero(finite))
                kept = piece[finite]
                if kept.shape[0]:
                    self._update_piece(kept)
                return
        # einsum's own summation loop, not BLAS: a multithreaded BLAS dot product fights the read-ahead
        # thread for the cores and its last digits depend on the machine's thread count
        s_ii = float(np.einsum("i,i->", i, i))
        s_qq = float(np.einsum("i,i->", q, q))
        s_iq = float(np.einsum("i,i->", i, q))
        np.multiply(i, i, out=p)
        p += np.multiply(q, q, out=self._qq[:n])
        piece_peak = float(p.max())
        self.n += n
        self.peak = max(self.peak, piece_peak)
        self.s_i += s_i
        self.s_q += s_q
        self.s_ii += s_ii
        self.s_qq += s_qq
        self.s_iq += s_iq
        high, low = self.clip_high, -1.0
        # |i|, |q| <= sqrt(peak power): a piece well below both limits cannot hold a clipped component
        if piece_peak >= 0.99 * min(high, 1.0) ** 2:
            hit = (i >= high) | (i <= low)
            if self.is_complex:
                hit |= (q >= high) | (q <= low)
            self.clipped += int(np.count_nonzero(hit))

    def result(self) -> CaptureStats:
        """The statistics so far."""
        n = max(self.n, 1)
        mi, mq = self.s_i / n, self.s_q / n
        mean_power = (self.s_ii + self.s_qq) / n
        if not self.is_complex:
            mean_power *= 2.0  # analytic-signal power: a full-scale sine is 0 dBFS (AES17)
        gain = phase = irr = None
        if self.is_complex and self.n > 1:
            var_i = self.s_ii / n - mi * mi
            var_q = self.s_qq / n - mq * mq
            cov = self.s_iq / n - mi * mq
            if var_i > 0 and var_q > 0:
                gain = 10 * math.log10(var_i / var_q)
                rho = max(-1.0, min(1.0, cov / math.sqrt(var_i * var_q)))
                phi = math.asin(rho)
                phase = math.degrees(phi)
                g = math.sqrt(var_i / var_q)
                num = 1 + 2 * g * math.cos(phi) + g * g
                den = 1 - 2 * g * math.cos(phi) + g * g
                irr = 10 * math.log10(num / den) if den > 1e-30 else None
        return CaptureStats(
            samples=self.n,
            nonfinite_samples=self.nonfinite,
            peak_dbfs=_db(self.peak),
            rms_dbfs=_db(mean_power),
            dc_i=mi,
            dc_q=mq,
            dc_dbfs=_db(mi * mi + mq * mq),
            clipped_samples=self.clipped,
            clipped_fraction=self.clipped / n if self.n else 0.0,
            gain_imbalance_db=gain,
            phase_imbalance_deg=phase,
            image_rejection_db=irr,
        )
