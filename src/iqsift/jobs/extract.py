"""The ``extract`` job: every channel of a plan, in one pass, to audio files and one report."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping

from ..captures import (
    AudioWriter,
    Capture,
    OutputSet,
    SampleRange,
    SigMFWriter,
    annotated_metadata,
    check_annotation_path,
)
from ..captures.atomic import why_not_a_folder
from ..errors import ParameterError
from ..jsonable import dumps
from ..plan import ChannelPlan, load_plan
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

if TYPE_CHECKING:  # the receivers (filter design, FFT engine) are imported once the capture is open
    from ..extractor import Extractor
    from ..receiver import ReceiverReport

__all__ = ["ChannelResult", "ExtractResult", "extract_file"]


@dataclass(frozen=True)
class ChannelResult:
    """One channel of an extraction: its report and the files written for it.

    Attributes
    ----------
    report : ReceiverReport
        Channel with level, design, delay and the measurement sections.
    outputs : Mapping
        ``audio`` (path), ``audio_clipped_samples``, and ``baseband`` and ``spectra`` when written.
    """

    report: ReceiverReport
    outputs: Mapping[str, Any]

    def to_dict(self) -> dict[str, Any]:
        return {**self.report.to_dict(), "outputs": dict(self.outputs)}


@dataclass(frozen=True)
class ExtractResult:
    """A finished extraction.

    Attributes
    ----------
    capture : CaptureSummary
    plan : str
        The plan file (or ``source`` of a plan given as an object).
    selection : SelectionSummary
    filter_bank : Mapping
        ``fft_size``, ``hop`` and ``channels`` of the shared fast-convolution bank.
    processing_s : float
        Time spent streaming the capture through the bank and channels (s).
    channels : tuple of ChannelResult
        Each channel's report (as ``demod`` gives it) with its ``outputs``.
    folder : str
        The output folder; ``report.json`` in it holds :meth:`to_dict`.
    elapsed_s : float
        Wall-clock time of the whole job up to the report, plots included (s).
    annotations : str or None
        The SigMF metadata written with ``annotate`` (one annotation per activity segment).
    html : str or None
        ``report.html`` in the folder, when asked for (``html=True``).
    """

    capture: CaptureSummary
    plan: str
    selection: SelectionSummary
    filter_bank: Mapping[str, Any]
    processing_s: float
    channels: tuple[ChannelResult, ...]
    folder: str
    elapsed_s: float
    annotations: str | None = None
    html: str | None = None

    schema = "extract-v1"

    @property
    def report_path(self) -> str:
        return str(Path(self.folder) / "report.json")

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift extract --json`` prints and ``report.json`` holds."""
        count = self.selection.sample_count
        return stamped(self.schema, {
            "capture": self.capture.to_dict(),
            "plan": self.plan,
            "selection": self.selection.to_dict(),
            "filter_bank": dict(self.filter_bank),
            "processing_s": self.processing_s,
            "input_throughput_msps": count / self.processing_s / 1e6 if self.processing_s > 0 else None,
            "channels": [c.to_dict() for c in self.channels],
            "outputs": {"folder": self.folder, "report": self.report_path,
                        **({} if self.annotations is None else {"annotations": self.annotations}),
                        **({"html": self.html} if self.html is not None else {})},
            "elapsed_s": self.elapsed_s,
        })


