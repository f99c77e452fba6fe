"""``iqsift demod``: one channel of a capture to audio, with baseband, report and stage spectra."""

from __future__ import annotations

import json
import time
from pathlib import Path
from typing import Optional

import typer

from ..captures import AudioWriter, OutputSet, SigMFWriter, open_capture
from ..channel import make_channel
from ..errors import ParameterError
from ..receiver import Receiver
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
from .info import capture_summary

FreqOption = typer.Option(None, "--freq", help="Carrier frequency in Hz, absolute (e.g. 127.35M).")
OffsetOption = typer.Option(None, "--offset", help="Carrier offset from the capture centre in Hz (e.g. -25k).")
BandwidthOption = typer.Option(None, "--bandwidth", "-b", help="Channel (necessary) bandwidth in Hz (default 6k).")
EmissionOption = typer.Option(None, "--emission", "-e", help="ITU emission designator, e.g. 6K00A3E, 2K70J3E.")
ModeOption = typer.Option(None, "--mode", "-m", help="Detector: envelope, coherent, usb, lsb or dsb.")
AudioRateOption = typer.Option("16000", "--audio-rate", help="Output audio rate in samples/s.")
StartOption = typer.Option(None, "--start", help="Start time in s (or samples: 48000sa).")
DurationOption = typer.Option(None, "--duration", help="Duration in s (or samples: 48000sa).")
EngineOption = typer.Option("fft", "--engine", help="Front end: fft (fast convolution) or polyphase (time domain).")
AgcOption = typer.Option(None, "--agc/--no-agc", help="Automatic gain control (default: on for usb/lsb/dsb only).")
NonfiniteOption = typer.Option(False, "--allow-nonfinite", help="Replace NaN/Inf samples by 0 instead of refusing.")
SpectraOption = typer.Option(None, "--spectra", help="Write stage spectra plots and their data into this folder.")
PlotFormatOption = typer.Option("png", "--plot-format", help="Plot file format: png or svg.")


