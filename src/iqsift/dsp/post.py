"""Audio post-processing after the detector: carrier normalisation, delay compensation, squelch.

For AM with a carrier the detector output is ``A(t)·(1 + m·s(t))``. Dividing the
AC part by the slowly varying carrier level ``A(t)`` gives ``m·s(t)``: audio whose
full scale is 100 % modulation, independent of the received level and of slow
(flat) fading — the classic AM receiver's carrier-derived gain control, done
here with a linear-phase low-pass instead of a feedback loop.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from .filters import design_lowpass, fractional_delay_taps
from .gridfir import GridFir
from .stages import FirFilter, Stage

__all__ = ["CarrierNormaliser", "DelayTrim", "FractionalDelay", "Squelch", "sliding_max"]


class CarrierNormaliser(Stage):
    """``(d − c)/c`` with ``c`` the carrier level from a linear-phase low-pass of ``d``.

    Parameters
    ----------
    rate_hz : float
        Sample rate of the detector output (samples/s).
    pass_hz, stop_hz : float
        Edges of the carrier-level low-pass (Hz): the level follows fading
        slower than ``pass_hz``; modulation above ``stop_hz`` is removed
        from the level by at least ``atten_db``.
    floor : float
        Smallest carrier level divided by (full scale = 1), so silence does
        not blow up.
    check_carrier : bool
        Guard against a detector output without a carrier (see below); not
        needed after an envelope detector, whose output is never zero-mean.
    settle_samples : int
        The first inputs are the upstream detector's start-up, not signal: they
        are left out of the carrier level (as is padding after :meth:`signal_ends`).
    max_gain_db : float
        The divisor never falls below the strongest level seen so far minus
        this many dB: when the carrier goes away (push-to-talk off, deep
        fade) the noise is not amplified to full scale, like an AM receiver's
        AGC at its gain limit.
    rows : int
        Channels processed together, one per row of a 2-D block.
    normalise : bool
        Divide by the level (AM with carrier). Without it the stage is a
        linear-phase DC remover ``d − LPF(d)``: unlike a one-pole DC blocker
        it does not shift the phase of low audio tones (a 20 Hz one-pole
        high-pass turns a 410 Hz tone by 2.8°, an error of −26 dB).

    Notes
    -----
    The level is a normalised convolution (Knutsson & Westin 1993),
    ``LPF(d·v) / LPF(v)`` with ``v`` 1 on the samples that carry signal and 0
    on the upstream start-up (``settle_samples``) and the padding after
    :meth:`signal_ends`, so the ends of a stream do not drag the level towards
    zero; ``LPF(v)`` is the running sum of the taps (exact), and 1 where the
    whole filter span carries signal.

    The low-pass runs in double precision on frames of :attr:`LEVEL_HOP`
    samples aligned to the absolute sample index
    (:class:`~iqsift.dsp.gridfir.GridFir`), so the level, and the audio, are
    bit-identical however the stream is cut into blocks (a live stream and a
    file). The signal path is delayed by the low-pass's group delay
    ``(N−1)/2`` (N is odd) plus ``LEVEL_HOP − 1`` samples, by which time the
    level's frame is complete; that is :attr:`delay`. The stage holds nothing
    at the end (flush is empty). Blocks may be 1-D (one channel) or 2-D with
    one channel per row (``rows``).

    The divisor is at least 99 % of the largest level from the output's own to
    ``ahead`` = min((N−1)/2, ``LOOK_AHEAD_S``) samples later (the delay grows by as much):
    where a carrier comes on after silence the level, a symmetric low-pass,
    is only half-way up at the onset and near zero just before it, and
    dividing by it there drives the audio into clipping; the level a little
    later is the carrier's. A steady carrier's level is unchanged (a tone's
    audio is the same), a fading one is followed slightly early.
    """

    LEVEL_HOP = 64
    """Frame length of the level low-pass (samples): its outputs are complete this much later."""

    LOOK_AHEAD_S = 0.02
    """Longest look-ahead of the divisor (s); the delay grows by as much."""

    AHEAD_SHARE = 0.99
    """The divisor is at least this share of the largest level ahead: a steady carrier's level ripples
    by at most the low-pass's stopband (60 dB: 0.1 % of the modulation), so it keeps its own level."""

    def __init__(
        self,
        rate_hz: float,
        pass_hz: float = 4.0,
        stop_hz: float = 60.0,
        atten_db: float = 60.0,
        floor: float = 1e-6,
        normalise: bool = True,
        max_gain_db: float = 30.0,
        check_carrier: bool = True,
        settle_samples: int = 0,
        rows: int = 1,
    ) -> None:
        self._settings: dict[str, Any] = dict(
            rate_hz=rate_hz, pass_hz=pass_hz, stop_hz=stop_hz, atten_db=atten_db, floor=floor,
            normalise=normalise, max_gain_db=max_gain_db, check_carrier=check_carrier,
            settle_samples=int(settle_samples),
        )
        self.settle_samples = int(settle_samples)
        stop_hz = min(stop_hz, 0.45 * rate_hz)
        pass_hz = min(pass_hz, 0.5 * stop_hz)
        self.design = design_lowpass(rate_hz, pass_hz, stop_hz, ripple_db=0.5, atten_db=atten_db, method="kaiser")
        self.rows = int(rows)
        self.rate_hz = float(rate_hz)
        self._rate_in = self._rate_out = self.rate_hz
        self.floor = float(floor)
        self.normalise = bool(normalise)
        self.check_carrier = bool(check_carrier) and self.normalise
        self.max_gain = 10 ** (-max_gain_db / 20)
        self._lag = int(round(self.design.group_delay_samples))
        # the divisor looks this far ahead (level samples): as far as the low-pass reaches, at most LOOK_AHEAD_S
        self._ahead = min(self._lag, int(round(self.LOOK_AHEAD_S * self.rate_hz))) if self.normalise else 0
        # output i divides by the levels i - wait .. i - wait + ahead, all complete once input i has arrived
        self._wait = self.LEVEL_HOP - 1 + self._ahead
        self._delay = float(self._lag + self._wait)
        taps = np.asarray(self.design.taps, dtype=np.float64)
        self._cover_sum = np.cumsum(taps)  # LPF(v) for v a step: a difference of two of these
        # the level (and, to check for a carrier, the mean square) of every row: one filter run
        self._lp = GridFir(taps, self.rows * (2 if self.check_carrier else 1), self.LEVEL_HOP, np.float64)
        self.reset()

    @property
    def settings(self) -> dict[str, Any]:
        """The parameters this normaliser was built with (equal settings: identical processing)."""
        return dict(self._settings)

    def for_rows(self, rows: int) -> "CarrierNormaliser":
        """The same normaliser for ``rows`` channels processed together."""
        return CarrierNormaliser(rows=rows, **self._settings)

    _signal_end: int | None

    def signal_ends(self, samples_in: int) -> None:
        """Input from sample ``samples_in`` on is padding: leave it out of the carrier level."""
        self._signal_end = int(samples_in)

    def _stop(self) -> float:
        """Input index where the padding starts (inf while the signal goes on)."""
        return float("inf") if self._signal_end is None else float(self._signal_end + self.settle_samples)

    def _validity(self, first: int, n: int) -> np.ndarray | None:
        """Which of inputs ``first .. first + n − 1`` carry signal (None: all of them, the usual case)."""
        stop = self._stop()
        if first >= self.settle_samples and first + n <= stop:
            return None
        idx = first + np.arange(n)
        return (idx >= self.settle_samples) & (idx < stop)

    def _cover(self, index: np.ndarray) -> np.ndarray | None:
        """``LPF(v)`` at level indices ``index``: None where it is 1 (the whole span carries signal)."""
        ntaps = self.design.num_taps
        stop = self._stop()
        if index[0] - self.settle_samples >= ntaps - 1 and index[-1] < stop:
            return None
        total = self._cover_sum

        def partial(m: np.ndarray) -> np.ndarray:  # sum of taps 0..m
            return np.where(m < 0, 0.0, total[np.clip(m, 0, ntaps - 1)])

        lagged = index - self.settle_samples
        cover = partial(lagged)
        if stop != float("inf"):
            cover = cover - partial(index - int(stop))
        full = (lagged >= ntaps - 1) & (index < stop)
        return np.where(full, 1.0, cover)

    def reset(self) -> None:
        self._lp.reset()
        self._seen = 0
        self._signal_end = None
        width = self._lp.rows
        self._levels = np.zeros((width, self._wait))  # level outputs not yet used (first: before the stream)
        self._history = np.zeros((self.rows, self._lag + self._wait), np.float32)
        self.last_level: float | None = None
        self._strongest = np.zeros((self.rows, 1))

    def process(self, block: ArrayLike) -> np.ndarray:
        """Process a block (1-D, or rows × n); float32 out, same shape."""
        d = np.asarray(block, dtype=np.float32)
        flat = d.ndim == 1
        d = d.reshape(1, -1) if flat else d
        n = d.shape[1]
        if n == 0:
            return np.zeros(0 if flat else (self.rows, 0), np.float32)
        first = self._seen
        self._seen += n
        valid = self._validity(first, n)
        dv = d.astype(np.float64)
        if valid is not None:
            dv *= valid
        rows_in = np.concatenate([dv, dv * d]) if self.check_carrier else dv
        levels = np.concatenate([self._levels, self._lp.process(rows_in)], axis=1)
        # the levels of outputs k = 0 .. n - 1 and of the `ahead` samples after them
        both, self._levels = levels[:, : n + self._ahead], levels[:, n:]
        cover = self._cover(first - self._wait + np.arange(n + self._ahead))
        if cover is not None:
            ok = cover > 1e-3
            both = np.where(ok, both / np.maximum(cover, 1e-3), 0.0)
        level = both[: self.rows]
        power = both[self.rows :] if self.check_carrier else None
        joined = np.concatenate([self._history, d], axis=1)
        delayed = joined[:, :n]
        self._history = joined[:, n:]
        self.last_level = float(level[0, n - 1])
        out = delayed - level[:, :n]
        if self.normalise:
            out /= self._divisor(level, power, n)
        out = out.astype(np.float32)
        return out[0] if flat else out

    def _divisor(self, level: np.ndarray, power: np.ndarray | None, n: int) -> np.ndarray:
        """What each of the ``n`` outputs is divided by: the largest carrier level from its own to
        ``ahead`` samples later (``level`` holds them all), with the floors."""
        magnitude = np.abs(level)
        running = np.maximum.accumulate(magnitude[:, :n], axis=1)
        np.maximum(running, self._strongest, out=running)
        self._strongest = running[:, -1:].copy()
        # carrier present: the mean of the detector output is most of its RMS (1/sqrt(1 + m^2/2) >= 0.8
        # for a tone at m <= 1). Without a carrier (a coherent detector fed only noise, the mean near 0)
        # dividing by the mean would blow the noise up: divide by 3 x the RMS instead (noise at -10 dBFS).
        if power is not None:
            rms = np.sqrt(np.maximum(power, 0.0))
            divisor = np.where(magnitude >= 0.5 * rms, magnitude, 3.0 * rms)
        else:
            divisor = magnitude
        ahead = sliding_max(divisor, self._ahead + 1)
        divisor = np.maximum(divisor[:, :n], self.AHEAD_SHARE * ahead)
        np.maximum(divisor, np.maximum(running * self.max_gain, self.floor), out=divisor)
        return divisor

    def flush(self) -> np.ndarray:
        self.reset()
        return np.zeros(0, np.float32)


