"""Survey analysis: noise floor, detection, grouping and measurement of emissions on the averaged spectra.

:func:`analyse_spectra` is the step :meth:`Surveyor.result <iqsift.survey.Surveyor.result>`
runs once the capture has been fed; the method and the published results it rests on
are set out in :mod:`iqsift.survey`.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.ndimage
import scipy.special

from ..emission import designator
from ..errors import IqsiftWarning, ParameterError
from ..measure import occupied_bandwidth, x_db_bandwidth
from ..spectra import Spectrum
from .formulas import floor_median_bias, grandke_offset, hann_response
from .results import DetectedEmission, SurveyResult
from .snapping import raster_rule, snap_emissions

if TYPE_CHECKING:
    from .surveyor import Surveyor

__all__ = ["DC_GUARD_BINS", "LOWEST_MODULATING_HZ", "analyse_spectra"]

#: Bins each side of 0 Hz of an IQ capture left to the DC offset.
DC_GUARD_BINS = 2
#: Lowest modulating frequency of voice (Hz): ITU-R SM.1138 J3E example (3000 - 300 Hz).
LOWEST_MODULATING_HZ = 300.0

_NREGIONS = 16
_EXTENT_DB = 1.5
_MASK_DB = 3.0
_SMOOTH_BINS = 5
_LINE_NEAR = 0.35  # near-side neighbour limit for a Hann main lobe, fraction of the peak (tone: <= 0.25)
_LINE_FAR = 0.10  # bins two away (tone: <= 0.04)
_SYMMETRIC_DB = 6.0
_ONE_SIDED_DB = 10.0
_MAX_SCALLOP = 0.848826363156775  # |W(0.5)/W(0)| of the Hann window = sinc(0.5)/0.75
_TINY = 1e-300
# Sidebands kept apart from their carrier by a gap (a tone of 1.5 kHz or more) are joined back to it
# out to this distance (Hz): the highest modulating frequency of A3E sound broadcasting, M = 5 kHz
# (ITU-R SM.1138 examples, 10K0A3E).
_SIDEBAND_REACH_HZ = 5000.0
# ... when each side is at least this far below the carrier line (dB): with at most 100 % modulation,
# A(1 + m s(t)) with |m s| <= 1 puts m^2 <s^2> / 2 <= 1/2 of the carrier power in each sideband
# (-3.01 dB; Haykin, Communication Systems, ch. 3), less a 0.5 dB allowance for the estimates ...
_SIDEBAND_BELOW_DB = 2.5
# ... and when the two sides match within this (dB): the spectrum of AM by a real message is mirrored
# about the carrier.
_MIRROR_DB = 3.0
# Channel-width floors per class (ITU-R SM.1138 telephony examples), Hz.
_MIN_CHANNEL_HZ = {"A3E": 6000.0, "H3E": 3000.0, "R3E": 3000.0, "J3E": 2700.0}


def _db(power: float) -> float:
    return 10.0 * math.log10(max(float(power), _TINY))


def _noise_floor(p: np.ndarray, usable: np.ndarray, nu: float, dilate: int) -> np.ndarray:
    """Local noise floor (linear density) for every bin, from the usable bins; see :mod:`iqsift.survey`."""
    idx = np.nonzero(usable)[0]
    nreg = max(1, min(_NREGIONS, idx.size // 32))
    chunks = [c for c in np.array_split(idx, nreg) if c.size]
    centres = np.array([float(np.mean(c)) for c in chunks])
    q = 0.25
    cq = float(2 * scipy.special.gammaincinv(nu / 2, q) / nu)  # = scipy.stats.chi2.ppf(q, nu) / nu
    cm = floor_median_bias(nu)
    first = np.array([_db(np.quantile(p[c], q) / cq) for c in chunks])
    # a region inside a wide emission reads high: pull it down to its neighbours' median
    robust = first.copy()
    for i in range(first.size):
        lo, hi = max(0, i - 2), min(first.size, i + 3)
        neighbours = np.concatenate([first[lo:i], first[i + 1 : hi]])
        if neighbours.size:
            robust[i] = min(first[i], float(np.median(neighbours)))
    grid = np.arange(p.size, dtype=np.float64)
    floor1 = 10.0 ** (np.interp(grid, centres, robust) / 10.0)
    occupied = p > floor1 * 10.0 ** (_MASK_DB / 10.0)
    if dilate > 0 and np.any(occupied):
        occupied = scipy.ndimage.binary_dilation(occupied, iterations=dilate)
    second = np.full(len(chunks), np.nan)
    for i, c in enumerate(chunks):
        free = c[~occupied[c]]
        if free.size >= max(16, c.size // 10):
            second[i] = _db(np.median(p[free]) / cm)
    good = np.isfinite(second)
    if not np.any(good):
        values = robust
    else:
        values = np.interp(centres, centres[good], second[good])
    return 10.0 ** (np.interp(grid, centres, values) / 10.0)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Inclusive (start, stop) index pairs of the True runs of a boolean array."""
    m = np.concatenate([[False], mask.astype(bool), [False]])
    d = np.diff(m.astype(np.int8))
    starts = np.nonzero(d == 1)[0]
    stops = np.nonzero(d == -1)[0] - 1
    return list(zip(starts.tolist(), stops.tolist()))


