"""``iqsift synth``: render an invented test scenario into a SigMF recording plus its truth file."""

from __future__ import annotations

import json
from typing import Any

import typer

from ..synth import load_scenario, write_synth
from ..units import format_hz
from .app import ForceOption, JsonOption, QuietOption, app
from .common import Progress, emit_json


def channel_summary(ch: dict[str, Any]) -> dict[str, Any]:
    """The per-channel part of the ``synth`` result (stable JSON keys)."""
    msg = ch["message"]
    if msg["kind"] in ("tone", "tones"):
        message = "tone " + "/".join(f"{f:g}" for f in msg["frequencies_hz"]) + " Hz"
    elif msg["kind"] == "noise":
        message = f"noise {msg['low_hz']:g}-{msg['high_hz']:g} Hz"
    else:
        message = f"file {msg['path']}"
    return {
        "name": ch["name"],
        "mode": ch["mode"],
        "frequency_hz": ch["carrier"]["frequency_hz"],
        "offset_hz": ch["carrier"]["offset_hz"],
        "level_dbfs": ch["level_dbfs"],
        "depth": ch["depth"],
        "bandwidth_hz": ch["bandwidth_hz"],
        "message": message,
        "cnr_db": ch["noise"]["cnr_db"] if ch["noise"] else None,
        "fading": ch["fading"]["kind"] if ch["fading"] else None,
        "bursts": len(ch["bursts"]),
    }


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
    scenario = load_scenario(scenario_path)
    bar = Progress(scenario.n_samples, "synthesising", quiet or json_out)
    try:
        paths = write_synth(scenario, output, force=force, progress=bar.advance)
    finally:
        bar.close()
    meta_path, data_path, truth_path = paths
    truth = json.loads(truth_path.read_text(encoding="utf-8"))
    result = {
        "meta": str(meta_path),
        "data": str(data_path),
        "truth": str(truth_path),
        "samples": truth["samples"],
        "sample_rate_hz": truth["sample_rate_hz"],
        "center_hz": truth["center_hz"],
        "datatype": truth["datatype"],
        "seed": truth["seed"],
        "clipped_components": truth["clipped_components"],
        "channels": [channel_summary(ch) for ch in truth["channels"]],
    }
    if json_out:
        emit_json(result)
        return
    lines = [f"wrote {p}" for p in paths]
    lines.append(
        f"{result['samples']} samples at {result['sample_rate_hz']:g} samples/s, {result['datatype']}, "
        f"seed {result['seed']}, {result['clipped_components']} clipped components"
    )
    lines += [_line(s) for s in result["channels"]]
    typer.echo("\n".join(lines))
