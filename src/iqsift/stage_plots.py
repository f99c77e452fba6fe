"""Per-stage spectra figures of a finished receiver run (``--spectra DIR``).

Writes one figure per tap point, an overview with every stage stacked, the
data behind each as JSON, and a waveform plot of the audio. The designed
channel filter's edges and its response are drawn on the stages it acts on.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["write_stage_plots", "stage_overlays"]

_TITLES = {
    "input": "input (capture)",
    "channel": "channel baseband (after mixing, channel filter, decimation)",
    "detector": "detector output",
    "audio": "audio",
}


def stage_overlays(receiver) -> dict[str, Any]:
    """Filter overlays and channel bands per tap point, in each spectrum's own frequency axis."""
    d = receiver.design
    ch = d.channel
    lo, hi = ch.passband_hz
    overlays: dict[str, Any] = {}
    bands: dict[str, Any] = {}
    centre = (receiver.center_hz or 0.0) + d.carrier_offset_hz
    if d.prototype is not None:
        proto = d.prototype
        freqs, resp = _response(proto.taps, d.rate_hz, 4 * (proto.stopband_hz + abs(lo + hi)))
        mid = 0.5 * (lo + hi)
        overlays["channel"] = {
            "passband_hz": (lo, hi),
            "stopband_hz": (mid - proto.stopband_hz, mid + proto.stopband_hz),
            "response": (freqs + mid, resp),
        }
        overlays["input"] = {
            "passband_hz": (centre + lo, centre + hi),
            "stopband_hz": (centre + mid - proto.stopband_hz, centre + mid + proto.stopband_hz),
            "response": (freqs + centre + mid, resp),
        }
    bands["input"] = (centre + lo, centre + hi)
    bands["channel"] = (lo, hi)
    if ch.audio_band:
        bands["detector"] = tuple(ch.audio_band)
        bands["audio"] = tuple(ch.audio_band)
    return {"overlays": overlays, "bands": bands}


def _response(taps: np.ndarray, rate: float, span: float, points: int = 2048):
    from scipy.signal import freqz

    f = np.linspace(-span, span, points)
    _, h = freqz(taps, 1, worN=f, fs=rate)
    return f, 20 * np.log10(np.maximum(np.abs(h), 1e-12))


def write_stage_plots(receiver, out_dir: Path, *, capture_name: str, fmt: str = "png", outputs=None,
                      audio: np.ndarray | None = None) -> list[Path]:
    """Write the stage figures and their data into ``out_dir``; returns the paths.

    With ``outputs`` (an :class:`~iqsift.captures.OutputSet`) the files are
    committed with the job's other outputs; otherwise written directly.
    """
    from . import plots

    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    spectra = receiver.spectra("density")
    if not spectra:
        return []
    ch = receiver.channel
    title = f"{capture_name}: {ch.name} ({ch.mode}, {ch.bandwidth_hz:g} Hz)"
    extras = stage_overlays(receiver)
    written: list[Path] = []

    def target(name: str) -> Path:
        final = out_dir / name
        return outputs.reserve(final) if outputs is not None else final

    order = [n for n in ("input", "channel", "detector", "audio") if n in spectra]
    for i, name in enumerate(order):
        spec = spectra[name]
        path = plots.plot_stage_spectrum(
            spec, target(f"{i + 1}_{name}.{fmt}"), title=f"{title}\n{_TITLES[name]}",
            filter_overlay=extras["overlays"].get(name), channel_band=extras["bands"].get(name), fmt=fmt,
        )
        written.append(out_dir / f"{i + 1}_{name}.{fmt}")
        plots.save_plot_data(spec, target(f"{i + 1}_{name}.json"))
        written.append(out_dir / f"{i + 1}_{name}.json")
        del path
    plots.plot_overview(
        [spectra[n] for n in order], target(f"overview.{fmt}"), title=title,
        overlays=[extras["overlays"].get(n) for n in order],
        channel_band=[extras["bands"].get(n) for n in order], fmt=fmt,
    )
    written.append(out_dir / f"overview.{fmt}")
    return written