def _line_at(excess: np.ndarray, k: int, sigma: np.ndarray) -> tuple[bool, float]:
    """Is bin k the peak of a Hann main lobe (a steady tone)? Returns (is_line, Grandke offset in bins)."""
    n = excess.size
    if k < 2 or k > n - 3:
        return False, 0.0
    e = np.maximum(excess[k - 2 : k + 3], 0.0)
    if e[2] <= 0.0:
        return False, 0.0
    amp = np.sqrt(e)
    delta = grandke_offset(amp[1], amp[2], amp[3])
    allow = 3.0 * sigma[k - 2 : k + 3]
    near_other = e[1] if delta >= 0 else e[3]
    line = (
        e[0] <= _LINE_FAR * e[2] + allow[0]
        and e[4] <= _LINE_FAR * e[2] + allow[4]
        and near_other <= _LINE_NEAR * e[2] + allow[1 if delta >= 0 else 3]
    )
    return bool(line), delta


@dataclass
class _Ctx:
    f: np.ndarray  # relative bin frequencies, Hz
    p: np.ndarray  # density, linear
    excess: np.ndarray
    sigma: np.ndarray
    ratio: np.ndarray
    dc_bins: np.ndarray
    usable: np.ndarray
    spec: Spectrum
    fine: Any
    owner: np.ndarray  # index of the group whose widened band holds each bin, -1 for none
    dc_carrier: bool = False  # a carrier line at 0 Hz is measured (the DC guard is lifted)


@dataclass
class _Group:
    lo: int  # detected bins (inclusive)
    hi: int
    ext_lo: int = 0  # widened band (inclusive)
    ext_hi: int = 0
    peak: int = 0
    line: bool = False
    delta: float = 0.0


