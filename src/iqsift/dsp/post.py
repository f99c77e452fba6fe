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

from .batch import BatchFir, long_fft_size
from .filters import design_lowpass, fractional_delay_taps
from .stages import FirFilter, Stage

__all__ = ["CarrierNormaliser", "DelayTrim", "FractionalDelay", "Squelch"]


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
    The signal path is delayed by the low-pass's group delay ``(N−1)/2``
    (an integer: N is odd) so that ``d`` and ``c`` line up; that is
    :attr:`delay`. The stage holds nothing at the end (flush is empty).
    Blocks may be 1-D (one channel) or 2-D with one channel per row
    (``rows``), all rows sharing the same validity mask. ``process(block)``
    alone is the :class:`~iqsift.dsp.stages.Stage` protocol: the samples that
    carry signal follow from ``settle_samples`` and :meth:`signal_ends`;
    ``process(block, valid)`` states them explicitly instead.
    """

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
        self._delay = float(self._lag)
        # the level (and, to check for a carrier, the mean square) of every row: one filter run
        self._lp = BatchFir(self.design.taps, self.rows * (2 if self.check_carrier else 1),
                            long_fft_size(self.design.num_taps), rate_hz=self.rate_hz)
        self.reset()

    @property
    def settings(self) -> dict[str, Any]:
        """The parameters this normaliser was built with (equal settings: identical processing)."""
        return dict(self._settings)

    def for_rows(self, rows: int) -> "CarrierNormaliser":
        """The same normaliser for ``rows`` channels processed together."""
        return CarrierNormaliser(rows=rows, **self._settings)

    def signal_ends(self, samples_in: int) -> None:
        """Input from sample ``samples_in`` on is padding: leave it out of the carrier level."""
        self._signal_end = int(samples_in)

    def _validity(self, n: int) -> np.ndarray | None:
        """Which of the next ``n`` inputs carry signal: not the upstream start-up (``settle_samples``)
        nor padding after :meth:`signal_ends`. None: all of them (the usual case)."""
        first = self._seen
        self._seen += n
        stop = self._signal_end + self.settle_samples if self._signal_end is not None else None
        if first >= self.settle_samples and (stop is None or first + n <= stop):
            return None
        idx = first + np.arange(n)
        keep = idx >= self.settle_samples
        if stop is not None:
            keep &= idx < stop
        return keep

    def reset(self) -> None:
        self._lp.reset()
        self._seen = 0
        self._signal_end: int | None = None
        self._cover = FirFilter(self.design.taps, self.rate_hz)
        self._run = 0  # consecutive valid samples fed most recently
        self._cover_stale = False
        self._history = np.zeros((self.rows, self._lag), np.float32)
        self.last_level: float | None = None
        self._strongest = np.zeros((self.rows, 1), np.float32)

    def _coverage(self, n: int, valid: np.ndarray | None) -> np.ndarray | None:
        """LPF of the validity mask (None where it is 1 everywhere, the steady state of most blocks)."""
        ntaps = self.design.num_taps
        if valid is None or bool(np.all(valid)):
            self._run += n
            if self._run - n >= ntaps:
                # the cover filter has seen only valid samples for a whole filter length: its output is 1
                self._cover_stale = True
                return None
            return np.asarray(self._cover.process(np.ones(n, np.float32)), dtype=np.float32)
        v = np.asarray(valid, dtype=np.float32)
        if self._cover_stale:  # bring the skipped cover filter back: its history is all ones
            self._cover.reset()
            self._cover.process(np.ones(ntaps, np.float32))
            self._cover_stale = False
        last_invalid = np.flatnonzero(v == 0)
        self._run = n - 1 - int(last_invalid[-1]) if last_invalid.size else self._run + n
        return np.asarray(self._cover.process(v), dtype=np.float32)

    def process(self, block: ArrayLike, valid: np.ndarray | None = None) -> np.ndarray:
        """Process a block (1-D, or rows × n); ``valid`` marks the samples that carry signal (default: all).

        The level is a normalised convolution (Knutsson & Westin 1993):
        ``LPF(d·v) / LPF(v)``, so the start and end of a stream (and gaps
        marked invalid) do not drag the level towards zero.
        """
        d = np.asarray(block, dtype=np.float32)
        flat = d.ndim == 1
        d = d.reshape(1, -1) if flat else d
        n = d.shape[1]
        if n == 0:
            return np.zeros(0 if flat else (self.rows, 0), np.float32)
        own = self._validity(n)
        if valid is None:
            valid = own
        cover = self._coverage(n, valid)
        dv = d if valid is None or cover is None else d * np.asarray(valid, dtype=np.float32)
        if self.check_carrier:
            both = self._lp.process(np.concatenate([dv, dv * d]))
            level, power = both[: self.rows], both[self.rows :]
        else:
            level, power = self._lp.process(dv), None
        if cover is not None:
            ok = cover > 1e-3
            safe = np.maximum(cover, np.float32(1e-3))
            level = np.where(ok, level / safe, np.float32(0))
            if power is not None:
                power = np.where(ok, power / safe, np.float32(0))
        joined = np.concatenate([self._history, d], axis=1)
        delayed = joined[:, :n]
        self._history = joined[:, n:]
        self.last_level = float(level[0, -1])
        out = delayed - level
        if self.normalise:
            magnitude = np.abs(level)
            running = np.maximum.accumulate(magnitude, axis=1)
            np.maximum(running, self._strongest, out=running)
            self._strongest = running[:, -1:].copy()
            # carrier present: the mean of the detector output is most of its RMS (1/sqrt(1 + m^2/2) >= 0.8
            # for a tone at m <= 1). Without a carrier (a coherent detector fed only noise, the mean near 0)
            # dividing by the mean would blow the noise up: divide by 3 x the RMS instead (noise at -10 dBFS).
            if power is not None:
                rms = np.sqrt(np.maximum(power, np.float32(0)))
                divisor = np.where(magnitude >= 0.5 * rms, magnitude, 3.0 * rms)
            else:
                divisor = magnitude
            np.maximum(divisor, np.maximum(running * np.float32(self.max_gain), np.float32(self.floor)), out=divisor)
            out /= divisor
        out = out.astype(np.float32)
        return out[0] if flat else out

    def flush(self) -> np.ndarray:
        self.reset()
        return np.zeros(0, np.float32)


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
    """Mute the audio while the channel carries only noise.

    The channel baseband is cut into 10 ms frames (grid continued across blocks); a frame is open when
    its power is at least ``threshold_db`` above the noise floor, taken as the quietest frame seen so
    far. Until the loudest and quietest frames seen differ by the threshold, the floor is unknown and
    the squelch stays open (a channel busy from the start, or a continuous carrier, is never muted).
    Opening and closing follow the frame levels with a linear ramp between frame centres (no clicks).
    Squelch circuits of radio receivers work on the same principle (common practice); this one is
    causal in the frames it has seen.

    Not a :class:`~iqsift.dsp.stages.Stage`: it does not turn a block of samples into a block of
    samples. It watches the channel baseband (:meth:`feed`, at the channel rate) and answers with a
    gain curve at any times asked for (:meth:`gain`, applied to the audio at the audio rate), so
    its input and output are different signals at different rates, and the gain for a time is
    known only once the frames around it have been fed.

    Parameters
    ----------
    rate_hz : float
        Channel baseband rate (samples/s).
    threshold_db : float
        Opening threshold above the noise floor (dB).
    """

    FRAME_S = 0.01

    def __init__(self, rate_hz: float, threshold_db: float) -> None:
        self.rate_hz = float(rate_hz)
        self.threshold_db = float(threshold_db)
        self.frame = max(1, int(round(self.FRAME_S * self.rate_hz)))
        self._tail = np.zeros(0, np.float64)
        self._gates: list[float] = []
        self._low = np.inf
        self._high = -np.inf

    def feed(self, baseband: np.ndarray) -> None:
        """Add channel baseband samples (complex)."""
        p = np.square(np.abs(np.asarray(baseband))).astype(np.float64)
        buf = np.concatenate([self._tail, p]) if self._tail.size else p
        count = buf.size // self.frame
        if count:
            levels = 10 * np.log10(np.maximum(buf[: count * self.frame].reshape(count, self.frame).mean(axis=1),
                                              1e-30))
            low = np.minimum.accumulate(np.minimum(levels, self._low))
            high = np.maximum.accumulate(np.maximum(levels, self._high))
            self._low, self._high = float(low[-1]), float(high[-1])
            known = high - low >= self.threshold_db
            self._gates.extend(np.where(known & (levels < low + self.threshold_db), 0.0, 1.0).tolist())
        self._tail = buf[count * self.frame :]

    def gain(self, times_s: np.ndarray) -> np.ndarray:
        """Audio gain (0..1) at the given capture times (s); open where no frame is known yet."""
        if not self._gates:
            return np.ones(times_s.size, np.float32)
        centres = (np.arange(len(self._gates)) + 0.5) * self.frame / self.rate_hz
        g = np.interp(times_s, centres, np.asarray(self._gates), left=self._gates[0], right=1.0)
        g[times_s > centres[-1] + 0.5 * self.frame / self.rate_hz] = 1.0
        return g.astype(np.float32)
