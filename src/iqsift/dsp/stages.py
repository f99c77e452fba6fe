"""Stateful streaming DSP stages.

Every stage is an object built with its rates and taps fixed. It carries its
state (filter history, oscillator phase, decimation phase, partial frames)
from one block to the next, so that feeding a signal in blocks of any length
(including 0 and 1) gives the same output as feeding it in one piece::

    y = concatenate([stage.process(b) for b in blocks] + [stage.flush()])

Common interface (:class:`Stage`):

``process(block) -> ndarray``
    Consume a 1-D block of samples and return every output sample that is
    complete.
``flush() -> ndarray``
    Return what the stage still holds (possibly empty) and reset it. Causal
    FIR stages hold nothing: their output length is a pure function of the
    input length and ``flush`` returns an empty array.
``reset()``
    Forget all state (back to "nothing seen yet").
``rate_in``, ``rate_out``
    Sample rates in Hz (samples/s).
``delay``
    Group delay of the stage in *output* samples (float).

Sample types: complex input gives complex64 output; real input to a real stage
gives float32 output; arithmetic is done in float64 / complex128. A stage that
has seen complex input since its last reset keeps producing complex output
(its state is complex).

A one-shot function wraps each stage (:func:`mix`, :func:`fir_filter`,
:func:`fir_decimate`, :func:`resample`, :func:`dc_block`, :func:`agc`,
:func:`audio_bandpass`); :func:`run_once` does it for any stage.
"""

from __future__ import annotations

import abc
import functools
import math
import operator
from fractions import Fraction
from typing import Iterable, Sequence

import numpy as np
import scipy.fft as sfft
import scipy.signal as ssig
from numpy.lib.stride_tricks import sliding_window_view

from .. import checks
from ..errors import ParameterError

__all__ = [
    "Stage",
    "Chain",
    "Mixer",
    "FirFilter",
    "FirDecimator",
    "RationalResampler",
    "DCBlock",
    "AGC",
    "AudioBandpass",
    "run_once",
    "mix",
    "fir_filter",
    "fir_decimate",
    "resample",
    "dc_block",
    "agc",
    "audio_bandpass",
    "exact_ratio",
]

# --------------------------------------------------------------------------
# validation helpers
# --------------------------------------------------------------------------


def _check_rate(name: str, value: float) -> float:
    return checks.positive(name, value)


def _check_freq(name: str, value: float) -> float:
    return checks.finite(name, value)


def _check_int(name: str, value: int, minimum: int = 1) -> int:
    return checks.whole(name, value, minimum)


def _check_taps(name: str, taps) -> np.ndarray:
    h = np.asarray(taps)
    if h.ndim != 1 or h.size == 0:
        raise ParameterError(f"{name}: expected a non-empty 1-D array of FIR taps, got shape {h.shape}")
    if h.dtype.kind not in "iufc":
        raise ParameterError(f"{name}: taps must be numeric, got dtype {h.dtype}")
    h = h.astype(np.complex128 if h.dtype.kind == "c" else np.float64)
    if not np.all(np.isfinite(h)):
        raise ParameterError(f"{name}: taps must be finite, got a NaN or infinity")
    return h


def _as_block(block) -> np.ndarray:
    x = np.asarray(block)
    if x.ndim != 1:
        raise ParameterError(f"block: expected a 1-D array of samples, got shape {x.shape}")
    if x.dtype.kind not in "iufc":
        raise ParameterError(f"block: samples must be numeric, got dtype {x.dtype}")
    return x


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


# --------------------------------------------------------------------------
# exact rational phase
# --------------------------------------------------------------------------

#: Largest denominator of the phase rational: indices (base + A[k]) stay < 2**63.
_QMAX = 1 << 62


def _simplest_open(lo: Fraction, hi: Fraction | None) -> Fraction:
    """Simplest rational (smallest denominator) strictly between lo >= 0 and hi (None = +inf)."""
    n = math.floor(lo)
    if hi is None or n + 1 < hi:
        return Fraction(n + 1)
    # n <= lo < hi <= n + 1: write x = n + 1/y with y in (1/(hi - n), 1/(lo - n))
    lo_y = 1 / (hi - n)
    hi_y = None if lo == n else 1 / (lo - n)
    return n + 1 / _simplest_open(lo_y, hi_y)


