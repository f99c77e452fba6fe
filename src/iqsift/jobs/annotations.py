"""SigMF annotations of what the jobs found: survey's emissions, extract's and demod's activity segments.

The documents are made by :func:`iqsift.captures.annotated_metadata` (the recording's own metadata
kept, ``core:dataset`` when needed, the ``iqsift`` extension declared); the extension's keys are
documented in ``docs/iqsift.sigmf-ext.md``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Mapping, Sequence

import numpy as np

from ..captures import Capture, SampleRange, recording_edges

if TYPE_CHECKING:  # survey pulls in scipy.ndimage: not on the way of demod and extract
    from ..survey import SurveyResult

__all__ = ["emission_annotations", "activity_annotations"]


def emission_annotations(cap: Capture, selection: SampleRange, found: SurveyResult) -> list[dict[str, Any]]:
    """One SigMF annotation per emission: the analysed samples, its occupied band (99 %), label and comment.

    ``core:label`` is the ICAO channel name when there is one, else the class (``A3E``, ``J3E usb``);
    ``core:comment`` gives the designator, level and carrier frequency; the numbers are also in
    ``iqsift:`` keys (true frequencies, see :mod:`iqsift.captures.annotate`).
    """
    out = []
    for e in found.emissions:
        kind = e.emission_class + (f" {e.sideband}" if e.sideband else "") + (" dsb" if e.mode == "dsb" else "")
        entry: dict[str, Any] = {"core:sample_start": selection.start, "core:sample_count": selection.count}
        if np.isfinite(e.occupied_lo_hz) and np.isfinite(e.occupied_hi_hz) and e.occupied_lo_hz <= e.occupied_hi_hz:
            entry.update(recording_edges(cap, e.occupied_lo_hz, e.occupied_hi_hz))
        entry["core:label"] = e.channel_name or kind
        entry["core:comment"] = (f"emission {e.index}: {e.designator} {kind}, {e.level_dbfs:.1f} dBFS, "
                                 f"carrier {e.frequency_hz:.1f} Hz ({e.frequency_method})")
        entry.update({"iqsift:emission": e.index, "iqsift:designator": e.designator, "iqsift:class": kind,
                      "iqsift:frequency_hz": e.frequency_hz, "iqsift:level_dbfs": e.level_dbfs,
                      "iqsift:occupied_hz": e.occupied_hz})
        if e.raster_frequency_hz is not None:
            entry["iqsift:channel_frequency_hz"] = e.raster_frequency_hz
        out.append(entry)
    return out


def activity_annotations(cap: Capture, channel: Mapping[str, Any], activity: Sequence[Mapping[str, Any]],
                         ) -> list[dict[str, Any]]:
    """One SigMF annotation per activity segment of a channel.

    Parameters
    ----------
    cap : Capture
        The capture the channel was received from (its rate turns capture times into sample indices).
    channel : mapping
        The channel as reported (``name``, ``frequency_hz`` absolute or None, ``offset_hz``,
        ``passband_hz`` relative to the carrier, ``mode``, ``emission``).
    activity : sequence of mapping
        ``start_s``, ``end_s`` (capture time, s) and ``level_dbfs`` of each segment.
    """
    carrier_hz = channel.get("frequency_hz")
    if carrier_hz is None:
        carrier_hz = channel["offset_hz"]
    lo_hz, hi_hz = channel["passband_hz"]
    out = []
    for seg in activity:
        first = min(max(int(round(seg["start_s"] * cap.sample_rate_hz)), 0), cap.samples)
        last = min(max(int(round(seg["end_s"] * cap.sample_rate_hz)), first), cap.samples)
        entry: dict[str, Any] = {"core:sample_start": first, "core:sample_count": last - first,
                                 **recording_edges(cap, carrier_hz + lo_hz, carrier_hz + hi_hz),
                                 "core:label": str(channel["name"]),
                                 "core:comment": f"{channel['name']} active, {seg['level_dbfs']:.1f} dBFS"}
        entry.update({"iqsift:channel_name": str(channel["name"]), "iqsift:frequency_hz": float(carrier_hz),
                      "iqsift:mode": channel.get("mode"), "iqsift:level_dbfs": seg["level_dbfs"],
                      "iqsift:start_s": seg["start_s"], "iqsift:end_s": seg["end_s"]})
        if channel.get("emission"):
            entry["iqsift:designator"] = channel["emission"]
        out.append(entry)
    return out
