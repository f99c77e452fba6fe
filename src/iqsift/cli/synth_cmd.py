"""``iqsift synth``: render an invented test scenario into a SigMF recording plus its truth file."""

from __future__ import annotations

from typing import Any

import typer

from ..units import format_hz
from .app import app
from .common import ProgressBar, emit_json
from .options import ForceOption, JsonOption, QuietOption


def _line(s: dict[str, Any]) -> str:
    where = format_hz(s["frequency_hz"]) if s["frequency_hz"] is not None else f"{s['offset_hz']:+.1f} Hz offset"
    parts = [f"{s['name']}: {s['mode']} at {where}, {s['level_dbfs']:.1f} dBFS"]
    if s["depth"] is not None:
        parts.append(f"depth {s['depth']:g}")
    parts.append(s["message"])
    parts.append(f"bandwidth {s['bandwidth_hz']:g} Hz")
    if s["cnr_db"] is not None:
        parts.append(f"CNR {s['cnr_db']:g} dB")
    if s["fading"]:
        parts.append(f"{s['fading']} fading")
    if s["bursts"]:
        parts.append(f"{s['bursts']} burst(s)")
    return "  " + ", ".join(parts)


@app.command("synth")
def synth(
    scenario_path: str = typer.Argument(..., metavar="SCENARIO", help="Scenario file (TOML)."),
    output: str = typer.Option(..., "-o", "--output", help="Output .sigmf-meta path (the truth goes beside it)."),
    force: bool = ForceOption,
    json_out: bool = JsonOption,
    quiet: bool = QuietOption,
) -> None:
    """Write a synthetic capture from an invented scenario: SigMF recording plus <stem>.truth.json."""
    from ..jobs import synth_file  # here, not at the top: `iqsift --help` stays fast

    with ProgressBar("synthesising", quiet or json_out) as progress:
        result = synth_file(scenario_path, output, force=force, progress=progress).to_dict()
    if json_out:
        emit_json(result)
        return
    lines = [f"wrote {result[key]}" for key in ("meta", "data", "truth")]
    lines.append(
        f"{result['samples']} samples at {result['sample_rate_hz']:g} samples/s, {result['datatype']}, "
        f"seed {result['seed']}, {result['clipped_components']} clipped components"
    )
    lines += [_line(s) for s in result["channels"]]
    typer.echo("\n".join(lines))
