"""Fast-convolution filter bank: mixing, channel filtering and decimation in one FFT step.

One forward FFT per block of the wideband input serves every channel. For each
channel the bins around its carrier are selected, multiplied by the spectrum of
that channel's filter (the prototype low-pass shifted onto the channel's
passband), and brought back to the time domain by a short inverse FFT, which
both mixes the carrier bin to 0 Hz and decimates (M. Borgerding, "Turning
overlap-save into a multiband mixing, downsampling filter bank", IEEE Signal
Processing Magazine, March 2006). The inverse FFTs of channels that share a
decimation are batched into one call.

Details of this implementation:

* Overlap-save with FFT size ``N`` and hop ``L``: each frame holds ``H`` old and
  ``L`` new samples (``N = H + L``); outputs before local index ``H`` are
  discarded (circular wrap). ``H`` is the longest filter length minus one,
  rounded up to a multiple of every channel's decimation so that each
  channel's output grid stays at input indices ``0, D, 2D, ...`` across frames.
* Keeping ``K = N / D`` bins and taking a ``K``-point inverse FFT equals
  decimating the ``N``-point inverse by ``D`` (the other bins are zero), with
  a factor ``1/D`` folded into the filter spectrum.
* Selecting bins ``k0 + m`` shifts the spectrum by the bin frequency
  ``k0·fs/N`` in each frame's local time; the frame's start ``s`` gives the
  phase correction ``exp(-j2π·k0·s/N)``, computed exactly with integers.
* The carrier generally falls between bins; the residual ``f_c − k0·fs/N``
  (at most half a bin) is left for a fine mixer at the channel rate, which
  this module exposes as :attr:`BankChannel.residual_hz`.
* The channel filter is the prototype modulated to the passband centre about
  its middle tap, so the band-pass is a pure delay of ``(P−1)/2`` samples
  relative to mixing by the carrier (no constant phase for one-sided passbands).
* Content outside a channel's ``K`` bins is discarded, not aliased: the only
  leakage into a channel is its filter's stopband response.

Real-valued input is treated as complex with a zero imaginary part and scaled
by 2 (the analytic-signal convention: a real cosine of amplitude A reads as a
complex exponential of amplitude A after mixing).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np
import scipy.fft

from ..errors import ParameterError

__all__ = [
    "BankChannel",
    "FastConvChannelizer",
    "choose_fft_size",
    "default_workers",
    "power_of_two_decimation",
    "smooth_numbers",
]

_MAX_FFT = 1 << 20


@dataclass(frozen=True)
class BankChannel:
    """One channel of the bank.

    Attributes
    ----------
    carrier_hz : float
        Carrier frequency relative to the capture centre (Hz); mixed to 0 Hz.
    passband_hz : tuple of float
        (low, high) edges of the passband relative to the carrier (Hz).
    taps : ndarray
        Real, linear-phase prototype low-pass (unity DC gain) whose passband
        half-width is ``(high - low) / 2`` at the input rate.
    decimation : int
        Input samples per output sample (no prime factor above 5); divides the FFT size.
    """

    carrier_hz: float
    passband_hz: tuple[float, float]
    taps: np.ndarray
    decimation: int

    @property
    def center_offset_hz(self) -> float:
        """Passband centre relative to the carrier (Hz)."""
        return 0.5 * (self.passband_hz[0] + self.passband_hz[1])


def default_workers() -> int:
    """Threads for the filter bank's transforms: the CPUs available to this process, at most 4."""
    try:
        available = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        available = os.cpu_count() or 1
    return max(1, min(4, available))


def power_of_two_decimation(rate_hz: float, min_rate_hz: float) -> int:
    """Largest power of two ``D`` with ``rate_hz / D >= min_rate_hz`` (at least 1)."""
    if min_rate_hz <= 0 or min_rate_hz > rate_hz:
        return 1
    return 1 << int(math.floor(math.log2(rate_hz / min_rate_hz) + 1e-12))


def smooth_numbers(limit: int) -> list[int]:
    """The integers 1..limit with no prime factor above 5 (sizes pocketfft transforms efficiently)."""
    out = []
    p2 = 1
    while p2 <= limit:
        p3 = p2
        while p3 <= limit:
            p5 = p3
            while p5 <= limit:
                out.append(p5)
                p5 *= 5
            p3 *= 3
        p2 *= 2
    return sorted(out)


