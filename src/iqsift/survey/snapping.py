"""Put the emissions a survey found on a channel raster, where (and only where) they belong on it.

A carrier is snapped to the nearest grid point of the raster only when the raster is
for its emission class and the point is within the raster's snap tolerance
(:meth:`iqsift.rasters.Raster.snap_error`: ICAO Annex 10 Volume V for the
aeronautical 25/8.33 kHz rasters, the ITU Geneva 1975 plan for the 9/10 kHz
broadcast rasters). A grid point holds one emission: when two carriers would snap to
the same point, the nearer one gets it. Every emission left off the raster keeps its
measured frequency, carries the reason (``raster_reason``) and is warned about in
one line, so two emissions never share a plan channel and no channel is tuned away
from the carrier it was proposed for.
"""

from __future__ import annotations

import dataclasses
import warnings
from typing import Any

from ..errors import IqsiftWarning, ParameterError
from ..rasters import Raster, aero_channel_name
from .results import DetectedEmission

__all__ = ["raster_rule", "snap_emissions"]

_AERO = ("25k", "8.33k")


def raster_rule(raster: Raster) -> dict[str, Any]:
    """The snapping rule of a raster as JSON: name, step, tolerance, classes, what it is."""
    return {
        "name": raster.name,
        "step_hz": raster.step_hz,
        "tolerance_hz": raster.snap_tolerance_hz,
        "classes": list(raster.classes),
        "description": raster.description,
    }


def _label(e: DetectedEmission) -> str:
    kind = e.emission_class + (f" {e.sideband}" if e.sideband else "")
    if e.mode == "dsb":
        kind += " dsb"
    return f"emission {e.index} ({e.frequency_hz / 1e6:.6f} MHz, {kind})"


def snap_emissions(emissions: list[DetectedEmission], raster: Raster, *, stacklevel: int = 2) -> list[DetectedEmission]:
    """The emissions with their raster fields set (snapped) or their ``raster_reason`` (kept as measured).

    Parameters
    ----------
    emissions : list of DetectedEmission
        As measured, absolute frequencies.
    raster : Raster
        The raster asked for.
    stacklevel : int
        Passed to :func:`warnings.warn` for the one-line warning about each emission left off.

    Returns
    -------
    list of DetectedEmission
        Same order. Snapped: ``raster_name``, ``raster_frequency_hz``, ``raster_error_hz``
        (measured − grid), ``raster_tolerance_hz`` and, on an aeronautical raster inside
        the band, ``channel_name``. Not snapped: ``raster_reason`` only.
    """
    reasons: dict[int, str] = {}
    claims: dict[int, list[int]] = {}  # grid index -> emissions within tolerance of it
    for i, e in enumerate(emissions):
        # a suppressed-carrier DSB is written A3E but has no carrier on the grid to measure
        why = raster.snap_error(e.frequency_hz, e.emission_class) if e.mode != "dsb" else (
            f"the {raster.name} raster is for {'/'.join(raster.classes)} carriers, not a suppressed-carrier DSB")
        if why is not None:
            reasons[i] = why
        else:
            claims.setdefault(raster.index(e.frequency_hz), []).append(i)
    for k, members in claims.items():
        grid_hz = raster.frequency(k)
        members.sort(key=lambda i: abs(emissions[i].frequency_hz - grid_hz))
        for i in members[1:]:
            reasons[i] = (f"the {raster.name} point {grid_hz / 1e6:.6f} MHz is taken by the nearer emission "
                          f"{emissions[members[0]].index}")
    out = []
    for i, e in enumerate(emissions):
        if i in reasons:
            warnings.warn(f"survey: {_label(e)} keeps its measured frequency: {reasons[i]}", IqsiftWarning,
                          stacklevel=stacklevel + 1)
            out.append(dataclasses.replace(e, raster_reason=reasons[i]))
            continue
        grid_hz = float(raster.frequency(raster.index(e.frequency_hz)))
        name = None
        if raster.name in _AERO:
            try:
                name = aero_channel_name(grid_hz, raster.name, tolerance_hz=1.0)
            except ParameterError:  # outside the aeronautical band: a grid point, but no channel name
                name = None
        out.append(dataclasses.replace(e, raster_name=raster.name, raster_frequency_hz=grid_hz,
                                       raster_error_hz=float(e.frequency_hz - grid_hz),
                                       raster_tolerance_hz=raster.snap_tolerance_hz, channel_name=name))
    return out