def sliding_max(x: np.ndarray, width: int) -> np.ndarray:
    """``max(x[..., k : k + width])`` for every k with a whole window, along the last axis (exact).

    Doubling: the maxima over windows of 1, 2, 4, ... samples, then two overlapping windows of the
    largest power of two not above ``width`` (log2(width) passes; no per-sample loop).
    """
    m = np.asarray(x)
    span = 1
    while 2 * span <= width:
        m = np.maximum(m[..., : m.shape[-1] - span], m[..., span:])
        span *= 2
    count = x.shape[-1] - width + 1
    return np.maximum(m[..., :count], m[..., width - span : width - span + count])


class DelayTrim(Stage):
    """Drop the first ``count`` samples of a stream (compensates a known processing delay).

    A negative delay: the output runs ``count`` samples ahead of the input, so
    ``delay`` is ``-count`` (a :class:`~iqsift.dsp.stages.Chain` adds it to the
    delays of the stages before). Blocks pass through unchanged otherwise (same
    dtype); nothing is held, so ``flush`` is empty.

    Parameters
    ----------
    count : int
        Samples to drop at the start of each stream.
    rate_hz : float
        Sample rate (samples/s), reported by ``rate_in`` and ``rate_out``
        (default 1.0: a normalised rate, for callers that only trim).
    """

    def __init__(self, count: int, rate_hz: float = 1.0) -> None:
        self.count = int(count)
        self._rate_in = self._rate_out = float(rate_hz)
        self._delay = -float(self.count)
        self.reset()

    def reset(self) -> None:
        self._left = self.count

    def process(self, block: ArrayLike) -> np.ndarray:
        block = np.asarray(block)
        if self._left <= 0:
            return block
        drop = min(self._left, block.shape[0])
        self._left -= drop
        return block[drop:]

    def flush(self) -> np.ndarray:
        self.reset()
        return np.zeros(0, np.float32)