def extract_file(
    capture: CaptureArg,
    plan: str | os.PathLike[str] | ChannelPlan,
    out_dir: str | os.PathLike[str],
    *,
    spectra: bool = False,
    plot_format: str = "png",
    baseband: bool = False,
    html: bool = False,
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
) -> ExtractResult:
    """Extract every channel of a plan in one pass: ``<name>.wav`` per channel and ``report.json``.

    The folder is created if needed (its parent must exist) and removed again if the job fails
    or is interrupted and nothing else was put into it. Outputs are checked before any work and
    committed together.

    Parameters
    ----------
    capture : path or Capture
        The capture.
    plan : path or ChannelPlan
        The channel plan (TOML file, or one read with :func:`iqsift.plan.load_plan`).
    out_dir : path
        Output folder.
    spectra : bool
        Also write stage spectra plots per channel under ``out_dir/spectra/<name>/``.
    plot_format : {"png", "svg"}
        Plot file format.
    baseband : bool
        Also write each channel's baseband as SigMF (``<name>.sigmf-meta``/``-data``).
    html : bool
        Also write ``report.html`` (:mod:`iqsift.html_report`): a table of the channels, the activity
        timeline, and per channel an audio player, its stage-spectra overview and links to its JSON;
        figures under ``report_files/`` in ``plot_format``.
    start, duration, allow_nonfinite, force, progress, format, rate, center, strict, verify, ppm, iq_correct
        As for :func:`demod_file`; without ``ppm`` the plan's ``[defaults] ppm`` (if any) applies.
    annotate : path, optional
        Write SigMF metadata of the same recording (``.sigmf-meta``, in the data file's folder) with one
        annotation per activity segment of every channel (:func:`~iqsift.jobs.annotations.activity_annotations`).
    """
    check_plot_format(plot_format)
    started = time.perf_counter()
    plan_obj = plan if isinstance(plan, ChannelPlan) else load_plan(plan)
    plan_file = None if isinstance(plan, ChannelPlan) else Path(plan)
    folder = Path(out_dir)
    if folder.exists() and not folder.is_dir():
        raise ParameterError(f"out_dir {folder}: exists and is not a folder", parameters=("out_dir",))
    with opened(capture, format=format, rate=rate, center=center, strict=strict,
                verify=verify, ppm=ppm if ppm is not None else plan_obj.ppm) as cap:
        selection = cap.select(start, duration)
        cap.check_ahead(selection.start, selection.count)  # hash the data while the job prepares
        from ..extractor import Extractor  # here: its imports (scipy.fft, the stages) overlap that hash

        extractor = Extractor.from_plan(cap, plan_obj, selection=selection, spectra=spectra or html)
        parent = folder.parent if str(folder.parent) else Path(".")
        if not parent.is_dir():
            raise ParameterError(f"out_dir {folder}: {why_not_a_folder(parent)}", parameters=("out_dir",))
        if spectra:
            from ..stage_plots import check_stage_plot_folder

            for rx in extractor.receivers:  # before any work: no plot overwritten without force
                if (folder / "spectra" / _stem(rx)).is_dir():
                    check_stage_plot_folder(folder / "spectra" / _stem(rx), plot_format, force)
        protect = (*cap.files, *(() if plan_file is None else (plan_file,)))
        if html:
            from ..html_report import check_report_files

            check_report_files(folder, [_stem(rx) for rx in extractor.receivers], plot_format, force, protect)
        with OutputSet(force=force, protect=protect) as outputs:
            annotate_tmp = outputs.reserve(check_annotation_path(cap, annotate)) if annotate else None
            outputs.make_folder(folder)  # removed again, with spectra/<name>/, unless the job finishes
            return _run(extractor, cap, selection, folder, outputs, started,
                        plan=str(plan_file) if plan_file is not None else plan_obj.source,
                        baseband=baseband, spectra=spectra, html=html, plot_format=plot_format,
                        nonfinite=nonfinite_policy(allow_nonfinite), progress=progress,
                        annotate=None if annotate_tmp is None else (annotate_tmp, str(annotate)),
                        iq_correct=iq_correct)


def _stem(rx: Any) -> str:
    """The file stem of a receiver's outputs (the plan's sanitised name)."""
    return str(rx.channel.extra.get("file_stem") or rx.channel.name)


