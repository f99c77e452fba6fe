"""The ``synth`` job: render an invented test scenario into a SigMF recording plus its truth file."""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from typing import Any, Mapping

from ..synth import Scenario, load_scenario, write_synth
from .common import Progress, stamped

__all__ = ["SynthReport", "synth_file"]


def channel_summary(ch: Mapping[str, Any]) -> dict[str, Any]:
    """One channel of the truth file in brief (stable JSON keys)."""
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


@dataclass(frozen=True)
class SynthReport:
    """The files written and a summary of the truth (per channel: mode, frequency, level, message ...)."""

    meta: str
    data: str
    truth: str
    truth_record: Mapping[str, Any]

    schema = "synth-v1"

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift synth --json`` prints."""
        t = self.truth_record
        return stamped(self.schema, {
            "meta": self.meta,
            "data": self.data,
            "truth": self.truth,
            "samples": t["samples"],
            "sample_rate_hz": t["sample_rate_hz"],
            "center_hz": t["center_hz"],
            "datatype": t["datatype"],
            "seed": t["seed"],
            "clipped_components": t["clipped_components"],
            "channels": [channel_summary(ch) for ch in t["channels"]],
        })


def synth_file(
    scenario: str | os.PathLike[str] | Scenario,
    output: str | os.PathLike[str],
    *,
    force: bool = False,
    progress: Progress | None = None,
) -> SynthReport:
    """Write the capture ``output`` (``.sigmf-meta``) and ``<stem>.truth.json`` from a scenario.

    Parameters
    ----------
    scenario : path or Scenario
        The scenario (TOML file, or one read with :func:`iqsift.synth.load_scenario`).
    output : path
        The ``.sigmf-meta`` to write; data and truth go beside it.
    force : bool
        Overwrite existing files.
    progress : callable, optional
        Called after each block with the samples written and the total.
    """
    scen = scenario if isinstance(scenario, Scenario) else load_scenario(scenario)
    total = scen.n_samples

    def advance(n: int) -> None:
        if progress is not None:
            progress(n, total)

    meta_path, data_path, truth_path = write_synth(scen, output, force=force, progress=advance)
    truth = json.loads(truth_path.read_text(encoding="utf-8"))
    return SynthReport(str(meta_path), str(data_path), str(truth_path), truth)