class FractionalDelay(Stage):
    """Delay a real signal by a non-integer number of samples with a windowed-sinc interpolator.

    The taps are :func:`iqsift.dsp.filters.fractional_delay_taps` (a
    Kaiser-windowed ideal fractional delay, Laakso et al. 1996), applied by a
    :class:`~iqsift.dsp.stages.FirFilter`; float32 out, nothing held.

    Parameters
    ----------
    rate_hz : float
        Sample rate (samples/s).
    delay_samples : float
        The delay ``c``; at least ``half_length``.
    half_length : int
        Taps on each side of the centre.
    beta : float
        Kaiser window parameter.
    """

    def __init__(self, rate_hz: float, delay_samples: float, half_length: int = 24, beta: float = 8.0) -> None:
        taps = fractional_delay_taps(delay_samples, half_length, beta)
        self.taps = taps
        self._filter = FirFilter(taps, rate_hz, method="direct" if taps.size <= 256 else "fft")
        self.rate_hz = float(rate_hz)
        self._rate_in = self._rate_out = self.rate_hz
        self._delay = float(delay_samples)

    def reset(self) -> None:
        self._filter.reset()

    def process(self, block: ArrayLike) -> np.ndarray:
        if np.asarray(block).size == 0:
            return np.zeros(0, np.float32)
        return np.asarray(self._filter.process(np.asarray(block, dtype=np.float32)), dtype=np.float32)

    def flush(self) -> np.ndarray:
        self.reset()
        return np.zeros(0, np.float32)