def analyse_spectra(
    sv: Surveyor, spec: Spectrum, fine: Spectrum | None, dof: float, fine_dof: float | None
) -> SurveyResult:
    """Noise floor, emissions, DC offset and false-alarm rate from a surveyor's averaged spectra.

    Parameters
    ----------
    sv : Surveyor
        Gives the settings (rate, centre, threshold, guards, raster) and the sample mean.
    spec : Spectrum
        The detection spectrum (density).
    fine : Spectrum or None
        The fine spectrum (density), when there is one.
    dof, fine_dof : float
        Equivalent degrees of freedom ν of the two averages (:func:`welch_dof`).
    """
    rate = sv.rate_hz
    centre = sv.center_hz
    f = spec.relative_freqs_hz
    p = spec.values_linear
    df = spec.bin_width_hz
    n = p.size
    nseg = spec.segments_averaged
    nu = dof

    # --- bins analysed
    lo_edge = sv.edge_guard * rate if not sv.is_complex else -(0.5 - sv.edge_guard) * rate
    hi_edge = (0.5 - sv.edge_guard) * rate
    if sv.band_hz is not None:  # a filtered baseband: nothing but filtered-away noise outside its passband
        lo_edge, hi_edge = max(lo_edge, sv.band_hz[0]), min(hi_edge, sv.band_hz[1])
    usable = (f >= lo_edge) & (f <= hi_edge)
    dc_bins = np.zeros(n, dtype=bool)
    if sv.is_complex:
        dc_bins = np.abs(f) <= DC_GUARD_BINS * df * (1.0 + 1e-9)
        usable &= ~dc_bins
    if np.count_nonzero(usable) < 8:
        raise ParameterError(
            f"survey: only {np.count_nonzero(usable)} bins to search at {df:g} Hz resolution; use a finer resolution"
        )
    dilate = max(2, int(round(LOWEST_MODULATING_HZ / df)))
    floor = _noise_floor(p, usable, nu, dilate)
    excess = p - floor
    sigma = floor * math.sqrt(2.0 / nu)  # std of an averaged noise bin

    # --- detection statistic, scalloping-corrected at line-shaped local maxima
    thr = 10.0 ** (sv.threshold_db / 10.0)
    ratio = p / floor
    cand = np.zeros(n, dtype=bool)
    cand[1:-1] = (p[1:-1] >= p[:-2]) & (p[1:-1] >= p[2:])
    cand &= usable & (ratio >= thr * _MAX_SCALLOP**2)
    for k in np.nonzero(cand)[0].tolist():
        line, delta = _line_at(excess, k, sigma)
        if line:
            ratio[k] = 1.0 + excess[k] / hann_response(delta) ** 2 / floor[k]
    detected = usable & (ratio >= thr)

    # --- groups
    gap_bins = int(math.floor(sv.merge_gap_hz / df))
    groups: list[_Group] = []
    for a, b in _runs(detected):
        if groups and a - groups[-1].hi - 1 <= gap_bins:
            groups[-1].hi = b
        else:
            groups.append(_Group(a, b))
    smooth = scipy.ndimage.uniform_filter1d(p, _SMOOTH_BINS, mode="nearest")
    # widening level: 1.5 dB, or 6 standard deviations of the smoothed noise if that is more
    extent = max(10.0 ** (_EXTENT_DB / 10.0), 1.0 + 6.0 * math.sqrt(2.0 / nu) / math.sqrt(_SMOOTH_BINS))
    passable = ((smooth >= floor * extent) & usable) | (dc_bins & (f >= lo_edge) & (f <= hi_edge))
    passable |= detected
    labels, _ = scipy.ndimage.label(passable)
    widened: list[_Group] = []
    for g in groups:
        run_ids = np.unique(labels[g.lo : g.hi + 1])
        run_ids = run_ids[run_ids > 0]
        members = np.nonzero(np.isin(labels, run_ids))[0]
        g.ext_lo = min(g.lo, int(members.min()))
        g.ext_hi = max(g.hi, int(members.max()))
        if widened and g.ext_lo <= widened[-1].ext_hi + 1:  # touching or overlapping: one band
            last = widened[-1]
            last.hi, last.ext_hi = max(last.hi, g.hi), max(last.ext_hi, g.ext_hi)
        else:
            widened.append(g)
    dc_line = _dc_line(excess, ratio, thr, sigma, dc_bins) if sv.is_complex else None
    split_dc = dc_bins.copy()  # a line at DC may be a carrier: its sideband lines must not split the band
    if dc_line is not None:
        split_dc[dc_line[0]] = False
    groups = [part for g in widened for part in _split_carriers(g, excess, ratio, thr, sigma, split_dc)]
    dc_group = _dc_line_group(groups, dc_line, dc_bins) if dc_line is not None else None
    groups = _join_sidebands(groups, excess, int(math.ceil(_SIDEBAND_REACH_HZ / df)))
    dc_carrier = _accept_dc_carrier(groups, dc_group, excess, sigma, dc_bins) if dc_group is not None else None
    # a carrier at 0 Hz (a baseband centred on its channel) is measured like any other: its
    # band is no longer left to the DC offset
    measure_dc = dc_bins.copy()
    measure_usable = usable.copy()
    if dc_carrier is not None:
        span = np.zeros(n, dtype=bool)
        span[groups[dc_carrier].ext_lo : groups[dc_carrier].ext_hi + 1] = True
        measure_dc &= ~span
        measure_usable |= dc_bins & span

    # --- measure each group
    fine_data = None
    if fine is not None and fine_dof is not None:
        ff = fine.relative_freqs_hz
        pf = fine.values_linear
        floor_f = 10.0 ** (np.interp(ff, f, 10.0 * np.log10(floor)) / 10.0)
        fine_data = (ff, pf, floor_f, fine.bin_width_hz, fine.enbw_hz, math.sqrt(2.0 / fine_dof))
    owner = np.full(n, -1, dtype=np.int64)
    for i, g in enumerate(groups):
        owner[g.ext_lo : g.ext_hi + 1] = i
    ctx = _Ctx(f, p, excess, sigma, ratio, measure_dc, measure_usable, spec, fine_data, owner, dc_carrier is not None)
    emissions = [_measure(sv, g, ctx, i) for i, g in enumerate(groups, start=1)]
    if sv.raster is not None:
        emissions = snap_emissions(emissions, sv.raster, stacklevel=3)

    # --- DC offset (IQ only)
    dc = None
    if sv.is_complex:
        mean = sv.sample_mean
        k0 = int(np.argmin(np.abs(f)))
        spike = _db(p[k0] / floor[k0])
        lo_dc = float(f[dc_bins].min()) if np.any(dc_bins) else 0.0
        hi_dc = float(f[dc_bins].max()) if np.any(dc_bins) else 0.0
        shift = centre or 0.0
        dc = {
            "i": float(mean.real),
            "q": float(mean.imag),
            "level_dbfs": _db(abs(mean) ** 2),
            "spike_above_floor_db": spike,
            "visible": bool(spike >= sv.threshold_db),
            "excluded_hz": [lo_dc + shift, hi_dc + shift],
            "carrier_emission": None if dc_carrier is None else dc_carrier + 1,
        }

    # --- false alarms
    searched = int(np.count_nonzero(usable))
    pfa = float(scipy.special.chdtrc(nu, nu * thr * _MAX_SCALLOP**2))  # = scipy.stats.chi2.sf(x, nu)
    expected = pfa * searched
    if expected > 0.01:
        warnings.warn(
            f"survey: only {nseg} averages (nu = {nu:.1f}); up to {expected:.2g} false detections expected from noise "
            f"at {sv.threshold_db:g} dB; use a longer capture, a coarser resolution or a higher threshold",
            IqsiftWarning,
            stacklevel=3,
        )
    floor_db = 10.0 * np.log10(np.maximum(floor, _TINY))
    shift = centre or 0.0
    band = (float(f[usable].min()) + shift, float(f[usable].max()) + shift)
    return SurveyResult(
        emissions=emissions,
        noise_floor_dbfs_per_hz=float(np.median(floor_db[usable])),
        floor_db=floor_db,
        spectrum=spec,
        fine_spectrum=fine,
        dc_offset=dc,
        threshold_db=sv.threshold_db,
        dof=float(nu),
        false_alarm_per_bin=pfa,
        expected_false_detections=float(expected),
        band_hz=band,
        center_hz=centre,
        sample_rate_hz=rate,
        is_complex=sv.is_complex,
        samples=sv.samples_fed,
        raster=sv.raster.name if sv.raster is not None else None,
        floor_range_dbfs_per_hz=(float(floor_db[usable].min()), float(floor_db[usable].max())),
        raster_rule=raster_rule(sv.raster) if sv.raster is not None else None,
    )


