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
from .dsp.batch import BatchFir
from .dsp.channelizer import FastConvChannelizer
from .dsp.post import CarrierNormaliser
from .dsp.stages import Mixer, UpFirDn
from .errors import ParameterError
from .plan import ChannelPlan, PlannedChannel
from .receiver import Receiver, bank_channel, input_tap, valid_mask

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


class _AmBatch:
    """Envelope-detected AM channels with identical chains, processed together as rows of 2-D arrays.

    The detector, carrier normaliser, band-pass and resampler of every member are the same filters with
    the same taps, so one set of calls per block serves them all (the stages take one channel per row); the
    per-channel parts (level, taps, analyzer, squelch, fades, writers) stay with each channel's receiver.
    """

    def __init__(self, members: list[int], receivers: list[Receiver]) -> None:
        self.members = members
        self.rxs = [receivers[i] for i in members]
        lead = self.rxs[0].back
        rows = len(members)
        normaliser, merged = lead.post
        # the lead channel's own stages, made for all rows (same taps, fresh state)
        self.normaliser = normaliser.for_rows(rows)
        self.fir = merged.stage.for_rows(rows)
        r = lead.resampler
        self.resampler = UpFirDn(r.taps.astype(np.float32), r.up, r.down)
        self.gain = np.float32(lead.audio_gain)
        self.detector_out = 0
        self.real_total: int | None = None
        self.baseband = 0

    @staticmethod
    def key(rx: Receiver):
        """Receivers with equal keys run identical audio chains (None: cannot be batched)."""
        back = rx.back
        if rx.channel.mode != "envelope" or back.agc or len(back.post) != 2:
            return None
        normaliser, merged = back.post
        if not isinstance(normaliser, CarrierNormaliser) or normaliser.check_carrier or not normaliser.normalise:
            return None
        if not isinstance(getattr(merged, "stage", None), BatchFir):
            return None
        r = back.resampler
        return (rx.design.channel_rate_hz, tuple(sorted(normaliser._args.items())),
                merged.stage.taps.tobytes(), merged.stage.nfft, r.up, r.down, r.taps.tobytes(),
                back.audio_gain, back.trim_samples)

    def _valid(self, count: int):
        first = self.detector_out
        self.detector_out += count
        return valid_mask(first, count, 0, self.real_total)  # the envelope detector has no delay

    def run(self, rows: list[np.ndarray], count_level: bool = True) -> np.ndarray:
        """Process one block of every member's baseband; returns the audio rows (before trimming)."""
        if not count_level and self.real_total is None:
            self.real_total = self.baseband
        for rx, row in zip(self.rxs, rows):
            rx.back.account(row, count_level)
        if count_level:
            self.baseband += rows[0].size
        d = np.abs(np.stack(rows)).astype(np.float32)
        for rx, row in zip(self.rxs, d):
            tap = rx.back.taps.get("detector")
            if tap is not None and row.size:
                tap.feed(row)
        d = self.normaliser.process(d, self._valid(d.shape[1]))
        d = self.fir.process(d) * self.gain
        return self.resampler.process(d)

    def process(self, rows: list[np.ndarray]) -> list[np.ndarray]:
        audio = self.run(rows)
        return [rx._emit(rx.back._trim.process(a)) for rx, a in zip(self.rxs, audio)]

    def finish(self, tails: list[np.ndarray], rests: list[np.ndarray]) -> list[np.ndarray]:
        """The batch form of :meth:`Receiver.finish_baseband`."""
        for rx in self.rxs:
            rx._warn_if_short()
        real_left = self.rxs[0].real_baseband_left(tails[0].size)  # the same for every member
        parts = [self.run([t[:real_left] for t in tails]), self.run([t[real_left:] for t in tails], False),
                 self.run(rests, False)]
        return [rx.emit_last(rx.back._trim.process(np.concatenate([p[i] for p in parts])))
                for i, rx in enumerate(self.rxs)]


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
        # channels with identical envelope chains run as one batch (one set of calls per block for all)
        groups: dict = {}
        for i, rx in enumerate(receivers):
            key = _AmBatch.key(rx)
            if key is not None:
                groups.setdefault(key, []).append(i)
        self.batches = [_AmBatch(members, receivers) for members in groups.values() if len(members) > 1]
        batched = {i for b in self.batches for i in b.members}
        self.singles = [i for i in range(len(receivers)) if i not in batched]
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
        baseband = [mixer.process(bb) for mixer, bb in zip(self.mixers, outs)]
        audio: list = [None] * len(self.receivers)
        for rx in self.receivers:
            rx.samples_in += block.shape[0]
        for i in self.singles:
            audio[i] = self.receivers[i].process_baseband(baseband[i])
        for batch in self.batches:
            for i, a in zip(batch.members, batch.process([baseband[i] for i in batch.members])):
                audio[i] = a
        return audio

    def flush(self) -> list[np.ndarray]:
        """Push every channel's delayed tail out; returns the last audio of every channel."""
        pad = max(rx.flush_padding for rx in self.receivers)
        tails = self.bank.process(np.zeros(pad, np.complex64))
        flushed = self.bank.flush()
        tails = [mixer.process(t) for mixer, t in zip(self.mixers, tails)]
        flushed = [mixer.process(r) for mixer, r in zip(self.mixers, flushed)]
        audio: list = [None] * len(self.receivers)
        for i in self.singles:
            audio[i] = self.receivers[i].finish_baseband(tails[i], flushed[i])
        for batch in self.batches:
            done = batch.finish([tails[i] for i in batch.members], [flushed[i] for i in batch.members])
            for i, a in zip(batch.members, done):
                audio[i] = a
        return audio

    def stream(self, blocks) -> Iterator[list[np.ndarray]]:
        """Run over IQ blocks, yielding per-channel audio lists; flushes at the end."""
        for block in blocks:
            yield self.process(block)
        yield self.flush()

    def reports(self) -> list[dict[str, Any]]:
        """Each channel's report (channel, design, level, delay, measurements)."""
        return [rx.report() for rx in self.receivers]
