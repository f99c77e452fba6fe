"""The ``measure`` job: a modulation analysis of one channel (carrier, depth, audio quality, bandwidth, activity)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..channel import Channel
from ..measure import WEIGHTINGS, ActivitySegment
from ..measure.sections import AudioQualitySummary, ChannelBandwidthResult, ModulationSummary, TunedCarrierResult
from ..receiver import Receiver, ReceiverReport
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

    schema = "measure-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift measure --json`` prints."""
        return stamped(self.schema, {**self.receiver.to_dict(), "capture": self.capture.to_dict(),
                                     "selection": self.selection.to_dict()})


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
    start, duration, allow_nonfinite, progress, format, rate, center, strict, verify, ppm
        As for :func:`demod_file`.
    """
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify, ppm=ppm, iq_correct=iq_correct) as cap:
        selection = cap.select(start, duration)
        receiver = Receiver.for_capture(cap, channel, selection, agc=False).analyze(
            tone_hz=tone_hz, weighting=weighting, x_db=x_db, activity={"threshold_db": threshold_db},
            time_offset_s=selection.start / cap.sample_rate_hz)  # activity in capture time
        blocks = cap.blocks(start=selection.start, count=selection.count,
                            nonfinite=nonfinite_policy(allow_nonfinite))
        for _ in receiver.stream(counted(blocks, selection.count, progress)):
            pass
        return MeasureResult(receiver.report(), CaptureSummary.of(cap),
                             SelectionSummary.of(cap, selection))


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

    Raises
    ------
    ParameterError
        Before any sample is read, for a bad parameter (see :class:`~iqsift.measure.ChannelAnalyzer`).
    """
    result = measure_file(capture, channel, tone_hz=tone_hz, weighting=weighting, x_db=x_db,
                          threshold_db=threshold_db, start=start, duration=duration,
                          allow_nonfinite=nonfinite == "zero", ppm=ppm)
    report = result.receiver
    analysis = report.analysis
    assert analysis is not None  # measure_file analyses
    return ChannelMeasurement(dict(report.channel), analysis.carrier, analysis.modulation, analysis.bandwidth,
                              analysis.audio, analysis.activity, report.to_dict())
