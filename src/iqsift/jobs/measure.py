"""The ``measure`` job: a modulation analysis of one channel (carrier, depth, audio quality, bandwidth, activity)."""

from __future__ import annotations

from dataclasses import dataclass, field
from os import PathLike
from typing import Any, Mapping

import numpy as np

from ..captures import read_audio
from ..channel import Channel
from ..errors import ParameterError
from ..measure import WEIGHTINGS, ActivitySegment, ReferenceScore, align_reference, score_reference
from ..measure.reference import MIN_REFERENCE_S
from ..measure.sections import AudioQualitySummary, ChannelBandwidthResult, ModulationSummary, TunedCarrierResult
from ..receiver import SIDEBAND_NAMES, Receiver, ReceiverReport
from .common import (
    CaptureArg,
    CaptureSummary,
    Progress,
    SelectionSummary,
    counted,
    nonfinite_policy,
    opened,
    stamped,
)

__all__ = ["ChannelMeasurement", "MeasureResult", "WEIGHTINGS", "measure_channel", "measure_file"]


@dataclass(frozen=True)
class MeasureResult:
    """A finished measurement.

    Attributes
    ----------
    receiver : ReceiverReport
        The receiver's report with its ``analysis``: ``carrier``, ``modulation``,
        ``bandwidth``, ``audio`` and ``activity`` (DESIGN.md report vocabulary).
    capture : CaptureSummary
    selection : SelectionSummary
    """

    receiver: ReceiverReport
    capture: CaptureSummary
    selection: SelectionSummary
    reference: Mapping[str, ReferenceScore] = field(default_factory=dict)
    """Scores against the reference: ``{"audio": ...}``, or ``{"lower": ..., "upper": ...}`` for ISB."""
    reference_path: str | None = None

    schema = "measure-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift measure --json`` prints; reference scores join the ``audio`` section(s)."""
        out = {**self.receiver.to_dict(), "capture": self.capture.to_dict(), "selection": self.selection.to_dict()}
        for name, score in self.reference.items():
            holder = out if name == "audio" else out["audio_sidebands"]
            section = dict(holder.get(name) or {})
            section.update(score.to_dict())
            section["reference"]["path"] = self.reference_path
            holder[name] = section
            holder.pop(f"{name}_reason", None)
        return stamped(self.schema, out)


def _read_reference(path: str | PathLike, channels: int) -> tuple[np.ndarray, float]:
    """The reference's frames ``(n, channels)`` and rate, refused (one line) when too short or of the wrong
    channel count, before any capture sample is read."""
    data, rate = read_audio(path)
    if data.shape[0] / rate < MIN_REFERENCE_S:
        raise ParameterError(f"reference: {path}: {data.shape[0] / rate:.2f} s long; a reference must be at least "
                             f"{MIN_REFERENCE_S:g} s (STOI needs 30 segments of 384 ms)", parameters=("reference",))
    if data.shape[1] != channels:
        want = "2 (left = lower sideband, right = upper)" if channels == 2 else "1"
        raise ParameterError(f"reference: {path}: has {data.shape[1]} channel(s); the channel's audio has {want}",
                             parameters=("reference",))
    return data, rate


def _scores(audio: np.ndarray, rate_hz: float, reference: np.ndarray, reference_rate_hz: float,
            path: str | PathLike, names: tuple[str, ...]) -> dict[str, ReferenceScore]:
    audio2 = audio.reshape(audio.shape[0], -1)
    return {name: score_reference(align_reference(audio2[:, i], rate_hz, reference[:, i], reference_rate_hz,
                                                  name=f"reference: {path}" + ("" if name == "audio" else f" ({name})")))
            for i, name in enumerate(names)}


def measure_file(
    capture: CaptureArg,
    channel: Channel,
    *,
    tone_hz: float | None = None,
    weighting: str = "none",
    x_db: float = 26.0,
    threshold_db: float = 10.0,
    start: str | float | None = None,
    duration: str | float | None = None,
    allow_nonfinite: bool = False,
    progress: Progress | None = None,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    verify: bool = True,
    ppm: float | None = None,
    iq_correct: bool = False,
    reference: str | PathLike | None = None,
) -> MeasureResult:
    """Measure one channel of a capture; writes nothing.

    Parameters
    ----------
    capture : path or Capture
        The capture.
    channel : Channel
        The channel (see :func:`iqsift.make_channel`); the AGC stays off so levels are true.
    tone_hz : float, optional
        Test-tone frequency (Hz) for SNR/SINAD/THD (IEEE Std 1241); default: the strongest tone found.
    weighting : {"none", "psophometric", "a"}
        Audio noise weighting (ITU-T O.41; IEC 61672-1).
    x_db : float
        x of the x-dB bandwidth (ITU-R SM.328), dB.
    threshold_db : float
        Activity threshold above the channel's noise floor, dB.
    start, duration, allow_nonfinite, progress, format, rate, center, strict, verify, ppm, iq_correct
        As for :func:`demod_file`.
    reference : path, optional
        The transmitted message (an audio file, >= 3 s; two channels, lower and upper, for ISB): the
        audio is scored against it (STOI, extended STOI, segmental SNR; :mod:`iqsift.measure.reference`)
        after alignment by cross-correlation. The recovered audio is kept in memory for this.
    """
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify, ppm=ppm, iq_correct=iq_correct) as cap:
        selection = cap.select(start, duration)
        cap.check_ahead(selection.start, selection.count)  # hash the data while the job prepares
        receiver = Receiver.for_capture(cap, channel, selection, agc=False).analyze(
            tone_hz=tone_hz, weighting=weighting, x_db=x_db, activity={"threshold_db": threshold_db},
            time_offset_s=selection.start / cap.sample_rate_hz)  # activity in capture time
        ref = None if reference is None else _read_reference(reference, receiver.audio_channels)
        blocks = cap.blocks(start=selection.start, count=selection.count,
                            nonfinite=nonfinite_policy(allow_nonfinite))
        kept = [audio for audio in receiver.stream(counted(blocks, selection.count, progress))
                if ref is not None]
        scores: dict[str, ReferenceScore] = {}
        if ref is not None and reference is not None:
            audio = np.concatenate(kept) if kept else np.zeros((0, receiver.audio_channels), np.float32)
            names = SIDEBAND_NAMES if receiver.audio_channels == 2 else ("audio",)
            scores = _scores(audio, receiver.audio_rate_hz, ref[0], ref[1], reference, names)
        return MeasureResult(receiver.report(), CaptureSummary.of(cap),
                             SelectionSummary.of(cap, selection), scores,
                             None if reference is None else str(reference))