def _run(extractor: Extractor, cap: Capture, selection: SampleRange, folder: Path, outputs: OutputSet,
         started: float, *, plan: str, baseband: bool, spectra: bool, html: bool, plot_format: str, nonfinite: str,
         progress: Progress | None, annotate: tuple[Path, str] | None = None,
         iq_correct: bool = False) -> ExtractResult:
    writers: list[AudioWriter] = []
    bb_writers: list[SigMFWriter] = []
    files: list[dict[str, Any]] = []
    centre = extractor.center_hz
    for rx in extractor.receivers:
        audio_path = folder / f"{_stem(rx)}.wav"
        writers.append(AudioWriter(audio_path, audio_file_rate(rx.audio_rate_hz), channels=rx.audio_channels,
                                   outputs=outputs))
        entry: dict[str, Any] = {"audio": str(audio_path)}
        if baseband:
            bb_path = folder / f"{_stem(rx)}.sigmf-meta"
            writer = baseband_writer(
                bb_path, capture=cap, selection=selection, rate_hz=rx.design.channel_rate_hz,
                center_hz=rx.channel.absolute_frequency(centre), channel=rx.channel.as_dict(centre),
                design=rx.design.as_dict(centre), outputs=outputs)
            rx.on_baseband(writer.write)
            bb_writers.append(writer)
            entry["baseband"] = str(bb_path)
        files.append(entry)
    keepers = []
    if spectra:
        from ..stage_plots import AudioKeeper

        keepers = [AudioKeeper.attach(rx) for rx in extractor.receivers]
    report_tmp = outputs.reserve(folder / "report.json")
    if iq_correct:  # its first pass over the capture comes once every output has been checked
        with_iq_correction(cap)
    blocks = cap.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)
    t0 = time.perf_counter()
    for audio_list in extractor.stream(counted(blocks, selection.count, progress)):
        for sink, audio in zip(writers, audio_list):
            if audio.size:
                sink.write(audio)
    processing_s = time.perf_counter() - t0
    for audio_writer in writers:
        audio_writer.close()
    for bb_writer in bb_writers:
        bb_writer.close()
    channels = []
    for i, (rx, entry, audio_writer) in enumerate(zip(extractor.receivers, files, writers)):
        entry["audio_clipped_samples"] = audio_writer.clipped_samples
        if spectra:
            from ..stage_plots import write_stage_plots

            entry["spectra"] = [str(p) for p in write_stage_plots(
                rx, folder / "spectra" / _stem(rx), capture_name=cap.path.name, fmt=plot_format, outputs=outputs,
                audio=keepers[i].audio())]
        channels.append(ChannelResult(rx.report(), entry))
    if annotate is not None:
        reports = [ch.report.to_dict() for ch in channels]
        notes = [a for r in reports for a in activity_annotations(cap, r["channel"], r.get("activity") or [])]
        annotate[0].write_text(dumps(annotated_metadata(cap, annotate[1], notes)), encoding="utf-8")
    html_path = None
    if html:
        html_path = _write_html(extractor, cap, selection, folder, outputs, channels, plot_format)
    result = ExtractResult(
        capture=CaptureSummary.of(cap),
        plan=plan,
        selection=SelectionSummary.of(cap, selection),
        filter_bank={"fft_size": extractor.bank.fft_size, "hop": extractor.bank.hop, "channels": len(channels)},
        processing_s=processing_s,
        channels=tuple(channels),
        folder=str(folder),
        elapsed_s=time.perf_counter() - started,
        annotations=None if annotate is None else annotate[1],
        html=None if html_path is None else str(html_path),
    )
    report_tmp.write_text(dumps(result.to_dict()))
    return result


def _write_html(extractor: Extractor, cap: Capture, selection: SampleRange, folder: Path, outputs: OutputSet,
                channels: list[ChannelResult], plot_format: str) -> Path:
    """``report.html`` and its figures, into the same OutputSet as everything else."""
    from ..html_report import capture_rows, write_html_report

    sel = SelectionSummary.of(cap, selection).to_dict()
    summary = [*capture_rows(cap.path, extractor.center_hz, cap.sample_rate_hz, sel["start_s"], sel["duration_s"]),
               ("Channels", f"{len(channels)}, in one pass through a shared filter bank")]
    write_html_report(
        folder, receivers=extractor.receivers, stems=[_stem(rx) for rx in extractor.receivers],
        reports=[c.report.to_dict() for c in channels], audio_files=[c.outputs["audio"] for c in channels],
        capture_name=cap.path.name, summary=summary, start_s=sel["start_s"], duration_s=sel["duration_s"],
        fmt=plot_format, outputs=outputs, report_json=folder / "report.json")
    return folder / "report.html"