class Squelch:
    """Mute the audio while the channel carries only noise, from the first sample on.

    The noise floor comes from the spectrum, not from the loudness history: the channel baseband's
    power density is averaged over 25 ms Hann segments, and its 10th percentile across the passband,
    times the passband width, is the noise power in the channel. Most of a voice channel's passband
    holds only noise most of the time (a carrier is one line, speech energy is concentrated), so the
    estimate holds whether the channel starts idle, busy, or carries a continuous carrier (common
    practice; the same estimate as :meth:`iqsift.measure.ChannelAnalyzer.noise_floor_dbfs`).

    The baseband is cut into 10 ms frames (grid continued across blocks); a frame is open when its
    power is at least ``threshold_db`` above the floor. Opening and closing follow the frame levels with
    a linear ramp between frame centres (no clicks). The floor is updated once per ``look_ahead_s`` of
    baseband (the spectrum of everything up to the end of that stretch), and audio is held back until
    the stretch it belongs to is complete: a look-ahead that closes the squelch from the first sample
    when the channel starts idle, and makes the result independent of how the stream is cut into
    blocks. The first audio therefore leaves up to ``look_ahead_s`` late; at the end of the stream
    everything held is released.

    Not a :class:`~iqsift.dsp.stages.Stage`: it watches the channel baseband (:meth:`feed`, at the channel
    rate) and gates the audio (:meth:`apply`, at the audio rate): two signals at two rates.

    Parameters
    ----------
    rate_hz : float
        Channel baseband rate (samples/s).
    threshold_db : float
        Opening threshold above the noise floor (dB).
    passband_hz : (float, float)
        The channel's passband relative to the carrier (Hz), where the floor is read.
    audio_rate_hz : float
        Rate of the audio gated by :meth:`apply` (samples/s).
    time_offset_s : float
        Time of the first baseband sample fed, relative to the first audio sample (s).
    look_ahead_s : float
        Stretch of baseband over which the floor is updated, and the most audio is held back (s).
    """

    FRAME_S = 0.01
    SEGMENT_S = 0.025
    PERCENTILE = 10.0

    def __init__(self, rate_hz: float, threshold_db: float, passband_hz: tuple[float, float] = (-3000.0, 3000.0),
                 audio_rate_hz: float = 16000.0, time_offset_s: float = 0.0, look_ahead_s: float = 0.5) -> None:
        self.rate_hz = float(rate_hz)
        self.threshold_db = float(threshold_db)
        self.audio_rate_hz = float(audio_rate_hz)
        self.time_offset_s = float(time_offset_s)
        self.frame = max(1, int(round(self.FRAME_S * self.rate_hz)))
        self.nseg = 1 << max(5, int(round(np.log2(self.SEGMENT_S * self.rate_hz))))
        self.stretch = self.nseg * max(1, int(np.ceil(look_ahead_s * self.rate_hz / self.nseg)))
        self.window = np.hanning(self.nseg + 2)[1:-1]
        self._scale = 1.0 / (self.rate_hz * float(np.sum(self.window**2)))  # |FFT|^2 -> power per Hz
        freqs = np.fft.fftfreq(self.nseg, 1 / self.rate_hz)
        lo, hi = passband_hz
        self.band = (freqs >= lo) & (freqs <= hi)
        if self.band.sum() < 4:  # a very narrow passband: read the floor over the whole channel band
            self.band = np.ones(self.nseg, bool)
        self.band_hz = max(float(hi - lo), self.rate_hz / self.nseg)
        self._psd_sum = np.zeros(self.nseg)
        self._segments = 0
        self._floors: list[float] = []  # floor (dBFS) of each complete stretch
        self._seg_tail = np.zeros(0, np.complex128)
        self._frame_tail = np.zeros(0, np.float64)
        self._levels: list[float] = []
        self._fed = 0
        self._held = np.zeros(0, np.float32)
        self._released = 0  # audio samples released so far

    def _floor_now(self) -> float:
        if not self._segments:
            return -300.0
        density = self._psd_sum[self.band] / self._segments
        return float(10 * np.log10(max(float(np.percentile(density, self.PERCENTILE)) * self.band_hz, 1e-30)))

    @property
    def floor_dbfs(self) -> float | None:
        """The latest noise floor in the passband (dBFS), once a segment has been seen."""
        return self._floor_now() if self._segments else None

    def feed(self, baseband: np.ndarray) -> None:
        """Add channel baseband samples (complex)."""
        z = np.asarray(baseband)
        while z.size:  # stretch by stretch, so each floor covers exactly the data up to its stretch's end
            room = self.stretch - self._fed % self.stretch
            self._feed(z[:room])
            z = z[room:]
            if self._fed % self.stretch == 0:
                self._floors.append(self._floor_now())

    def _feed(self, z: np.ndarray) -> None:
        self._fed += z.size
        seg = np.concatenate([self._seg_tail, z]) if self._seg_tail.size else z.astype(np.complex128)
        count = seg.size // self.nseg
        if count:
            frames = seg[: count * self.nseg].reshape(count, self.nseg) * self.window
            self._psd_sum += (np.abs(np.fft.fft(frames, axis=1)) ** 2).sum(axis=0) * self._scale
            self._segments += count
        self._seg_tail = seg[count * self.nseg :]
        p = np.square(np.abs(z)).astype(np.float64)
        buf = np.concatenate([self._frame_tail, p]) if self._frame_tail.size else p
        count = buf.size // self.frame
        if count:
            levels = buf[: count * self.frame].reshape(count, self.frame).mean(axis=1)
            self._levels.extend((10 * np.log10(np.maximum(levels, 1e-30))).tolist())
        self._frame_tail = buf[count * self.frame :]

    def _gains(self, times_s: np.ndarray) -> np.ndarray:
        if not self._levels:
            return np.ones(times_s.size, np.float32)
        levels = np.asarray(self._levels)
        centre_samples = (np.arange(levels.size) + 0.5) * self.frame
        stretch = (centre_samples // self.stretch).astype(int)
        floors = np.asarray(self._floors + [self._floor_now()])  # the last: the stretch still open
        gates = (levels >= floors[np.minimum(stretch, floors.size - 1)] + self.threshold_db).astype(np.float64)
        centres = self.time_offset_s + centre_samples / self.rate_hz
        return np.interp(times_s, centres, gates, left=gates[0], right=gates[-1]).astype(np.float32)

    def apply(self, audio: np.ndarray, final: bool = False) -> np.ndarray:
        """Gate audio (the samples following those given before); returns the audio that can be released
        now (its frames' stretches are complete), all of it when ``final``."""
        audio = np.asarray(audio, np.float32)  # (n,) or (n, channels): frames are rows
        held = np.concatenate([self._held, audio]) if self._held.shape[0] else audio
        if final:
            ready = held.shape[0]
        else:
            # frames whose centres lie in complete stretches are decided; audio up to the last such centre goes
            decided = int(np.floor((len(self._floors) * self.stretch) / self.frame - 0.5)) + 1
            decided = min(decided, len(self._levels))
            if decided <= 0:
                ready = 0
            else:
                known_s = self.time_offset_s + (decided - 0.5) * self.frame / self.rate_hz
                ready = int(np.clip(np.floor(known_s * self.audio_rate_hz) + 1 - self._released, 0, held.shape[0]))
        out, self._held = held[:ready], held[ready:]
        if out.shape[0]:
            times = (self._released + np.arange(out.shape[0])) / self.audio_rate_hz
            gains = self._gains(times)
            out = out * (gains[:, None] if out.ndim == 2 else gains)
            self._released += out.shape[0]
        return out
