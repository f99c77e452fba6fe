"""The ``demod`` job: one channel of a capture to audio, with optional baseband, report and stage spectra."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..captures import AudioWriter, OutputSet
from ..channel import Channel
from ..receiver import Receiver, ReceiverReport
from .common import (
    CaptureArg,
    CaptureSummary,
    Progress,
    SelectionSummary,
    baseband_writer,
    check_plot_format,
    counted,
    nonfinite_policy,
    opened,
    stamped,
)

__all__ = ["DemodOutputs", "DemodResult", "demod_file"]


@dataclass(frozen=True)
class DemodOutputs:
    """Files a demod run wrote (None: not asked for)."""

    audio: str
    baseband: str | None = None
    report: str | None = None
    spectra: str | None = None
    spectra_files: tuple[str, ...] | None = None

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"audio": self.audio, "baseband": self.baseband, "report": self.report,
                               "spectra": self.spectra}
        if self.spectra_files is not None:
            out["spectra_files"] = list(self.spectra_files)
        return out


@dataclass(frozen=True)
class DemodResult:
    """A finished demod run.

    Attributes
    ----------
    receiver : ReceiverReport
        The receiver's report: ``channel`` (with the measured ``level_dbfs``), ``design``,
        ``detector``, ``agc``, ``delay``, sample counts and the audio rate.
    capture : CaptureSummary
    selection : SelectionSummary
    outputs : DemodOutputs
    audio_clipped_samples : int
        Audio samples clipped at full scale in the written file.
    elapsed_s : float
        Wall-clock time of the run up to the report (s).
    """

    receiver: ReceiverReport
    capture: CaptureSummary
    selection: SelectionSummary
    outputs: DemodOutputs
    audio_clipped_samples: int
    elapsed_s: float

    schema = "demod-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift demod --json`` prints and ``--report`` writes."""
        return stamped(self.schema, {
            **self.receiver.to_dict(),
            "capture": self.capture.to_dict(),
            "selection": self.selection.to_dict(),
            "outputs": self.outputs.to_dict(),
            "audio_clipped_samples": self.audio_clipped_samples,
            "elapsed_s": self.elapsed_s,
        })


def demod_file(
    capture: CaptureArg,
    channel: Channel,
    output: str | os.PathLike[str],
    *,
    baseband: str | os.PathLike[str] | None = None,
    report: str | os.PathLike[str] | None = None,
    spectra: str | os.PathLike[str] | None = None,
    plot_format: str = "png",
    engine: str = "fft",
    agc: bool | None = None,
    start: str | float | None = None,
    duration: str | float | None = None,
    allow_nonfinite: bool = False,
    force: bool = False,
    progress: Progress | None = None,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    verify: bool = True,
) -> DemodResult:
    """Demodulate one channel of a capture to a WAV/FLAC file.

    Every output is checked before any work and committed together at the end (nothing is
    left behind on an error); existing files are refused unless ``force``; inputs are never
    overwritten.

    Parameters
    ----------
    capture : path or Capture
        The capture.
    channel : Channel
        What to receive (see :func:`iqsift.make_channel`).
    output : path
        Audio file, ``.wav`` or ``.flac`` (16-bit).
    baseband : path, optional
        Also write the channel baseband as SigMF (cf32_le at the channel rate).
    report : path, optional
        Also write the JSON report (the same as :meth:`DemodResult.to_dict`).
    spectra : path, optional
        Folder for stage spectra plots and their data.
    plot_format : {"png", "svg"}
        Plot file format.
    engine : {"fft", "polyphase"}
        Front end (see :class:`iqsift.Receiver`).
    agc : bool, optional
        Automatic gain control; default on for usb/lsb/dsb only.
    start, duration : float (s) or str, optional
        Part of the capture to process (``"48000sa"`` for samples).
    allow_nonfinite : bool
        Replace NaN/Inf samples by 0 instead of refusing the capture.
    force : bool
        Overwrite existing outputs.
    progress : callable, optional
        Called after each block with the samples processed and the total.
    format, rate, center, strict
        How to read a capture given by path (see :func:`iqsift.open_capture`).
    verify : bool
        Check a SigMF capture's data against its ``core:sha512`` while reading it (when the whole
        capture is read; a part selected by ``start``/``duration`` is not checked). On a mismatch
        :class:`~iqsift.captures.ChecksumError` is raised and nothing is written.
    """
    check_plot_format(plot_format)
    started = time.perf_counter()
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify) as cap:
        selection = cap.select(start, duration)
        receiver = Receiver.for_capture(cap, channel, selection, engine=engine, agc=agc, spectra=bool(spectra))
        spectra_dir = Path(spectra) if spectra else None
        keeper = None
        if spectra_dir is not None:
            from ..stage_plots import AudioKeeper, check_stage_plot_folder

            check_stage_plot_folder(spectra_dir, plot_format, force)  # before any work
            keeper = AudioKeeper.attach(receiver)
        with OutputSet(force=force, protect=cap.files) as outputs:
            audio_writer = AudioWriter(output, receiver.audio_rate_hz, channels=receiver.audio_channels,
                                       outputs=outputs)
            report_tmp = outputs.reserve(report) if report else None
            bb_writer = None
            if baseband:
                centre = receiver.center_hz
                bb_writer = baseband_writer(
                    baseband, capture=cap, selection=selection, rate_hz=receiver.design.channel_rate_hz,
                    center_hz=channel.absolute_frequency(centre), channel=channel.as_dict(centre),
                    design=receiver.design.as_dict(centre), outputs=outputs)
                receiver.on_baseband(bb_writer.write)
            blocks = cap.blocks(start=selection.start, count=selection.count,
                                nonfinite=nonfinite_policy(allow_nonfinite))
            for audio in receiver.stream(counted(blocks, selection.count, progress)):
                audio_writer.write(audio)
            audio_writer.close()
            if bb_writer is not None:
                bb_writer.close()
            rx_report = receiver.report()
            elapsed_s = time.perf_counter() - started
            spectra_files = None
            if spectra_dir is not None:
                from ..stage_plots import write_stage_plots

                spectra_files = tuple(str(p) for p in write_stage_plots(
                    receiver, spectra_dir, capture_name=cap.path.name, fmt=plot_format, outputs=outputs,
                    audio=None if keeper is None else keeper.audio()))
            result = DemodResult(
                receiver=rx_report,
                capture=CaptureSummary.of(cap),
                selection=SelectionSummary.of(cap, selection),
                outputs=DemodOutputs(
                    audio=str(output), baseband=None if baseband is None else str(baseband),
                    report=None if report is None else str(report),
                    spectra=None if spectra_dir is None else str(spectra_dir), spectra_files=spectra_files),
                audio_clipped_samples=audio_writer.clipped_samples,
                elapsed_s=elapsed_s,
            )
            if report_tmp is not None:
                from ..jsonable import dumps

                report_tmp.write_text(dumps(result.to_dict()))
    return result
