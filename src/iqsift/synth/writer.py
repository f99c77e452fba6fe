"""Writing a synthetic capture: the SigMF recording, its annotations and the truth file, committed together.

The recording carries one annotation per channel (the channel band around the
actual carrier, widened by the drift) and one per burst; the truth file
``<stem>.truth.json`` beside it adds what only the writer knows (the clipped
component count and the data file's SHA-512).
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any, Callable, Mapping

from ..errors import ParameterError
from .scenario import Scenario, as_scenario
from .synthesizer import DEFAULT_BLOCK, Synthesizer

__all__ = ["truth_path_for", "write_synth"]


def truth_path_for(out_meta_path: str | os.PathLike) -> Path:
    """``<stem>.truth.json`` beside the SigMF pair named by ``out_meta_path``."""
    from ..captures.sigmf import sigmf_paths

    meta, _ = sigmf_paths(out_meta_path)
    return meta.with_name(meta.name[: -len(".sigmf-meta")] + ".truth.json")


def _annotations(truth: Mapping[str, Any]) -> list[dict[str, Any]]:
    rate = truth["sample_rate_hz"]
    items = []
    for ch in truth["channels"]:
        band = ch["band"]
        lower = band["lower_hz"] if band["lower_hz"] is not None else band["lower_offset_hz"]
        upper = band["upper_hz"] if band["upper_hz"] is not None else band["upper_offset_hz"]
        where = (f"{ch['carrier']['frequency_hz'] / 1e6:.6f} MHz" if ch["carrier"]["frequency_hz"] is not None
                 else f"{ch['carrier']['offset_hz']:+.1f} Hz offset")
        level = f"{ch['level_dbfs']:.1f} dBFS {ch['level_meaning']}"
        detail = f", depth {ch['depth']:g}" if ch["mode"] == "am" else ""
        common = {"core:freq_lower_edge": lower, "core:freq_upper_edge": upper, "core:generator": "iqsift synth"}
        items.append({"core:sample_start": 0, "core:sample_count": truth["samples"], **common,
                      "core:label": ch["name"],
                      "core:comment": f"synthetic {ch['mode']} channel, carrier {where}, {level}{detail}"})
        for j, b in enumerate(ch["bursts"]):
            count = b["end_sample"] - b["start_sample"]
            if count <= 0:
                continue
            items.append({"core:sample_start": b["start_sample"], "core:sample_count": count, **common,
                          "core:label": f"{ch['name']} burst {j + 1}",
                          "core:comment": f"burst {b['start_s']:g}..{b['end_s']:g} s (half-amplitude points, "
                                          f"{rate:g} samples/s)"})
    items.sort(key=lambda a: (a["core:sample_start"], a["core:label"]))
    return items


def write_synth(scenario: Scenario | Mapping[str, Any] | str | os.PathLike, out_meta_path: str | os.PathLike,
                force: bool = False, *, block_size: int = DEFAULT_BLOCK,
                progress: Callable[[int], None] | None = None) -> list[Path]:
    """Render a scenario into a SigMF recording and its truth file, all committed atomically.

    Parameters
    ----------
    scenario : Scenario, dict or path
    out_meta_path : path
        The ``.sigmf-meta`` (or ``.sigmf-data``, or stem) to write; the truth
        goes to ``<stem>.truth.json`` beside it.
    force : bool
        Overwrite existing files.
    block_size : int
        Samples per generated block (the output does not depend on it).
    progress : callable, optional
        Called with the number of samples written after each block.

    Returns
    -------
    list of Path
        ``[meta, data, truth]`` paths.
    """
    from ..captures.atomic import OutputSet
    from ..captures.sigmf import SigMFWriter, sigmf_paths

    scen = as_scenario(scenario)
    synth = Synthesizer(scen)
    truth = synth.truth
    if not str(out_meta_path).endswith((".sigmf-meta", ".sigmf-data")):
        raise ParameterError(f"{out_meta_path}: the output is a SigMF recording; name it OUT.sigmf-meta")
    meta_path, data_path = sigmf_paths(out_meta_path)
    truth_path = truth_path_for(out_meta_path)
    inputs = [Path(scen.source)] if scen.source and Path(str(scen.source)).exists() else []
    inputs += [Path(path) for path in (ch.message.resolved_path for ch in scen.channels) if path]
    description = scen.description or (
        f"iqsift synthetic test capture (invented scenario): {len(scen.channels)} channel(s), seed {scen.seed}"
    )
    with OutputSet(force=force, protect=tuple(inputs)) as outputs:
        truth_tmp = outputs.reserve(truth_path)
        writer = SigMFWriter(
            meta_path, scen.sample_rate_hz, center_hz=scen.center_hz, datatype=scen.datatype,
            description=description,
            extra={"iqsift:source": {"generator": "iqsift synth", "scenario": truth["scenario"], "seed": scen.seed,
                                     "truth": truth_path.name}},
            annotations=_annotations(truth), outputs=outputs,
        )
        try:
            for block in synth.blocks(block_size):
                writer.write(block)
                if progress is not None:
                    progress(block.shape[0])
            writer.close()
        except BaseException:
            writer.abort()
            raise
        truth["clipped_components"] = int(writer.clipped_components)
        truth["output"] = {"meta": meta_path.name, "data": data_path.name,
                           "data_sha512": writer.metadata()["global"]["core:sha512"]}
        written = json.loads(json.dumps(truth, allow_nan=False))
        for channel in written.get("channels", []):
            message = channel.get("message") or {}
            if message.get("resolved_path"):
                # relative to the truth file's folder, so a clone elsewhere regenerates the same bytes
                message["resolved_path"] = os.path.relpath(message["resolved_path"], meta_path.parent.resolve())
        with open(truth_tmp, "w", encoding="utf-8") as handle:
            json.dump(written, handle, indent=2, allow_nan=False)
            handle.write("\n")
    return [meta_path, data_path, truth_path]