def _split_carriers(
    g: _Group,
    excess: np.ndarray,
    ratio: np.ndarray,
    thr: float,
    sigma: np.ndarray,
    dc_bins: np.ndarray,
) -> list[_Group]:
    """Split a group that holds several carriers (adjacent AM channels whose sidebands touch).

    Carriers are the detected, line-shaped local maxima that are not the sideband
    lines of a tone-modulated AM signal: a line is taken for a sideband when a line at
    least 5.5 dB stronger sits halfway between it and another line within 3 dB of it
    (single-tone AM sidebands are symmetric and at most −6.02 dBc, Haykin).
    """
    lo, hi = max(g.ext_lo, 2), min(g.ext_hi, excess.size - 3)
    if hi - lo < 4:
        return [g]
    k = np.arange(lo, hi + 1)
    local = (excess[k] >= excess[k - 1]) & (excess[k] >= excess[k + 1]) & (ratio[k] >= thr) & ~dc_bins[k]
    lines: list[tuple[int, float, float]] = []  # (bin, position in bins, corrected power)
    for kk in k[local].tolist():
        is_line, delta = _line_at(excess, kk, sigma)
        if is_line:
            lines.append((kk, kk + delta, excess[kk] / hann_response(delta) ** 2))
    if len(lines) < 2:
        return [_with_peak(g, excess, sigma, dc_bins)]
    carriers = []
    for i, (kk, pos, power) in enumerate(lines):
        sideband = False
        for j, (_, pos_l, power_l) in enumerate(lines):
            if j == i or power_l < power * 10.0 ** 0.55:
                continue
            mirror = 2.0 * pos_l - pos
            for m, (_, pos_m, power_m) in enumerate(lines):
                if m not in (i, j) and abs(pos_m - mirror) <= 1.5 and abs(_db(power_m) - _db(power)) <= 3.0:
                    sideband = True
                    break
            if sideband:
                break
        if not sideband:
            carriers.append((kk, pos))
    if len(carriers) < 2:
        return [_with_peak(g, excess, sigma, dc_bins)]
    parts: list[_Group] = []
    start = g.ext_lo
    for (k1, p1), (k2, p2) in zip(carriers[:-1], carriers[1:]):
        if k2 - k1 < 3:
            continue
        cut = int(math.floor(0.5 * (p1 + p2)))  # halfway between the carriers
        parts.append(_Group(start, cut, start, cut))
        start = cut + 1
    parts.append(_Group(start, g.ext_hi, start, g.ext_hi))
    return [_with_peak(part, excess, sigma, dc_bins) for part in parts]


