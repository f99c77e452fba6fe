"""``iqsift info``: what a capture holds, and its levels measured in one pass."""

from __future__ import annotations

from typing import Any, Optional

import typer

from ..units import format_hz
from .app import app
from .common import ProgressBar, emit_json, live_input, reference_text
from .options import (
    CaptureArgument,
    CenterOption,
    FormatOption,
    JsonOption,
    IqCorrectOption,
    NoVerifyOption,
    OptStr,
    PpmOption,
    QuietOption,
    RateOption,
    StrictOption,
)


@app.command()
def info(
    capture_path: str = CaptureArgument,
    json_out: bool = JsonOption,
    format: OptStr = FormatOption,
    rate: OptStr = RateOption,
    center: OptStr = CenterOption,
    strict: bool = StrictOption,
    no_verify: bool = NoVerifyOption,
    ppm: Optional[float] = PpmOption,
    iq_correct: bool = IqCorrectOption,
    quiet: bool = QuietOption,
) -> None:
    """Describe a capture and measure its levels, DC offset, clipping and IQ imbalance."""
    from ..jobs import info_file  # here, not at the top: `iqsift --help` stays fast

    with ProgressBar("measuring", live_input(capture_path) or quiet) as progress:
        result = info_file(capture_path, format=format, rate=rate, center=center, strict=strict,
                           progress=progress, verify=not no_verify, ppm=ppm, iq_correct=iq_correct).to_dict()
    if json_out:
        emit_json(result)
    else:
        typer.echo(format_info(result))


def format_rate(rate: float) -> str:
    """A sample rate for people: 2.4 MS/s, 240 kS/s, 8000 S/s."""
    if rate >= 1e6:
        return f"{rate / 1e6:g} MS/s"
    if rate >= 1e3:
        return f"{rate / 1e3:g} kS/s"
    return f"{rate:g} S/s"


def _db(value: float | None, unit: str = "dBFS") -> str:
    return "-inf " + unit if value is None else f"{value:.2f} {unit}"

def format_info(result: dict[str, Any]) -> str:
    """Plain-text rendering of an ``info`` result."""
    stats = result["stats"]
    kind = "complex IQ" if result["is_complex"] else "real"
    lines = [
        f"capture       {result['path']}",
        f"format        {result['format']} ({result['datatype']}, {kind})",
        f"sample rate   {format_rate(result['sample_rate_hz'])}",
        f"centre        {format_hz(result['center_hz']) if result['center_hz'] is not None else 'unknown (frequencies are offsets)'}",
        f"duration      {result['duration_s']:.6g} s ({result['samples']} samples)",
        f"segments      {len(result['segments'])}",
    ]
    for i, seg in enumerate(result["segments"]):
        freq = format_hz(seg["frequency_hz"]) if seg["frequency_hz"] is not None else "centre unknown"
        when = f", {seg['datetime']}" if seg["datetime"] else ""
        lines.append(
            f"  [{i}] samples {seg['sample_start']}..{seg['sample_start'] + seg['sample_count'] - 1} at {freq}{when}"
        )
    lines.append(f"annotations   {len(result['annotations'])}")
    for ann in result["annotations"][:20]:
        span = "to the end" if ann["sample_count"] is None else f"{ann['sample_count']} samples"
        band = ""
        if ann["freq_lower_hz"] is not None and ann["freq_upper_hz"] is not None:
            band = f", {format_hz(ann['freq_lower_hz'])} to {format_hz(ann['freq_upper_hz'])}"
        lines.append(f"  from sample {ann['sample_start']}, {span}{band}: {ann['label'] or ann['comment'] or ''}")
    if len(result["annotations"]) > 20:
        lines.append(f"  ... {len(result['annotations']) - 20} more (see --json)")
    lines += [
        f"peak level    {_db(stats['peak_dbfs'])}",
        f"RMS level     {_db(stats['rms_dbfs'])}",
        f"DC offset     I {stats['dc_i']:+.5f}, Q {stats['dc_q']:+.5f} ({_db(stats['dc_dbfs'])})",
        f"clipped       {stats['clipped_samples']} samples ({100 * stats['clipped_fraction']:.4f} %)",
        f"non-finite    {stats['nonfinite_samples']} samples"
        + ("  (NaN/Inf: processing commands refuse them unless --allow-nonfinite)" if stats["nonfinite_samples"] else ""),
    ]
    if result["is_complex"] and stats["gain_imbalance_db"] is not None:
        irr = stats["image_rejection_db"]
        lines.append(
            f"IQ imbalance  gain {stats['gain_imbalance_db']:+.3f} dB, phase {stats['phase_imbalance_deg']:+.3f} deg, "
            f"image rejection {'>90' if irr is None or irr > 90 else f'{irr:.1f}'} dB (assumes a noise-like signal)"
        )
    ref = reference_text(result)
    if ref:
        lines.append(f"reference     {ref}")
    corr = result.get("iq_correction")
    if corr:
        lines.append(
            f"IQ corrected  {corr['method']} estimate removed gain {corr['gain_imbalance_db']:+.3f} dB, phase "
            f"{corr['phase_imbalance_deg']:+.3f} deg, DC I {corr['dc_i']:+.5f} Q {corr['dc_q']:+.5f} "
            "(the figures above are after correction)"
        )
    return "\n".join(lines)
