"""One channel of a capture, streamed block by block: front end, then back end, with observers.

The receiver is only the chain. What watches it (spectrum accumulators, writers of the baseband,
the measurement analyzer) attaches through :meth:`Receiver.on_input`, :meth:`~Receiver.on_baseband`,
:meth:`~Receiver.on_detector`, :meth:`~Receiver.on_audio` and :meth:`~Receiver.on_decimation_stage`.

The receiver compensates its own delay: audio sample ``k`` belongs to capture time
``start + k / audio_rate``, and ``n`` input samples give ``round(n · audio_rate / fs)`` audio
samples. The compensated delay and what is left of it (below one audio sample) are reported.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator, Mapping

import numpy as np

from ..channel import Channel
from ..dsp.post import Squelch
from ..dsp.stages import Stage, TapPoint
from ..jsonable import to_jsonable
from ..errors import IqsiftWarning, ParameterError
from .back import ChannelBackEnd
from .isb import SIDEBAND_NAMES, IsbBackEnd
from .design import ChannelDesign, design_channel
from .front import front_end_for
from .taps import TAP_NAMES, StageTaps

if TYPE_CHECKING:
    from ..captures import Capture, SampleRange
    from ..measure import AnalysisResult, ChannelAnalyzer

__all__ = ["Receiver", "ReceiverReport", "ReceiverResult", "EDGE_FADE_S"]

EDGE_FADE_S = 0.005
"""Length of the raised-cosine fade-in and fade-out at the ends of the audio (s)."""

Observer = Callable[[np.ndarray], object]


@dataclass(frozen=True)
class ReceiverReport:
    """What a finished run reports: the channel with its measured level, the chain, the delay.

    Attributes
    ----------
    channel : Mapping
        The channel (``name``, ``frequency_hz``, ``bandwidth_hz``, ``mode`` ...) with the measured
        ``level_dbfs`` and ``peak_dbfs`` of its baseband.
    design : Mapping
        The chain (:meth:`ChannelDesign.as_dict`).
    detector : Mapping
        ``mode``, and the tracked ``carrier_offset_hz`` of a coherent detector.
    agc : bool
        Whether the AGC was on.
    delay : Mapping
        ``compensated_s``, ``chain_s`` and ``residual_s``.
    input_samples, audio_samples : int
    audio_rate_hz : float
    analysis : AnalysisResult or None
        The measurement sections, when the receiver was asked to :meth:`~Receiver.analyze`.
    """

    channel: Mapping[str, Any]
    design: Mapping[str, Any]
    detector: Mapping[str, Any]
    agc: bool
    delay: Mapping[str, float]
    input_samples: int
    audio_samples: int
    audio_rate_hz: float
    analysis: "AnalysisResult | None" = None
    sideband_audio: "Mapping[str, Any] | None" = None
    """ISB channels: the audio figures per sideband, ``{"lower": {...} or None, "upper": ...}``, with
    ``"<side>_reason"`` for an empty one."""

    def to_dict(self) -> dict[str, Any]:
        """Stable JSON keys (DESIGN.md report vocabulary); the analysis sections at the top level."""
        out: dict[str, Any] = {
            "channel": dict(self.channel),
            "design": dict(self.design),
            "detector": dict(self.detector),
            "agc": self.agc,
            "delay": dict(self.delay),
            "input_samples": self.input_samples,
            "audio_samples": self.audio_samples,
            "audio_rate_hz": self.audio_rate_hz,
        }
        if self.analysis is not None:
            out.update(self.analysis.to_dict())
        if self.sideband_audio is not None:
            out["audio_sidebands"] = to_jsonable(dict(self.sideband_audio))
        return out


@dataclass
class ReceiverResult:
    """Audio, report and spectra of a finished run."""

    audio: np.ndarray
    audio_rate_hz: float
    report: ReceiverReport
    spectra: dict[str, Any] = field(default_factory=dict)


class Receiver:
    """One channel of a capture, streamed block by block.

    Parameters
    ----------
    rate_hz : float
        Input sample rate (samples/s).
    channel : Channel
        What to receive.
    center_hz : float, optional
        Capture centre frequency (Hz); needed when the channel is given by
        absolute frequency.
    real_input : bool
        The input is a real signal (real IF).
    engine : {"fft", "polyphase"}
        Front end (see :mod:`iqsift.receiver.front`).
    ripple_db, atten_db : float
        Channel filter specification (passband ripple peak-to-peak, stopband attenuation).
    agc : bool or None
        See :class:`~iqsift.receiver.back.ChannelBackEnd`.
    spectra : bool or sequence of str
        Accumulate spectra at these tap points (``True`` = all of :data:`TAP_NAMES` and, for the
        polyphase engine, every decimation stage); see :class:`~iqsift.receiver.taps.StageTaps`.
    detector_options : dict, optional
        Passed to the detector.
    workers : int, optional
        Threads for the fast-convolution transforms.

    Examples
    --------
    >>> from iqsift import Receiver, make_channel, open_capture          # doctest: +SKIP
    >>> capture = open_capture("sample_captures/vhf_airband.sigmf-meta")
    >>> rx = Receiver.for_capture(capture, make_channel(freq="124.09M", emission="6K00A3E"))
    >>> rx.on_baseband(print)                # observers see the chain without changing it
    >>> result = rx.run(capture)
    >>> result.audio.shape, result.report.channel["level_dbfs"]
    """

    taps: StageTaps | None
    """The spectrum accumulators at the tap points, when spectra were asked for."""
    analyzer: "ChannelAnalyzer | None"
    """The measurement analyzer, after :meth:`analyze`."""

    def __init__(
        self,
        rate_hz: float,
        channel: Channel,
        *,
        center_hz: float | None = None,
        real_input: bool = False,
        engine: str = "fft",
        ripple_db: float = 0.1,
        atten_db: float = 80.0,
        agc: bool | None = None,
        spectra: bool | Iterable[str] = False,
        detector_options: dict | None = None,
        workers: int | None = None,
    ) -> None:
        design = design_channel(rate_hz, channel, center_hz=center_hz, real_input=real_input, engine=engine,
                                ripple_db=ripple_db, atten_db=atten_db)
        self._build(design, center_hz, front_end_for(design, workers), agc, detector_options)
        if spectra:
            names = (*TAP_NAMES, "stages") if spectra is True else tuple(spectra)
            taps = StageTaps(design, center_hz, names)
            taps.attach(self)
            self.taps = taps

    @classmethod
    def from_design(cls, design: ChannelDesign, *, center_hz: float | None = None, front: Stage | None = None,
                    agc: bool | None = None, detector_options: dict | None = None) -> "Receiver":
        """A receiver for a finished design; ``front=None``: fed channel baseband by a shared filter bank
        (:meth:`process_baseband`), as :class:`~iqsift.Extractor` does."""
        receiver = cls.__new__(cls)
        receiver._build(design, center_hz, front, agc, detector_options)
        return receiver

    def _build(self, design: ChannelDesign, center_hz: float | None, front: Stage | None, agc: bool | None,
               detector_options: dict | None) -> None:
        self.design = design
        self.channel = design.channel
        self.rate_hz = float(design.rate_hz)
        self.center_hz = center_hz
        self.front = front
        back = IsbBackEnd if self.channel.mode == "isb" else ChannelBackEnd
        self.back = back(design, design.front_end_delay_s(), agc=agc, detector_options=detector_options)
        self.audio_channels = 2 if self.channel.mode == "isb" else 1
        self.sideband_analyzers: "dict[str, ChannelAnalyzer]" = {}
        self.audio_rate_hz = self.back.audio_rate_hz
        self.taps = None
        self.analyzer = None
        self._input_tap = TapPoint(self.rate_hz)
        self._audio_tap = TapPoint(self.audio_rate_hz)
        # mute the audio while the channel holds only noise (Channel.squelch_db dB above the floor)
        self.squelch = None
        if self.channel.squelch_db is not None:
            self.squelch = Squelch(design.channel_rate_hz, self.channel.squelch_db, self.channel.passband_hz,
                                   self.audio_rate_hz, time_offset_s=design.settle_samples / design.channel_rate_hz)
            self.back.on_settled_baseband(self.squelch.feed)
        self.samples_in = 0
        self.audio_out = 0
        self._produced = 0  # audio samples made by the back end (the squelch may hold some back)

    @classmethod
    def for_capture(cls, capture: "Capture", channel: Channel, selection: "SampleRange | None" = None,
                    **options: Any) -> "Receiver":
        """A receiver matching a capture's rate, centre (over ``selection``) and kind.

        Raises
        ------
        ParameterError
            Naming the capture file, when the channel cannot be received from it.
        """
        try:
            return cls(capture.sample_rate_hz, channel, center_hz=capture.center_for(selection),
                       real_input=not capture.is_complex, **options)
        except ParameterError as exc:
            raise ParameterError(f"{capture.path}: {exc}", parameters=exc.parameters) from None

    # -- observers -----------------------------------------------------------------------------
    def on_input(self, observer: Observer) -> "Receiver":
        """Call ``observer`` with every block of wideband input. Returns the receiver."""
        self._input_tap.attach(observer)
        return self

    def on_baseband(self, observer: Observer) -> "Receiver":
        """Call ``observer`` with every block of channel baseband (carrier at 0 Hz, channel rate) that
        carries signal. Returns the receiver."""
        self.back.on_baseband(observer)
        return self

    def on_detector(self, observer: Observer) -> "Receiver":
        """Call ``observer`` with every block of detector output. Returns the receiver."""
        self.back.on_detector(observer)
        return self

    def on_audio(self, observer: Observer) -> "Receiver":
        """Call ``observer`` with every block of final audio, as written. Returns the receiver."""
        self._audio_tap.attach(observer)
        return self

    def on_decimation_stage(self, index: int, observer: Observer) -> "Receiver":
        """Call ``observer`` with the output of decimation stage ``index`` (time-domain engine only)."""
        on_stage = getattr(self.front, "on_stage", None)
        if on_stage is None:
            raise ParameterError(f"index: the {self.design.engine} engine has no decimation stages to observe",
                                 parameters=("index",))
        on_stage(index, observer)
        return self

    def analyze(self, **options: Any) -> "Receiver":
        """Measure the channel while it runs (see :class:`iqsift.measure.ChannelAnalyzer` for options).

        The report then carries the ``carrier``, ``modulation``, ``bandwidth``, ``audio`` and
        ``activity`` sections. Returns the receiver, for chaining.

        Raises
        ------
        ParameterError
            For a bad option, before any sample is processed.
        """
        from ..measure.analyzer import ChannelAnalyzer

        nominal = self.channel.absolute_frequency(self.center_hz)
        if nominal is None:
            nominal = self.design.carrier_offset_hz
        isb = isinstance(self.back, IsbBackEnd)
        main = dict(options)
        if isb:  # the audio figures are per sideband (audio_sidebands)
            main.update(tone_hz=None, audio_reason="independent sidebands: measured per sideband (audio_sidebands)")
        self.analyzer = ChannelAnalyzer(
            self.design.channel_rate_hz, self.audio_rate_hz, self.channel.mode, self.channel.bandwidth_hz,
            nominal, passband_hz=self.channel.passband_hz, **main,
        )
        self.on_baseband(self.analyzer.feed_activity)  # activity keeps the capture's time base
        self.back.on_settled_baseband(self.analyzer.feed_baseband)  # measurements leave the warm-up out
        if not isb:
            self.on_audio(self.analyzer.feed_audio)
            return self
        assert isinstance(self.back, IsbBackEnd)
        split = self.back.split
        for column, (name, mode) in enumerate(zip(SIDEBAND_NAMES, ("lsb", "usb"))):
            sign = -1.0 if mode == "lsb" else 1.0
            passband = tuple(sorted((sign * split.low_hz, sign * split.high_hz)))
            side = ChannelAnalyzer(self.design.channel_rate_hz, self.audio_rate_hz, mode,
                                   split.high_hz - split.low_hz, nominal, passband_hz=passband,  # type: ignore[arg-type]
                                   find_tone=True, **options)
            self.on_baseband(side.feed_activity)
            self.on_audio(_column_feeder(side, column))
            self.sideband_analyzers[name] = side
        return self

    # -- streaming -----------------------------------------------------------------------------
    def process(self, block: np.ndarray) -> np.ndarray:
        """Feed IQ samples (complex64, or real for a real capture); returns new audio (float32)."""
        if self.front is None:
            raise ParameterError("block: this receiver is fed channel baseband by a filter bank; use "
                                 "process_baseband", parameters=("block",))
        block = np.asarray(block)
        self.samples_in += block.shape[0]
        self._input_tap.process(block)
        return self.emit(self.back.process(self.front.process(block)))

    def count_input(self, samples: int) -> None:
        """Record ``samples`` more input samples fed to a shared bank on this receiver's behalf."""
        self.samples_in += int(samples)

    def process_baseband(self, baseband: np.ndarray) -> np.ndarray:
        """Feed channel baseband from an outside front end (a shared filter bank); returns audio."""
        return self.emit(self.back.process(baseband))

    @property
    def flush_padding(self) -> int:
        """Zero input samples needed at the end to push the chain's delayed tail out."""
        return int(math.ceil(self.back.delay_s * self.rate_hz)) + 4 * self.design.decimation

    def flush(self) -> np.ndarray:
        """Finish: push the delayed tail out; total audio = round(samples_in · audio_rate / fs)."""
        assert self.front is not None, "a receiver fed by a bank is finished with finish_baseband"
        self.front.signal_ends(self.samples_in)  # padding is not signal: keep it out of the observers
        tail = self.front.process(np.zeros(self.flush_padding, np.complex64))
        return self.finish_baseband(tail, self.front.flush())

    def finish_baseband(self, tail: np.ndarray, flushed: np.ndarray) -> np.ndarray:
        """Finish from the front end's output for the end padding (``tail``) and its flush."""
        real_left = self.real_baseband_left(tail.size)
        audio = self.back.process(tail[:real_left])
        rest = self.back.finish(tail[real_left:], flushed)
        return self.emit_last(np.concatenate([audio, rest]))

    def real_baseband_left(self, available: int) -> int:
        """How many of the next ``available`` baseband samples still stem from the input (the front end
        emits ceil(n / D) of them for n input samples); the rest is end padding."""
        left = -(-self.samples_in // self.design.decimation) - self.back.baseband_samples
        return max(0, min(left, available))

    def emit(self, audio: np.ndarray, at_end: bool = False) -> np.ndarray:
        """Deliver audio from the back end: edge fades, squelch (which may hold audio back until it knows
        the noise floor), audio observers; returns the audio delivered now."""
        audio = self._fade(audio, at_end)
        self._produced += audio.shape[0]
        if self.squelch is not None:
            audio = self.squelch.apply(audio, final=at_end)
        self._audio_tap.process(audio)
        self.audio_out += audio.shape[0]
        return audio

    def emit_last(self, audio: np.ndarray) -> np.ndarray:
        """Emit the final audio, cut or zero-padded to round(samples_in × audio rate / input rate) in all."""
        self._warn_if_short()
        audio = np.asarray(audio, dtype=np.float32)
        need = max(0, self.expected_audio_samples - self._produced)
        if audio.shape[0] < need:
            audio = np.concatenate([audio, np.zeros((need - audio.shape[0], *audio.shape[1:]), np.float32)])
        return self.emit(audio[:need], at_end=True)

    def _fade(self, audio: np.ndarray, at_end: bool) -> np.ndarray:
        """Raised-cosine fade over the first and last EDGE_FADE_S of the stream.

        A stream starts and stops abruptly; the audio filters ring on those steps (Gibbs overshoot
        up to ~30 % of full scale). The fades confine the edits to 5 ms at each end.
        """
        n_fade = int(round(EDGE_FADE_S * self.audio_rate_hz))
        head = n_fade - self._produced
        n = audio.shape[0]
        if (head <= 0 and not at_end) or not n:
            return audio
        audio = np.array(audio, dtype=np.float32, copy=True)
        shape = (-1,) + (1,) * (audio.ndim - 1)  # one gain per frame (row) of multichannel audio
        if head > 0:
            k = np.arange(self._produced, self._produced + min(head, n))
            audio[: k.size] *= (0.5 - 0.5 * np.cos(np.pi * (k + 0.5) / n_fade)).astype(np.float32).reshape(shape)
        if at_end:
            m = min(n_fade, n)
            k = np.arange(m)[::-1]
            audio[-m:] *= (0.5 - 0.5 * np.cos(np.pi * (k + 0.5) / n_fade)).astype(np.float32).reshape(shape)
        return audio

    def _warn_if_short(self) -> None:
        settle = int(math.ceil(self.back.delay_s * self.rate_hz))
        if self.samples_in < settle:
            warnings.warn(
                f"channel {self.channel.name!r}: {self.samples_in} input samples are fewer than the receiver needs "
                f"to settle ({settle} samples, {self.back.delay_s * 1e3:.1f} ms); the audio and the level are "
                "mostly filter start-up", IqsiftWarning)

    @property
    def expected_audio_samples(self) -> int:
        """Audio samples the whole run yields: round(samples_in × audio rate / input rate)."""
        return int(round(self.samples_in * self.audio_rate_hz / self.rate_hz))

    def stream(self, blocks: Iterable[np.ndarray]) -> Iterator[np.ndarray]:
        """Run over an iterable of IQ blocks, yielding audio blocks; flushes at the end."""
        for block in blocks:
            out = self.process(block)
            if out.shape[0]:
                yield out
        tail = self.flush()
        if tail.shape[0]:
            yield tail

    def run(self, capture: "Capture | None" = None, samples: np.ndarray | None = None, *,
            selection: "SampleRange | None" = None, nonfinite: str = "error",
            block_size: int | None = None) -> ReceiverResult:
        """Run to completion over a capture (or an array) and return the audio and the report."""
        blocks: Iterable[np.ndarray]
        if samples is not None:
            blocks = [np.asarray(samples)]
        else:
            if capture is None:
                raise ParameterError("capture: give a capture or samples", parameters=("capture", "samples"))
            kwargs: dict[str, Any] = {"nonfinite": nonfinite}
            if selection is not None:
                kwargs.update(start=selection.start, count=selection.count)
            if block_size:
                kwargs["block_size"] = block_size
            blocks = capture.blocks(**kwargs)
        pieces = list(self.stream(blocks))
        audio = np.concatenate(pieces) if pieces else np.zeros((0, 2) if self.audio_channels == 2 else 0, np.float32)
        return ReceiverResult(audio, self.audio_rate_hz, self.report(), self.spectra())

    # -- results -------------------------------------------------------------------------------
    def spectra(self, scaling: str = "density") -> dict[str, Any]:
        """Accumulated spectra per tap point (``Spectrum`` objects), for those with data."""
        return self.taps.spectra(scaling) if self.taps is not None else {}

    def spectrogram_results(self) -> dict[str, Any]:
        """Accumulated spectrograms per tap point, for those with data."""
        return self.taps.spectrogram_results() if self.taps is not None else {}

    def report(self) -> ReceiverReport:
        """The run's report: channel with measured level, design, detector, delay (and the analysis)."""
        ch = self.channel.as_dict(self.center_hz)
        ch["level_dbfs"] = self.back.level_dbfs
        ch["peak_dbfs"] = self.back.peak_dbfs
        detector: dict[str, Any] = {"mode": self.channel.mode}
        track = getattr(self.back.detector, "carrier_offset_hz", None)
        if track is not None:
            detector["carrier_offset_hz"] = track
        return ReceiverReport(
            channel=ch,
            design=self.design.as_dict(self.center_hz),
            detector=detector,
            agc=self.back.agc,
            delay={
                "compensated_s": self.back.trim_samples / self.audio_rate_hz,
                "chain_s": self.back.delay_s,
                "residual_s": self.back.residual_delay_s,
            },
            input_samples=self.samples_in,
            audio_samples=self.audio_out,
            audio_rate_hz=self.audio_rate_hz,
            analysis=None if self.analyzer is None else self.analyzer.result(),
            sideband_audio=self._sideband_audio(),
        )

    def _sideband_audio(self) -> dict[str, Any] | None:
        if not self.sideband_analyzers:
            return None
        out: dict[str, Any] = {}
        for name, side in self.sideband_analyzers.items():
            audio, reason = side.audio_result()
            out[name] = audio
            if reason is not None:
                out[f"{name}_reason"] = reason
        return out


def _column_feeder(analyzer: "ChannelAnalyzer", column: int) -> Observer:
    """An audio observer feeding one column of multichannel audio to ``analyzer``."""

    def feed(audio: np.ndarray) -> None:
        analyzer.feed_audio(audio[:, column])

    return feed
