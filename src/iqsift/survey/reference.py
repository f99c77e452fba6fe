"""The receiver's reference error estimated from the carriers a survey found.

A receiver whose reference runs ``P`` ppm fast shows every transmitter at ``f / (1 + P·1e-6)``
(:mod:`iqsift.reference`): the shift is proportional to frequency, so carriers that should sit
on known frequencies reveal it.

Against a raster (:func:`estimate_from_raster`)
    Each measured carrier line ``f_i`` (A3E-class carriers, interpolated on the spectrum: not the
    conventional frequencies of suppressed carriers) is on the grid for the corrections
    ``e = (g/f_i − 1)·1e6`` ppm, ``g`` a grid point. Every such ``e`` within the search range
    is a candidate; its *support* is the number of carriers that land within their tolerance of
    a grid point once corrected by it. The tolerance is the larger of 1 ppm of the carrier
    (the frequency tolerance of an aeronautical ground transmitter on the 8.33 kHz raster,
    ICAO Annex 10 Volume III, 0.0001 %, memory) and three fine-spectrum bins. The candidate
    with the most support wins (ties: the smaller summed residual, then the smaller ``|e|``);
    at least two carriers must agree. The estimate is the *median* of the agreeing carriers'
    own ``e_i``, so carriers genuinely off their channel (outside tolerance) are left out and
    small offsets within it cannot pull it far (a consensus, then a median: the RANSAC idea,
    M. A. Fischler & R. C. Bolles, Comm. ACM 24(6), 1981, on a one-parameter model). Its
    standard uncertainty is the standard error of the median of normal data,
    ``sqrt(π/2)·s/sqrt(n)`` (``s`` the sample standard deviation of the ``e_i``), combined in
    quadrature with the measurement uncertainty of the carriers (below) over ``sqrt(n)``.

    The search range is ± half a raster step at the highest carrier, relative to it (8.33 kHz
    at 124 MHz: ±33.6 ppm; 25 kHz: ±100 ppm, capped at 100 ppm): beyond it a carrier one channel
    away reads the same, and the raster alone cannot tell them apart (use a reference carrier).

Against one known carrier (:func:`estimate_from_carrier`)
    The measured carrier line nearest ``reference_hz`` within 100 ppm of it gives
    ``e = (reference_hz/f − 1)·1e6``. Its uncertainty is that of one carrier measurement,
    taken as a fine-spectrum bin over sqrt(12) (a frequency known to within one bin, uniformly:
    GUM, JCGM 100:2008, 4.3.7); Grandke's interpolation usually does far better.

Both give the error *added* to the correction the capture was already read with (``base_ppm``)
and report the total (:func:`iqsift.reference.compose_ppm`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from ..rasters import Raster
from ..reference import compose_ppm
from .results import DetectedEmission

__all__ = ["FrequencyReference", "estimate_from_raster", "estimate_from_carrier", "measured_carriers",
           "SEARCH_PPM"]

#: Widest reference error searched for (ppm).
SEARCH_PPM = 100.0


@dataclass(frozen=True)
class FrequencyReference:
    """A reference-error estimate (or why there is none).

    Attributes
    ----------
    method : str
        ``"raster 8.33k"`` (etc.) or ``"reference carrier"``.
    error_ppm : float or None
        Total receiver reference error (ppm, positive: fast), the correction already applied included.
    uncertainty_ppm : float or None
        Its standard uncertainty (ppm).
    added_ppm : float or None
        The part found on top of ``base_ppm``.
    base_ppm : float
        The correction the capture was read with while the carriers were measured.
    carriers_used : tuple of dict
        Per agreeing carrier: ``index`` (the survey's emission), ``frequency_hz`` (measured), ``target_hz``
        (grid point or reference), ``error_ppm`` (its own estimate, total).
    carriers_considered : int
        Measured carrier lines looked at.
    reason : str or None
        Why there is no estimate.
    applied : bool
        Whether the survey's frequencies (and plan) use it.
    """

    method: str
    error_ppm: float | None
    uncertainty_ppm: float | None
    added_ppm: float | None
    base_ppm: float
    carriers_used: tuple[dict[str, Any], ...] = ()
    carriers_considered: int = 0
    reason: str | None = None
    applied: bool = False
    search_ppm: float = SEARCH_PPM
    extra: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """The ``frequency_reference`` section of the survey JSON."""
        out = {"method": self.method, "error_ppm": self.error_ppm, "uncertainty_ppm": self.uncertainty_ppm,
               "carriers_used": [dict(c) for c in self.carriers_used],
               "carriers_considered": self.carriers_considered, "base_ppm": self.base_ppm,
               "applied": self.applied, "search_ppm": self.search_ppm, **self.extra}
        if self.reason is not None:
            out["reason"] = self.reason
        return out


def measured_carriers(emissions: Sequence[DetectedEmission], classes: Sequence[str] | None = None
                      ) -> list[DetectedEmission]:
    """The emissions whose frequency is a measured carrier line (of ``classes``, when given)."""
    return [e for e in emissions
            if e.carrier_level_dbfs is not None and e.frequency_method.startswith("grandke") and e.mode != "dsb"
            and e.frequency_hz > 0 and (classes is None or e.emission_class in classes)]


def _carrier_u_hz(bin_hz: float) -> float:
    return bin_hz / math.sqrt(12.0)


def estimate_from_raster(emissions: Sequence[DetectedEmission], raster: Raster, *, bin_hz: float,
                         base_ppm: float = 0.0) -> FrequencyReference:
    """The reference error that puts the most measured carriers on ``raster`` (see the module notes).

    Parameters
    ----------
    emissions : sequence of DetectedEmission
        As measured (absolute frequencies, not snapped).
    raster : Raster
    bin_hz : float
        Bin width of the spectrum the carriers were refined on (Hz).
    base_ppm : float
        Correction the capture was read with.
    """
    method = f"raster {raster.name}"
    carriers = measured_carriers(emissions, raster.classes)
    if len(carriers) < 2:
        return FrequencyReference(method, None, None, None, base_ppm, carriers_considered=len(carriers),
                                  reason=f"{len(carriers)} measured {'/'.join(raster.classes)} carrier(s); "
                                         "at least two must agree")
    f = np.array([e.frequency_hz for e in carriers])
    search = min(SEARCH_PPM, raster.step_hz / 2.0 / float(f.max()) * 1e6)
    tol = np.maximum(1e-6 * f, 3.0 * bin_hz)
    candidates = []
    for fi in f:
        lo, hi = raster.index(fi * (1 - search * 1e-6)), raster.index(fi * (1 + search * 1e-6))
        for k in range(lo, hi + 1):
            e = (raster.frequency(k) / fi - 1.0) * 1e6
            if abs(e) <= search:
                candidates.append(e)
    best: tuple[int, float, float] | None = None
    for e in candidates:
        corrected = f * (1 + e * 1e-6)
        grid = np.array([raster.frequency(raster.index(c)) for c in corrected])
        resid = np.abs(corrected - grid)
        inside = resid <= tol
        key = (-int(inside.sum()), float(resid[inside].sum()), abs(e))
        if best is None or key < (best[0], best[1], abs(best[2])):
            best = (key[0], key[1], e)
    if best is None:
        return FrequencyReference(method, None, None, None, base_ppm, carriers_considered=len(carriers),
                                  search_ppm=search, reason=f"no grid point within ±{search:.3g} ppm of a carrier")
    e_best = best[2]
    corrected = f * (1 + e_best * 1e-6)
    grid = np.array([raster.frequency(raster.index(c)) for c in corrected])
    inside = np.abs(corrected - grid) <= tol
    if inside.sum() < 2:
        return FrequencyReference(method, None, None, None, base_ppm, carriers_considered=len(carriers),
                                  search_ppm=search,
                                  reason=f"no two of the {len(carriers)} measured carriers agree on one reference "
                                         f"error within ±{search:.3g} ppm")
    own = (grid[inside] / f[inside] - 1.0) * 1e6  # each agreeing carrier's own estimate
    added = float(np.median(own))
    n = int(inside.sum())
    spread = float(np.std(own, ddof=1)) * math.sqrt(math.pi / 2.0) / math.sqrt(n)
    meas = float(np.sqrt(np.mean((_carrier_u_hz(bin_hz) / f[inside]) ** 2))) * 1e6 / math.sqrt(n)
    used = tuple({"index": carriers[i].index, "frequency_hz": float(f[i]), "target_hz": float(g),
                  "error_ppm": compose_ppm(base_ppm, float(o))}
                 for i, g, o in zip(np.flatnonzero(inside), grid[inside], own))
    return FrequencyReference(method, compose_ppm(base_ppm, added), math.hypot(spread, meas), added, base_ppm,
                              used, len(carriers), search_ppm=search)


def estimate_from_carrier(emissions: Sequence[DetectedEmission], reference_hz: float, *, bin_hz: float,
                          base_ppm: float = 0.0) -> FrequencyReference:
    """The reference error from one transmitter whose true frequency ``reference_hz`` is known."""
    method = "reference carrier"
    carriers = measured_carriers(emissions)
    near = [e for e in carriers if abs(e.frequency_hz / reference_hz - 1.0) * 1e6 <= SEARCH_PPM]
    extra = {"reference_hz": float(reference_hz)}
    if not near:
        return FrequencyReference(method, None, None, None, base_ppm, carriers_considered=len(carriers),
                                  reason=f"no measured carrier line within {SEARCH_PPM:g} ppm of "
                                         f"{reference_hz:.1f} Hz", extra=extra)
    e = min(near, key=lambda c: abs(c.frequency_hz - reference_hz))
    added = (reference_hz / e.frequency_hz - 1.0) * 1e6
    u = _carrier_u_hz(bin_hz) / e.frequency_hz * 1e6
    used = ({"index": e.index, "frequency_hz": e.frequency_hz, "target_hz": float(reference_hz),
             "error_ppm": compose_ppm(base_ppm, added)},)
    return FrequencyReference(method, compose_ppm(base_ppm, added), u, added, base_ppm, used, len(carriers),
                              extra=extra)