def _simplest_rational_of_float(x: float) -> Fraction:
    """Simplest rational number that rounds to the float ``x``.

    This recovers what was most likely meant: 12345.678 -> 6172839/500,
    8333.333333333334 -> 25000/3, 2.4e6 -> 2400000 (the same idea as Python's
    shortest-repr, in rationals instead of decimals).
    """
    if x == 0.0:
        return Fraction(0)
    if x < 0:
        return -_simplest_rational_of_float(-x)
    fx = Fraction(x)
    down = fx - Fraction(math.nextafter(x, 0.0))
    nxt = math.nextafter(x, math.inf)
    up = Fraction(nxt) - fx if math.isfinite(nxt) else down
    cand = _simplest_open(fx - down / 2, fx + up / 2)
    if float(cand) != x:  # rounding ties: fall back to the exact binary value
        return fx
    return cand


def exact_ratio(freq_hz: float, rate_hz: float) -> Fraction:
    """The rational p/q (cycles per sample) used for a frequency ``freq_hz`` at ``rate_hz``.

    Both floats are first read as the simplest rational that rounds to them
    (so decimal input such as 12345.678 Hz at 2.4e6 Hz is taken exactly as
    written: 6172839/1200000000). If the resulting denominator exceeds 2**62
    the exact binary ratio is approximated with
    ``Fraction.limit_denominator(2**62)``; the frequency error is then below
    rate_hz / 2**62 (2.2e-13 Hz at 1 MHz). In all cases the frequency differs
    from the one given by the floats (phase step 2π·freq/rate per sample) by at
    most ulp(freq)/2 + |freq|·2**-53 + rate/2**62 Hz (reading both floats as
    simple rationals moves each by at most half a unit in its last place):
    < 1e-9 Hz for |freq| < 8 MHz.
    """
    f = _simplest_rational_of_float(freq_hz)
    fs = _simplest_rational_of_float(rate_hz)
    r = f / fs
    if r.denominator > _QMAX:
        r = (Fraction(freq_hz) / Fraction(rate_hz)).limit_denominator(_QMAX)
    return r


