"""Detectors: complex baseband at the channel rate in, real signal at the same rate out.

The channel front end has already mixed the channel's nominal carrier to 0 Hz,
filtered and decimated to the channel rate ``fs_ch``.  A detector turns that
complex64 baseband ``z[n]`` into a real float32 signal at the same rate; the
receiver removes DC, normalises, band-passes and resamples it afterwards.

Modes (see :func:`make_detector`):

``envelope``
    ``|z|`` -- the envelope detector (S. Haykin, *Communication Systems*, 4th
    ed., amplitude modulation chapter).  Output ``A(1 + m s(t))`` while
    ``1 + m s(t) > 0``; distorts when overmodulated or when the carrier is
    faded below the sidebands.
``coherent``
    Synchronous (coherent) detection of AM with carrier (Haykin, coherent
    detection): the carrier is acquired anywhere in the channel, tracked, and
    recovered from the signal itself; the output is ``Re(z · conj(ĉ) / |ĉ|)``,
    i.e. the in-phase component ``A(1 + m s(t))`` including negative
    excursions, with the carrier DC kept.
``usb`` / ``lsb``
    Single sideband, product detection with the carrier at 0 Hz: ``Re(z)``,
    optionally after a one-sided complex band-pass that removes the opposite
    sideband.
``dsb``
    Double sideband, suppressed carrier: carrier recovery by squaring, output
    ``Re(z · e^{-jθ̂})`` with a 180° ambiguity (documented on
    :class:`DsbDetector`).

Streaming convention (all detectors)
------------------------------------
Every detector is a stage (:class:`iqsift.dsp.stages.Stage`): ``process(block)``
returns the output that is ready, ``flush()`` returns the rest, ``reset()``
starts a new stream; read-only
``rate_in`` = ``rate_out`` = ``fs_ch`` and ``delay`` (an integer number of
samples, as a float).  As for the stages of :mod:`iqsift.dsp.stages`, the
output is causal and its total length equals the input length: ``out[n +
delay]`` is the detection of ``in[n]``, the first ``delay`` outputs are the
start-up of the filter (the delayed signal path is zero there), and the
detection of the last ``delay`` input samples is never emitted (feed
``delay`` zeros before ``flush()`` to push it out).  Frame-based detectors
(coherent, DSB) hold up to half an analysis window of look-ahead, so
``process`` may return fewer samples than it was given and ``flush()``
returns the held part (then resets, as a stage does; their carrier track
stays readable until the next stream starts).  Chunked processing gives the
same output as one-shot processing: frame detectors work on a fixed frame
grid counted from the first sample of the stream, so their arithmetic does
not depend on how the input was split.  :func:`detect` is the one-shot
wrapper and returns ``N`` aligned samples.
"""

from __future__ import annotations

import inspect
import math
import warnings
from collections import deque
from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy import fft as sfft

from .. import checks
from ..errors import IqsiftWarning, ParameterError
from ..modes import MODES
from .filters import carrier_lowpass_taps, sideband_bandpass_taps
from .stages import Stage
from .stages.linear import fft_convolve_valid, fir_valid

__all__ = [
    "DETECTOR_MODES",
    "EnvelopeDetector",
    "CoherentDetector",
    "SidebandDetector",
    "DsbDetector",
    "make_detector",
    "detect",
]

DETECTOR_MODES = tuple(m for m in MODES if m != "isb")  # isb = two sideband detectors (receiver/isb.py)

_TWO_PI = 2.0 * math.pi


# ----------------------------------------------------------------------------- validation
def _as_block(block: ArrayLike) -> np.ndarray:
    x = np.asarray(block)
    if x.ndim != 1:
        raise ParameterError(f"block: got an array of shape {x.shape}; a detector takes a 1-D array of samples")
    if x.size and not (np.issubdtype(x.dtype, np.number) or x.dtype == np.bool_):
        raise ParameterError(f"block: got dtype {x.dtype}; samples must be numeric (complex64 expected)")
    return x.astype(np.complex128, copy=False)


# ----------------------------------------------------------------------------- base class
class _Detector(Stage):
    """Common machinery: rates, delay, validation, auto-restart after flush."""

    mode = ""
    _delay: int  # a whole number of samples: the signal path is delayed by a sample buffer

    def __init__(self, rate_hz: float) -> None:
        self._rate = checks.positive("rate_hz", rate_hz)
        self._rate_in = self._rate_out = self._rate
        self._delay = 0
        self._finished = False

    @property
    def delay(self) -> float:
        """Group delay in output samples (an integer value): ``out[n + delay]`` is the detection of ``in[n]``."""
        return float(self._delay)

    def reset(self) -> None:
        """Forget all state and start a new stream."""
        self._finished = False
        self._reset_state()

    def _start(self, block: ArrayLike) -> np.ndarray:
        x = _as_block(block)
        if self._finished:  # a new stream after flush()
            self.reset()
        return x

    def _reset_state(self) -> None:  # pragma: no cover - overridden
        raise NotImplementedError

    def __repr__(self) -> str:
        return f"{type(self).__name__}(rate_hz={self._rate:g}, delay={self._delay})"


