"""``iqsift demod``: one channel of a capture to audio, with baseband, report and stage spectra."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from ..channel import make_channel
from ..errors import ParameterError
from .app import app
from .common import ProgressBar, emit_json, live_input, reference_text
from .options import (
    AgcOption,
    AudioRateOption,
    BandwidthOption,
    CaptureArgument,
    CenterOption,
    DurationOption,
    EmissionOption,
    EngineOption,
    ForceOption,
    FormatOption,
    FreqOption,
    HtmlOption,
    IqCorrectOption,
    JsonOption,
    ModeOption,
    NoVerifyOption,
    NonfiniteOption,
    OffsetOption,
    OptStr,
    PlotFormatOption,
    PpmOption,
    QuietOption,
    RateOption,
    StartOption,
    StrictOption,
    annotate_option,
)


@app.command()
def demod(
    capture_path: str = CaptureArgument,
    freq: OptStr = FreqOption,
    offset: OptStr = OffsetOption,
    bandwidth: OptStr = BandwidthOption,
    emission: OptStr = EmissionOption,
    mode: OptStr = ModeOption,
    audio_rate: str = AudioRateOption,
    start: OptStr = StartOption,
    duration: OptStr = DurationOption,
    output: str = typer.Option(..., "--output", "-o", help="Audio output: OUT.wav, OUT.flac, or - (standard output, "
                                                          "as it is made)."),
    audio_format: str = typer.Option("wav", "--audio-format",
                                     help="With -o -: wav (a WAV stream of unknown length) or s16 (raw 16-bit "
                                          "little-endian samples)."),
    baseband: OptStr = typer.Option(None, "--baseband", help="Also write the channel baseband as SigMF."),
    report: OptStr = typer.Option(None, "--report", help="Also write the JSON report to this file."),
    spectra: OptStr = typer.Option(None, "--spectra", help="Write stage spectra plots and their data into this folder."),
    plot_format: str = PlotFormatOption,
    html: bool = HtmlOption,
    engine: str = EngineOption,
    agc: Optional[bool] = AgcOption,
    squelch: Optional[float] = typer.Option(None, "--squelch", help="Mute audio while the channel is less than this many dB above its noise floor."),
    allow_nonfinite: bool = NonfiniteOption,
    force: bool = ForceOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: OptStr = FormatOption,
    rate: OptStr = RateOption,
    center: OptStr = CenterOption,
    strict: bool = StrictOption,
    no_verify: bool = NoVerifyOption,
    ppm: Optional[float] = PpmOption,
    annotate: OptStr = annotate_option("activity segment of the channel (measured then as by 'measure')"),
    iq_correct: bool = IqCorrectOption,
) -> None:
    """Demodulate one channel to audio (AM envelope/coherent, USB, LSB, DSB)."""
    if squelch is not None and not (0 <= squelch < 200):
        raise ParameterError(f"--squelch: must be between 0 and 200 dB, got {squelch!r}")
    if output == "-" and json_out:
        raise ParameterError("--json: standard output carries the audio (-o -); write the JSON with --report")
    channel = make_channel(freq=freq, offset=offset, bandwidth=bandwidth, emission=emission, mode=mode,
                           audio_rate=audio_rate, name="stdout" if output == "-" else Path(output).stem,
                           squelch_db=squelch)
    from ..jobs import demod_file  # here, not at the top: `iqsift --help` stays fast

    with ProgressBar("demod", live_input(capture_path) or quiet) as progress:
        result = demod_file(
            capture_path, channel, output, baseband=baseband, report=report, spectra=spectra,
            plot_format=plot_format, html=html, engine=engine, agc=agc, start=start, duration=duration,
            allow_nonfinite=allow_nonfinite, force=force, progress=progress,
            format=format, rate=rate, center=center, strict=strict, verify=not no_verify, ppm=ppm,
            annotate=annotate, iq_correct=iq_correct, audio_format=audio_format,
        ).to_dict()
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_demod(result), err=output == "-")  # stdout carries the audio


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
        f"audio      {result['outputs']['audio']} ({result['audio_samples']} samples"
        + ("; 2 channels: left = lower sideband, right = upper)" if ch["mode"] == "isb" else ")"),
    ]
    if result["outputs"].get("baseband"):
        lines.append(f"baseband   {result['outputs']['baseband']}")
    if result["outputs"].get("report"):
        lines.append(f"report     {result['outputs']['report']}")
    if result["outputs"].get("spectra"):
        lines.append(f"spectra    {result['outputs']['spectra']}/ ({len(result['outputs'].get('spectra_files', []))} files)")
    if result["outputs"].get("annotations"):
        lines.append(f"annotated  {result['outputs']['annotations']}")
    ref = reference_text(result.get("capture") or {})
    if ref:
        lines.append(f"reference  {ref}")
    if result["outputs"].get("html"):
        lines.append(f"page       {result['outputs']['html']}")
    return "\n".join(lines)
