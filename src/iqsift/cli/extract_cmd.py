"""``iqsift extract``: every channel of a plan, in one pass, to audio files and one report."""

from __future__ import annotations

from typing import Optional

import typer

from .app import app
from .common import ProgressBar, emit_json, live_input, reference_text
from .options import (
    CaptureArgument,
    CenterOption,
    DurationOption,
    ForceOption,
    FormatOption,
    HtmlOption,
    IqCorrectOption,
    JsonOption,
    NoVerifyOption,
    NonfiniteOption,
    OptStr,
    PerChannelBasebandOption,
    PerChannelSpectraOption,
    PlotFormatOption,
    PpmOption,
    QuietOption,
    RateOption,
    StartOption,
    StrictOption,
    annotate_option,
)


@app.command("extract")
def extract_command(
    capture_path: str = CaptureArgument,
    plan_path: str = typer.Option(..., "--plan", "-p", help="Channel plan (TOML)."),
    out_dir: str = typer.Option(..., "--out-dir", "-o", help="Folder for the audio files and report.json."),
    spectra: bool = PerChannelSpectraOption,
    plot_format: str = PlotFormatOption,
    baseband: bool = PerChannelBasebandOption,
    html: bool = HtmlOption,
    start: OptStr = StartOption,
    duration: OptStr = DurationOption,
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
    annotate: OptStr = annotate_option("activity segment of every channel"),
    iq_correct: bool = IqCorrectOption,
) -> None:
    """Extract every channel of a plan in one pass: <name>.wav per channel and report.json."""
    from ..jobs import extract_file  # here, not at the top: `iqsift --help` stays fast

    with ProgressBar("extract", live_input(capture_path) or quiet) as progress:
        result = extract_file(
            capture_path, plan_path, out_dir, spectra=spectra, plot_format=plot_format, baseband=baseband, html=html,
            start=start, duration=duration, allow_nonfinite=allow_nonfinite, force=force, progress=progress,
            format=format, rate=rate, center=center, strict=strict, verify=not no_verify, ppm=ppm,
            annotate=annotate, iq_correct=iq_correct,
        ).to_dict()
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_extract(result))


def format_extract(result: dict) -> str:
    """Human summary of an extraction."""
    lines = [
        f"extracted {len(result['channels'])} channel(s) from {result['capture']['path']} in one pass "
        f"({result['selection']['duration_s']:.2f} s of capture; {result['processing_s']:.2f} s streaming the channels, "
        f"{result['elapsed_s']:.2f} s in all)",
        f"{'channel':<24} {'frequency':>16} {'mode':>9} {'level dBFS':>11} {'carrier err Hz':>15} {'active':>7}  audio",
    ]
    for ch in result["channels"]:
        c = ch["channel"]
        where = c["frequency_hz"] if c["frequency_hz"] is not None else c["offset_hz"]
        carrier = ch.get("carrier") or {}
        err = carrier.get("error_hz")
        if err is not None and round(err, 2) == 0:
            err = 0.0  # no "-0.00"
        level = c.get("level_dbfs")
        lines.append(
            f"{c['name']:<24} {where:>16.1f} {c['mode']:>9} {'-' if level is None else f'{level:.1f}':>11} "
            f"{'-' if err is None else f'{err:+.2f}':>15} {len(ch.get('activity') or []):>7}  {ch['outputs']['audio']}"
        )
    lines.append(f"report: {result['outputs']['report']}")
    if result["outputs"].get("annotations"):
        lines.append(f"annotated: {result['outputs']['annotations']}")
    ref = reference_text(result["capture"])
    if ref:
        lines.append(f"reference: {ref}")
    if result["outputs"].get("html"):
        lines.append(f"page:   {result['outputs']['html']}")
    return "\n".join(lines)
