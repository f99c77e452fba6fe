"""``iqsift extract``: every channel of a plan, in one pass, to audio files and one report."""

from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Optional

import typer

from ..captures import AudioWriter, OutputSet, SigMFWriter, open_capture
from ..errors import ParameterError
from ..extract import Extractor, channels_from_plan
from ..plan import load_plan
from .app import (
    CenterOption,
    ForceOption,
    FormatOption,
    JsonOption,
    QuietOption,
    RateOption,
    StrictOption,
    app,
)
from .common import emit_json, progress_blocks, to_jsonable
from .demod import DurationOption, NonfiniteOption, PlotFormatOption, StartOption
from .info import capture_summary


@app.command("extract")
def extract_command(
    capture_path: str = typer.Argument(..., metavar="CAPTURE", help="Capture file (SigMF, WAV/FLAC, or raw)."),
    plan_path: str = typer.Option(..., "--plan", "-p", help="Channel plan (TOML)."),
    out_dir: str = typer.Option(..., "--out-dir", "-o", help="Folder for the audio files and report.json."),
    spectra: bool = typer.Option(False, "--spectra", help="Also write stage spectra plots per channel."),
    plot_format: str = PlotFormatOption,
    baseband: bool = typer.Option(False, "--baseband", help="Also write each channel's baseband as SigMF."),
    start: Optional[str] = StartOption,
    duration: Optional[str] = DurationOption,
    allow_nonfinite: bool = NonfiniteOption,
    force: bool = ForceOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: Optional[str] = FormatOption,
    rate: Optional[str] = RateOption,
    center: Optional[str] = CenterOption,
    strict: bool = StrictOption,
) -> None:
    """Extract every channel of a plan in one pass: <name>.wav per channel and report.json."""
    if plot_format not in ("png", "svg"):
        raise ParameterError(f"--plot-format: got {plot_format!r}; use png or svg")
    started = time.perf_counter()
    plan = load_plan(plan_path)
    folder = Path(out_dir)
    if folder.exists() and not folder.is_dir():
        raise ParameterError(f"--out-dir {folder}: exists and is not a folder")
    with open_capture(capture_path, format=format, rate=rate, center=center, strict=strict) as capture:
        selection = capture.select(start, duration)
        centre = capture.center_for(selection)
        channels = channels_from_plan(plan, centre)
        extractor = Extractor(capture.sample_rate_hz, channels, center_hz=centre,
                              real_input=not capture.is_complex, spectra=spectra,
                              time_offset_s=selection.start / capture.sample_rate_hz)
        parent = folder.parent if str(folder.parent) else Path(".")
        if not parent.is_dir():
            raise ParameterError(f"--out-dir {folder}: the folder {parent} does not exist")
        if spectra:
            from ..stage_plots import check_stage_plot_folder

            for rx in extractor.receivers:  # before any work: no plot overwritten without --force
                stem = rx.channel.extra.get("file_stem") or rx.channel.name
                if (folder / "spectra" / stem).is_dir():
                    check_stage_plot_folder(folder / "spectra" / stem, plot_format, force)
        created = not folder.exists()
        folder.mkdir(exist_ok=True)
        try:
            result = _run(extractor, capture, selection, folder, plan_path, baseband, spectra, plot_format,
                          allow_nonfinite, force, quiet)
        except BaseException:
            if created and not any(folder.iterdir()):
                folder.rmdir()
            raise
    result["elapsed_s"] = time.perf_counter() - started
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_extract(result))


