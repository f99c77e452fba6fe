"""The AM audio chain for many identical channels at once, as 2-D arrays (one row per channel).

Extracting dozens of channels of the same kind (say every 6K00A3E channel of a plan) runs the same
filters with the same taps on every channel. Doing it row-wise on a (channels × samples) array costs
one set of numpy/scipy calls per block instead of one per channel, which is what keeps the cost of
an extra channel small. The arithmetic is the one of the single-channel stages
(:class:`~iqsift.dsp.post.CarrierNormaliser`, :class:`~iqsift.dsp.stages.FirFilter` in single
precision, :class:`~iqsift.dsp.stages.RationalResampler`); tests check the rows against them.
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft
import scipy.signal as ssig
from numpy.lib.stride_tricks import sliding_window_view

from .stages import FirFilter

__all__ = ["BatchFir", "BatchUpFirDn", "BatchCarrierNormaliser"]


class BatchFir:
    """Streaming FIR filter (overlap-save, single precision) applied to every row of a 2-D array.

    Parameters
    ----------
    taps : ndarray
        Real taps.
    rows : int
        Number of rows (channels).
    fft_size : int
        Overlap-save transform length (> len(taps) − 1).
    """

    def __init__(self, taps: np.ndarray, rows: int, fft_size: int) -> None:
        self.h = np.asarray(taps, dtype=np.float64)
        self.m = self.h.size - 1
        self.nfft = int(fft_size)
        self.hop = self.nfft - self.m
        self.H = sfft.rfft(self.h, self.nfft).astype(np.complex64)
        self.rows = rows
        self.reset()

    def reset(self) -> None:
        self.state = np.zeros((self.rows, self.m), np.float32)

    def process(self, x: np.ndarray) -> np.ndarray:
        """Filter a (rows × n) float block; returns (rows × n) float32."""
        x = np.asarray(x, dtype=np.float32)
        n = x.shape[1]
        if n == 0:
            return np.zeros((self.rows, 0), np.float32)
        buf = np.concatenate([self.state, x], axis=1)
        nseg = -(-n // self.hop)
        pad = self.m + nseg * self.hop - buf.shape[1]
        padded = np.concatenate([buf, np.zeros((self.rows, pad), np.float32)], axis=1) if pad else buf
        segs = sliding_window_view(padded, self.nfft, axis=1)[:, :: self.hop]  # (rows, nseg, nfft)
        y = sfft.irfft(sfft.rfft(segs, axis=-1) * self.H, self.nfft, axis=-1)[:, :, self.m :]
        if self.m:
            self.state = buf[:, -self.m :].copy()
        return y.reshape(self.rows, -1)[:, :n].astype(np.float32, copy=False)


class BatchUpFirDn:
    """Streaming ``scipy.signal.upfirdn(h, x, up, down)`` on every row (the 2-D form of the resampler core)."""

    def __init__(self, taps: np.ndarray, up: int, down: int, rows: int) -> None:
        h = np.asarray(taps, dtype=np.float32)  # single precision, like the audio it carries
        if h.size < up:
            h = np.concatenate([h, np.zeros(up - h.size, np.float32)])
        self.h, self.up, self.down, self.rows = h, int(up), int(down), rows
        self.reset()

    def reset(self) -> None:
        self.buf = np.zeros((self.rows, 0), np.float32)
        self.s = 0
        self.n_end = 0
        self.m_next = 0

    def process(self, x: np.ndarray) -> np.ndarray:
        up, down, h = self.up, self.down, self.h
        x = np.asarray(x, np.float32)
        buf = np.concatenate([self.buf, x], axis=1) if self.buf.shape[1] else x
        self.n_end += x.shape[1]
        m_stop = -(-(self.n_end * up) // down)
        count = m_stop - self.m_next
        if count <= 0:
            self.buf = buf
            return np.zeros((self.rows, 0), np.float32)
        z = (self.s * up) % down
        hz = np.concatenate([np.zeros(z, np.float32), h]) if z else h
        j0 = self.m_next - (self.s * up - z) // down
        y = ssig.upfirdn(hz, buf, up, down, axis=1)[:, j0 : j0 + count]
        self.m_next = m_stop
        n_min = -(-(m_stop * down - h.size + 1) // up)
        drop = min(max(0, n_min - self.s), buf.shape[1])
        self.buf = buf[:, drop:].copy()
        self.s += drop
        return y.astype(np.float32)


class BatchCarrierNormaliser:
    """:class:`~iqsift.dsp.post.CarrierNormaliser` (``normalise=True``, no carrier check) on every row.

    Parameters
    ----------
    single : CarrierNormaliser
        A single-channel normaliser with the settings to copy (taps, lag, gain limits).
    rows : int
        Number of rows.
    """

    def __init__(self, single, rows: int) -> None:
        self.taps = single.design.taps
        self.ntaps = single.design.num_taps
        self.lag = int(single.delay)
        self.rows = rows
        self.rate_hz = single.rate_hz
        self.max_gain = single.max_gain
        self.floor = single.floor
        self.fft_size = single._lp.fft_size
        self.reset()

    def reset(self) -> None:
        self.lp = BatchFir(self.taps, self.rows, self.fft_size)
        self.cover = FirFilter(self.taps, self.rate_hz)
        self.history = np.zeros((self.rows, self.lag), np.float32)
        self.strongest = np.zeros(self.rows, np.float32)
        self.run = 0
        self.cover_stale = False

    def process(self, d: np.ndarray, valid: np.ndarray | None = None) -> np.ndarray:
        d = np.asarray(d, dtype=np.float32)
        n = d.shape[1]
        if n == 0:
            return np.zeros((self.rows, 0), np.float32)
        cover = None
        if valid is None or bool(np.all(valid)):
            dv = d
            if self.run >= self.ntaps:
                self.cover_stale = True
            else:
                cover = np.asarray(self.cover.process(np.ones(n, np.float32)), dtype=np.float32)
            self.run += n
        else:
            v = np.asarray(valid, dtype=np.float32)
            dv = d * v
            if self.cover_stale:
                self.cover.reset()
                self.cover.process(np.ones(self.ntaps, np.float32))
                self.cover_stale = False
            cover = np.asarray(self.cover.process(v), dtype=np.float32)
            last_invalid = np.flatnonzero(v == 0)
            self.run = n - 1 - int(last_invalid[-1]) if last_invalid.size else self.run + n
        level = self.lp.process(dv)
        if cover is not None:
            ok = cover > 1e-3
            level = np.where(ok, level / np.maximum(cover, np.float32(1e-3)), np.float32(0))
        joined = np.concatenate([self.history, d], axis=1)
        delayed = joined[:, :n]
        self.history = joined[:, n:]
        out = delayed - level
        magnitude = np.abs(level)
        running = np.maximum.accumulate(magnitude, axis=1)
        np.maximum(running, self.strongest[:, None], out=running)
        self.strongest = running[:, -1].copy()
        divisor = np.maximum(magnitude, np.maximum(running * np.float32(self.max_gain), np.float32(self.floor)))
        return (out / divisor).astype(np.float32)
