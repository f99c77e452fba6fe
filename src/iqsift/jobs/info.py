"""The ``info`` job: what a capture holds, and its levels measured in one pass."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..captures import CaptureStats, StatsAccumulator
from .common import CaptureArg, CaptureSummary, Progress, counted, opened, stamped

__all__ = ["InfoResult", "info_file"]


@dataclass(frozen=True)
class InfoResult:
    """The capture's metadata and one-pass statistics (levels, DC, clipping, IQ imbalance)."""

    capture: CaptureSummary
    stats: CaptureStats

    schema = "info-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift info --json`` prints: the capture's keys at the top, then ``stats``."""
        return stamped(self.schema, {**self.capture.to_dict(), "stats": self.stats.as_dict()})


def info_file(
    capture: CaptureArg,
    *,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    progress: Progress | None = None,
    verify: bool = True,
    ppm: float | None = None,
    iq_correct: bool = False,
) -> InfoResult:
    """Describe a capture and measure it in one pass (NaN/Inf samples are counted, not refused).

    Parameters
    ----------
    capture : path or Capture
        The capture (SigMF, WAV/FLAC, or raw with ``format`` and ``rate``).
    format, rate, center, strict
        How to read a capture given by path (see :func:`iqsift.open_capture`).
    progress : callable, optional
        Called after each block with the samples processed and the total.
    verify : bool
        Check a SigMF capture's data against its ``core:sha512`` while reading it; a mismatch
        raises :class:`~iqsift.captures.ChecksumError`.
    ppm : float, optional
        Receiver reference error (ppm) to correct for (see :func:`demod_file`).
    iq_correct : bool
        Remove the IQ imbalance and DC offset (a first pass over a file, a running estimate on
        standard input) before measuring: the statistics then describe the corrected samples, and
        ``iq_correction`` what was removed.
    """
    with opened(capture, format=format, rate=rate, center=center, strict=strict, verify=verify,
                ppm=ppm, iq_correct=iq_correct) as cap:
        cap.check_ahead()
        acc = StatsAccumulator(cap.is_complex, cap.clip_high)
        for block in counted(cap.blocks(nonfinite="keep"), cap.samples, progress):
            acc.update(block)
        return InfoResult(CaptureSummary.of(cap), acc.result())