class _ExactPhase:
    """Phasors exp(-j 2π r n) for n = 0, 1, 2, ... with r = p/q exact.

    The sample counter is kept as n mod q in a Python int, the phase index of
    sample n is (p n) mod q, computed in int64 per sub-block of B samples as
    base_j + A[k], where A[k] = (p k) mod q (precomputed with Python ints) and
    base_j = (p (n0 + j B)) mod q (Python ints); both are < q <= 2**62 so the
    sum fits in int64. The only floating-point step is index/q -> phase, so
    the phase error is ~1e-15 rad at any n (no accumulation, no drift).
    For q <= 2**16 a table of the q phasors is used instead (fast path).
    """

    _B = 4096
    _TABLE_MAX = 1 << 16

    def __init__(self, ratio: Fraction):
        q = ratio.denominator
        p = ratio.numerator % q
        self.p, self.q = p, q
        self.n = 0  # n mod q
        if q <= self._TABLE_MAX:
            i = np.arange(q, dtype=np.float64)
            frac = i / q
            frac[frac >= 0.5] -= 1.0
            self._table = np.exp(-2j * np.pi * frac)
            self._a = None
        else:
            self._table = None
            self._a = np.array([(p * k) % q for k in range(self._B)], dtype=np.int64)
            self._step_b = (p * self._B) % q

    def advance(self, count: int) -> None:
        self.n = (self.n + count) % self.q

    def indices(self, count: int) -> np.ndarray:
        """Phase indices (p (n + k)) mod q for k < count; advances the counter."""
        p, q = self.p, self.q
        base = (p * self.n) % q
        self.advance(count)
        if count == 0:
            return np.zeros(0, dtype=np.int64)
        if self._table is not None:
            # p < 2**16 and count < 2**47: the product fits in int64.
            return (base + p * np.arange(count, dtype=np.int64)) % q
        nsub = -(-count // self._B)
        bases = np.empty(nsub, dtype=np.int64)
        b = base
        for j in range(nsub):
            bases[j] = b
            b = (b + self._step_b) % q
        idx = bases[:, None] + self._a[None, :]
        idx[idx >= q] -= q
        return idx.ravel()[:count]

    def phasors(self, count: int) -> np.ndarray:
        idx = self.indices(count)
        if self._table is not None:
            return self._table[idx]
        frac = idx.astype(np.float64) / float(self.q)
        frac[frac >= 0.5] -= 1.0
        return np.exp(-2j * np.pi * frac)

    def phase_rad(self) -> float:
        """Phase (rad, in [-π, π)) of the phasor for the next sample."""
        frac = Fraction((self.p * self.n) % self.q, self.q)
        if frac >= Fraction(1, 2):
            frac -= 1
        return -2.0 * math.pi * float(frac)


# --------------------------------------------------------------------------
# base classes
# --------------------------------------------------------------------------


class Stage(abc.ABC):
    """A streaming stage: ``process`` blocks, ``flush`` at the end, ``reset`` to restart.

    Subclasses set ``_rate_in``, ``_rate_out``, ``_delay`` and ``_complex_stage``
    (True when the stage always produces complex output) in ``__init__`` and
    implement :meth:`process` and :meth:`reset`. Stages that hold samples
    (partial frames) override :meth:`flush`.
    """

    _rate_in: float
    _rate_out: float
    _delay: float
    _complex_stage: bool = False
    _complex_seen: bool = False

    @property
    def rate_in(self) -> float:
        """Input sample rate, Hz."""
        return self._rate_in

    @property
    def rate_out(self) -> float:
        """Output sample rate, Hz."""
        return self._rate_out

    @property
    def delay(self) -> float:
        """Group delay, in output samples."""
        return self._delay

    @abc.abstractmethod
    def process(self, block) -> np.ndarray:
        """Consume a 1-D block, return the completed output samples."""

    @abc.abstractmethod
    def reset(self) -> None:
        """Forget all state."""

    def flush(self) -> np.ndarray:
        """Return whatever the stage still holds (empty here) and reset."""
        out = self._empty()
        self.reset()
        return out

    # helpers ---------------------------------------------------------------
    def _prep(self, block) -> np.ndarray:
        x = _as_block(block)
        if x.dtype.kind == "c":
            self._complex_seen = True
        if self._is_complex():
            return x.astype(np.complex128, copy=False)
        return x.astype(np.float64, copy=False)

    def _is_complex(self) -> bool:
        return self._complex_stage or self._complex_seen

    def _out_dtype(self):
        return np.complex64 if self._is_complex() else np.float32

    def _out(self, y: np.ndarray) -> np.ndarray:
        return np.asarray(y).astype(self._out_dtype(), copy=False)

    def _empty(self) -> np.ndarray:
        return np.zeros(0, dtype=self._out_dtype())

    def __repr__(self) -> str:
        return f"{type(self).__name__}(rate_in={self.rate_in:g}, rate_out={self.rate_out:g}, delay={self.delay:g})"


def run_once(stage: Stage, x) -> np.ndarray:
    """One-shot use of a stage: ``concatenate(stage.process(x), stage.flush())``.

    The stage is not reset first (so a :meth:`Mixer.advance` seek is kept);
    it ends reset.
    """
    a = stage.process(x)
    b = stage.flush()
    return np.concatenate([a, b])


class Chain(Stage):
    """Stages composed in series.

    ``process`` feeds each stage's output to the next. ``flush`` cascades:
    stage k's held samples go through stages k+1.. before those are flushed.
    ``rate_in``/``rate_out`` come from the ends; ``delay`` is the sum of the
    stage delays, each converted to output samples
    (delay_k * rate_out / rate_out_k).

    Parameters
    ----------
    stages : sequence of Stage
        At least one; each stage's ``rate_in`` must equal the previous
        stage's ``rate_out`` (relative tolerance 1e-9).
    """

    def __init__(self, stages: Sequence[Stage] | Iterable[Stage]):
        st = tuple(stages)
        if not st:
            raise ParameterError("stages: a Chain needs at least one stage, got none")
        for i, s in enumerate(st):
            if not isinstance(s, Stage):
                raise ParameterError(f"stages[{i}]: expected a Stage, got {type(s).__name__}")
        for i in range(1, len(st)):
            a, b = st[i - 1].rate_out, st[i].rate_in
            if abs(a - b) > 1e-9 * max(abs(a), abs(b)):
                raise ParameterError(
                    f"stages[{i}].rate_in: must equal the previous stage's rate_out {a:g} Hz, got {b:g} Hz"
                )
        self._stages = st

    @property
    def stages(self) -> tuple[Stage, ...]:
        return self._stages

    @property
    def rate_in(self) -> float:
        return self._stages[0].rate_in

    @property
    def rate_out(self) -> float:
        return self._stages[-1].rate_out

    @property
    def delay(self) -> float:
        out = self.rate_out
        return float(sum(s.delay * out / s.rate_out for s in self._stages))

    def process(self, block) -> np.ndarray:
        y = _as_block(block)
        for s in self._stages:
            y = s.process(y)
        return y

    def flush(self) -> np.ndarray:
        carry = None
        for s in self._stages:
            if carry is None:
                carry = s.flush()
            else:
                carry = np.concatenate([s.process(carry), s.flush()])
        return carry

    def reset(self) -> None:
        for s in self._stages:
            s.reset()


# --------------------------------------------------------------------------
# Mixer
# --------------------------------------------------------------------------


class Mixer(Stage):
    """Frequency translation by an exact-phase complex oscillator.

    ``y[n] = x[n] · exp(-j 2π f n / fs)``: a component at +f Hz in ``x`` moves
    to 0 Hz (mix DOWN by ``freq_hz``; a negative ``freq_hz`` mixes up). n
    counts samples since the last reset (or as moved by :meth:`advance`).

    f/fs is held as an exact rational p/q (see :func:`exact_ratio`); the
    phase of sample n is 2π ((p n) mod q)/q evaluated with integers, so the
    oscillator does not drift: after 10**9 samples the phase error is ~1e-15 rad.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    freq_hz : float
        Frequency to move to 0 Hz, Hz (any finite value; f and f + fs are the
        same mix).
    """

    _complex_stage = True

    def __init__(self, rate_hz: float, freq_hz: float):
        fs = _check_rate("rate_hz", rate_hz)
        f = _check_freq("freq_hz", freq_hz)
        self._rate_in = self._rate_out = fs
        self._delay = 0.0
        self._requested = f
        self._ratio = exact_ratio(f, fs)
        self._phase = _ExactPhase(self._ratio)

    @property
    def ratio(self) -> Fraction:
        """f/fs in cycles per sample, exactly as used."""
        return self._ratio

    @property
    def frequency_hz(self) -> float:
        """Achieved mixing frequency, Hz (ratio · rate_hz)."""
        return float(self._ratio * Fraction(self._rate_in))

    @property
    def frequency_error_hz(self) -> float:
        """Achieved minus requested frequency, Hz (exact arithmetic on the given floats)."""
        fs = Fraction(self._rate_in)
        return float((self._ratio - Fraction(self._requested) / fs) * fs)

    @property
    def phase_rad(self) -> float:
        """Phase of the oscillator for the next sample, rad in [-π, π)."""
        return self._phase.phase_rad()

    @property
    def position(self) -> int:
        """Sample counter modulo the period q of the oscillator."""
        return self._phase.n

    def oscillator(self, count: int) -> np.ndarray:
        """The next ``count`` phasors exp(-j 2π f n/fs), complex128; advances like ``process``."""
        return self._phase.phasors(_check_int("count", count, minimum=0))

    def advance(self, n_samples: int) -> None:
        """Move the oscillator by ``n_samples`` (may be negative) without processing (seek)."""
        try:
            n = operator.index(n_samples)
        except TypeError:
            raise ParameterError(f"n_samples: expected an integer, got {n_samples!r}") from None
        self._phase.advance(int(n))

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        return self._out(x * self._phase.phasors(x.size))

    def reset(self) -> None:
        self._phase.n = 0
        self._complex_seen = False


def mix(x, rate_hz: float, freq_hz: float) -> np.ndarray:
    """One-shot :class:`Mixer`: ``x · exp(-j 2π freq_hz n / rate_hz)``, complex64."""
    return run_once(Mixer(rate_hz, freq_hz), x)


# --------------------------------------------------------------------------
# FIR filter
# --------------------------------------------------------------------------


class FirFilter(Stage):
    """Streaming FIR filter, ``y = scipy.signal.lfilter(taps, 1, x)``.

    Two methods, same result (to float64 rounding):

    * ``"direct"``: ``scipy.signal.lfilter`` with its ``zi`` state carried.
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

    def __init__(self, taps, rate_hz: float, method: str = "auto", fft_size: int | None = None):
        self._h = _check_taps("taps", taps)
        fs = _check_rate("rate_hz", rate_hz)
        self._rate_in = self._rate_out = fs
        self._complex_stage = self._h.dtype.kind == "c"
        self._delay = _energy_centroid(self._h)
        n = self._h.size
        if method not in ("auto", "direct", "fft"):
            raise ParameterError(f"method: expected 'auto', 'direct' or 'fft', got {method!r}")
        if method == "auto":
            method = "fft" if n > self.DIRECT_MAX_TAPS else "direct"
        self._method = method
        if method == "fft":
            if fft_size is None:
                nfft = sfft.next_fast_len(max(8 * n, 256))
            else:
                nfft = _check_int("fft_size", fft_size, minimum=n)
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

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        if x.dtype.kind == "c" and self._state.dtype.kind != "c":
            self._state = self._state.astype(np.complex128)
        if x.size == 0:
            return self._empty()
        if self._method == "direct":
            y, self._state = ssig.lfilter(self._h, 1.0, x, zi=self._state)
            return self._out(y)
        # fft method: _state holds the last N-1 inputs
        m = self._h.size - 1
        buf = np.concatenate([self._state, x])
        if x.size < self._SMALL_BLOCK:
            y = np.convolve(buf, self._h, mode="valid")
        else:
            y = self._overlap_save(buf, x.size)
        if m:
            self._state = buf[-m:].copy()
        return self._out(y)

    def _overlap_save(self, buf: np.ndarray, count: int) -> np.ndarray:
        m = self._h.size - 1
        nfft, hop = self._nfft, self._hop
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


def fir_filter(x, taps, rate_hz: float = 1.0, method: str = "auto") -> np.ndarray:
    """One-shot :class:`FirFilter`: ``lfilter(taps, 1, x)`` as float32/complex64."""
    return run_once(FirFilter(taps, rate_hz, method=method), x)


# --------------------------------------------------------------------------
# streaming upfirdn core (shared by FirDecimator and RationalResampler)
# --------------------------------------------------------------------------


class _UpFirDn:
    """Streaming ``scipy.signal.upfirdn(h, x, up, down)`` without the tail.

    Output m is y[m] = sum_k h[k] u[m·down − k], u the input zero-stuffed by
    ``up``. Outputs are emitted for m·down < n_in·up, i.e. ceil(n_in·up/down)
    of them: exactly those whose newest contributing input has arrived. The
    buffer keeps the inputs still needed (global index s onward); to align
    the decimation phase, ``z = (s·up) mod down`` zeros are put in front of
    the taps for each call.
    """

    def __init__(self, h: np.ndarray, up: int, down: int):
        if h.size < up:
            h = np.concatenate([h, np.zeros(up - h.size, dtype=h.dtype)])
        self.h, self.up, self.down = h, up, down
        self.reset()

    def reset(self) -> None:
        self.buf = None  # inputs still needed; rows of a 2-D block are independent channels
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
        y = ssig.upfirdn(hz, buf, up, down, axis=-1)[..., j0 : j0 + count]
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
    Computed with ``scipy.signal.upfirdn`` (polyphase, only the kept outputs)
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

    def __init__(self, taps, down: int, rate_in_hz: float, translate_hz: float | None = None):
        h = _check_taps("taps", taps)
        self._down = _check_int("down", down)
        fs = _check_rate("rate_in_hz", rate_in_hz)
        self._rate_in = fs
        self._rate_out = fs / self._down
        self._h = h
        self._delay = _energy_centroid(h) / self._down
        if translate_hz is None:
            self._ratio = None
            g = h
            self._complex_stage = h.dtype.kind == "c"
        else:
            f0 = _check_freq("translate_hz", translate_hz)
            self._ratio = exact_ratio(f0, fs)
            g = h * np.conj(_ExactPhase(self._ratio).phasors(h.size))
            self._complex_stage = True
        self._g = g
        self._core = _UpFirDn(g, 1, self._down)
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
            self._out_phase = _ExactPhase(self._ratio * self._down)

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        y = self._core.process(x)
        if self._ratio is not None:
            y = y * self._out_phase.phasors(y.size)
        return self._out(y)


def fir_decimate(x, taps, down: int, rate_in_hz: float = 1.0, translate_hz: float | None = None) -> np.ndarray:
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

    def __init__(self, taps, up: int, down: int, rate_in_hz: float):
        h = _check_taps("taps", taps)
        self._up = _check_int("up", up)
        self._down = _check_int("down", down)
        fs = _check_rate("rate_in_hz", rate_in_hz)
        self._rate_in = fs
        self._rate_out = fs * self._up / self._down
        self._h = h
        self._complex_stage = h.dtype.kind == "c"
        self._delay = _energy_centroid(h) / self._down
        self._core = _UpFirDn(h, self._up, self._down)
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

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        return self._out(self._core.process(x))


def resample(x, taps, up: int, down: int, rate_in_hz: float = 1.0) -> np.ndarray:
    """One-shot :class:`RationalResampler` (leading ceil(n·up/down) samples of upfirdn)."""
    return run_once(RationalResampler(taps, up, down, rate_in_hz), x)


# --------------------------------------------------------------------------
# DC block
# --------------------------------------------------------------------------


def dc_block_coefficient(rate_hz: float, cutoff_hz: float) -> float:
    """Pole ``a`` of y[n] = x[n] − x[n−1] + a·y[n−1] with |H| = 1/√2 (−3.01 dB) at ``cutoff_hz``.

    |H(e^{jω})|² = 2(1 − cos ω)/(1 − 2a cos ω + a²) = 1/2 gives
    a = c − sqrt((1 − c)(3 − c)), c = cos(2π cutoff/rate) (the root below 1);
    for small cutoffs a ≈ 1 − 2π cutoff/rate.
    """
    c = math.cos(2.0 * math.pi * cutoff_hz / rate_hz)
    return c - math.sqrt((1.0 - c) * (3.0 - c))


class DCBlock(Stage):
    """First-order DC-removal high-pass, ``y[n] = x[n] − x[n−1] + a·y[n−1]``.

    R. Lyons, *Understanding Digital Signal Processing* (3rd ed.), DC removal
    section (§13.23, memory for the number): a zero at DC and a pole at ``a``
    just inside the unit circle. ``a`` puts the −3.01 dB point (absolute,
    |H| = 1/√2) at ``cutoff_hz`` (:func:`dc_block_coefficient`). Applied with
    ``scipy.signal.lfilter([1, −1], [1, −a], x, zi=...)`` in float64.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    cutoff_hz : float
        −3 dB frequency, Hz, 0 < cutoff < rate/8 (default 30 Hz: below the
        300 Hz lower edge of the voice band, settling time constant ≈ 5 ms;
        common practice).

    Notes
    -----
    Real or complex input. ``delay`` = 0 (the phase lead is confined to the
    region near the cutoff).
    """

    def __init__(self, rate_hz: float, cutoff_hz: float = 30.0):
        fs = _check_rate("rate_hz", rate_hz)
        fc = _check_freq("cutoff_hz", cutoff_hz)
        if not (0.0 < fc < fs / 8.0):
            raise ParameterError(
                f"cutoff_hz: must be > 0 and < rate_hz/8 = {fs / 8.0:g} Hz, got {cutoff_hz!r}"
            )
        self._rate_in = self._rate_out = fs
        self._delay = 0.0
        self._cutoff = fc
        self._a = dc_block_coefficient(fs, fc)
        self._b_coef = np.array([1.0, -1.0])
        self._a_coef = np.array([1.0, -self._a])
        self.reset()

    @property
    def cutoff_hz(self) -> float:
        return self._cutoff

    @property
    def pole(self) -> float:
        """The feedback coefficient a."""
        return self._a

    def reset(self) -> None:
        self._complex_seen = False
        self._zi = np.zeros(1, dtype=np.float64)

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        if x.dtype.kind == "c" and self._zi.dtype.kind != "c":
            self._zi = self._zi.astype(np.complex128)
        if x.size == 0:
            return self._empty()
        y, self._zi = ssig.lfilter(self._b_coef, self._a_coef, x, zi=self._zi)
        return self._out(y)


def dc_block(x, rate_hz: float, cutoff_hz: float = 30.0) -> np.ndarray:
    """One-shot :class:`DCBlock`."""
    return run_once(DCBlock(rate_hz, cutoff_hz), x)


# --------------------------------------------------------------------------
# AGC
# --------------------------------------------------------------------------


class AGC(Stage):
    """Frame-based automatic gain control.

    The input is cut into frames of F = round(frame_s · rate_hz) samples on a
    grid that continues across blocks (a partial frame is held until it
    completes; ``flush`` releases it). Per frame a level L is measured
    (``"peak"``: max |x|; ``"rms"``: sqrt(mean |x|²)) and smoothed into the
    level estimate E by a one-pole recursion with separate coefficients::

        E_i = E_{i−1} + α (L_i − E_{i−1}),  α = 1 − exp(−T/τ),  T = F/rate_hz

    with τ = ``attack_s`` when L_i > E_{i−1} and τ = ``decay_s`` otherwise.
    After a step in level E covers 1 − 1/e (63.2 %) of the step in τ seconds
    (at frame resolution): these are the attack and decay time constants.
    The first frame sets E directly (no start-up transient).

    The gain of frame i is G_i = min(A_t / E_i, max_gain), A_t = 10^(target/20);
    within frame i the gain moves linearly from G_{i−1} to G_i (reached at its
    last sample), so it has no steps. With a steady input the output level
    is ``target_dbfs`` (peak or RMS, as the detector), unless max_gain limits.

    Samples are not delayed relative to each other (``delay`` = 0), but up to
    F − 1 input samples are held (latency of one frame).

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    target_dbfs : float
        Output level, dBFS (peak or RMS by ``detector``).
    attack_s, decay_s : float
        Time constants (s) for rising / falling level, > 0.
    max_gain_db : float
        Gain ceiling, dB (reached on silence).
    frame_s : float
        Frame length, s (default 1 ms).
    detector : {"peak", "rms"}
    """

    def __init__(
        self,
        rate_hz: float,
        target_dbfs: float = -6.0,
        attack_s: float = 0.01,
        decay_s: float = 0.5,
        max_gain_db: float = 60.0,
        frame_s: float = 0.001,
        detector: str = "peak",
    ):
        fs = _check_rate("rate_hz", rate_hz)
        target = _check_freq("target_dbfs", target_dbfs)
        if target > 0.0:
            raise ParameterError(f"target_dbfs: must be <= 0 dBFS, got {target_dbfs!r}")
        for name, v in (("attack_s", attack_s), ("decay_s", decay_s), ("frame_s", frame_s)):
            vv = _check_freq(name, v)
            if vv <= 0.0:
                raise ParameterError(f"{name}: must be > 0 s, got {v!r}")
        mg = _check_freq("max_gain_db", max_gain_db)
        if detector not in ("peak", "rms"):
            raise ParameterError(f"detector: expected 'peak' or 'rms', got {detector!r}")
        self._rate_in = self._rate_out = fs
        self._delay = 0.0
        self._frame = max(1, int(round(frame_s * fs)))
        self._attack = float(attack_s)
        self._decay = float(decay_s)
        self._target = 10.0 ** (target / 20.0)
        self._max_gain = 10.0 ** (mg / 20.0)
        self._detector = detector
        self.reset()

    @property
    def frame_len(self) -> int:
        """Frame length F, samples."""
        return self._frame

    @property
    def level(self) -> float | None:
        """Current level estimate E (linear, full scale 1.0), None before the first frame."""
        return self._env

    def reset(self) -> None:
        self._complex_seen = False
        self._held = np.zeros(0, dtype=np.float64)
        self._env: float | None = None
        self._g_prev: float | None = None

    def _levels(self, frames: np.ndarray) -> np.ndarray:
        a = np.abs(frames)
        if self._detector == "peak":
            return a.max(axis=1)
        return np.sqrt(np.mean(a * a, axis=1))

    def _run(self, frames: np.ndarray) -> np.ndarray:
        """Gain-apply whole frames (rows of equal length); updates the recursion state."""
        nfr, flen = frames.shape
        t = flen / self._rate_in
        alpha_a = -math.expm1(-t / self._attack)
        alpha_d = -math.expm1(-t / self._decay)
        lv = self._levels(frames)
        g = np.empty(nfr)
        g_start = np.empty(nfr)
        env, g_prev = self._env, self._g_prev
        tgt, gmax = self._target, self._max_gain
        for i, li in enumerate(lv.tolist()):  # loop over frames, not samples
            if env is None:
                env = li
            else:
                env += (alpha_a if li > env else alpha_d) * (li - env)
            gi = gmax if env * gmax <= tgt else tgt / env
            g_start[i] = gi if g_prev is None else g_prev
            g[i] = gi
            g_prev = gi
        self._env, self._g_prev = env, g_prev
        ramp = np.arange(1, flen + 1, dtype=np.float64) / flen
        gains = g_start[:, None] + (g - g_start)[:, None] * ramp[None, :]
        return (frames * gains).ravel()

    def process(self, block) -> np.ndarray:
        x = self._prep(block)
        if x.dtype.kind == "c" and self._held.dtype.kind != "c":
            self._held = self._held.astype(np.complex128)
        buf = np.concatenate([self._held, x]) if self._held.size else x
        f = self._frame
        nfull = buf.size // f
        self._held = buf[nfull * f :].copy()
        if nfull == 0:
            return self._empty()
        return self._out(self._run(buf[: nfull * f].reshape(nfull, f)))

    def flush(self) -> np.ndarray:
        if self._held.size:
            out = self._out(self._run(self._held.reshape(1, -1)))
        else:
            out = self._empty()
        self.reset()
        return out


def agc(x, rate_hz: float, **kwargs) -> np.ndarray:
    """One-shot :class:`AGC` (keyword arguments as the class)."""
    return run_once(AGC(rate_hz, **kwargs), x)


# --------------------------------------------------------------------------
# audio band-pass
# --------------------------------------------------------------------------


@functools.lru_cache(maxsize=32)
def _audio_bandpass_design(fs: float, lo: float, hi: float, tw: float, a: float):
    """Kaiser's formulas are approximate: design, measure, raise the design attenuation by 0.5 dB
    until the measured stop band meets ``a``. Cached: every channel of a plan usually asks the same."""
    a_design = a
    for _ in range(20):
        taps, beta = AudioBandpass._design(fs, lo, hi, tw, a_design)
        stop_db, ripple_db = AudioBandpass._measure(taps, fs, lo, hi, tw)
        if stop_db <= -a:
            break
        a_design += 0.5
    taps.setflags(write=False)
    return taps, beta, a_design, stop_db, ripple_db


class AudioBandpass(FirFilter):
    """Linear-phase Kaiser-window band-pass FIR for the voice band.

    Designed with ``scipy.signal.kaiserord`` (Kaiser 1974; Oppenheim & Schafer,
    DTSP, §7.6: β and N from the attenuation A and the transition width) and
    ``scipy.signal.firwin``: pass band [low_hz, high_hz], stop bands below
    low_hz − transition_hz and above high_hz + transition_hz (firwin's cutoffs
    sit mid-transition, at low − tw/2 and high + tw/2; N made odd, type I).
    Ripple δ ≈ 10^(−A/20) in both bands (window method). Kaiser's length
    formula is approximate (at A = 60 dB it gave −58.8 dB measured), so the
    taps are checked with ``scipy.signal.freqz`` and the design attenuation is
    raised in 0.5 dB steps until the measured stop band is at or below
    −atten_db (``measured_stopband_db``, ``measured_ripple_db``). Applied with
    the overlap-save path of :class:`FirFilter`. ``delay`` = (N − 1)/2 samples.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    low_hz, high_hz : float
        Pass-band edges, Hz.
    atten_db : float
        Stop-band attenuation A, dB (> 0).
    transition_hz : float, optional
        Transition width, Hz; default min(200, low_hz/2, (rate/2 − high_hz)/2).
    """

    def __init__(
        self,
        rate_hz: float,
        low_hz: float = 300.0,
        high_hz: float = 3000.0,
        atten_db: float = 60.0,
        transition_hz: float | None = None,
    ):
        fs = _check_rate("rate_hz", rate_hz)
        lo = _check_freq("low_hz", low_hz)
        hi = _check_freq("high_hz", high_hz)
        a = _check_freq("atten_db", atten_db)
        if a <= 0.0:
            raise ParameterError(f"atten_db: must be > 0 dB, got {atten_db!r}")
        if not (0.0 < lo < hi < fs / 2.0):
            raise ParameterError(
                f"low_hz/high_hz: need 0 < low < high < rate/2 = {fs / 2:g} Hz, got {low_hz!r}, {high_hz!r}"
            )
        if transition_hz is None:
            tw = min(200.0, lo / 2.0, (fs / 2.0 - hi) / 2.0)
        else:
            tw = _check_freq("transition_hz", transition_hz)
        if not (0.0 < tw < lo and hi + tw < fs / 2.0):
            raise ParameterError(
                f"transition_hz: need 0 < tw < low_hz and high_hz + tw < rate/2, got {tw!r}"
            )
        taps, beta, a_design, stop_db, ripple_db = _audio_bandpass_design(fs, lo, hi, tw, a)
        self._low, self._high, self._atten, self._tw, self._beta = lo, hi, a, tw, float(beta)
        self._design_atten = a_design
        self._stop_db, self._ripple_db = stop_db, ripple_db
        super().__init__(taps, fs, method="fft")
        self._delay = (taps.size - 1) / 2.0

    @staticmethod
    def _design(fs, lo, hi, tw, a):
        numtaps, beta = ssig.kaiserord(a, tw / (0.5 * fs))
        if numtaps % 2 == 0:
            numtaps += 1
        taps = ssig.firwin(
            numtaps, [lo - tw / 2.0, hi + tw / 2.0], pass_zero=False, window=("kaiser", beta), fs=fs
        )
        return taps, beta

    @staticmethod
    def _measure(taps, fs, lo, hi, tw):
        """(max stop-band gain dB, max |pass-band deviation| dB) from scipy.signal.freqz."""
        w, hresp = ssig.freqz(taps, 1, worN=max(8192, 16 * taps.size), fs=fs)
        mag = np.abs(hresp)
        pb = (w >= lo) & (w <= hi)
        sb = (w <= lo - tw) | (w >= hi + tw)
        stop = 20.0 * np.log10(max(float(mag[sb].max()), 1e-300))
        ripple = float(np.max(np.abs(20.0 * np.log10(mag[pb]))))
        return stop, ripple

    @property
    def low_hz(self) -> float:
        return self._low

    @property
    def high_hz(self) -> float:
        return self._high

    @property
    def atten_db(self) -> float:
        return self._atten

    @property
    def transition_hz(self) -> float:
        return self._tw

    @property
    def kaiser_beta(self) -> float:
        return self._beta

    @property
    def design_atten_db(self) -> float:
        """Attenuation given to kaiserord (atten_db plus any margin the check added), dB."""
        return self._design_atten

    @property
    def measured_stopband_db(self) -> float:
        """Highest stop-band gain measured on the taps (freqz), dB (<= −atten_db)."""
        return self._stop_db

    @property
    def measured_ripple_db(self) -> float:
        """Largest pass-band deviation from 0 dB measured on the taps, dB."""
        return self._ripple_db

    @property
    def num_taps(self) -> int:
        return self._h.size


def audio_bandpass(
    x,
    rate_hz: float,
    low_hz: float = 300.0,
    high_hz: float = 3000.0,
    atten_db: float = 60.0,
    transition_hz: float | None = None,
) -> np.ndarray:
    """One-shot :class:`AudioBandpass`."""
    return run_once(AudioBandpass(rate_hz, low_hz, high_hz, atten_db, transition_hz), x)