def choose_fft_size(history: int, decimation: int, min_hop_share: float = 0.75) -> int:
    """Smallest FFT size (a multiple of ``decimation`` with no prime factor above 5) whose hop is at least
    ``min_hop_share`` of it.

    Larger transforms waste less on overlap but run slower per sample once
    they leave the cache; at least 4x the filter length (75 % useful) is the
    usual compromise (common practice for overlap-save).
    """
    need = max(1 << 10, 2 * decimation, int(math.ceil(history / (1.0 - min_hop_share))))
    for m in smooth_numbers(max(4, _MAX_FFT // max(decimation, 1))):
        n = m * decimation
        if n >= need and n - history >= decimation and _is_smooth(n):
            return n
    raise ParameterError(
        f"channel filter of {history + 1} taps needs an FFT larger than {_MAX_FFT} points; reduce the input "
        "rate or relax the transition band"
    )


def _is_smooth(n: int) -> bool:
    for p in (2, 3, 5):
        while n % p == 0:
            n //= p
    return n == 1


class FastConvChannelizer:
    """Streaming overlap-save filter bank for one or many channels.

    Parameters
    ----------
    rate_hz : float
        Input sample rate (samples/s).
    channels : sequence of BankChannel
        The channels; the FFT size is a multiple of all their decimations.
    real_input : bool
        The input is real-valued (imaginary part zero): outputs are scaled
        by 2 (analytic-signal convention).
    fft_size : int, optional
        Override the FFT size (a multiple of every decimation, large enough for the filters).
    workers : int or None
        Threads for the transforms (scipy.fft ``workers``); None uses every CPU
        this process may run on, up to 4 (the frames of a block are
        transformed in parallel).

    Notes
    -----
    ``process(block)`` returns one complex64 array per channel. The number of
    outputs per channel after ``n`` input samples is ``floor(n_done / L)·L/D``
    where ``n_done`` counts whole hops; :meth:`flush` pads with zeros and
    returns the rest so that the total is ``ceil(n / D)`` — exactly what a
    one-shot causal filter-and-decimate of the same samples gives.
    """

    def __init__(
        self,
        rate_hz: float,
        channels: list[BankChannel],
        *,
        real_input: bool = False,
        fft_size: int | None = None,
        workers: int | None = None,
    ) -> None:
        if not channels:
            raise ParameterError("channelizer: at least one channel is needed")
        self.rate_hz = float(rate_hz)
        self.channels = list(channels)
        self.real_input = real_input
        self.workers = default_workers() if workers is None else max(1, int(workers))
        decimations = [int(c.decimation) for c in self.channels]
        for d in decimations:
            if d < 1 or not _is_smooth(d):
                raise ParameterError(f"channelizer: decimation must be a whole number with no prime factor above 5, "
                                     f"got {d}")
        # every channel's output grid must stay aligned across frames: history and hop are multiples of
        # every decimation
        step = math.lcm(*decimations)
        self.max_decimation = step
        longest = max(len(c.taps) for c in self.channels)
        self.history = int(math.ceil((longest - 1) / step)) * step
        n = fft_size or choose_fft_size(self.history, step)
        if n % step or n - self.history < step:
            raise ParameterError(f"channelizer: FFT size {n} is not a multiple of every decimation ({step}) "
                                 "large enough for the filters")
        self.fft_size = n
        self.hop = ((n - self.history) // step) * step
        self._prepare_channels()
        self.reset()

    # ------------------------------------------------------------------
    def _prepare_channels(self) -> None:
        n = self.fft_size
        fs = self.rate_hz
        gain = 2.0 if self.real_input else 1.0
        self._k0 = []
        self._residual = []
        groups: dict[int, list[int]] = {}
        index_rows, filter_rows = [], []
        for ci, ch in enumerate(self.channels):
            k = n // ch.decimation
            k0 = int(round(ch.carrier_hz / fs * n))
            self._k0.append(k0)
            self._residual.append(ch.carrier_hz - k0 * fs / n)
            # channel filter: prototype shifted onto the passband centre (absolute offset in the input)
            centre = ch.carrier_hz + ch.center_offset_hz
            taps = np.asarray(ch.taps, dtype=np.float64)
            # modulate about the filter's centre tap c = (P-1)/2 so the complex band-pass delays the
            # channel by exactly c samples with no extra phase (as mixing by the carrier first, then
            # filtering with the low-pass shifted by the passband offset, would)
            c = (taps.size - 1) / 2
            shifted = taps * np.exp(2j * np.pi * centre / fs * np.arange(taps.size))
            shifted *= np.exp(-2j * np.pi * ch.center_offset_hz / fs * c)
            spectrum = np.fft.fft(shifted, n)
            m = np.fft.fftfreq(k, 1.0 / k).astype(np.int64)  # 0..K/2-1, -K/2..-1
            idx = (k0 + m) % n
            index_rows.append(idx)
            filter_rows.append((spectrum[idx] * gain / ch.decimation).astype(np.complex64))
            groups.setdefault(k, []).append(ci)
        self._groups = []
        for k, members in groups.items():
            idx = np.stack([index_rows[c] for c in members])
            filt = np.stack([filter_rows[c] for c in members])
            group_k0 = np.array([self._k0[c] for c in members], dtype=np.int64)
            self._groups.append((k, members, idx, filt, group_k0))

    @property
    def rate_in(self) -> float:
        """Input rate (samples/s)."""
        return self.rate_hz

    def rate_out(self, channel: int = 0) -> float:
        """Output rate of a channel (samples/s)."""
        return self.rate_hz / self.channels[channel].decimation

    def delay(self, channel: int = 0) -> float:
        """Group delay of a channel's filter, in that channel's output samples."""
        ch = self.channels[channel]
        return (len(ch.taps) - 1) / 2 / ch.decimation

    def residual_hz(self, channel: int = 0) -> float:
        """Carrier left after mixing by the nearest bin (Hz), for the fine mixer."""
        return self._residual[channel]

    def kept_band_hz(self, channel: int = 0) -> tuple[float, float]:
        """Lowest and highest bin frequency a channel keeps, relative to the capture centre (Hz).

        Everything outside lies beyond the channel's cut and reaches its output only through the
        frame's rectangular window (see :meth:`tone_gain`)."""
        ch = self.channels[channel]
        k = self.fft_size // ch.decimation
        bin_hz = self.rate_hz / self.fft_size
        return (self._k0[channel] - k // 2) * bin_hz, (self._k0[channel] + k - k // 2 - 1) * bin_hz

    def tone_gain(self, freqs_hz: np.ndarray, channel: int = 0) -> np.ndarray:
        """Steady-state RMS output of a channel for unit complex tones, computed exactly (no simulation).

        Parameters
        ----------
        freqs_hz : array_like
            Tone frequencies relative to the capture centre (Hz).
        channel : int
            Which channel.

        Returns
        -------
        ndarray
            RMS output amplitude per tone (same scale as :meth:`process`; the real-input factor 2 included).

        Notes
        -----
        The bank is linear and periodically time-varying: frame ``i`` of a tone ``exp(j2π f n / fs)``
        is frame 0 times ``exp(j2π f s_i / fs)``, and the frame phase correction has unit magnitude,
        so every frame yields the same output samples up to a common phase, and the output power of
        one frame is the steady-state power of the stream. Frame 0's spectrum is the rectangular-window
        transform ``X[k] = (1 - e^{j2πu}) / (1 - e^{j2π(u-k)/N})``, ``u = f N / fs`` (``X[k] = N`` where
        ``u - k`` is a multiple of ``N``); the output is the channel's ``K``-point inverse transform of
        ``X`` times its filter row, over the frame's valid samples. This includes everything the
        engine does: the bin selection (a tone outside the kept bins leaks in through the window and
        is cancelled only as far as the channel filter's response spans less than the frame's
        history), the overlap and the decimation.
        """
        u = np.atleast_1d(np.asarray(freqs_hz, dtype=np.float64)) / self.rate_hz * self.fft_size
        k, members, idx, filt, _ = next(g for g in self._groups if channel in g[1])
        row = members.index(channel)
        n = self.fft_size
        bins = idx[row].astype(np.float64)
        taps_row = filt[row].astype(np.complex128)
        skip = self.history // (n // k)
        count = self.hop // (n // k)
        rot_bins = np.exp(-2j * np.pi * bins / n)
        # a tone on a bin (u whole) is periodic in the frame: all of its energy, N, lands on that bin
        whole = np.abs(u - np.round(u)) < 1e-9
        u = np.where(whole, np.round(u), u)
        out = np.empty(u.size)
        step = max(1, (1 << 19) // k)
        for first in range(0, u.size, step):
            uu = u[first : first + step, None]
            den = 1.0 - np.exp(2j * np.pi * uu / n) * rot_bins[None, :]
            on_bin = whole[first : first + step, None] & (np.mod(uu - bins[None, :], n) == 0)
            den[on_bin] = 1.0
            spectrum = (1.0 - np.exp(2j * np.pi * uu)) / den
            spectrum[on_bin] = n
            spectrum *= taps_row[None, :]
            y = scipy.fft.ifft(spectrum, axis=-1, overwrite_x=True)[:, skip : skip + count]
            out[first : first + step] = np.sqrt(np.mean(y.real**2 + y.imag**2, axis=-1))
        return out

    def measure_channel(self, channel: int, passband_hz: float, stopband_hz: float) -> tuple[float, float]:
        """A channel's end-to-end passband ripple and stopband attenuation, from :meth:`tone_gain`.

        Parameters
        ----------
        channel : int
            Which channel.
        passband_hz, stopband_hz : float
            Passband and stopband edges as distances from the channel filter's centre (Hz).

        Returns
        -------
        ripple_db : float
            Peak-to-peak ripple of the output level over the passband (dB).
        atten_db : float
            Least attenuation of the output level, relative to a tone at the filter centre, over
            every frequency of the capture band at least ``stopband_hz`` from the centre, either side (dB).

        Notes
        -----
        Grid (in bins of the transform): eight points per bin over the kept bins and eight bins
        beyond either end (the filter's own response and the cut); further out, where a tone
        reaches the output only through the frame's window, its level is ``|sin πu|`` times a
        factor that varies smoothly with the distance to the kept bins, so it is evaluated at
        half-bin offsets (``|sin πu| = 1``) with a stride of 1/32 of that distance; plus the exact
        band edges. The extremes of the grid are the result.
        """
        ch = self.channels[channel]
        n, k = self.fft_size, self.fft_size // ch.decimation
        bin_hz = self.rate_hz / n
        centre = ch.carrier_hz + ch.center_offset_hz
        k0 = self._k0[channel]
        fine = k0 - k // 2 - 8 + np.arange(8 * (k + 16)) / 8.0
        far_bins = []
        if k < n:
            for side in (1, -1):
                edge = k0 + (k - k // 2 - 1 + 8 if side > 0 else -(k // 2) - 8)
                distance, end = 0.5, (n - k) / 2.0
                while distance < end:
                    far_bins.append(edge + side * distance)
                    distance += max(1.0, math.floor(distance / 32.0))
        edges = centre + np.array([0.0, passband_hz, -passband_hz, stopband_hz, -stopband_hz])
        freqs = np.concatenate([(np.concatenate([fine, far_bins]) if far_bins else fine) * bin_hz, edges])
        gains = self.tone_gain(freqs, channel)
        # distance from the filter centre within the capture band (the bank's spectrum repeats every rate)
        distance_hz = np.abs((freqs - centre + 0.5 * self.rate_hz) % self.rate_hz - 0.5 * self.rate_hz)
        inside = gains[distance_hz <= passband_hz]
        stop = gains[distance_hz >= stopband_hz * (1 - 1e-12)]
        ripple_db = 20.0 * math.log10(inside.max() / inside.min())
        atten_db = -20.0 * math.log10(stop.max() / gains[-5]) if stop.size and stop.max() > 0 else math.inf
        return float(ripple_db), float(atten_db)

    def reset(self) -> None:
        """Forget all input; the next sample is sample 0 again."""
        self._buffer = np.zeros(self.history, np.complex64)  # history (zeros before the start) + pending input
        self._frame_start = -self.history  # global index of the buffer's first sample
        self._consumed = 0  # input samples received

    def start_at(self, start: int, preceding: np.ndarray) -> None:
        """Continue as though input samples ``0 .. start - 1`` had been fed: the bank's frames stay on the
        absolute grid ``-history + i·hop``, so a time piece of a capture gives exactly the outputs a whole
        pass gives for it (from output ``start / D`` of each channel on).

        Parameters
        ----------
        start : int
            Index of the next input sample; a multiple of :attr:`hop`.
        preceding : ndarray
            The :attr:`history` input samples before ``start`` (zeros before sample 0, as the
            whole pass holds them).

        Raises
        ------
        ParameterError
            If ``start`` is off the hop grid or ``preceding`` is not ``history`` samples long.
        """
        if start < 0 or start % self.hop:
            raise ParameterError(f"start: got {start}; a time piece must start on the bank's hop grid "
                                 f"(a multiple of {self.hop} samples)", parameters=("start",))
        preceding = np.asarray(preceding)
        if preceding.shape != (self.history,):
            raise ParameterError(f"preceding: got {preceding.shape[0]} samples; the bank's history is "
                                 f"{self.history}", parameters=("preceding",))
        self._buffer = preceding.astype(np.complex64, copy=True)
        self._frame_start = start - self.history
        self._consumed = start

    # ------------------------------------------------------------------
    def process(self, block: np.ndarray) -> list[np.ndarray]:
        """Feed input samples; returns the new outputs of every channel."""
        block = np.asarray(block)
        if block.dtype != np.complex64:
            block = block.astype(np.complex64)
        self._consumed += block.shape[0]
        old = self._buffer
        n, hop = self.fft_size, self.hop
        frames = (old.shape[0] + block.shape[0] - self.history) // hop
        if frames <= 0:
            self._buffer = np.concatenate([old, block]) if block.size else old
            return [np.zeros(0, np.complex64) for _ in self.channels]
        # Frame i covers samples [i*hop, i*hop + N) of (old ++ block). The few frames starting inside the
        # held samples come from a short joined array; the rest are views straight into the block, so the
        # block is never copied as a whole.
        straddling = min(frames, -(-old.shape[0] // hop))
        views = []
        if straddling:
            head = np.concatenate([old, block[: max(0, (straddling - 1) * hop + n - old.shape[0])]])
            views.append(np.lib.stride_tricks.sliding_window_view(head, n)[::hop][:straddling])
        if frames > straddling:
            first = straddling * hop - old.shape[0]
            last = (frames - 1) * hop - old.shape[0] + n
            views.append(np.lib.stride_tricks.sliding_window_view(block[first:last], n)[::hop])
        out = self._run_frames(views)
        used = frames * hop
        if used >= old.shape[0]:
            self._buffer = block[used - old.shape[0] :].copy()
        else:
            self._buffer = np.concatenate([old[used:], block])
        self._frame_start += used
        return out

    def _run_frames(self, views: list[np.ndarray]) -> list[np.ndarray]:
        n, hop, hist = self.fft_size, self.hop, self.history
        # limit the 2-D FFT's working set to ~2 Mi samples at a time
        step = max(1, (1 << 21) // n)
        parts: list[list[np.ndarray]] = [[] for _ in self.channels]
        done = 0
        for view in views:
            for first in range(0, view.shape[0], step):
                chunk = view[first : first + step]
                spectra = scipy.fft.fft(chunk, axis=-1, workers=self.workers)
                starts = self._frame_start + (done + np.arange(chunk.shape[0], dtype=np.int64)) * hop
                done += chunk.shape[0]
                for k, members, idx, filt, k0 in self._groups:
                    decim = n // k
                    skip = hist // decim
                    count = hop // decim
                    # bins of every member channel for every frame: (frames, channels, K)
                    selected = spectra[:, idx] * filt[None, :, :]
                    y = scipy.fft.ifft(selected, axis=-1, workers=self.workers)[:, :, skip : skip + count]
                    # exact frame phase: exp(-j 2π k0 s / N) with s the frame start (integers mod N)
                    phase_idx = np.mod(np.outer(starts, k0), n)
                    rot = np.exp(-2j * np.pi * phase_idx / n).astype(np.complex64)
                    y = y * rot[:, :, None]
                    for j, ci in enumerate(members):
                        parts[ci].append(y[:, j, :].reshape(-1))
        return [np.concatenate(p).astype(np.complex64, copy=False) for p in parts]

    def flush(self) -> list[np.ndarray]:
        """Pad with zeros to finish the last frame; returns the remaining outputs.

        After flush the bank is reset. Each channel has then produced
        ``ceil(n / D)`` outputs in total for ``n`` input samples.
        """
        consumed = self._consumed
        pending = self._buffer.shape[0] - self.history
        outputs = [np.zeros(0, np.complex64) for _ in self.channels]
        if pending > 0:
            pad = self.hop - pending
            produced_before = [(self._frame_start + self.history) // ch.decimation for ch in self.channels]
            outputs = self.process(np.zeros(pad, np.complex64))
            for ci, ch in enumerate(self.channels):
                total = -(-consumed // ch.decimation)
                outputs[ci] = outputs[ci][: total - produced_before[ci]]
        self.reset()
        return outputs
