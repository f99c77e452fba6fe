"""FIR stages: filter, polyphase decimator (optionally frequency translating), rational resampler.

The decimator and the resampler share one streaming polyphase core,
:class:`UpFirDn` (``scipy.signal.upfirdn`` continued across blocks), which
also serves several channels at once (one per row).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view
from numpy.typing import ArrayLike

from ... import checks
from ...errors import ParameterError
from .base import Stage, checked_taps, run_once
from .linear import fir_valid, polyphase_upfirdn
from .oscillator import ExactPhase, exact_ratio

__all__ = [
    "FirFilter",
    "fir_filter",
    "UpFirDn",
    "FirDecimator",
    "fir_decimate",
    "RationalResampler",
    "resample",
]


def _energy_centroid(h: np.ndarray) -> float:
    """Group delay estimate of an FIR, in its own samples.

    Exactly (N - 1)/2 when |h| is symmetric (linear-phase taps, also when they
    are modulated to a band-pass: Oppenheim & Schafer, DTSP, generalised linear
    phase); otherwise the energy centroid sum(k |h|^2)/sum(|h|^2).
    """
    a = np.abs(h)
    n = a.size
    if np.allclose(a, a[::-1], rtol=1e-12, atol=1e-15 * max(a.max(), 1e-300)):
        return (n - 1) / 2.0
    e = a * a
    tot = e.sum()
    if tot == 0.0:
        return 0.0
    return float(np.dot(np.arange(n), e) / tot)


class FirFilter(Stage):
    """Streaming FIR filter, ``y = scipy.signal.lfilter(taps, 1, x)``.

    Two methods, same result (to float64 rounding):

    * ``"direct"``: the convolution sum against the last N − 1 inputs carried
      (:func:`.linear.fir_valid`).
    * ``"fft"``: overlap-save fast convolution (Oppenheim & Schafer, DTSP,
      §8.7) with ``scipy.fft``; FFT size ``next_fast_len(max(8 N, 256))``,
      hop = FFT size − (N − 1); blocks shorter than 64 samples are done by
      direct convolution against the carried history.

    ``"auto"`` picks ``"fft"`` for more than :attr:`DIRECT_MAX_TAPS` taps
    (measured on one 2**18-sample block: lfilter/FFT time ≈ 2 at 64 and 128
    real taps, ≈ 3 at 128 complex taps, ≈ 15 at 2048; the threshold is set
    above the break-even because every streamed block pays at least one FFT).

    The filter is causal and holds no partial output: ``flush`` is empty.
    ``delay`` is (N − 1)/2 for taps with symmetric magnitude (linear phase),
    else the energy centroid of the taps.

    Parameters
    ----------
    taps : array_like
        FIR taps h[0..N-1], real or complex.
    rate_hz : float
        Sample rate, Hz (input = output).
    method : {"auto", "direct", "fft"}
    fft_size : int, optional
        FFT length for the ``"fft"`` method (must exceed N − 1).
    """

    DIRECT_MAX_TAPS = 64
    _SMALL_BLOCK = 64

    def __init__(self, taps: ArrayLike, rate_hz: float, method: str = "auto", fft_size: int | None = None) -> None:
        self._h = checked_taps("taps", taps)
        fs = checks.positive("rate_hz", rate_hz)
        self._rate_in = self._rate_out = fs
        self._complex_stage = self._h.dtype.kind == "c"
        self._delay = _energy_centroid(self._h)
        n = self._h.size
        if method not in ("auto", "direct", "fft"):
            raise ParameterError(f"method: expected 'auto', 'direct' or 'fft', got {method!r}")
        if method == "auto":
            method = "fft" if n > self.DIRECT_MAX_TAPS else "direct"
        self._method = method
        self._nfft: int | None
        self._hop: int | None
        if method == "fft":
            if fft_size is None:
                nfft = sfft.next_fast_len(max(8 * n, 256))
            else:
                nfft = checks.whole("fft_size", fft_size, minimum=n)
            self._nfft = nfft
            self._hop = nfft - (n - 1)
            self._Hc = sfft.fft(self._h, nfft)
            self._Hr = None if self._complex_stage else sfft.rfft(self._h, nfft)
        else:
            self._nfft = None
            self._hop = None
        self.reset()

    @property
    def taps(self) -> np.ndarray:
        return self._h.copy()

    @property
    def method(self) -> str:
        """``"direct"`` or ``"fft"``."""
        return self._method

    @property
    def fft_size(self) -> int | None:
        return self._nfft

    def reset(self) -> None:
        self._complex_seen = False
        m = self._h.size - 1
        self._state = np.zeros(m, dtype=np.complex128 if self._complex_stage else np.float64)

    def process(self, block: ArrayLike) -> np.ndarray:
        x = self._prep(block)
        if x.dtype.kind == "c" and self._state.dtype.kind != "c":
            self._state = self._state.astype(np.complex128)
        if x.size == 0:
            return self._empty()
        # _state holds the last N-1 inputs
        m = self._h.size - 1
        buf = np.concatenate([self._state, x])
        if self._method == "direct":
            y = fir_valid(buf, self._h)
        elif x.size < self._SMALL_BLOCK:
            y = np.convolve(buf, self._h, mode="valid")
        else:
            y = self._overlap_save(buf, x.size)
        if m:
            self._state = buf[-m:].copy()
        return self._out(y)

    def _overlap_save(self, buf: np.ndarray, count: int) -> np.ndarray:
        m = self._h.size - 1
        nfft, hop = self._nfft, self._hop
        assert nfft is not None and hop is not None  # set by __init__ for the fft method
        nseg = -(-count // hop)
        pad = m + nseg * hop - buf.size
        if pad:
            buf = np.concatenate([buf, np.zeros(pad, dtype=buf.dtype)])
        segs = sliding_window_view(buf, nfft)[::hop]
        real = buf.dtype.kind != "c" and self._Hr is not None
        out = np.empty((nseg, hop), dtype=np.float64 if real else np.complex128)
        batch = max(1, (1 << 20) // nfft)
        for a in range(0, nseg, batch):
            s = segs[a : a + batch]
            if real:
                out[a : a + batch] = sfft.irfft(sfft.rfft(s, axis=1) * self._Hr, nfft, axis=1)[:, m:]
            else:
                out[a : a + batch] = sfft.ifft(sfft.fft(s, axis=1) * self._Hc, axis=1)[:, m:]
        return out.ravel()[:count]


def fir_filter(x: ArrayLike, taps: ArrayLike, rate_hz: float = 1.0, method: str = "auto") -> np.ndarray:
    """One-shot :class:`FirFilter`: ``lfilter(taps, 1, x)`` as float32/complex64."""
    return run_once(FirFilter(taps, rate_hz, method=method), x)


# --------------------------------------------------------------------------
# streaming upfirdn core (shared by FirDecimator and RationalResampler)
# --------------------------------------------------------------------------


class UpFirDn:
    """Streaming ``scipy.signal.upfirdn(h, x, up, down)`` without the tail.

    Output m is y[m] = sum_k h[k] u[m·down − k], u the input zero-stuffed by
    ``up``. Outputs are emitted for m·down < n_in·up, i.e. ceil(n_in·up/down)
    of them: exactly those whose newest contributing input has arrived. The
    buffer keeps the inputs still needed (global index s onward); to align
    the decimation phase, ``z = (s·up) mod down`` zeros are put in front of
    the taps for each call.

    This is the arithmetic core of :class:`FirDecimator` and
    :class:`RationalResampler`, not a :class:`Stage`: it knows no sample rate
    and filters 1-D blocks or 2-D blocks with one channel per row (the
    row-wise audio chain of many channels uses it directly). Output dtype is
    ``result_type(h, x)``.

    Parameters
    ----------
    h : numpy.ndarray
        Taps at the zero-stuffed rate (zero-padded to ``up`` taps if shorter).
    up, down : int
        Interpolation and decimation factors.
    """

    def __init__(self, h: np.ndarray, up: int, down: int):
        if h.size < up:
            h = np.concatenate([h, np.zeros(up - h.size, dtype=h.dtype)])
        self.h, self.up, self.down = h, up, down
        self.reset()

    def reset(self) -> None:
        self.buf: np.ndarray | None = None  # inputs still needed; rows of a 2-D block are independent channels
        self.s = 0  # global input index of buf[..., 0]
        self.n_end = 0  # inputs seen
        self.m_next = 0  # next output index

    def process(self, x: np.ndarray) -> np.ndarray:
        """Filter along the last axis (1-D, or one channel per row of a 2-D block)."""
        up, down, h = self.up, self.down, self.h
        buf = x if self.buf is None or self.buf.shape[-1] == 0 else np.concatenate([self.buf, x], axis=-1)
        self.n_end += x.shape[-1]
        m_stop = -(-(self.n_end * up) // down)
        count = m_stop - self.m_next
        rt = np.result_type(h, buf)
        if count <= 0:
            self.buf = buf
            return np.zeros(x.shape[:-1] + (0,), dtype=rt)
        z = (self.s * up) % down
        hz = np.concatenate([np.zeros(z, dtype=h.dtype), h]) if z else h
        j0 = self.m_next - (self.s * up - z) // down
        y = polyphase_upfirdn(hz, buf, up, down, j0, count)
        self.m_next = m_stop
        n_min = -(-(m_stop * down - h.size + 1) // up)
        drop = min(max(0, n_min - self.s), buf.shape[-1])
        self.buf = buf[..., drop:].copy()
        self.s += drop
        return y


# --------------------------------------------------------------------------
# FIR decimator (optionally frequency translating)
# --------------------------------------------------------------------------


class FirDecimator(Stage):
    """Polyphase FIR decimator, optionally frequency translating.

    Output ``y[m] = sum_k h[k] x[m·D − k]``, i.e.
    ``scipy.signal.lfilter(h, 1, x)[::D]`` (the first output uses x[0]);
    ceil(n_in/D) outputs for n_in inputs, nothing held (``flush`` is empty).
    Computed polyphase (only the kept outputs, :func:`.linear.polyphase_upfirdn`)
    on the carried history, so the decimation phase continues across blocks.

    With ``translate_hz = f0`` (frequency-translating FIR decimator, f. harris,
    *Multirate Signal Processing for Communication Systems*, 2004, ch. 6) the
    result equals mixing down by f0 at the input rate (as :class:`Mixer`,
    phase 0 at the first sample), filtering with h, then decimating:

        y[m] = e^{-j2π f0 mD/fs} · sum_k (h[k] e^{+j2π f0 k/fs}) x[mD − k]

    The band-pass taps and the output phase use the exact rational of
    :func:`exact_ratio`, so the output phase does not drift.

    Parameters
    ----------
    taps : array_like
        Low-pass prototype h (real or complex), at the input rate.
    down : int
        Decimation factor D >= 1.
    rate_in_hz : float
        Input sample rate, Hz.
    translate_hz : float, optional
        Frequency moved to 0 Hz before filtering, Hz.

    Notes
    -----
    ``delay`` = (group delay of h in input samples) / D.
    """

    def __init__(self, taps: ArrayLike, down: int, rate_in_hz: float, translate_hz: float | None = None) -> None:
        h = checked_taps("taps", taps)
        self._down = checks.whole("down", down)
        fs = checks.positive("rate_in_hz", rate_in_hz)
        self._rate_in = fs
        self._rate_out = fs / self._down
        self._h = h
        self._delay = _energy_centroid(h) / self._down
        if translate_hz is None:
            self._ratio = None
            g = h
            self._complex_stage = h.dtype.kind == "c"
        else:
            f0 = checks.finite("translate_hz", translate_hz)
            self._ratio = exact_ratio(f0, fs)
            g = h * np.conj(ExactPhase(self._ratio).phasors(h.size))
            self._complex_stage = True
        self._g = g
        self._core = UpFirDn(g, 1, self._down)
        self.reset()

    @property
    def down(self) -> int:
        return self._down

    @property
    def taps(self) -> np.ndarray:
        """Taps actually applied (modulated when translating)."""
        return self._g.copy()

    @property
    def translate_hz(self) -> float | None:
        """Achieved translation frequency, Hz (None when not translating)."""
        if self._ratio is None:
            return None
        return float(self._ratio * Fraction(self._rate_in))

    def reset(self) -> None:
        self._complex_seen = False
        self._core.reset()
        if self._ratio is not None:
            self._out_phase = ExactPhase(self._ratio * self._down)

    def process(self, block: ArrayLike) -> np.ndarray:
        x = self._prep(block)
        y = self._core.process(x)
        if self._ratio is not None:
            y = y * self._out_phase.phasors(y.size)
        return self._out(y)


def fir_decimate(
    x: ArrayLike, taps: ArrayLike, down: int, rate_in_hz: float = 1.0, translate_hz: float | None = None
) -> np.ndarray:
    """One-shot :class:`FirDecimator`."""
    return run_once(FirDecimator(taps, down, rate_in_hz, translate_hz), x)


# --------------------------------------------------------------------------
# rational resampler
# --------------------------------------------------------------------------


class RationalResampler(Stage):
    """Streaming rational resampler: ``scipy.signal.upfirdn(taps, x, up, down)``.

    Output m is y[m] = sum_k h[k] u[m·down − k], u = x zero-stuffed by ``up``
    (taps used as given: for unity passband gain they should sum to ``up``;
    ``scipy.signal.resample_poly`` multiplies its window by ``up``). ``up`` and
    ``down`` are used as given (not reduced by their gcd).

    Output length: for n_in inputs the stream gives ceil(n_in·up/down)
    samples — the outputs whose newest contributing input has arrived — and
    holds nothing (``flush`` is empty). These are the leading samples of the
    one-shot ``upfirdn``; its last ceil(((n_in−1)·up + N)/down) −
    ceil(n_in·up/down) samples are the filter's ringing after the end of the
    input, which a stream produces only when more input (e.g. zeros) arrives.

    With fewer than ``up`` taps, ``upfirdn``'s own output is shorter; the stream
    continues with the (zero) values the definition gives, i.e. it equals
    ``upfirdn`` with the taps zero-padded to ``up`` samples.

    ``resample_poly(x, up, down, window=h)`` (coprime up, down, odd N) equals
    ``up ·`` this stream advanced by ((N−1)/2)/down output samples, which is
    ``delay``.
    """

    def __init__(self, taps: ArrayLike, up: int, down: int, rate_in_hz: float) -> None:
        h = checked_taps("taps", taps)
        self._up = checks.whole("up", up)
        self._down = checks.whole("down", down)
        fs = checks.positive("rate_in_hz", rate_in_hz)
        self._rate_in = fs
        self._rate_out = fs * self._up / self._down
        self._h = h
        self._complex_stage = h.dtype.kind == "c"
        self._delay = _energy_centroid(h) / self._down
        self._core = UpFirDn(h, self._up, self._down)
        self.reset()

    @property
    def up(self) -> int:
        return self._up

    @property
    def down(self) -> int:
        return self._down

    @property
    def taps(self) -> np.ndarray:
        return self._h.copy()

    def reset(self) -> None:
        self._complex_seen = False
        self._core.reset()

    def process(self, block: ArrayLike) -> np.ndarray:
        x = self._prep(block)
        return self._out(self._core.process(x))


def resample(x: ArrayLike, taps: ArrayLike, up: int, down: int, rate_in_hz: float = 1.0) -> np.ndarray:
    """One-shot :class:`RationalResampler` (leading ceil(n·up/down) samples of upfirdn)."""
    return run_once(RationalResampler(taps, up, down, rate_in_hz), x)
