"""Many channels of one capture in one pass: a shared filter bank feeding one receiver chain per channel.

The wideband input is transformed once per block by the fast-convolution
filter bank (:mod:`iqsift.dsp.channelizer`, Borgerding 2006); each channel
selects its bins, is filtered and decimated by a short inverse FFT (batched
across channels), then runs through its own fine mixer, detector and audio
stages — the same :class:`~iqsift.receiver.Receiver` back end as ``demod``, so a
channel's audio from ``extract`` matches its audio from ``demod``.

Every channel is designed (and checked against the capture band) before the
first sample is read; a channel that cannot be extracted is refused by name.
"""

from __future__ import annotations

from typing import Any, Iterator, Sequence

import numpy as np

from .channel import Channel
from .dsp.channelizer import FastConvChannelizer
from .dsp.stages import Mixer
from .errors import ParameterError
from .plan import ChannelPlan, PlannedChannel
from .receiver import Receiver, bank_channel, input_tap

__all__ = ["Extractor", "channels_from_plan"]


def channels_from_plan(plan: ChannelPlan | Sequence[PlannedChannel], center_hz: float | None) -> list[Channel]:
    """Turn validated plan entries into :class:`~iqsift.channel.Channel` objects."""
    out = []
    for p in plan:
        if p.freq_hz is not None and center_hz is not None:
            freq, offset = p.freq_hz, None
        else:
            freq, offset = None, p.tuning_offset_hz(center_hz)
        out.append(
            Channel(
                bandwidth_hz=p.bandwidth_hz,
                mode=p.mode,
                frequency_hz=freq,
                offset_hz=offset,
                name=p.name,
                emission=p.emission,
                audio_low_hz=p.audio_low_hz,
                audio_rate_hz=p.audio_rate_hz,
                squelch_db=p.squelch_db,
                extra={"file_stem": p.file_stem, "channel_name": p.channel_name},
            )
        )
    return out


class Extractor:
    """Extract many channels from one stream of IQ blocks.

    Parameters
    ----------
    rate_hz : float
        Input sample rate (samples/s).
    channels : sequence of Channel
        The channels (names must be unique).
    center_hz : float, optional
        Capture centre frequency (Hz).
    real_input : bool
        Real-valued input (real IF).
    ripple_db, atten_db : float
        Channel filter specification.
    agc : bool or None
        As for :class:`~iqsift.receiver.Receiver`.
    spectra : bool
        Accumulate stage spectra per channel (the input spectrum is shared).
    analyze : bool
        Measure every channel (carrier, depth, bandwidth, activity).
    time_offset_s : float
        Capture time of the first sample fed (s), so activity is reported in capture time.
    workers : int or None
        Threads for the bank's transforms (None: all CPUs, up to 4).

    Raises
    ------
    ParameterError
        Listing every channel that cannot be extracted (outside the capture
        band, filter over the band edge, too wide for the rate ...).
    """

    def __init__(
        self,
        rate_hz: float,
        channels: Sequence[Channel],
        *,
        center_hz: float | None = None,
        real_input: bool = False,
        ripple_db: float = 0.1,
        atten_db: float = 80.0,
        agc: bool | None = None,
        spectra: bool = False,
        analyze: bool = True,
        workers: int | None = None,
        time_offset_s: float = 0.0,
    ) -> None:
        if not channels:
            raise ParameterError("no channels to extract")
        names = [c.name for c in channels]
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise ParameterError(f"channel names must be unique; repeated: {', '.join(dupes)}")
        self.rate_hz = float(rate_hz)
        self.center_hz = center_hz
        receivers, problems = [], []
        taps = ("channel", "detector", "audio") if spectra else False
        for ch in channels:
            try:
                rx = Receiver(rate_hz, ch, center_hz=center_hz, real_input=real_input, engine="fft",
                              ripple_db=ripple_db, atten_db=atten_db, agc=agc, spectra=taps, own_front=False)
            except ParameterError as exc:
                problems.append(str(exc))
                continue
            receivers.append(rx)
        if problems:
            raise ParameterError(f"{len(problems)} channel(s) refused before any work: " + "; ".join(problems))
        self.receivers = receivers
        self.bank = FastConvChannelizer(
            rate_hz, [bank_channel(rx.design) for rx in receivers], real_input=real_input, workers=workers
        )
        for rx in receivers:
            rx.design.fft_size = self.bank.fft_size
            rx.design.fft_hop = self.bank.hop
        self.mixers = [Mixer(rx.design.channel_rate_hz, self.bank.residual_hz(i)) for i, rx in enumerate(receivers)]
        self.input_spectrum = None
        if spectra:
            self.input_spectrum = input_tap(rate_hz, center_hz or 0.0, real_input)
            for rx in receivers:
                rx.taps["input"] = self.input_spectrum
        if analyze:
            for rx in receivers:
                options = {}
                if rx.channel.squelch_db is not None:
                    options["activity"] = {"threshold_db": rx.channel.squelch_db}
                rx.analyze(time_offset_s=time_offset_s, **options)
        self.samples_in = 0

    @property
    def channels(self) -> list[Channel]:
        return [rx.channel for rx in self.receivers]

    def process(self, block: np.ndarray) -> list[np.ndarray]:
        """Feed IQ samples; returns the new audio of every channel (in channel order)."""
        block = np.asarray(block)
        self.samples_in += block.shape[0]
        if self.input_spectrum is not None and block.size:
            self.input_spectrum.feed(block)
        outs = self.bank.process(block)
        audio = []
        for rx, mixer, bb in zip(self.receivers, self.mixers, outs):
            rx.samples_in += block.shape[0]
            audio.append(rx.process_baseband(mixer.process(bb)))
        return audio

    def flush(self) -> list[np.ndarray]:
        """Push every channel's delayed tail out; returns the last audio of every channel."""
        pad = max(rx.flush_padding for rx in self.receivers)
        tails = self.bank.process(np.zeros(pad, np.complex64))
        flushed = self.bank.flush()
        audio = []
        for rx, mixer, tail, rest in zip(self.receivers, self.mixers, tails, flushed):
            audio.append(rx.finish_baseband(mixer.process(tail), mixer.process(rest)))
        return audio

    def stream(self, blocks) -> Iterator[list[np.ndarray]]:
        """Run over IQ blocks, yielding per-channel audio lists; flushes at the end."""
        for block in blocks:
            yield self.process(block)
        yield self.flush()

    def reports(self) -> list[dict[str, Any]]:
        """Each channel's report (channel, design, level, delay, measurements)."""
        return [rx.report() for rx in self.receivers]