@app.command()
def demod(
    capture_path: str = typer.Argument(..., metavar="CAPTURE", help="Capture file (SigMF, WAV/FLAC, or raw)."),
    freq: Optional[str] = FreqOption,
    offset: Optional[str] = OffsetOption,
    bandwidth: Optional[str] = BandwidthOption,
    emission: Optional[str] = EmissionOption,
    mode: Optional[str] = ModeOption,
    audio_rate: str = AudioRateOption,
    start: Optional[str] = StartOption,
    duration: Optional[str] = DurationOption,
    output: str = typer.Option(..., "--output", "-o", help="Audio output: OUT.wav or OUT.flac."),
    baseband: Optional[str] = typer.Option(None, "--baseband", help="Also write the channel baseband as SigMF."),
    report: Optional[str] = typer.Option(None, "--report", help="Also write the JSON report to this file."),
    spectra: Optional[str] = SpectraOption,
    plot_format: str = PlotFormatOption,
    engine: str = EngineOption,
    agc: Optional[bool] = AgcOption,
    squelch: Optional[float] = typer.Option(None, "--squelch", help="Mute audio while the channel is less than this many dB above its noise floor."),
    allow_nonfinite: bool = NonfiniteOption,
    force: bool = ForceOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: Optional[str] = FormatOption,
    rate: Optional[str] = RateOption,
    center: Optional[str] = CenterOption,
    strict: bool = StrictOption,
) -> None:
    """Demodulate one channel to audio (AM envelope/coherent, USB, LSB, DSB)."""
    if plot_format not in ("png", "svg"):
        raise ParameterError(f"--plot-format: got {plot_format!r}; use png or svg")
    if squelch is not None and not (0 <= squelch < 200):
        raise ParameterError(f"--squelch: must be between 0 and 200 dB, got {squelch!r}")
    channel = make_channel(freq=freq, offset=offset, bandwidth=bandwidth, emission=emission, mode=mode,
                           audio_rate=audio_rate, name=Path(output).stem, squelch_db=squelch)
    started = time.perf_counter()
    with open_capture(capture_path, format=format, rate=rate, center=center, strict=strict) as capture:
        selection = capture.select(start, duration)
        receiver = Receiver.for_capture(capture, channel, selection, engine=engine, agc=agc,
                                        spectra=bool(spectra))
        spectra_dir = Path(spectra) if spectra else None
        if spectra_dir is not None:
            from ..stage_plots import check_stage_plot_folder

            check_stage_plot_folder(spectra_dir, plot_format, force)  # before any work
        with OutputSet(force=force, protect=capture.files) as outputs:
            audio_writer = AudioWriter(output, receiver.audio_rate_hz, outputs=outputs)
            report_tmp = outputs.reserve(report) if report else None
            bb_writer = None
            if baseband:
                design = receiver.design
                bb_writer = SigMFWriter(
                    baseband, design.channel_rate_hz,
                    center_hz=channel.absolute_frequency(receiver.center_hz),
                    datatype="cf32_le",
                    description=f"iqsift channel baseband of {capture.path.name}",
                    extra={
                        "iqsift:source": {"path": str(capture.path), "sample_start": selection.start,
                                          "sample_count": selection.count},
                        "iqsift:channel": to_jsonable(channel.as_dict(receiver.center_hz)),
                        "iqsift:design": to_jsonable(design.as_dict(receiver.center_hz)),
                    },
                    outputs=outputs,
                )
                receiver.back.on_baseband = bb_writer.write
            nonfinite = "zero" if allow_nonfinite else "error"
            blocks = capture.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)
            for audio in receiver.stream(progress_blocks(blocks, selection.count, "demod", quiet)):
                audio_writer.write(audio)
            audio_writer.close()
            if bb_writer is not None:
                bb_writer.close()
            result = receiver.report()
            result["capture"] = capture_summary(capture)
            result["selection"] = {"start_s": selection.start / capture.sample_rate_hz,
                                   "duration_s": selection.count / capture.sample_rate_hz,
                                   "sample_start": selection.start, "sample_count": selection.count}
            result["outputs"] = {"audio": str(output), "baseband": baseband, "report": report,
                                 "spectra": str(spectra_dir) if spectra_dir else None}
            result["audio_clipped_samples"] = audio_writer.clipped_samples
            result["elapsed_s"] = time.perf_counter() - started
            if spectra_dir is not None:
                from ..stage_plots import write_stage_plots

                result["outputs"]["spectra_files"] = [
                    str(p) for p in write_stage_plots(receiver, spectra_dir, capture_name=capture.path.name,
                                                      fmt=plot_format, outputs=outputs)
                ]
            if report_tmp is not None:
                report_tmp.write_text(json.dumps(to_jsonable(result), indent=2, allow_nan=False) + "\n")
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_demod(result))


def format_demod(result: dict) -> str:
    """Human summary of a demod run."""
    ch = result["channel"]
    d = result["design"]
    freq = ch["frequency_hz"] if ch["frequency_hz"] is not None else ch["offset_hz"]
    level = ch["level_dbfs"]
    lines = [
        f"channel    {ch['name']}: {freq:.6f} Hz, {ch['bandwidth_hz']:g} Hz, {ch['mode']}",
        f"level      {'-inf' if level is None else f'{level:.2f}'} dBFS (mean power in the channel)",
        f"chain      {d['engine']}: {d['rate_in_hz']:g} S/s -> /{d['decimation']} -> {d['channel_rate_hz']:g} S/s "
        f"-> audio {d['audio_rate_hz']:g} S/s; {d['macs_per_input_sample']:.1f} multiply-adds per input sample",
        f"delay      {result['delay']['compensated_s'] * 1e3:.3f} ms compensated (audio is time-aligned with the capture)",
        f"audio      {result['outputs']['audio']} ({result['audio_samples']} samples)",
    ]
    if result["outputs"].get("baseband"):
        lines.append(f"baseband   {result['outputs']['baseband']}")
    if result["outputs"].get("report"):
        lines.append(f"report     {result['outputs']['report']}")
    if result["outputs"].get("spectra"):
        lines.append(f"spectra    {result['outputs']['spectra']}/ ({len(result['outputs'].get('spectra_files', []))} files)")
    return "\n".join(lines)
