"""Single-precision FIR filtering of one channel or of many channels at once (one per row).

Extracting dozens of channels of the same kind (say every 6K00A3E channel of a plan) runs the same
filters with the same taps on every channel. Filtering the rows of a (channels × samples) array costs
one set of numpy/scipy calls per block instead of one per channel, which is what keeps the cost of
an extra channel small. A single channel is simply one row.
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft
from numpy.typing import ArrayLike

from .gridfir import SplitFir
from .stages import Stage

__all__ = ["BatchFir", "long_fft_size", "split_head"]


def split_head(num_taps: int) -> int:
    """Direct-form head (taps) of a :class:`~iqsift.dsp.gridfir.SplitFir` of ``num_taps`` taps.

    32 up to 1023 taps, 64 beyond: the fastest split measured for 64 channels of 269-1765 taps
    (the head costs L multiply-adds per sample, the tail two 2L-point transforms per L samples
    and one spectrum product per L taps).
    """
    return 32 if num_taps < 1024 else 64


def long_fft_size(num_taps: int) -> int:
    """Overlap-save FFT size for a filter of ``num_taps`` taps fed long blocks.

    ``next_fast_len(max(8192, 16 * num_taps))``: few transforms per block, so
    little Python overhead per block (the hop is at least 15/16 of the size).
    """
    return int(sfft.next_fast_len(max(8192, 16 * num_taps)))


class BatchFir(Stage):
    """Streaming real FIR filter by overlap-save in single precision, along the last axis.

    Equals ``scipy.signal.lfilter(taps, 1, x)`` per row (chunked or not) to float32 rounding; used for
    audio-rate filters, where float32 output is all that is kept and complex64 transforms run about
    twice as fast as double precision. The rounding itself does not depend on where the stream is cut
    into blocks (a :class:`~iqsift.dsp.gridfir.SplitFir`: a direct-form head and a tail convolved on an
    absolute frame grid), so a live stream and a file give bit-identical outputs.

    Parameters
    ----------
    taps : ndarray
        Real taps.
    rows : int
        Rows (channels) per block; 1 for a single channel, which may then be fed 1-D blocks.
    fft_size : int
        Kept for the callers' identity of a filter (:attr:`nfft`); the transforms' own lengths follow
        from the taps (:func:`split_head`).
    rate_hz : float
        Sample rate (samples/s), reported by ``rate_in`` and ``rate_out``
        (default 1.0: a normalised rate, for callers that only filter).

    Notes
    -----
    A :class:`~iqsift.dsp.stages.Stage` whose blocks may also be 2-D (one
    channel per row). ``delay`` is ``(len(taps) − 1)/2``, the group delay of
    symmetric taps, unless ``delay_samples`` states it (taps made by convolving a
    symmetric filter with a fractional delay); the filter is causal and holds
    nothing (``flush`` is empty).
    """

    def __init__(self, taps: np.ndarray, rows: int, fft_size: int, rate_hz: float = 1.0,
                 delay_samples: float | None = None) -> None:
        self.taps = np.asarray(taps, dtype=np.float64)
        self.m = self.taps.size - 1
        self.nfft = int(fft_size)
        self.rows = int(rows)
        self._rate_in = self._rate_out = float(rate_hz)
        self._delay = self.m / 2.0 if delay_samples is None else float(delay_samples)
        self._fir = SplitFir(self.taps, self.rows, split_head(self.taps.size), np.float32)
        self.reset()

    def for_rows(self, rows: int) -> "BatchFir":
        """A fresh filter with the same taps (rate and delay) for ``rows`` channels."""
        return BatchFir(self.taps, rows, self.nfft, self._rate_in, self._delay)

    def reset(self) -> None:
        self._fir.reset()

    def process(self, x: ArrayLike) -> np.ndarray:
        """Filter a (rows × n) block, or a 1-D block when there is one row; float32 out, same shape."""
        x = np.asarray(x, dtype=np.float32)
        flat = x.ndim == 1
        x2 = x.reshape(1, -1) if flat else x
        if x2.shape[1] == 0:
            return np.zeros(x.shape, np.float32)
        y = self._fir.process(x2)
        return y[0] if flat else y

    def flush(self) -> np.ndarray:
        """Nothing is held: an empty float32 block of the stage's shape (and reset)."""
        self.reset()
        return np.zeros(0 if self.rows == 1 else (self.rows, 0), np.float32)
