"""The ``measure`` job: a modulation analysis of one channel (carrier, depth, audio quality, bandwidth, activity)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

from ..channel import Channel
from ..measure import WEIGHTINGS
from ..receiver import Receiver
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

__all__ = ["MeasureResult", "measure_file", "WEIGHTINGS"]


@dataclass(frozen=True)
class MeasureResult:
    """A finished measurement.

    Attributes
    ----------
    receiver : Mapping
        The receiver's report with the measurement sections: ``carrier``, ``modulation``,
        ``bandwidth``, ``audio`` and ``activity`` (DESIGN.md report vocabulary).
    capture : CaptureSummary
    selection : SelectionSummary
    """

    receiver: Mapping[str, Any]
    capture: CaptureSummary
    selection: SelectionSummary

    schema = "measure-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift measure --json`` prints."""
        return stamped(self.schema, {**self.receiver, "capture": self.capture.to_dict(),
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
    start, duration, allow_nonfinite, progress, format, rate, center, strict, verify
        As for :func:`demod_file`.
    """
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify) as cap:
        selection = cap.select(start, duration)
        receiver = Receiver.for_capture(cap, channel, selection, agc=False).analyze(
            tone_hz=tone_hz, weighting=weighting, x_db=x_db, activity={"threshold_db": threshold_db},
            time_offset_s=selection.start / cap.sample_rate_hz)  # activity in capture time
        blocks = cap.blocks(start=selection.start, count=selection.count,
                            nonfinite=nonfinite_policy(allow_nonfinite))
        for _ in receiver.stream(counted(blocks, selection.count, progress)):
            pass
        return MeasureResult(receiver.report(), CaptureSummary.of(cap), SelectionSummary.of(cap, selection))