def _join_sidebands(groups: list[_Group], excess: np.ndarray, reach_bins: int) -> list[_Group]:
    """Join to each carrier line the separate groups that are its sidebands.

    A tone of 1.5 kHz or more leaves its sideband lines more than ``merge_gap_hz`` from the carrier,
    with only noise between, so they are detected as groups of their own. Starting from the strongest
    carrier line, the groups nearest to it on either side (out to 5 kHz, nothing unjoined in between)
    are taken for its sidebands when the spectrum mirrored about the carrier holds the same power within
    3 dB (AM by a real message has a spectrum mirrored about its carrier) and each side is at least
    2.5 dB below the carrier line (at most 100 % modulation puts at most half the carrier power in a
    sideband). A group in the mirrored span is joined too; a one-sided neighbour (an SSB signal, a
    DSB-SC one centred elsewhere) has no mirror image and stays its own emission.
    """
    if len(groups) < 2:
        return groups
    alive = [True] * len(groups)
    carriers = sorted((i for i, g in enumerate(groups) if g.line),
                      key=lambda i: -float(excess[groups[i].peak]))
    for i in carriers:
        if not alive[i]:
            continue
        g = groups[i]
        pos = g.peak + g.delta
        carrier = float(np.sum(np.maximum(excess[max(0, g.peak - 2) : g.peak + 3], 0.0)))
        joined = True
        while joined:
            joined = False
            # the nearest unjoined group on each side; the sidebands are what lies next to the carrier
            nearest = [j for j in (_next_alive(alive, i, -1), _next_alive(alive, i, +1)) if j is not None]
            for j in sorted(nearest, key=lambda j: abs(0.5 * (groups[j].ext_lo + groups[j].ext_hi) - pos)):
                mirror = _mirror_partners(groups, alive, i, j, excess, carrier, reach_bins)
                if mirror is None:
                    continue
                for m in (j, *mirror):
                    h = groups[m]
                    g.lo, g.hi = min(g.lo, h.lo), max(g.hi, h.hi)
                    g.ext_lo, g.ext_hi = min(g.ext_lo, h.ext_lo), max(g.ext_hi, h.ext_hi)
                    alive[m] = False
                # the band is the carrier's: the mirrored span of a sideband is part of it
                span = max(pos - g.ext_lo, g.ext_hi - pos)
                g.ext_lo = max(0, int(math.floor(pos - span)))
                g.ext_hi = min(excess.size - 1, int(math.ceil(pos + span)))
                joined = True
                break
    return [g for g, keep in zip(groups, alive) if keep]


def _dc_line(
    excess: np.ndarray, ratio: np.ndarray, thr: float, sigma: np.ndarray, dc_bins: np.ndarray
) -> tuple[int, float] | None:
    """A line in the DC bins of an IQ capture that may be a carrier: (bin, Grandke offset), or None.

    A baseband centred on its channel (``iqsift demod --baseband`` writes one) has its carrier
    within the bins left to the receiver's DC offset. The strongest DC bin is offered when it is
    shaped like a Hann main lobe and, scalloping-corrected as for detection (its ``ratio`` is
    corrected in place), above the threshold; :func:`_accept_dc_carrier` keeps it only if AM
    sidebands are mirrored about it.
    """
    k_dc = np.nonzero(dc_bins)[0]
    if k_dc.size == 0:
        return None
    k = int(k_dc[np.argmax(excess[k_dc])])
    line, delta = _line_at(excess, k, sigma)
    if not line or ratio[k] <= 1.0:
        return None
    floor_k = excess[k] / (ratio[k] - 1.0)  # ratio = p / floor and excess = p - floor
    ratio[k] = 1.0 + excess[k] / hann_response(delta) ** 2 / floor_k
    return (k, delta) if ratio[k] >= thr else None


def _dc_line_group(groups: list[_Group], dc_line: tuple[int, float], dc_bins: np.ndarray) -> int:
    """Index of the group that takes the DC line as its peak (one is made when none holds it)."""
    k, delta = dc_line
    k_dc = np.nonzero(dc_bins)[0]
    for i, g in enumerate(groups):
        if g.ext_lo <= k <= g.ext_hi:
            g.peak, g.line, g.delta = k, True, delta
            return i
    at = sum(1 for g in groups if g.ext_hi < k)
    lo, hi = int(k_dc[0]), int(k_dc[-1])
    groups.insert(at, _Group(lo, hi, lo, hi, k, True, delta))
    return at


def _accept_dc_carrier(
    groups: list[_Group], dc_line: int, excess: np.ndarray, sigma: np.ndarray, dc_bins: np.ndarray
) -> int | None:
    """Index of the group whose carrier is the DC line, or None (the line is left to the DC offset).

    Accepted when there is sideband power above the noise on both sides of the line, the two sides
    within ±6 dB of each other (the class rule for A3E) and each at least 2.5 dB below the line (at most
    100 % modulation). Otherwise the group falls back to its strongest bin outside the DC guard, or is
    dropped when it held nothing but the line.
    """
    k = -1
    for i, g in enumerate(groups):  # the group holding the line after sidebands were joined
        if g.line and dc_bins[g.peak]:
            dc_line, k = i, g.peak
    g = groups[dc_line]
    if k >= 0:
        lower = np.arange(g.ext_lo, max(g.ext_lo, k - 2))
        upper = np.arange(k + 3, g.ext_hi + 1)
        line = float(np.sum(np.maximum(excess[max(0, k - 2) : k + 3], 0.0)))
        sides = [float(np.sum(excess[b])) for b in (lower, upper)]
        noise = [5.0 * 1.5 * float(np.sqrt(np.sum(sigma[b] ** 2))) for b in (lower, upper)]
        if (
            lower.size and upper.size and all(sd > nz for sd, nz in zip(sides, noise))
            and abs(_db(sides[1]) - _db(sides[0])) <= _SYMMETRIC_DB
            and max(sides) <= line * 10.0 ** (-_SIDEBAND_BELOW_DB / 10.0)
        ):
            return dc_line
    if np.all(dc_bins[g.ext_lo : g.ext_hi + 1]):
        del groups[dc_line]
    else:
        _with_peak(g, excess, sigma, dc_bins)
    return None


