"""Measure one channel of a capture in one streaming pass: the library form of ``iqsift measure``."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .activity import ActivitySegment
from .sections import AudioQualitySummary, ChannelBandwidthResult, ModulationSummary, TunedCarrierResult

__all__ = ["ChannelMeasurement", "measure_channel"]


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
) -> ChannelMeasurement:
    """Measure one channel of a capture in one streaming pass (the library form of ``iqsift measure``).

    Parameters
    ----------
    capture : Capture
        From :func:`iqsift.open_capture`.
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

    Raises
    ------
    ParameterError
        Before any sample is read, for a bad parameter (see :class:`~iqsift.measure.ChannelAnalyzer`).
    """
    from ..receiver import Receiver

    selection = capture.select(start, duration)
    receiver = Receiver.for_capture(capture, channel, selection, agc=False).analyze(
        tone_hz=tone_hz, weighting=weighting, x_db=x_db, activity={"threshold_db": threshold_db},
        time_offset_s=selection.start / capture.sample_rate_hz)
    for _ in receiver.stream(capture.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)):
        pass
    report = receiver.report()
    analysis = report.analysis
    assert analysis is not None  # analyze() above
    return ChannelMeasurement(dict(report.channel), analysis.carrier, analysis.modulation, analysis.bandwidth,
                              analysis.audio, analysis.activity, report.to_dict())