@dataclass(frozen=True)
class ChannelMeasurement:
    """The result of :func:`measure_channel`: one attribute per report section (DESIGN.md vocabulary).

    The sections are the typed results of :class:`~iqsift.measure.AnalysisResult`; each also reads
    like its JSON section (``m.carrier["error_hz"]``). A section is None (activity: empty) only when
    nothing was there or it was not measured; ``report["<section>_reason"]`` says which.

    Attributes
    ----------
    channel : dict
        ``name``, ``frequency_hz``, ``bandwidth_hz``, ``mode``, ``level_dbfs`` ...
    carrier : TunedCarrierResult or None
        ``frequency_hz``, ``error_hz`` (measured − nominal), ``level_dbfs``; None for suppressed-carrier modes.
    modulation : ModulationSummary or None
        ``depth_percent``, ``depth_positive_percent``, ``depth_negative_percent``, ``tone_hz`` (AM only).
    bandwidth : ChannelBandwidthResult or None
        ``occupied_hz`` (99 %, ITU-R SM.328), ``x_db_hz`` with ``x_db``.
    audio : AudioQualitySummary or None
        ``snr_db``, ``sinad_db``, ``thd_percent``, ``receiver_sinad_db`` (with a test tone only).
    activity : tuple of ActivitySegment
        ``start_s``, ``end_s`` (capture time), ``level_dbfs`` per segment.
    report : dict
        The whole report (design, delay, ... as well).
    """

    channel: dict
    carrier: TunedCarrierResult | None
    modulation: ModulationSummary | None
    bandwidth: ChannelBandwidthResult | None
    audio: AudioQualitySummary | None
    activity: tuple[ActivitySegment, ...]
    report: dict
    reference: dict = field(default_factory=dict)
    """Scores against the reference (:class:`~iqsift.measure.ReferenceScore`), by audio channel name."""

    def to_dict(self) -> dict[str, Any]:
        """The JSON report."""
        return self.report


def measure_channel(
    capture: Any,
    channel: Any,
    *,
    tone_hz: float | None = None,
    weighting: str = "none",
    x_db: float = 26.0,
    threshold_db: float = 10.0,
    start: Any = None,
    duration: Any = None,
    nonfinite: str = "error",
    ppm: float | None = None,
    reference: Any = None,
) -> ChannelMeasurement:
    """Measure one channel of a capture in one streaming pass (the library form of ``iqsift measure``).

    Parameters
    ----------
    capture : path or Capture
        The capture (see :func:`measure_file`).
    channel : Channel
        From :func:`iqsift.make_channel`.
    tone_hz : float, optional
        Test-tone frequency (Hz) for SNR/SINAD/THD (IEEE Std 1241); inside the channel's audio band.
    weighting : {"none", "psophometric", "a"}
        Noise weighting (ITU-T O.41, IEC 61672-1).
    x_db : float
        x of the x-dB bandwidth (dB), > 0.
    threshold_db : float
        Activity threshold above the noise floor (dB).
    start, duration : seconds or str, optional
        The window to analyse (see :meth:`Capture.select`).
    ppm : float, optional
        The receiver's reference error (ppm, positive: fast), corrected for (see :func:`demod_file`).
    reference : path, optional
        The transmitted message: adds ``stoi``, ``estoi`` and ``segmental_snr_db`` (see :func:`measure_file`).

    Raises
    ------
    ParameterError
        Before any sample is read, for a bad parameter (see :class:`~iqsift.measure.ChannelAnalyzer`).
    """
    result = measure_file(capture, channel, tone_hz=tone_hz, weighting=weighting, x_db=x_db,
                          threshold_db=threshold_db, start=start, duration=duration,
                          allow_nonfinite=nonfinite == "zero", ppm=ppm, reference=reference)
    report = result.receiver
    analysis = report.analysis
    assert analysis is not None  # measure_file analyses
    return ChannelMeasurement(dict(report.channel), analysis.carrier, analysis.modulation, analysis.bandwidth,
                              analysis.audio, analysis.activity, _report(result), dict(result.reference))


def _report(result: MeasureResult) -> dict[str, Any]:
    """The receiver's report with the reference scores merged in (without the capture stamp)."""
    out = result.to_dict()
    for key in ("schema", "iqsift_version", "capture", "selection"):
        out.pop(key, None)
    return out