def _next_alive(alive: list[bool], i: int, step: int) -> int | None:
    """Index of the next group still on its own from group i in one direction, or None."""
    j = i + step
    while 0 <= j < len(alive) and not alive[j]:
        j += step
    return j if 0 <= j < len(alive) else None


def _mirror_partners(
    groups: list[_Group], alive: list[bool], i: int, j: int, excess: np.ndarray, carrier: float, reach_bins: int
) -> tuple[int, ...] | None:
    """The groups lying in the mirror image of group j about carrier group i, if j is i's sideband; else None."""
    g, h = groups[i], groups[j]
    pos = g.peak + g.delta
    if max(abs(h.ext_lo - pos), abs(h.ext_hi - pos)) > reach_bins:
        return None
    lo = int(math.floor(2.0 * pos - h.ext_hi))
    hi = int(math.ceil(2.0 * pos - h.ext_lo))
    if lo < 0 or hi >= excess.size:
        return None
    side = float(np.sum(excess[h.ext_lo : h.ext_hi + 1]))
    image = float(np.sum(excess[lo : hi + 1]))
    if side <= 0.0 or image <= 0.0 or abs(_db(side) - _db(image)) > _MIRROR_DB:
        return None
    if max(side, image) > carrier * 10.0 ** (-_SIDEBAND_BELOW_DB / 10.0):
        return None
    # groups in the image must be images themselves (lie inside it, give or take the window's spread)
    slack = 3 + int(0.1 * (hi - lo))
    partners = []
    for m, other in enumerate(groups):
        if m in (i, j) or not alive[m] or other.ext_hi < lo or other.ext_lo > hi:
            continue
        if other.ext_lo < lo - slack or other.ext_hi > hi + slack:
            return None
        partners.append(m)
    return tuple(partners)


def _with_peak(g: _Group, excess: np.ndarray, sigma: np.ndarray, dc_bins: np.ndarray) -> _Group:
    """Set the group's strongest bin and whether it is a carrier line."""
    inband = np.arange(g.ext_lo, g.ext_hi + 1)
    if np.any(~dc_bins[inband]):
        inband = inband[~dc_bins[inband]]
    g.peak = int(inband[np.argmax(excess[inband])])
    g.line, g.delta = _line_at(excess, g.peak, sigma)
    return g


def _round_up(value: float, step: float) -> float:
    return float(math.ceil(value / step - 1e-9) * step)


_AM_WIDTHS_HZ = (6000.0, 8000.0, 9000.0, 10000.0, 12000.0, 16000.0, 20000.0)
"""Usual double-sideband telephony/broadcast necessary bandwidths (6K00A3E voice; 8K00-10K0A3E sound
broadcasting, ITU-R SM.1138 with M = 4-5 kHz; wider ones for completeness), common practice."""


def _channel_width(cls: str, needed_hz: float) -> float:
    if cls == "A3E":
        # the measured extent carries some spread (window leakage, filter skirts): 5 % grace before the
        # next usual width
        for width in _AM_WIDTHS_HZ:
            if needed_hz <= 1.05 * width:
                return width
        return _round_up(needed_hz, 1000.0)
    return max(_MIN_CHANNEL_HZ[cls], _round_up(max(needed_hz, 1.0), 100.0))


