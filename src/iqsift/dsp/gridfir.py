"""FIR filtering whose rounding does not depend on where the blocks of a stream are cut.

An overlap-save filter that starts its transforms at the start of each block rounds every output
differently for every way of cutting the stream: a live stream (blocks are whatever arrives) and a
file (read in fixed blocks) then give outputs that differ in the last bits, which a division by a
small carrier level or a 16-bit quantiser can make visible. The filters here compute each output
sample by the same arithmetic whatever the cut:

* :class:`GridFir` runs a partitioned overlap-save on frames aligned to the absolute sample index
  (frame ``j`` holds inputs ``j·hop .. (j+1)·hop − 1``): each transform sees the same inputs in every
  run, and an output leaves once its frame is complete (up to ``hop − 1`` samples later than it could);
* :class:`SplitFir` needs no such wait: the first ``head`` taps run as a direct-form filter (the
  products summed in a fixed order for every sample, vectorised over samples), the rest by a
  :class:`GridFir` on frames of ``head`` samples, whose outputs are always complete in time. This is
  the split of a long filter into a direct-form head and FFT-convolved tail of Gardner (1995),
  "Efficient convolution without input-output delay", J. Audio Eng. Soc. 43(3), 127-136.

Both filter the rows of a (rows × n) block independently (one channel per row) along the last axis.
A batched transform computes each row as it would alone (pocketfft's vectorised and scalar paths do
the same operations), which the chunked-equals-one-shot tests check bit for bit.
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view

__all__ = ["GridFir", "SplitFir"]


class GridFir:
    """FIR on frames aligned to the absolute sample index; outputs leave per whole frame.

    Uniformly partitioned overlap-save (the frequency-domain delay line; Soo & Pang 1990, "Multidelay
    block frequency domain adaptive filter", IEEE Trans. ASSP 38(2), 373-376): the taps are cut into
    ``P`` parts of ``hop`` taps; each frame's spectrum (a ``2·hop`` transform of it and the frame
    before) is taken once, and output frame ``q`` is the inverse transform of
    ``Σ_p X_{q−p}·H_p``, summed in the order p = 0, 1, ... .

    Parameters
    ----------
    taps : ndarray
        Real taps (N of them).
    rows : int
        Channels filtered together, one per row.
    hop : int
        Frame length (samples): outputs leave ``hop`` at a time.
    dtype : numpy dtype
        float32 (complex64 transforms) or float64 (complex128 transforms).

    Notes
    -----
    After ``T`` inputs, ``floor(T / hop) · hop`` outputs have left in all, each equal to
    ``lfilter(taps, 1, x)`` up to the transforms' rounding, and bit-identical for every way of
    cutting the input into blocks: every transform sees the same numbers in every run.
    """

    def __init__(self, taps: np.ndarray, rows: int, hop: int, dtype: type = np.float32) -> None:
        h = np.asarray(taps, dtype=np.float64)
        self.hop = int(hop)
        self.parts = -(-h.size // self.hop)
        self.nfft = 2 * self.hop
        self.rows = int(rows)
        self.dtype = np.dtype(dtype)
        cdtype = np.complex64 if self.dtype == np.float32 else np.complex128
        padded = np.zeros(self.parts * self.hop)
        padded[: h.size] = h
        self.H = sfft.rfft(padded.reshape(self.parts, self.hop), self.nfft, axis=-1).astype(cdtype)
        self.reset()

    def reset(self) -> None:
        self._pending = np.zeros((self.rows, self.hop), self.dtype)  # the previous frame, then the new inputs
        cdtype = self.H.dtype
        self._spectra = np.zeros((self.rows, self.parts - 1, self.hop + 1), cdtype)  # X_{q-P+1} .. X_{q-1}

    def process(self, x: np.ndarray) -> np.ndarray:
        """Add a (rows × n) block; returns the outputs of the frames it completed (rows × k·hop)."""
        buf = np.concatenate([self._pending, np.asarray(x, dtype=self.dtype)], axis=1)
        frames = (buf.shape[1] - self.hop) // self.hop
        if not frames:
            self._pending = buf
            return np.zeros((self.rows, 0), self.dtype)
        windows = sliding_window_view(buf[:, : (frames + 1) * self.hop], self.nfft, axis=1)[:, :: self.hop]
        spectra = np.concatenate([self._spectra, sfft.rfft(windows, axis=-1)], axis=1)
        first = self.parts - 1
        acc = spectra[:, first : first + frames] * self.H[0]
        for p in range(1, self.parts):
            acc += spectra[:, first - p : first - p + frames] * self.H[p]
        y = sfft.irfft(acc, self.nfft, axis=-1)[:, :, self.hop :]
        self._spectra = spectra[:, spectra.shape[1] - first :].copy() if first else self._spectra
        self._pending = buf[:, frames * self.hop :].copy()
        return y.reshape(self.rows, frames * self.hop).astype(self.dtype, copy=False)


class SplitFir:
    """A causal FIR without extra delay whose outputs do not depend on block boundaries.

    ``y[n] = Σ_{k<L} h[k]·x[n−k]`` (direct form, the last L − 1 inputs carried)
    ``+ Σ_{k≥L} h[k]·x[n−k]`` (a :class:`GridFir` of the taps from ``L`` on, frames of ``L``: the
    tail of output ``n`` needs inputs up to ``n − L`` only, whose frame is complete by then), added
    in that order. ``L`` is ``head``.

    Parameters
    ----------
    taps : ndarray
        Real taps.
    rows : int
        Channels filtered together, one per row.
    head : int
        Taps run in direct form, and the frame length of the tail.
    dtype : numpy dtype
        float32 or float64, for both parts.
    """

    CHUNK = 4096
    """Columns of the direct-form head computed at a time (the partial sums stay in cache)."""

    def __init__(self, taps: np.ndarray, rows: int, head: int, dtype: type = np.float32) -> None:
        h = np.asarray(taps, dtype=np.float64)
        self.rows = int(rows)
        self.dtype = np.dtype(dtype)
        self.head_len = max(1, min(int(head), h.size))
        self._b = h[: self.head_len].astype(self.dtype)
        self._tail = GridFir(h[self.head_len :], self.rows, self.head_len, dtype) if h.size > self.head_len else None
        self.reset()

    def reset(self) -> None:
        self._history = np.zeros((self.rows, self.head_len - 1), self.dtype)  # the last L - 1 inputs
        if self._tail is not None:
            self._tail.reset()
            # tail outputs not yet added; the first L outputs get none (their inputs precede the stream)
            self._queue = np.zeros((self.rows, self.head_len), self.dtype)

    def _head(self, x: np.ndarray) -> np.ndarray:
        """``Σ_{k<L} b[k]·x[n−k]``, summed in the order k = 0, 1, ... for every sample."""
        lag = self.head_len - 1
        xx = np.concatenate([self._history, x], axis=1) if lag else x
        n = x.shape[1]
        y = np.empty((self.rows, n), self.dtype)
        tmp = np.empty((self.rows, min(n, self.CHUNK)), self.dtype)
        for c0 in range(0, n, self.CHUNK):
            c1 = min(n, c0 + self.CHUNK)
            acc = y[:, c0:c1]
            np.multiply(xx[:, lag + c0 : lag + c1], self._b[0], out=acc)
            part = tmp[:, : c1 - c0]
            for k in range(1, self.head_len):
                np.multiply(xx[:, lag - k + c0 : lag - k + c1], self._b[k], out=part)
                acc += part
        if lag:
            self._history = xx[:, -lag:].copy()
        return y

    def process(self, x: np.ndarray) -> np.ndarray:
        """Filter a (rows × n) block; returns rows × n."""
        x = np.asarray(x, dtype=self.dtype)
        n = x.shape[1]
        if n == 0:
            return np.zeros((self.rows, 0), self.dtype)
        y = self._head(x)
        if self._tail is None:
            return y
        queue = np.concatenate([self._queue, self._tail.process(x)], axis=1)
        y += queue[:, :n]
        self._queue = queue[:, n:]
        return y