# ----------------------------------------------------------------------------- envelope
class EnvelopeDetector(_Detector):
    """Envelope detector: ``y[n] = |z[n]|``.

    For AM ``z = A(1 + m s(t))·e^{jθ}`` the output is ``A|1 + m s(t)|``, which
    equals the message plus carrier DC while ``1 + m s(t) > 0`` and is
    distorted otherwise (overmodulation, selective fading of the carrier) --
    Haykin, *Communication Systems*, envelope detection.  Insensitive to the
    carrier's frequency offset.  ``delay`` = 0; ``flush()`` returns nothing.

    Parameters
    ----------
    rate_hz : float
        Channel sample rate in Hz.
    """

    mode = "envelope"

    def __init__(self, rate_hz: float) -> None:
        super().__init__(rate_hz)

    def _reset_state(self) -> None:
        pass

    def process(self, block: ArrayLike) -> np.ndarray:
        """Return ``|block|`` as float32 (same length as ``block``)."""
        x = self._start(block)
        return np.abs(x).astype(np.float32)

    def flush(self) -> np.ndarray:
        """Nothing is held: return an empty float32 array (and reset)."""
        self.reset()
        return np.zeros(0, np.float32)


# ----------------------------------------------------------------------------- sideband
class SidebandDetector(_Detector):
    """Single-sideband product detector with the carrier at 0 Hz: ``y = Re(z)``.

    Why ``Re(z)`` serves both sidebands: a USB signal carrying the real message
    ``s(t)`` is the analytic signal ``z = s + j·ŝ`` (``ŝ`` the Hilbert transform;
    spectrum only at positive frequencies), so ``Re(z) = s``.  The LSB signal is
    its mirror image in frequency, ``z = conj(s + j·ŝ) = s - j·ŝ`` (spectrum only
    at negative frequencies), and again ``Re(z) = s``: a tone ``cos(ωt)`` sent on
    LSB arrives as ``e^{-jωt}``, whose real part is ``cos(ωt)``.  The mirror is
    therefore undone by taking the real part; no conjugation is needed.  The
    opposite sideband, however, also lands in ``Re(z)`` (``Re`` of ``e^{+jωt}``
    and of ``e^{-jωt}`` is the same tone), so unless the front end removed it,
    ``sideband_filter=True`` applies a one-sided complex band-pass
    (:func:`sideband_bandpass_taps`) first.  (SSB modulation and demodulation:
    Haykin, *Communication Systems*, single-sideband modulation.)

    Parameters
    ----------
    rate_hz : float
        Channel sample rate in Hz.
    sideband : {"usb", "lsb"}
        Which sideband carries the message.
    sideband_filter : bool
        Apply the one-sided band-pass (default True).  With False, ``delay`` is 0.
    low_hz, high_hz : float
        Audio passband of the band-pass in Hz (default 300–3000 Hz).
    transition_hz : float, optional
        Transition width in Hz (default ``max(2·low_hz, 200)``).
    atten_db : float
        Designed opposite-sideband attenuation in dB (default 60 dB).
    """

    def __init__(
        self,
        rate_hz: float,
        sideband: str = "usb",
        *,
        sideband_filter: bool = True,
        low_hz: float = 300.0,
        high_hz: float = 3000.0,
        transition_hz: float | None = None,
        atten_db: float = 60.0,
    ) -> None:
        super().__init__(rate_hz)
        side = str(sideband).lower()
        if side not in ("usb", "lsb"):
            raise ParameterError(f"sideband: got {sideband!r}; it must be 'usb' or 'lsb'")
        self.sideband = side
        self.mode = side
        self.sideband_filter = bool(sideband_filter)
        self._taps: np.ndarray | None
        if self.sideband_filter:
            self._taps = sideband_bandpass_taps(rate_hz, side, low_hz, high_hz, transition_hz, atten_db)
            self._delay = (len(self._taps) - 1) // 2
        else:
            self._taps = None
            self._delay = 0
        self._reset_state()

    @property
    def taps(self) -> np.ndarray | None:
        """The complex band-pass taps (a copy), or None without the sideband filter."""
        return None if self._taps is None else self._taps.copy()

    def _reset_state(self) -> None:
        self._hist = None if self._taps is None else np.zeros(len(self._taps) - 1, np.complex128)

    def _filter(self, x: np.ndarray) -> np.ndarray:
        if self._taps is None:
            return x
        assert self._hist is not None  # set with the taps
        buf = np.concatenate((self._hist, x))
        self._hist = buf[x.size :]
        return fir_valid(buf, self._taps)

    def process(self, block: ArrayLike) -> np.ndarray:
        """Return ``Re(z)`` (after the band-pass, if any) for ``block``, float32, same length."""
        x = self._start(block)
        if x.size == 0:
            return np.zeros(0, np.float32)
        return self._filter(x).real.astype(np.float32)

    def flush(self) -> np.ndarray:
        """A causal FIR holds nothing: return an empty float32 array (and reset)."""
        self.reset()
        return np.zeros(0, np.float32)