def _run(extractor, capture, selection, folder, plan_path, baseband, spectra, plot_format, allow_nonfinite,
         force, quiet) -> dict:
    with OutputSet(force=force, protect=(*capture.files, Path(plan_path))) as outputs:
        writers, bb_writers, files = [], [], []
        for rx in extractor.receivers:
            stem = rx.channel.extra.get("file_stem") or rx.channel.name
            audio_path = folder / f"{stem}.wav"
            writers.append(AudioWriter(audio_path, rx.audio_rate_hz, outputs=outputs))
            entry = {"audio": str(audio_path)}
            if baseband:
                bb_path = folder / f"{stem}.sigmf-meta"
                writer = SigMFWriter(
                    bb_path, rx.design.channel_rate_hz,
                    center_hz=rx.channel.absolute_frequency(extractor.center_hz), datatype="cf32_le",
                    description=f"iqsift channel baseband of {capture.path.name}",
                    extra={"iqsift:source": {"path": str(capture.path), "sample_start": selection.start,
                                             "sample_count": selection.count},
                           "iqsift:channel": to_jsonable(rx.channel.as_dict(extractor.center_hz)),
                           "iqsift:design": to_jsonable(rx.design.as_dict(extractor.center_hz))},
                    outputs=outputs,
                )
                rx.back.on_baseband = writer.write
                bb_writers.append(writer)
                entry["baseband"] = str(bb_path)
            files.append(entry)
        report_tmp = outputs.reserve(folder / "report.json")
        blocks = capture.blocks(start=selection.start, count=selection.count,
                                nonfinite="zero" if allow_nonfinite else "error")
        t0 = time.perf_counter()
        for audio_list in extractor.stream(progress_blocks(blocks, selection.count, "extract", quiet)):
            for writer, audio in zip(writers, audio_list):
                if audio.size:
                    writer.write(audio)
        work_s = time.perf_counter() - t0
        for writer in writers + bb_writers:
            writer.close()
        channels = []
        for rx, entry, writer in zip(extractor.receivers, files, writers):
            report = rx.report()
            entry["audio_clipped_samples"] = writer.clipped_samples
            if spectra:
                from ..stage_plots import write_stage_plots

                stem = Path(entry["audio"]).stem
                entry["spectra"] = [
                    str(p) for p in write_stage_plots(rx, folder / "spectra" / stem, capture_name=capture.path.name,
                                                      fmt=plot_format, outputs=outputs)
                ]
            report["outputs"] = entry
            channels.append(report)
        result = {
            "capture": capture_summary(capture),
            "plan": str(plan_path),
            "selection": {"start_s": selection.start / capture.sample_rate_hz,
                          "duration_s": selection.count / capture.sample_rate_hz},
            "filter_bank": {"fft_size": extractor.bank.fft_size, "hop": extractor.bank.hop,
                            "channels": len(channels)},
            "processing_s": work_s,
            "input_throughput_msps": selection.count / work_s / 1e6 if work_s > 0 else None,
            "channels": channels,
            "outputs": {"folder": str(folder), "report": str(folder / "report.json")},
        }
        report_tmp.write_text(json.dumps(to_jsonable(result), indent=2, allow_nan=False) + "\n")
    return result


def format_extract(result: dict) -> str:
    """Human summary of an extraction."""
    lines = [
        f"extracted {len(result['channels'])} channel(s) from {result['capture']['path']} in one pass "
        f"({result['selection']['duration_s']:.2f} s of capture, {result['processing_s']:.2f} s processing)",
        f"{'channel':<24} {'frequency':>16} {'mode':>9} {'level dBFS':>11} {'carrier err Hz':>15} {'active':>7}  audio",
    ]
    for ch in result["channels"]:
        c = ch["channel"]
        where = c["frequency_hz"] if c["frequency_hz"] is not None else c["offset_hz"]
        carrier = ch.get("carrier") or {}
        err = carrier.get("error_hz")
        level = c.get("level_dbfs")
        lines.append(
            f"{c['name']:<24} {where:>16.1f} {c['mode']:>9} {'-' if level is None else f'{level:.1f}':>11} "
            f"{'-' if err is None else f'{err:+.2f}':>15} {len(ch.get('activity') or []):>7}  {ch['outputs']['audio']}"
        )
    lines.append(f"report: {result['outputs']['report']}")
    return "\n".join(lines)
