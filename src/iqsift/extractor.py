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

from typing import TYPE_CHECKING, Any, Hashable, Iterable, Iterator, Sequence, cast

import numpy as np

from .channel import Channel
from .dsp.batch import BatchFir
from .dsp.channelizer import FastConvChannelizer
from .dsp.post import CarrierNormaliser
from .dsp.stages import Mixer, UpFirDn
from .errors import ParameterError
from .plan import ChannelPlan, PlannedChannel
from .receiver import (ChannelBackEnd, ChannelDesign, Receiver, ReceiverReport, StageTaps, bank_channel, design_channel,
                       input_tap)

if TYPE_CHECKING:
    from .captures import Capture, SampleRange
    from .spectra import Spectrum

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


class _EnvelopeBatch:
    """Envelope-detected AM channels with identical chains, processed together as rows of 2-D arrays.

    The detector, carrier normaliser, band-pass and resampler of every member are the same filters with
    the same taps (equal :meth:`ChannelBackEnd.batch_key`), so one set of calls per block serves them all
    (the stages take one channel per row); the per-channel parts (level, observers, squelch, fades,
    writers) stay with each channel's receiver.
    """

    def __init__(self, members: list[int], receivers: list[Receiver]) -> None:
        self.members = members
        self.rxs = [receivers[i] for i in members]
        lead = self.rxs[0].back
        assert isinstance(lead, ChannelBackEnd)  # only ChannelBackEnds have a batch key
        rows = len(members)
        # the lead channel's own stages, made for all rows (same taps, fresh state)
        self.normaliser = cast(CarrierNormaliser, lead.normaliser).for_rows(rows)
        self.fir = cast(BatchFir, lead.band_filter).for_rows(rows)
        r = lead.resampler
        self.resampler = UpFirDn(r.taps.astype(np.float32), r.up, r.down)
        self.gain = np.float32(lead.audio_gain)

    def _run(self, rows: list[np.ndarray], signal: bool = True) -> np.ndarray:
        """Process one block of every member's baseband; returns the audio rows (before trimming)."""
        if signal:
            for rx, row in zip(self.rxs, rows):
                rx.back.observe(row)
        d = np.abs(np.stack(rows)).astype(np.float32)  # the envelope detector (no delay)
        for rx, row in zip(self.rxs, d):
            rx.back.observe_detector(row)
        d = self.normaliser.process(d)
        d = self.fir.process(d) * self.gain
        return self.resampler.process(d)

    def process(self, rows: list[np.ndarray]) -> list[np.ndarray]:
        audio = self._run(rows)
        return [rx.emit(rx.back.trim(a)) for rx, a in zip(self.rxs, audio)]

    def finish(self, tails: list[np.ndarray], rests: list[np.ndarray]) -> list[np.ndarray]:
        """The batch form of :meth:`Receiver.finish_baseband`."""
        real_left = self.rxs[0].real_baseband_left(tails[0].size)  # the same for every member
        first = self._run([t[:real_left] for t in tails])
        self.normaliser.signal_ends(self.rxs[0].back.baseband_samples)
        parts = [first, self._run([t[real_left:] for t in tails], False), self._run(rests, False)]
        return [rx.emit_last(rx.back.trim(np.concatenate([p[i] for p in parts])))
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

    Examples
    --------
    >>> from iqsift import Extractor, open_capture                       # doctest: +SKIP
    >>> with open_capture("sample_captures/vhf_airband.sigmf-meta") as capture:
    ...     extractor = Extractor.from_plan(capture, "plan.toml")
    ...     for audio_per_channel in extractor.stream(capture.blocks()):
    ...         pass
    >>> [r.channel["level_dbfs"] for r in extractor.results()]
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
            raise ParameterError("channels: no channels to extract", parameters=("channels",))
        names = [c.name for c in channels]
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise ParameterError(f"channels: names must be unique; repeated: {', '.join(dupes)}",
                                 parameters=("channels",))
        self.rate_hz = float(rate_hz)
        self.center_hz = center_hz
        designs: list[ChannelDesign] = []
        problems = []
        for ch in channels:
            try:
                designs.append(design_channel(rate_hz, ch, center_hz=center_hz, real_input=real_input, engine="fft",
                                              ripple_db=ripple_db, atten_db=atten_db))
            except ParameterError as exc:
                problems.append(str(exc))
        if problems:
            raise ParameterError(f"{len(problems)} channel(s) refused before any work: " + "; ".join(problems))
        self.bank = FastConvChannelizer(rate_hz, [bank_channel(d) for d in designs], real_input=real_input,
                                        workers=workers)
        self.receivers = [Receiver.from_design(d.with_bank(self.bank.fft_size, self.bank.hop), center_hz=center_hz,
                                               agc=agc) for d in designs]
        self.mixers = [Mixer(rx.design.channel_rate_hz, self.bank.residual_hz(i)) for i, rx in enumerate(self.receivers)]
        self.input_spectrum = None
        if spectra:
            self.input_spectrum = input_tap(rate_hz, center_hz or 0.0, real_input)
            for rx in self.receivers:
                rx.taps = StageTaps(rx.design, center_hz, ("channel", "detector", "audio"))
                rx.taps.attach(rx)
                rx.taps.share_input(self.input_spectrum)
        if analyze:
            for rx in self.receivers:
                options: dict[str, Any] = {}
                if rx.channel.squelch_db is not None:
                    options["activity"] = {"threshold_db": rx.channel.squelch_db}
                rx.analyze(time_offset_s=time_offset_s, **options)
        # channels with identical envelope chains run as one batch (one set of calls per block for all)
        groups: dict[Hashable, list[int]] = {}
        for i, rx in enumerate(self.receivers):
            key = rx.back.batch_key()
            if key is not None:
                groups.setdefault(key, []).append(i)
        self.batches = [_EnvelopeBatch(members, self.receivers) for members in groups.values() if len(members) > 1]
        batched = {i for b in self.batches for i in b.members}
        self.singles = [i for i in range(len(self.receivers)) if i not in batched]
        self.samples_in = 0

    @classmethod
    def from_plan(cls, capture: "Capture", plan: "ChannelPlan | str", *, selection: "SampleRange | None" = None,
                  **options: Any) -> "Extractor":
        """An extractor for every channel of a plan (a :class:`~iqsift.plan.ChannelPlan` or a TOML file)
        in ``capture`` (over ``selection``: its centre, and activity times in capture time).

        Raises
        ------
        ParameterError
            Naming the capture file and every channel that cannot be extracted from it.
        """
        from .plan import load_plan

        plan_obj = plan if isinstance(plan, ChannelPlan) else load_plan(plan)
        centre = capture.center_for(selection)
        options.setdefault("time_offset_s", (selection.start if selection is not None else 0) / capture.sample_rate_hz)
        try:
            return cls(capture.sample_rate_hz, channels_from_plan(plan_obj, centre), center_hz=centre,
                       real_input=not capture.is_complex, **options)
        except ParameterError as exc:
            raise ParameterError(f"{capture.path}: {exc}", parameters=exc.parameters) from None

    @property
    def channels(self) -> list[Channel]:
        return [rx.channel for rx in self.receivers]

    @property
    def units(self) -> list[tuple[int, ...]]:
        """The channels' back ends as independent units of work (channel indices): each single channel,
        then each batch of identical envelope chains (which share their stages' state)."""
        return [(i,) for i in self.singles] + [tuple(b.members) for b in self.batches]

    def process(self, block: np.ndarray) -> list[np.ndarray]:
        """Feed IQ samples; returns the new audio of every channel (in channel order)."""
        block = np.asarray(block)
        self.samples_in += block.shape[0]
        if self.input_spectrum is not None and block.size:
            self.input_spectrum.feed(block)
        return self.process_channels(self.bank.process(block), block.shape[0])

    def process_channels(self, outs: Sequence[np.ndarray], input_samples: int,
                         units: Sequence[tuple[int, ...]] | None = None) -> list[np.ndarray]:
        """The back ends of ``units`` (default: all, see :attr:`units`) on the bank's outputs ``outs``
        (one per channel; those outside ``units`` are not read) made from ``input_samples`` input samples;
        returns the new audio of every channel (empty outside ``units``)."""
        chosen = self.units if units is None else units
        members = [i for unit in chosen for i in unit]
        audio: list[np.ndarray] = [np.zeros(0, np.float32)] * len(self.receivers)
        baseband: dict[int, np.ndarray] = {i: self.mixers[i].process(outs[i]) for i in sorted(members)}
        for i in sorted(members):
            self.receivers[i].count_input(input_samples)
        for i in self.singles:
            if i in baseband:
                audio[i] = self.receivers[i].process_baseband(baseband[i])
        for batch in self.batches:
            if batch.members[0] in baseband:
                for i, a in zip(batch.members, batch.process([baseband[i] for i in batch.members])):
                    audio[i] = a
        return audio

    @property
    def flush_padding(self) -> int:
        """Zero input samples fed at the end to push every channel's delayed tail out."""
        return max(rx.flush_padding for rx in self.receivers)

    def flush(self) -> list[np.ndarray]:
        """Push every channel's delayed tail out; returns the last audio of every channel."""
        tails = self.bank.process(np.zeros(self.flush_padding, np.complex64))
        flushed = self.bank.flush()
        return self.finish_channels(tails, flushed)

    def finish_channels(self, tails: Sequence[np.ndarray], flushed: Sequence[np.ndarray],
                        units: Sequence[tuple[int, ...]] | None = None) -> list[np.ndarray]:
        """Finish the back ends of ``units`` from the bank's outputs for the end padding (``tails``) and
        its flush (``flushed``); returns the last audio of every channel (empty outside ``units``)."""
        chosen = self.units if units is None else units
        members = sorted(i for unit in chosen for i in unit)
        tail = {i: self.mixers[i].process(tails[i]) for i in members}
        rest = {i: self.mixers[i].process(flushed[i]) for i in members}
        audio: list[np.ndarray] = [np.zeros(0, np.float32)] * len(self.receivers)
        for i in self.singles:
            if i in tail:
                audio[i] = self.receivers[i].finish_baseband(tail[i], rest[i])
        for batch in self.batches:
            if batch.members[0] in tail:
                done = batch.finish([tail[i] for i in batch.members], [rest[i] for i in batch.members])
                for i, a in zip(batch.members, done):
                    audio[i] = a
        return audio

    def stream(self, blocks: Iterable[np.ndarray]) -> Iterator[list[np.ndarray]]:
        """Run over IQ blocks, yielding per-channel audio lists; flushes at the end."""
        for block in blocks:
            yield self.process(block)
        yield self.flush()

    def results(self) -> list[ReceiverReport]:
        """Each channel's typed report (channel with level, design, delay, measurements), in channel order."""
        return [rx.report() for rx in self.receivers]

    def spectra(self, scaling: str = "density") -> "list[dict[str, Spectrum]]":
        """Each channel's accumulated stage spectra (empty dicts without ``spectra=True``)."""
        return [rx.spectra(scaling) for rx in self.receivers]