# ----------------------------------------------------------------------------- frame-based carrier recovery
TRACK_FRAMES_KEPT = 3000
"""Frames of :attr:`carrier_track` kept (the latest; one minute at the default 20 ms frame): bounded memory."""


class _CarrierTracker(_Detector):
    """Frame-wise carrier frequency estimation + phase-continuous NCO + carrier low-pass.

    Frame ``k`` covers input samples ``[k·H, (k+1)·H)`` (``H`` = ``frame_s·fs``).
    Its carrier frequency is estimated (the subclass's ``_estimate``) from an
    analysis window of ``W`` samples centred on the frame (zeros before the
    stream's start and after its end).  The common estimate is the *squared
    line*: the spectrum of ``z²`` (Hann window, zero-padded FFT) is searched
    for its largest line, refined by parabolic interpolation of the log
    magnitude, and halved.  Squaring makes the estimate robust: for any
    AM-family signal ``z = p(t)·e^{jθ(t)}`` with a real ``p`` (AM with or
    without carrier, overmodulated, carrier faded), ``z² = p²·e^{j2θ}`` with
    ``p² >= 0``, and the spectrum of a non-negative sequence (times a
    non-negative window) has its largest magnitude at zero frequency, so the
    peak of ``|FFT(w·z²)|`` sits at ``2Δf`` even when message tones are
    stronger than the carrier (common practice for DSB-SC carrier recovery;
    the peak property is the triangle inequality).  The previous frequency is
    held when the frame's line is not clear: its peak is less than
    ``min_peak_db`` above the median of the search range (no signal), or more
    than ``accept_drop_db`` below the recent best line-to-median ratio (a
    peak-hold that decays by ``release_db_per_s``).  The second rule rejects
    the poor estimates of windows that only catch the edge of a talk spurt;
    holding an accurate frequency through a pause keeps the DSB phase (and
    so the sign) across the pause.

    The NCO ``φ[n]`` runs at the frame's frequency and is phase-continuous across
    frames; ``zm = z·e^{-jφ}`` then has its carrier within a fraction of a hertz
    of 0 Hz, and the subclass filters ``zm`` (or ``zm²``) with
    :func:`carrier_lowpass_taps` to obtain the carrier phasor.
    """

    _offset_limit = 0.25  # max_offset_hz must stay below this fraction of the rate ...
    _offset_reason = "the squared signal's line at twice the offset must stay below rate/2"  # ... because

    def __init__(self, rate_hz: float, *, max_offset_hz: float, frame_s: float, window_s: float,
                 carrier_stop_hz: float, carrier_atten_db: float, min_peak_db: float, accept_drop_db: float,
                 release_db_per_s: float, initial_offset_hz: float) -> None:
        super().__init__(rate_hz)
        fs = self._rate
        self.max_offset_hz = checks.positive("max_offset_hz", max_offset_hz)
        if self.max_offset_hz >= fs * self._offset_limit:
            raise ParameterError(
                f"max_offset_hz: got {max_offset_hz!r} Hz; it must be below {self._offset_limit:g}·rate = "
                f"{fs * self._offset_limit:g} Hz ({self._offset_reason})"
            )
        self.frame_s = checks.positive("frame_s", frame_s)
        self.window_s = checks.positive("window_s", window_s)
        if self.window_s < self.frame_s:
            raise ParameterError(f"window_s: got {window_s!r} s; it must be at least frame_s = {frame_s!r} s")
        self.min_peak_db = checks.finite("min_peak_db", min_peak_db)
        self.accept_drop_db = checks.positive("accept_drop_db", accept_drop_db)
        self.release_db_per_s = checks.positive("release_db_per_s", release_db_per_s)
        self.initial_offset_hz = checks.finite("initial_offset_hz", initial_offset_hz)
        if abs(self.initial_offset_hz) > self.max_offset_hz:
            raise ParameterError(
                f"initial_offset_hz: got {initial_offset_hz!r} Hz; it must lie within ±max_offset_hz = "
                f"±{self.max_offset_hz:g} Hz"
            )
        self._hop = max(1, int(round(self.frame_s * fs)))
        self._win_len = max(self._hop, int(round(self.window_s * fs)))
        if self._win_len < 16:
            raise ParameterError(f"window_s: got {window_s!r} s, only {self._win_len} samples; need >= 16 samples")
        self._nfft = 1 << int(math.ceil(math.log2(2 * self._win_len)))
        self._window = np.hanning(self._win_len)  # the symmetric Hann window (scipy.signal.windows.hann, sym=True)
        k_max = int(math.floor(self.max_offset_hz / fs * self._nfft))
        self._search_k = np.arange(-k_max, k_max + 1)  # bins of the signal's spectrum within ±max_offset_hz
        self._taps = carrier_lowpass_taps(fs, carrier_stop_hz, carrier_atten_db)
        self._delay = (len(self._taps) - 1) // 2
        self._reset_state()

    # -- public read-only views
    @property
    def carrier_taps(self) -> np.ndarray:
        """The carrier low-pass taps (a copy)."""
        return self._taps.copy()

    @property
    def frame_length(self) -> int:
        """Frame (hop) length in samples."""
        return self._hop

    @property
    def window_length(self) -> int:
        """Analysis window length in samples."""
        return self._win_len

    @property
    def carrier_offset_hz(self) -> float:
        """Carrier offset from 0 Hz in Hz estimated for the latest frame (NaN before the first frame)."""
        return self._track[-1][1] if self._track else float("nan")

    @property
    def carrier_track(self) -> list[tuple[float, float]]:
        """``[(time_s, offset_hz), ...]``: per frame, the frame centre (s from stream start) and the NCO frequency (Hz).

        The latest :data:`TRACK_FRAMES_KEPT` frames; kept after :meth:`flush` until the next stream starts
        (``reset()`` or ``process()`` after flush).
        """
        return list(self._track)

    # -- state
    def _reset_state(self) -> None:
        self._buf = np.zeros(0, np.complex128)
        self._buf_start = 0
        self._n_in = 0
        self._k = 0
        self._phase = 0.0
        self._freq = self.initial_offset_hz
        self._best_db = -math.inf  # peak-hold of the line-to-median ratio (dB)
        self._fir_hist = np.zeros(len(self._taps) - 1, np.complex128)
        self._delay_hist = np.zeros(self._delay, np.complex128)
        self._track: deque[tuple[float, float]] = deque(maxlen=TRACK_FRAMES_KEPT)
        self._reset_extra()

    def _reset_extra(self) -> None:
        pass

    def _take(self, start: int, stop: int) -> np.ndarray:
        """Input samples [start, stop) in absolute indices, zeros outside [0, n_in)."""
        out = np.zeros(stop - start, np.complex128)
        a = max(start, self._buf_start)
        b = min(stop, self._n_in)
        if b > a:
            out[a - start : b - start] = self._buf[a - self._buf_start : b - self._buf_start]
        return out

    def _squared_spectrum(self, win: np.ndarray) -> np.ndarray:
        """``|FFT(w·z²)|`` of an analysis window (all ``nfft`` bins)."""
        return np.abs(sfft.fft(win * win * self._window, self._nfft))

    def _squared_line(self, mag: np.ndarray, ks: np.ndarray) -> bool:
        """Take the largest line of ``mag`` among bins ``ks`` (signed, unwrapped) as ``2·freq``, if it is clear.

        Returns True when accepted (``_freq`` updated, clipped to ±max_offset_hz); False when held (no
        clear line, or much less clear than recently, or digital silence).
        """
        m = mag[ks % self._nfft]
        i = int(np.argmax(m))
        peak = float(m[i])
        med = float(np.median(m))
        if not peak > 0.0:
            return False  # digital silence: hold
        ratio_db = 20.0 * math.log10(peak / med) if med > 0.0 else 300.0
        self._best_db = max(self._best_db - self.release_db_per_s * self._hop / self._rate, ratio_db)
        if ratio_db < self.min_peak_db or ratio_db < self._best_db - self.accept_drop_db:
            return False  # no clear line, or much less clear than recently (edge of a pause): hold
        f = (ks[i] + _parabolic_offset(m, i)) * self._rate / self._nfft / 2.0
        self._freq = float(np.clip(f, -self.max_offset_hz, self.max_offset_hz))
        return True

    def _estimate(self, win: np.ndarray) -> float:  # pragma: no cover - overridden
        raise NotImplementedError

    def _lowpass(self, x: np.ndarray) -> np.ndarray:
        """Causal FIR with the carrier taps; state carried in ``_fir_hist``."""
        buf = np.concatenate((self._fir_hist, x))
        y = fft_convolve_valid(buf, self._taps)
        self._fir_hist = buf[len(buf) - (len(self._taps) - 1) :]
        return y

    def _delayed(self, x: np.ndarray) -> np.ndarray:
        """Signal path delayed by ``delay`` samples."""
        if self._delay == 0:
            return x
        buf = np.concatenate((self._delay_hist, x))
        self._delay_hist = buf[len(x) :]
        return buf[: len(x)]

    def _run_frames(self, final: bool) -> list[np.ndarray]:
        hop, wl, fs = self._hop, self._win_len, self._rate
        outs = []
        while True:
            f0 = self._k * hop
            if f0 >= self._n_in:
                break
            ws = f0 + hop // 2 - wl // 2
            we = ws + wl
            if not final and self._n_in < we:
                break
            freq = self._estimate(self._take(ws, we))
            fe = min(f0 + hop, self._n_in)
            seg = self._take(f0, fe)
            ph = self._phase + (_TWO_PI * freq / fs) * np.arange(fe - f0)
            outs.append(self._detect(seg * np.exp(-1j * ph)))
            self._phase = (self._phase + _TWO_PI * freq / fs * (fe - f0)) % _TWO_PI
            self._track.append(((f0 + hop // 2) / fs, freq))
            self._k += 1
            keep = max(0, self._k * hop + hop // 2 - wl // 2)
            if keep > self._buf_start:
                self._buf = self._buf[keep - self._buf_start :]
                self._buf_start = keep
        return outs

    def process(self, block: ArrayLike) -> np.ndarray:
        """Feed ``block`` (complex baseband); return the float32 output that is ready (may be shorter)."""
        x = self._start(block)
        if x.size:
            self._buf = np.concatenate((self._buf, x))
            self._n_in += x.size
        outs = self._run_frames(final=False)
        return np.concatenate(outs).astype(np.float32) if outs else np.zeros(0, np.float32)

    def flush(self) -> np.ndarray:
        """Process the held frames (zero look-ahead past the end of the stream); then start afresh.

        The carrier track stays readable until the next ``process()`` or ``reset()``.
        """
        outs = self._run_frames(final=True) if self._n_in else []
        if self._n_in:
            self._stream_ended()
        self._finished = True
        return np.concatenate(outs).astype(np.float32) if outs else np.zeros(0, np.float32)

    def _stream_ended(self) -> None:
        pass

    def _detect(self, zm: np.ndarray) -> np.ndarray:  # pragma: no cover - overridden
        raise NotImplementedError


def _parabolic_offset(m: np.ndarray, i: int) -> float:
    """Fractional-bin offset of the peak ``m[i]`` by a parabola through the log magnitudes of ``m[i-1..i+1]``.

    For a Hann main lobe sampled at two or more bins per lobe width this is within a few hundredths of
    a bin of the true position (Gaussian interpolation, common practice); 0 at the ends of ``m``.
    """
    if not 0 < i < len(m) - 1:
        return 0.0
    a, b, c = np.log(m[i - 1 : i + 2] + m[i] * 1e-12)
    den = a - 2.0 * b + c
    return float(np.clip(0.5 * (a - c) / den, -0.5, 0.5)) if den < 0.0 else 0.0


class CoherentDetector(_CarrierTracker):
    """Coherent (synchronous) AM detector with carrier recovery from the signal.

    Haykin, *Communication Systems*, coherent detection of AM: multiplying by a
    local carrier of the right frequency and phase and low-pass filtering gives
    ``A(1 + m s(t))`` without the envelope detector's distortion when
    ``1 + m s(t)`` goes negative (overmodulation) or when selective fading
    weakens the carrier relative to the sidebands.

    Carrier acquisition, anywhere within ±``max_offset_hz`` (by default 0.4 × the rate, which covers the
    channel passband of either front end: the FFT engine's channel rate is at least 2.5 × the passband
    edge, the polyphase engine's 3 ×).  While no carrier is locked, each frame's analysis window is
    searched twice: the largest line of the squared spectrum ``|FFT(w·z²)|`` over the whole circle gives
    ``2Δf`` modulo the rate, robustly (see :class:`_CarrierTracker`), so the carrier is at ``f₁`` or
    ``f₁ ± rate/2``; of these candidates within range, the one with the larger line in the spectrum of
    ``z`` itself is taken, and it is a carrier only if that line (the largest bin within ±2 bins of the
    candidate) stands at least ``min_peak_db`` above the median of ``|FFT(w·z)|`` over ±``max_offset_hz``.
    A suppressed carrier (DSB-SC, SSB) or noise has no such line, so nothing is locked; a stream of at
    least half an analysis window that ends without a lock gets an ``IqsiftWarning`` naming ``channel_name``.

    Tracking, once locked: the squared spectrum is searched only within ±``track_range_hz`` of the locked
    frequency (so a strong sideband can never capture the tracker; a drift of tens of Hz/s moves the
    carrier a fraction of a hertz per frame), with the hold rules of :class:`_CarrierTracker`.  After
    ``reacquire_s`` of held frames (the carrier gone, e.g. between push-to-talk transmissions) the whole
    range is searched again, so the next transmission is found wherever it is; meanwhile the NCO holds
    the last frequency.

    Detection: with ``zm = z·e^{-jφ_nco}``, the carrier phasor is ``ĉ = h * zm`` with ``h`` the narrow
    non-negative low-pass of :func:`carrier_lowpass_taps` (first null at ``carrier_stop_hz``).  The output
    is ``y[n] = Re(zm[n - D]·conj(ĉ[n])) / |ĉ[n]|`` with ``D`` = ``delay`` = the low-pass's group delay,
    i.e. the in-phase component relative to the recovered carrier; the carrier DC stays in the output.
    With the carrier present there is no 180° ambiguity: ``ĉ`` is the carrier itself.  Output is zero
    where ``ĉ`` is exactly zero (digital silence).

    Parameters
    ----------
    rate_hz : float
        Channel sample rate in Hz.
    max_offset_hz : float, optional
        Carrier search range ±Hz around 0 Hz (default 0.4 × ``rate_hz``; below ``rate_hz``/2).
    frame_s : float
        Frame (hop) length in s for the frequency estimate (default 0.02 s).
    window_s : float
        Analysis window in s (default 0.2 s; frequency resolution ≈ 2/window_s Hz
        before refinement; look-ahead ≈ window_s/2).
    carrier_stop_hz : float
        The carrier low-pass attenuates everything at or beyond this distance
        from the carrier by ``carrier_atten_db`` (default 120 Hz, 70 dB).
        Message content below ``carrier_stop_hz`` leaks into the carrier
        reference; voice (>= 300 Hz) is well clear.
    min_peak_db : float
        A carrier is acquired when its line is this many dB above the median of the spectrum; a locked
        frequency is held when the squared spectrum's peak is less than this many dB above its median in
        the tracking range (default 15 dB).
    accept_drop_db, release_db_per_s : float
        Hold the frequency when the line-to-median ratio is more than
        ``accept_drop_db`` (default 6 dB) below its recent peak, which decays
        by ``release_db_per_s`` (default 5 dB/s).
    initial_offset_hz : float
        NCO frequency until a carrier is acquired (default 0 Hz).
    track_range_hz : float
        Tracking search range ±Hz around the locked frequency (default 100 Hz).
    reacquire_s : float
        Held time after which the whole range is searched again (default 1 s).
    channel_name : str, optional
        Names the channel in the no-carrier warning.
    """

    mode = "coherent"
    _offset_limit = 0.5
    _offset_reason = "the carrier must lie within the channel's spectrum"

    def __init__(self, rate_hz: float, *, max_offset_hz: float | None = None, frame_s: float = 0.02,
                 window_s: float = 0.2, carrier_stop_hz: float = 120.0, carrier_atten_db: float = 70.0,
                 min_peak_db: float = 15.0, accept_drop_db: float = 6.0, release_db_per_s: float = 5.0,
                 initial_offset_hz: float = 0.0, track_range_hz: float = 100.0, reacquire_s: float = 1.0,
                 channel_name: str | None = None) -> None:
        self.track_range_hz = checks.positive("track_range_hz", track_range_hz)
        self.reacquire_s = checks.positive("reacquire_s", reacquire_s)
        self.channel_name = None if channel_name is None else str(channel_name)
        rate = checks.positive("rate_hz", rate_hz)
        super().__init__(rate, max_offset_hz=0.4 * rate if max_offset_hz is None else max_offset_hz,
                         frame_s=frame_s, window_s=window_s, carrier_stop_hz=carrier_stop_hz,
                         carrier_atten_db=carrier_atten_db, min_peak_db=min_peak_db, accept_drop_db=accept_drop_db,
                         release_db_per_s=release_db_per_s, initial_offset_hz=initial_offset_hz)
        half = self._nfft // 2
        self._circle_k = np.arange(-half, half)  # every bin of the squared spectrum, signed
        k_track = max(2, int(math.ceil(2.0 * self.track_range_hz / self._rate * self._nfft)))
        self._track_k = np.arange(-k_track, k_track + 1)

    @property
    def carrier_offset_hz(self) -> float:
        """The tracked carrier offset from 0 Hz in Hz at the latest frame; NaN while no carrier was ever acquired
        in this stream (the last tracked frequency is held when the carrier goes)."""
        return self._track[-1][1] if self._acquired and self._track else float("nan")

    @property
    def locked(self) -> bool:
        """Whether a carrier is being tracked now (False while searching)."""
        return self._locked

    def _reset_extra(self) -> None:
        self._locked = False
        self._acquired = False  # a carrier was locked at some time in this stream
        self._held_s = 0.0  # time the locked frequency has been held
        self._best_acquire_db = -math.inf  # the clearest candidate line seen while searching (dB over the median)

    def _estimate(self, win: np.ndarray) -> float:
        sq = self._squared_spectrum(win)
        if self._locked:
            centre = int(round(2.0 * self._freq / self._rate * self._nfft))
            if self._squared_line(sq, centre + self._track_k):
                self._held_s = 0.0
            else:
                self._held_s += self._hop / self._rate
                self._locked = self._held_s < self.reacquire_s
            return self._freq
        found = self._acquire(win, sq)
        if found is not None:
            self._freq = found
            self._locked = self._acquired = True
            self._held_s = 0.0
            self._best_db = -math.inf  # a new carrier: forget the previous one's line clarity
        return self._freq

    def _acquire(self, win: np.ndarray, sq: np.ndarray) -> float | None:
        """The carrier frequency in this window (Hz), or None when there is no carrier line."""
        m = sq[self._circle_k % self._nfft]
        i = int(np.argmax(m))
        if not m[i] > 0.0:
            return None  # digital silence
        f1 = float(self._circle_k[i] + _parabolic_offset(m, i)) * self._rate / self._nfft / 2.0  # in [-rate/4, rate/4)
        mag = np.abs(sfft.fft(win * self._window, self._nfft))
        floor = float(np.median(mag[self._search_k % self._nfft]))
        best_db, best_f = -math.inf, 0.0
        for f in (f1, f1 - math.copysign(0.5 * self._rate, f1)):
            if abs(f) > self.max_offset_hz:
                continue
            b = int(round(f / self._rate * self._nfft))
            peak = float(np.max(mag[np.arange(b - 2, b + 3) % self._nfft]))
            line_db = 20.0 * math.log10(peak / floor) if floor > 0.0 else (300.0 if peak > 0.0 else -math.inf)
            if line_db > best_db:
                best_db, best_f = line_db, f
        self._best_acquire_db = max(self._best_acquire_db, best_db)
        return best_f if best_db >= self.min_peak_db else None

    def _stream_ended(self) -> None:
        if self._acquired or self._n_in < self._win_len // 2:
            return  # locked, or too short to tell (less than the look-ahead of one frame)
        where = f"channel {self.channel_name!r}" if self.channel_name is not None else "coherent detector"
        seen = (f"the clearest candidate line was {self._best_acquire_db:.1f} dB above the spectrum's median"
                if math.isfinite(self._best_acquire_db) else "the signal was digital silence")
        warnings.warn(
            f"{where}: no carrier to lock to within ±{self.max_offset_hz:g} Hz ({seen}; a carrier needs "
            f"{self.min_peak_db:g} dB), so the coherent audio is not the message; a suppressed-carrier signal "
            "needs mode dsb, usb or lsb", IqsiftWarning, stacklevel=3)

    def _detect(self, zm: np.ndarray) -> np.ndarray:
        c = self._lowpass(zm)
        zd = self._delayed(zm)
        mag = np.abs(c)
        num = zd.real * c.real + zd.imag * c.imag
        return np.divide(num, mag, out=np.zeros_like(num), where=mag > 0.0)


class DsbDetector(_CarrierTracker):
    """Double-sideband suppressed-carrier detector, carrier recovery by squaring.

    ``z = s(t)·e^{jθ(t)}`` with a real message ``s`` has no carrier line, but
    ``z² = s²·e^{j2θ}`` does (``s² >= 0`` has a non-zero mean): the classic
    squaring loop (Haykin, *Communication Systems*, Costas receiver and
    squaring loop for DSB-SC).  Frame-wise, the line at ``2Δf`` gives the NCO
    frequency (see :class:`_CarrierTracker`); the phasor
    ``q = h * (zm²)`` (non-negative narrow low-pass, so ``LPF(s²) >= 0`` never
    flips sign) gives ``2θ̂``; its phase is unwrapped continuously from sample
    to sample and across frames and halved, ``θ̂ = ψ/2``, and the output is
    ``y[n] = Re(zm[n - D]·e^{-jψ[n]/2})`` with ``D`` = ``delay``.

    The 180° ambiguity is inherent to DSB-SC: ``s·e^{jθ}`` and ``(-s)·e^{j(θ+π)}``
    are the same signal, so the output is ``±s(t)``.  The sign is arbitrary at
    the start of the stream (an audio polarity flip is inaudible) but kept
    consistent afterwards by the phase continuity; only a gap with no signal
    at all (nothing to track) can leave the sign changed after the gap.  To
    carry the sign through pauses, the phase is held wherever ``|q|`` is more
    than ``phase_hold_db`` below its peak-hold level (decaying by
    ``release_db_per_s``), and the NCO frequency is held too (see
    :class:`_CarrierTracker`); the sign survives a pause when the held
    frequency is within about ``1/(4·pause)`` Hz of the true offset (a
    quarter turn of the carrier over the pause).

    Parameters are those of :class:`CoherentDetector` up to ``initial_offset_hz``, except that every
    frame's frequency is the squared line within ±``max_offset_hz`` (default 600 Hz, below rate/4: twice
    the offset must stay below rate/2, and no carrier line resolves the alias), plus ``phase_hold_db``
    (default 15 dB, power ratio); ``carrier_stop_hz`` also bounds the
    squared message's content that reaches the phase estimate.
    """

    mode = "dsb"

    def __init__(self, rate_hz: float, *, max_offset_hz: float = 600.0, frame_s: float = 0.02, window_s: float = 0.2,
                 carrier_stop_hz: float = 120.0, carrier_atten_db: float = 70.0, min_peak_db: float = 15.0,
                 initial_offset_hz: float = 0.0, accept_drop_db: float = 6.0, release_db_per_s: float = 5.0,
                 phase_hold_db: float = 15.0) -> None:
        self.phase_hold_db = checks.positive("phase_hold_db", phase_hold_db)
        super().__init__(rate_hz, max_offset_hz=max_offset_hz, frame_s=frame_s, window_s=window_s,
                         carrier_stop_hz=carrier_stop_hz, carrier_atten_db=carrier_atten_db, min_peak_db=min_peak_db,
                         accept_drop_db=accept_drop_db, release_db_per_s=release_db_per_s,
                         initial_offset_hz=initial_offset_hz)
        k_max = int(math.floor(2.0 * self.max_offset_hz / self._rate * self._nfft))
        self._squared_k = np.arange(-k_max, k_max + 1)  # the squared line within ±2·max_offset_hz

    def _estimate(self, win: np.ndarray) -> float:
        self._squared_line(self._squared_spectrum(win), self._squared_k)
        return self._freq

    def _reset_extra(self) -> None:
        self._w_last = 0.0  # wrapped phase of q at the last sample
        self._psi_last = 0.0  # unwrapped phase (kept modulo 4π)
        self._level = 0.0  # peak-hold level of |q| (signal power scale)

    def _detect(self, zm: np.ndarray) -> np.ndarray:
        q = self._lowpass(zm * zm)
        zd = self._delayed(zm)
        if q.size == 0:
            return np.zeros(0)
        mag = np.abs(q)
        decay = 10.0 ** (-self.release_db_per_s * q.size / self._rate / 10.0)
        self._level = max(self._level * decay, float(np.max(mag)))
        live = mag > self._level * 10.0 ** (-self.phase_hold_db / 10.0)
        w = np.angle(q)
        # Hold the phase where |q| is weak (signal pause): forward-fill the last live phase.
        last = np.maximum.accumulate(np.where(live, np.arange(q.size), -1))
        w = np.where(last >= 0, w[np.maximum(last, 0)], self._w_last)
        d = np.diff(w, prepend=self._w_last)
        d = (d + math.pi) % _TWO_PI - math.pi
        psi = self._psi_last + np.cumsum(d)
        self._w_last = float(w[-1])
        self._psi_last = float(psi[-1] % (2.0 * _TWO_PI))
        half = 0.5 * psi
        return zd.real * np.cos(half) + zd.imag * np.sin(half)


# ----------------------------------------------------------------------------- factory
_CLASSES = {
    "envelope": EnvelopeDetector,
    "coherent": CoherentDetector,
    "usb": SidebandDetector,
    "lsb": SidebandDetector,
    "dsb": DsbDetector,
}


def make_detector(mode: str, rate_hz: float, **options: Any) -> _Detector:
    """Build the detector for ``mode`` at the channel rate ``rate_hz`` (Hz).

    Parameters
    ----------
    mode : {"envelope", "coherent", "usb", "lsb", "dsb"}
        Detection method (case-insensitive).
    rate_hz : float
        Channel sample rate in Hz.
    **options
        Keyword options of the detector class (e.g. ``max_offset_hz`` for
        coherent/dsb, ``sideband_filter`` for usb/lsb).

    Raises
    ------
    ParameterError
        Unknown mode or option, or an option with a bad value.
    """
    key = str(mode).strip().lower()
    cls = _CLASSES.get(key)
    if cls is None:
        raise ParameterError(f"mode: got {mode!r}; it must be one of {', '.join(DETECTOR_MODES)}")
    params: Mapping[str, inspect.Parameter] = inspect.signature(cls).parameters
    if cls is SidebandDetector:
        params = {k: v for k, v in params.items() if k != "sideband"}
    allowed = [name for name in params if name not in ("self", "rate_hz")]
    for name in options:
        if name not in allowed:
            raise ParameterError(
                f"{name}: not an option of the {key} detector; options are {', '.join(allowed) or 'none'}"
            )
    if cls is SidebandDetector:
        return SidebandDetector(rate_hz, key, **options)
    return cls(rate_hz, **options)


def detect(iq: ArrayLike, mode: str, rate_hz: float, **options: Any) -> np.ndarray:
    """One-shot detection: run the ``mode`` detector over ``iq`` and return ``len(iq)`` aligned samples.

    ``delay`` zeros are appended to push the detection of the last samples
    out, and the detector's group delay is removed (``out[n]`` is the
    detection of ``iq[n]``).  See :func:`make_detector` for the options.

    Returns
    -------
    numpy.ndarray
        float32, same length as ``iq``.
    """
    det = make_detector(mode, rate_hz, **options)
    x = _as_block(iq)
    d = int(det.delay)
    y = np.concatenate((det.process(x), det.process(np.zeros(d if x.size else 0)), det.flush()))
    return np.ascontiguousarray(y[d : d + x.size], dtype=np.float32)
