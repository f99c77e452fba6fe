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

__all__ = ["BankChannel", "FastConvChannelizer", "choose_fft_size", "default_workers", "power_of_two_decimation"]

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
        Input samples per output sample; must divide the FFT size.
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


def choose_fft_size(history: int, max_decimation: int, min_hop_share: float = 0.75) -> int:
    """Smallest power-of-two FFT size whose hop is at least ``min_hop_share`` of it.

    Larger transforms waste less on overlap but run slower per sample once
    they leave the cache; at least 4x the filter length (75 % useful) is the
    usual compromise (common practice for overlap-save).
    """
    n = max(1 << 10, 2 * max_decimation)
    while n - history < min_hop_share * n or (n - history) < max_decimation:
        n <<= 1
    if n > _MAX_FFT:
        raise ParameterError(
            f"channel filter of {history + 1} taps needs an FFT of {n} points; reduce the input rate or "
            "relax the transition band"
        )
    return n


class FastConvChannelizer:
    """Streaming overlap-save filter bank for one or many channels.

    Parameters
    ----------
    rate_hz : float
        Input sample rate (samples/s).
    channels : sequence of BankChannel
        The channels; their decimations must all be powers of two.
    real_input : bool
        The input is real-valued (imaginary part zero): outputs are scaled
        by 2 (analytic-signal convention).
    fft_size : int, optional
        Override the FFT size (power of two, large enough for the filters).
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
        decimations = [c.decimation for c in self.channels]
        for d in decimations:
            if d < 1 or d & (d - 1):
                raise ParameterError(f"channelizer: decimation must be a power of two, got {d}")
        self.max_decimation = max(decimations)
        longest = max(len(c.taps) for c in self.channels)
        self.history = int(math.ceil((longest - 1) / self.max_decimation)) * self.max_decimation
        n = fft_size or choose_fft_size(self.history, self.max_decimation)
        if n & (n - 1) or n - self.history < self.max_decimation:
            raise ParameterError(f"channelizer: FFT size {n} is not a power of two large enough for the filters")
        self.fft_size = n
        self.hop = ((n - self.history) // self.max_decimation) * self.max_decimation
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
            k0 = np.array([self._k0[c] for c in members], dtype=np.int64)
            self._groups.append((k, members, idx, filt, k0))

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

    def reset(self) -> None:
        """Forget all input; the next sample is sample 0 again."""
        self._buffer = np.zeros(self.history, np.complex64)  # history (zeros before the start) + pending input
        self._frame_start = -self.history  # global index of the buffer's first sample
        self._consumed = 0  # input samples received

    # ------------------------------------------------------------------
    def process(self, block: np.ndarray) -> list[np.ndarray]:
        """Feed input samples; returns the new outputs of every channel."""
        block = np.asarray(block)
        if block.dtype != np.complex64:
            block = block.astype(np.complex64)
        self._consumed += block.shape[0]
        self._buffer = np.concatenate([self._buffer, block]) if block.size else self._buffer
        frames = (self._buffer.shape[0] - self.history) // self.hop
        if frames <= 0:
            return [np.zeros(0, np.complex64) for _ in self.channels]
        out = self._run_frames(frames)
        self._buffer = self._buffer[frames * self.hop :].copy()
        self._frame_start += frames * self.hop
        return out

    def _run_frames(self, frames: int) -> list[np.ndarray]:
        n, hop, hist = self.fft_size, self.hop, self.history
        view = np.lib.stride_tricks.sliding_window_view(self._buffer[: hist + frames * hop], n)[::hop]
        results: list[np.ndarray | None] = [None] * len(self.channels)
        # limit the 2-D FFT's working set to ~8 frames at a time
        step = max(1, (1 << 21) // n)
        parts: list[list[np.ndarray]] = [[] for _ in self.channels]
        for first in range(0, frames, step):
            chunk = view[first : first + step]
            spectra = scipy.fft.fft(chunk, axis=-1, workers=self.workers)
            starts = self._frame_start + (first + np.arange(chunk.shape[0], dtype=np.int64)) * hop
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
        for ci in range(len(self.channels)):
            results[ci] = np.concatenate(parts[ci]).astype(np.complex64, copy=False)
        return results  # type: ignore[return-value]

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
