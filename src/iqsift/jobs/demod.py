"""The ``demod`` job: one channel of a capture to audio, with optional baseband, report and stage spectra."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..captures import AudioWriter, OutputSet, annotated_metadata, check_annotation_path
from ..captures.audio_stream import StreamAudioWriter
from ..channel import Channel
from ..errors import ParameterError
from ..jsonable import dumps
from .annotations import activity_annotations
from .common import (
    CaptureArg,
    CaptureSummary,
    Progress,
    SelectionSummary,
    audio_file_rate,
    baseband_writer,
    check_plot_format,
    counted,
    nonfinite_policy,
    opened,
    stamped,
    with_iq_correction,
)

if TYPE_CHECKING:  # the receiver (filter design, FFT engine) is imported once the capture is open
    from ..receiver import Receiver, ReceiverReport

__all__ = ["DemodOutputs", "DemodResult", "demod_file"]


@dataclass(frozen=True)
class DemodOutputs:
    """Files a demod run wrote (None: not asked for)."""

    audio: str
    baseband: str | None = None
    report: str | None = None
    spectra: str | None = None
    spectra_files: tuple[str, ...] | None = None
    annotations: str | None = None
    html: str | None = None

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"audio": self.audio, "baseband": self.baseband, "report": self.report,
                               "spectra": self.spectra}
        if self.spectra_files is not None:
            out["spectra_files"] = list(self.spectra_files)
        if self.annotations is not None:
            out["annotations"] = self.annotations
        if self.html is not None:
            out["html"] = self.html
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
    html: bool = False,
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
    ppm: float | None = None,
    annotate: str | os.PathLike[str] | None = None,
    iq_correct: bool = False,
    audio_format: str = "wav",
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
        Audio file, ``.wav`` or ``.flac`` (16-bit); ``"-"``: standard output, each block as soon as it
        is made (:class:`~iqsift.captures.audio_stream.StreamAudioWriter`).
    baseband : path, optional
        Also write the channel baseband as SigMF (cf32_le at the channel rate).
    report : path, optional
        Also write the JSON report (the same as :meth:`DemodResult.to_dict`).
    spectra : path, optional
        Folder for stage spectra plots and their data.
    plot_format : {"png", "svg"}
        Plot file format.
    html : bool
        Also write ``report.html`` in the audio file's folder (:mod:`iqsift.html_report`): the channel's
        table row, activity timeline, audio player, stage-spectra overview (figures under
        ``report_files/``) and links to its JSON (the ``report`` file, when given).
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
    ppm : float, optional
        The receiver's reference error (ppm, positive: fast; see :mod:`iqsift.reference`): the capture's
        rate and centre are corrected, so the channel is tuned to, and reports, true frequencies.
    annotate : path, optional
        Write SigMF metadata of the same recording (``.sigmf-meta``, in the data file's folder) with one
        annotation per activity segment of the channel. The channel is then measured as by
        :func:`~iqsift.jobs.measure_file` (activity needs it), and the report carries those sections.
    audio_format : {"wav", "s16"}
        With ``output="-"``: a WAV stream of unknown length, or raw 16-bit little-endian samples.
    iq_correct : bool
        Estimate the IQ gain and phase imbalance and the DC offset (a first pass over a file, a
        running estimate on standard input) and remove them before any processing; the report's
        ``capture.iq_correction`` records what was removed.
    """
    check_plot_format(plot_format)
    if html and str(output) == "-":
        raise ParameterError("html: the page links its audio file; output '-' sends the audio down a pipe, with no "
                             "file to link",
                             parameters=("html", "output"))
    if audio_format != "wav" and str(output) != "-":
        raise ParameterError(f"audio_format: {audio_format!r} is for audio on standard output (output '-'); "
                             f"{output} takes its format from its extension")
    started = time.perf_counter()
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify, ppm=ppm) as cap:
        selection = cap.select(start, duration)
        cap.check_ahead(selection.start, selection.count)  # hash the data while the job prepares
        from ..receiver import Receiver  # here: its imports (scipy.fft, the stages) overlap that hash

        receiver = Receiver.for_capture(cap, channel, selection, engine=engine, agc=agc, spectra=bool(spectra) or html)
        if annotate or html:  # activity (and the page's table) need the measurements
            receiver.analyze(time_offset_s=selection.start / cap.sample_rate_hz)  # activity in capture time
        spectra_dir = Path(spectra) if spectra else None
        keeper = None
        if spectra_dir is not None:
            from ..stage_plots import AudioKeeper, check_stage_plot_folder

            check_stage_plot_folder(spectra_dir, plot_format, force)  # before any work
            keeper = AudioKeeper.attach(receiver)
        html_folder = Path(output).parent
        stem = Path(output).stem
        if html:
            from ..html_report import check_report_files

            check_report_files(html_folder, [stem], plot_format, force, cap.files)  # before any work
        with OutputSet(force=force, protect=cap.files) as outputs:
            audio_writer: AudioWriter | StreamAudioWriter
            if str(output) == "-":
                if receiver.audio_channels != 1:
                    raise ParameterError("output: '-' streams one audio channel; an isb channel has two, "
                                         "write it to a WAV or FLAC file", parameters=("output",))
                audio_writer = StreamAudioWriter(audio_file_rate(receiver.audio_rate_hz), audio_format)
            else:
                audio_writer = AudioWriter(output, audio_file_rate(receiver.audio_rate_hz),
                                           channels=receiver.audio_channels, outputs=outputs)
            report_tmp = outputs.reserve(report) if report else None
            annotate_tmp = outputs.reserve(check_annotation_path(cap, annotate)) if annotate else None
            bb_writer = None
            if baseband:
                centre = receiver.center_hz
                bb_writer = baseband_writer(
                    baseband, capture=cap, selection=selection, rate_hz=receiver.design.channel_rate_hz,
                    center_hz=channel.absolute_frequency(centre), channel=channel.as_dict(centre),
                    design=receiver.design.as_dict(centre), outputs=outputs)
                receiver.on_baseband(bb_writer.write)
            if iq_correct:  # its first pass over the capture comes once every output has been checked
                with_iq_correction(cap)
            blocks = cap.blocks(start=selection.start, count=selection.count,
                                nonfinite=nonfinite_policy(allow_nonfinite))
            for audio in receiver.stream(counted(blocks, selection.count, progress)):
                audio_writer.write(audio)
            audio_writer.close()
            if bb_writer is not None:
                bb_writer.close()
            rx_report = receiver.report()
            if annotate_tmp is not None:
                found = rx_report.to_dict()
                notes = activity_annotations(cap, found["channel"], found.get("activity") or [])
                annotate_tmp.write_text(dumps(annotated_metadata(cap, str(annotate), notes)), encoding="utf-8")
            elapsed_s = time.perf_counter() - started
            spectra_files = None
            if spectra_dir is not None:
                from ..stage_plots import write_stage_plots

                spectra_files = tuple(str(p) for p in write_stage_plots(
                    receiver, spectra_dir, capture_name=cap.path.name, fmt=plot_format, outputs=outputs,
                    audio=None if keeper is None else keeper.audio()))
            html_path = None
            if html:
                html_path = _write_html(receiver, cap, selection, html_folder, stem, output, report, rx_report,
                                        outputs, plot_format)
            result = DemodResult(
                receiver=rx_report,
                capture=CaptureSummary.of(cap),
                selection=SelectionSummary.of(cap, selection),
                outputs=DemodOutputs(
                    audio=str(output), baseband=None if baseband is None else str(baseband),
                    report=None if report is None else str(report),
                    spectra=None if spectra_dir is None else str(spectra_dir), spectra_files=spectra_files,
                    annotations=None if annotate is None else str(annotate),
                    html=None if html_path is None else str(html_path)),
                audio_clipped_samples=audio_writer.clipped_samples,
                elapsed_s=elapsed_s,
            )
            if report_tmp is not None:
                report_tmp.write_text(dumps(result.to_dict()))
    return result


def _write_html(receiver: Receiver, cap: Any, selection: Any, folder: Path, stem: str, output: Any, report: Any,
                rx_report: ReceiverReport, outputs: OutputSet, plot_format: str) -> Path:
    """``report.html`` of one channel, beside its audio, in the run's OutputSet."""
    from ..html_report import capture_rows, write_html_report

    sel = SelectionSummary.of(cap, selection).to_dict()
    summary = [*capture_rows(cap.path, receiver.center_hz, cap.sample_rate_hz, sel["start_s"], sel["duration_s"]),
               ("Engine", str(receiver.design.engine))]
    write_html_report(
        folder, receivers=[receiver], stems=[stem], reports=[rx_report.to_dict()], audio_files=[output],
        capture_name=cap.path.name, summary=summary, start_s=sel["start_s"], duration_s=sel["duration_s"],
        fmt=plot_format, outputs=outputs, report_json=report)
    return folder / "report.html"