def _measure(sv: Surveyor, g: _Group, ctx: _Ctx, index: int) -> DetectedEmission:
    f, p, excess, dc_bins, spec = ctx.f, ctx.p, ctx.excess, ctx.dc_bins, ctx.spec
    fine_data, ratio = ctx.fine, ctx.ratio
    df = spec.bin_width_hz
    n = p.size
    a, b = g.ext_lo, g.ext_hi
    band = np.arange(a, b + 1)
    keep = ~dc_bins[band]
    k0 = g.peak
    # level: noise-subtracted density (an unbiased estimate, so bins of pure noise add nothing on
    # average) summed over the band and, for a carrier, 3 kHz each side (weak sidebands under the
    # widening level); DC bins and other emissions' bins left out
    reach = max(k0 - a, b - k0, int(math.ceil(3000.0 / df)))
    around = np.arange(max(0, k0 - reach), min(n, k0 + reach + 1))
    around = around[ctx.usable[around] & ((ctx.owner[around] == index - 1) | (ctx.owner[around] < 0))]
    level_bins = np.union1d(band[keep], around) if g.line else band[keep]
    level = _db(float(np.sum(excess[level_bins])) * df)
    peak_dbfs = _db(p[k0] * spec.enbw_hz)
    above = _db(max(ratio[k0], _TINY))

    # occupied bandwidth on the clipped, noise-subtracted spectrum (2 bins margin), on the
    # fine spectrum when there is one (its main lobe smears band edges 8 times less);
    # x-dB bandwidth on the detection spectrum
    m_lo, m_hi = max(0, a - 2), min(n - 1, b + 2)
    sel = np.arange(m_lo, m_hi + 1)
    pos = np.where(dc_bins[sel], 0.0, np.maximum(excess[sel], 0.0))
    occ, occ_lo, occ_hi = occupied_bandwidth(f[sel], pos)
    if fine_data is not None:
        ff, pf, floor_f = fine_data[:3]
        dc_hz = DC_GUARD_BINS * df * (1.0 + 1e-9) if sv.is_complex and not ctx.dc_carrier else -1.0
        sel_f = np.nonzero((ff >= f[m_lo] - 0.5 * df) & (ff <= f[m_hi] + 0.5 * df))[0]
        pos_f = np.where(np.abs(ff[sel_f]) <= dc_hz, 0.0, np.maximum(pf[sel_f] - floor_f[sel_f], 0.0))
        if sel_f.size >= 2 and np.any(pos_f > 0):
            occ, occ_lo, occ_hi = occupied_bandwidth(ff[sel_f], pos_f)
    xdb, _, _ = x_db_bandwidth(f[sel], pos, 26.0)

    # carrier line: refine on the fine spectrum (Grandke), else on the detection spectrum
    carrier_rel = None
    carrier_level = None
    method = ""
    if g.line:
        coarse_hz = float(f[k0] + g.delta * df)
        carrier_rel = coarse_hz
        method = "grandke-coarse"
        carrier_level = _db(excess[k0] * spec.enbw_hz / hann_response(g.delta) ** 2)
        if fine_data is not None:
            ff, pf, floor_f, dff, enbw_f, rel_sigma = fine_data
            j_sel = np.nonzero(np.abs(ff - coarse_hz) <= df)[0]
            if j_sel.size >= 3:
                j = int(j_sel[np.argmax(pf[j_sel])])
                if 0 < j < pf.size - 1:
                    e = np.maximum(pf[j - 1 : j + 2] - floor_f[j - 1 : j + 2], 0.0)
                    if e[1] > 10.0 * rel_sigma * floor_f[j]:
                        amp = np.sqrt(e)
                        delta = grandke_offset(amp[0], amp[1], amp[2])
                        refined = float(ff[j] + delta * dff)
                        if abs(refined - coarse_hz) <= 0.75 * df:
                            carrier_rel = refined
                            method = "grandke-fine"
                            carrier_level = _db(e[1] * enbw_f / hann_response(delta) ** 2)

    # sideband powers around the line (noise-subtracted), and their noise
    cls, sideband, mode, confidence, note = "A3E", None, "envelope", "high", ""
    if g.line:
        # sidebands: at least 3 kHz (voice, SM.1138 M) each side of the line, or the widened band
        # if wider, in bins searched and not claimed by another emission
        lower = around[around <= k0 - 3]
        upper = around[around >= k0 + 3]
        s_l = float(np.sum(excess[lower])) if lower.size else 0.0
        s_u = float(np.sum(excess[upper])) if upper.size else 0.0
        # 5 standard deviations of a sum of noise bins (adjacent Hann bins are correlated: x1.5)
        n_l = 5.0 * 1.5 * float(np.sqrt(np.sum(ctx.sigma[lower] ** 2))) if lower.size else 0.0
        n_u = 5.0 * 1.5 * float(np.sqrt(np.sum(ctx.sigma[upper] ** 2))) if upper.size else 0.0
        line_power = float(np.sum(np.maximum(excess[max(0, k0 - 2) : k0 + 3], 0.0)))
        total = max(line_power + max(s_l, 0.0) + max(s_u, 0.0), _TINY)
        seen_l, seen_u = s_l > n_l and lower.size > 0, s_u > n_u and upper.size > 0
        if not (seen_l or seen_u):
            confidence, note = "low", "carrier line only: no sideband power above the noise"
        else:
            ratio_db = _db(max(s_u, n_u / 5.0, _TINY)) - _db(max(s_l, n_l / 5.0, _TINY))
            if abs(ratio_db) <= _SYMMETRIC_DB:
                note = f"carrier line with sidebands on both sides ({ratio_db:+.1f} dB upper/lower)"
            elif abs(ratio_db) >= _ONE_SIDED_DB:
                sideband = "usb" if ratio_db > 0 else "lsb"
                cls = "H3E" if line_power / total >= 0.2 else "R3E"
                mode = sideband
                note = f"carrier line with one sideband ({ratio_db:+.1f} dB upper/lower)"
            else:
                confidence = "low"
                note = f"carrier line, sidebands unequal ({ratio_db:+.1f} dB upper/lower)"
        assert carrier_rel is not None
        freq_rel = carrier_rel
        # the 99 % band of voice AM hugs the carrier (the carrier holds nearly all the power), so the
        # channel is sized from the detected band's extent instead (its sidebands above the noise), less
        # the window's spread of about two bins on each side
        reach_hz = max(carrier_rel - f[g.ext_lo], f[g.ext_hi] - carrier_rel, 0.0) - 2.0 * df
        reach_hz = max(reach_hz, carrier_rel - occ_lo, occ_hi - carrier_rel, 0.0)
        needed = 2.0 * reach_hz if cls == "A3E" else reach_hz
    else:
        carrier_level = None
        width = max(occ_hi - occ_lo, df)
        mid = 0.5 * (occ_lo + occ_hi)
        occ_bins = band[(f[band] >= occ_lo) & (f[band] <= occ_hi) & keep]
        w = np.maximum(excess[occ_bins], 0.0)
        hole = occ_bins[np.abs(f[occ_bins] - mid) <= max(0.04 * width, 1.01 * df)]
        low_half = occ_bins[f[occ_bins] < mid]
        high_half = occ_bins[f[occ_bins] > mid]
        mean_all = float(np.mean(w)) if w.size else 0.0
        mean_hole = float(np.mean(np.maximum(excess[hole], 0.0))) if hole.size else mean_all
        halves_db = _db(max(float(np.sum(np.maximum(excess[high_half], 0.0))), _TINY)) - _db(
            max(float(np.sum(np.maximum(excess[low_half], 0.0))), _TINY)
        )
        centroid = float(np.sum(w * f[occ_bins]) / np.sum(w)) if np.sum(w) > 0 else mid
        position = (centroid - occ_lo) / width
        if hole.size and mean_hole < 0.25 * mean_all and abs(halves_db) <= 3.0 and width > 4 * LOWEST_MODULATING_HZ:
            cls, mode, confidence = "A3E", "dsb", "low"
            method = "band-centre"
            freq_rel = mid
            needed = width
            note = "no carrier line; symmetric sidebands with a gap in the middle (suppressed-carrier DSB)"
        else:
            cls = "J3E"
            method = "sideband-edge"
            if position < 0.45:
                sideband = "usb"
            elif position > 0.55:
                sideband = "lsb"
            else:
                sideband, confidence = "usb", "low"
            mode = sideband
            if sideband == "usb":
                freq_rel = occ_lo - LOWEST_MODULATING_HZ
            else:
                freq_rel = occ_hi + LOWEST_MODULATING_HZ
            needed = width
            note = (
                f"no carrier line; power centroid at {100 * position:.0f} % of the band "
                f"(speech tilt: {'upper' if sideband == 'usb' else 'lower'} sideband"
                f"{', unsure' if confidence == 'low' else ''}); carrier assumed "
                f"{LOWEST_MODULATING_HZ:g} Hz outside the band"
            )
    searched = np.nonzero(ctx.usable)[0]
    if g.ext_lo <= searched[0] or g.ext_hi >= searched[-1]:
        note += "; at the edge of the analysed band (may be cut off)"

    bandwidth = _channel_width(cls, needed)
    shift = sv.center_hz or 0.0
    freq_abs = freq_rel + shift
    return DetectedEmission(
        index=index,
        frequency_hz=float(freq_abs),
        offset_hz=float(freq_rel),
        frequency_method=method,
        emission_class=cls,
        sideband=sideband,
        mode=mode,
        confidence=confidence,
        note=note,
        level_dbfs=level,
        peak_dbfs=peak_dbfs,
        peak_above_floor_db=above,
        carrier_level_dbfs=carrier_level,
        band_lo_hz=float(f[a] + shift),
        band_hi_hz=float(f[b] + shift),
        occupied_hz=float(occ),
        occupied_lo_hz=float(occ_lo + shift),
        occupied_hi_hz=float(occ_hi + shift),
        x_db_hz=float(xdb),
        bandwidth_hz=bandwidth,
        designator=designator(bandwidth, cls),
    )
