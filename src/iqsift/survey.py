"""Survey a capture: find the emissions in it, measure them, and propose a channel plan.

One streaming pass over the capture feeds two Welch accumulators
(:class:`~iqsift.spectra.WelchAccumulator`, Hann window, 50 % overlap):

* a *detection* spectrum with bins of about 60 Hz (``nperseg`` the power of two
  nearest to ``rate / 60 Hz``, fewer points when the capture is too short for 16
  averages; ``resolution_hz`` sets it explicitly), averaged over the whole
  capture so the noise in each bin is small;
* a *fine* spectrum, 8 times longer segments (about 7.5 Hz bins, at least 4
  averages), used only to refine carrier frequencies and levels.

Everything else happens on the averaged spectra when :meth:`Surveyor.result` is
called.

Noise floor
    The averaged periodogram of Gaussian noise is, bin by bin, a scaled
    chi-square variable with ν equivalent degrees of freedom. For K segments of
    window w overlapping by a step s, ν = 2K / (1 + 2 Σ_{m≥1} (1 − m/K)·ρ(m)²)
    with ρ(m) = Σ w[n]·w[n+m·s] / Σ w² (P. D. Welch, IEEE Trans. AU-15, 1967;
    D. B. Percival & A. T. Walden, *Spectral Analysis for Physical
    Applications*, 1993, equivalent degrees of freedom of the WOSA estimator).
    For the Hann window at 50 % overlap ρ(1) = 1/6 (harris 1978's "overlap
    correlation" of 16.7 %), so ν ≈ 1.9·K. The band is cut into 16 regions
    (so a sloped floor is followed); in each, a first estimate is the lower
    quartile of the bins, divided by the lower quartile of χ²_ν/ν, and a region
    that reads above the median of its four neighbours is pulled down to it (an
    emission that fills a region cannot lift the floor there). Bins more than
    3 dB above that first floor, widened by about 300 Hz each side, are then
    masked and each region's floor is the *median* of the remaining bins divided
    by the median of χ²_ν/ν (``scipy.stats.chi2.median(ν)/ν``): the median of a
    chi-square average lies below its mean, by 1.59 dB for one periodogram
    (ν = 2, median/mean = ln 2) and by about 10·log10((1 − 2/(9ν))³) dB for
    larger ν (Wilson-Hilferty; 0.04 dB at ν = 100). Region values are joined by
    straight lines in dB.

Detection
    A bin is detected when its level is ``threshold_db`` (default 10 dB) or more
    above the local floor. The false-alarm probability per noise bin is
    P(χ²_ν/ν > 10^((threshold − 1.43 dB)/10)) (the 1.43 dB allow for the
    scalloping correction below, so this is an upper bound: the correction
    applies only to peaks shaped like a tone); it is reported with the expected
    number of false detections over the band, and a warning is given when that exceeds
    0.01 (too few averages: give a longer capture or coarser resolution). At
    ν ≈ 240 (about 1 s at 1 MS/s) and 10 dB it is below 1e-200.

    A steady carrier that falls between two bins reads up to 1.42 dB low in the
    Hann spectrum (scalloping loss, harris 1978). At every local maximum whose
    shape is that of a Hann main lobe (the bins two away are below a tenth of
    the peak, allowing three standard deviations of noise) the peak is
    corrected for it, using the offset from Grandke's interpolation (below), so
    that a tone whose on-bin reading would be ``threshold_db`` above the floor
    is detected wherever it falls.

    The bins within ±2 bins of 0 Hz of a complex (IQ) capture are left out:
    that is where a receiver's DC offset shows. It is measured from the mean of
    the samples and reported under ``dc_offset``, never as an emission. The
    outer 5 % of the band at each edge (``edge_guard``; the anti-alias filter's
    roll-off) is left out as well; for a real capture that also removes 0 Hz.

Grouping
    Runs of detected bins closer than ``merge_gap_hz`` (1 kHz) become one
    emission, so an AM carrier and its sidebands (voice starts about 300 Hz from
    the carrier) belong together. Each emission is then widened while the
    5-bin moving average of the spectrum stays above the floor, to catch
    the weak skirts of its modulation (1.5 dB, or six standard deviations of
    the smoothed noise when there are few averages). An emission holding several carrier
    lines (adjacent AM channels whose sidebands touch, e.g. broadcast on a
    9 kHz raster) is split halfway between them; the sideband
    lines of a tone-modulated AM signal are recognised (a pair mirrored about
    a line at least 5.5 dB stronger, within 3 dB of each other: single-tone
    AM sidebands are symmetric and at most −6.02 dBc, Haykin) and do not
    split it. Widened emissions that touch are first joined, then split
    between their carriers as above, so sideband patches go with the carrier
    on their side.

Per emission
    ``level_dbfs``: total power, the noise-subtracted density summed over the
    widened band and, for an emission with a carrier line, 3 kHz each side of
    it (sidebands too weak to widen the band still count). ``peak_dbfs``: the strongest bin, power per bin (spectrum
    scaling). Occupied bandwidth: 99 % power (ITU Radio Regulations No. 1.153,
    ITU-R SM.328) of the noise-subtracted spectrum, with
    :func:`iqsift.measure.occupied_bandwidth`, on the fine spectrum when there
    is one (band edges smeared by ±15 Hz instead of ±120 Hz); also the 26 dB
    bandwidth on the detection spectrum (:func:`iqsift.measure.x_db_bandwidth`).

    Carrier frequency: the strongest line of the emission, refined on the fine
    spectrum by Grandke's interpolation for the Hann window: with A0 the
    noise-subtracted amplitude of the peak bin and A1 that of its larger
    neighbour, α = A1/A0 and the offset from the peak bin is
    δ = (2α − 1)/(α + 1) bins, towards that neighbour (T. Grandke,
    "Interpolation algorithms for discrete Fourier transforms of weighted
    signals", IEEE Trans. IM-32(2), 1983). It is exact for one steady tone
    without noise, because the Hann kernel satisfies
    |W(1 − δ)|/|W(δ)| = (1 + δ)/(2 − δ). The carrier level is the peak bin
    corrected by the Hann response |W(δ)/W(0)| = sinc(δ)/(1 − δ²).

Class guess (a guess from the averaged spectrum, with a ``confidence``)
    Sideband power is the noise-subtracted density summed from 3 bins off the
    line out to 3 kHz (or the widened band, if wider) on each side, and counts
    as present above five standard deviations of such a sum of noise bins.

    * A carrier line with sideband power on both sides within ±6 dB of each
      other: ``A3E`` (double sideband, full carrier), mode ``envelope``.
    * A carrier line and no sideband power measurable above the noise: ``A3E``
      with low confidence (an AM carrier during a pause looks like this; an
      unmodulated carrier N0N cannot be told from it by its spectrum).
    * A carrier line with the sideband power on one side more than 10 dB above
      the other: ``H3E`` (single sideband, full carrier) when the line holds at
      least a fifth of the power, else ``R3E`` (reduced carrier); ``sideband``
      ``"usb"`` or ``"lsb"``.
    * Sidebands unequal by 6 to 10 dB: ``A3E``, low confidence.
    * No carrier line, a gap in the middle of the band (less than a quarter of
      the average density over its middle 8 %) and halves within ±3 dB:
      double sideband with suppressed carrier, written ``A3E`` (the Radio
      Regulations give DSB-SC the same first symbol), mode ``dsb``; the carrier
      is taken at the centre of the occupied band.
    * Otherwise, no line: ``J3E`` (suppressed carrier single sideband). Which
      sideband follows from the tilt of the spectrum: speech has most of its
      power at low audio frequencies (the long-term average speech spectrum
      peaks near 500 Hz and falls above it: D. Byrne et al., J. Acoust. Soc.
      Am. 96(4), 1994), so the power centroid lies nearer the suppressed
      carrier: in the lower 45 % of the occupied band → ``usb``, upper 45 % →
      ``lsb``; in between, ``usb`` with low confidence (the usual choice above
      10 MHz and in aeronautical HF, common practice). The suppressed carrier
      is placed 300 Hz (the lowest modulating frequency of ITU-R SM.1138's J3E
      example, and the audio low edge iqsift's ``usb``/``lsb`` channels use)
      below the lower edge of the occupied band for ``usb`` (above the upper
      edge for ``lsb``). This frequency is an estimate good to about a bin plus
      1 % of the width, not a measurement of a carrier.

Channel bandwidth (``bandwidth_hz``, used in the designator and the plan)
    The measured width needed around the carrier, rounded up (to 100 Hz for
    single sideband, 500 Hz for double sideband up to 20 kHz, else 1 kHz), and
    never less than ITU-R SM.1138's telephony value for the class: A3E 6 kHz
    (2M, M = 3 kHz), H3E/R3E 3 kHz (M), J3E 2.7 kHz (M − 300 Hz). A weak AM
    signal whose sidebands are under the noise thus still gets a voice channel.

Rasters (``raster``)
    ``25k``, ``8.33k``, ``9k``, ``10k`` (:func:`iqsift.rasters.parse_raster`):
    each carrier is snapped to the nearest grid point (``raster.frequency_hz``,
    ``raster.error_hz`` = measured − grid) and, for the aeronautical rasters,
    named by ICAO Annex 10 (:func:`iqsift.rasters.aero_channel_name`, e.g.
    ``"127.355"``). A raster needs absolute frequencies, so the capture's
    centre must be known.

Known limits
    Emissions whose spectra touch without a carrier line in both (two adjacent
    SSB signals, or an SSB signal next to an AM one) are reported as one. A
    carrier within ±2 bins of the centre
    of an IQ capture is taken for the DC offset, and a DC offset that drifts
    during the capture spreads beyond ±2 bins and may show as a narrow emission
    beside 0 Hz. Frequencies of suppressed
    carriers are conventions (see above). Bursty emissions are averaged over
    the whole capture, so a short burst reads lower than while it was on.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Iterator

import numpy as np
import scipy.ndimage
import scipy.stats

from .emission import designator as _designator
from .errors import IqsiftWarning, ParameterError
from .measure import occupied_bandwidth, x_db_bandwidth
from .plan import ChannelPlan, format_plan, plan_from_dict, sanitize_name
from .rasters import Raster, aero_channel_name, parse_raster
from .spectra import Spectrum, WelchAccumulator

__all__ = [
    "DEFAULT_THRESHOLD_DB",
    "Emission",
    "SurveyResult",
    "Surveyor",
    "choose_resolution",
    "welch_dof",
    "floor_median_bias",
    "grandke_offset",
    "hann_response",
    "survey_capture",
    "survey_to_plan",
    "survey_plan_text",
]

#: Default detection threshold, dB above the local noise floor.
DEFAULT_THRESHOLD_DB = 10.0
#: Target detection bin width (Hz) when none is asked for.
TARGET_BIN_HZ = 60.0
#: Fewest averages wanted in the detection spectrum (the resolution is coarsened to get them).
MIN_SEGMENTS = 16
#: Fine spectrum: segments this many times longer than the detection ones ...
FINE_FACTOR = 8
#: ... with at least this many averages (else shorter, down to the detection length).
FINE_MIN_SEGMENTS = 4
#: Fraction of the sample rate left out at each band edge (anti-alias roll-off).
DEFAULT_EDGE_GUARD = 0.05
#: Bins each side of 0 Hz of an IQ capture left to the DC offset.
DC_GUARD_BINS = 2
#: Runs of detected bins closer than this (Hz) form one emission.
DEFAULT_MERGE_GAP_HZ = 1000.0
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
# Channel-width floors per class (ITU-R SM.1138 telephony examples), Hz.
_MIN_CHANNEL_HZ = {"A3E": 6000.0, "H3E": 3000.0, "R3E": 3000.0, "J3E": 2700.0}


# ============================================================================= small published formulas


def welch_dof(window: np.ndarray, step: int, segments: int) -> float:
    """Equivalent degrees of freedom ν of a Welch (WOSA) average.

    ν = 2K / (1 + 2 Σ_{m=1}^{K−1} (1 − m/K)·ρ(m)²), ρ(m) = Σ_n w[n]·w[n + m·step] / Σ_n w[n]²
    (Welch 1967; Percival & Walden 1993). Each bin of the average is then
    distributed as (mean)·χ²_ν/ν for Gaussian noise.

    Parameters
    ----------
    window : array_like
        Window weights (length nperseg).
    step : int
        Samples between segment starts (nperseg − noverlap).
    segments : int
        Number K of segments averaged (>= 1).
    """
    w = np.asarray(window, dtype=np.float64)
    k = int(segments)
    if k < 1:
        raise ParameterError(f"segments: must be >= 1, got {segments!r}")
    if step < 1:
        raise ParameterError(f"step: must be >= 1 sample, got {step!r}")
    s2 = float(np.sum(w * w))
    acc = 0.0
    for m in range(1, k):
        lag = m * step
        if lag >= w.size:
            break
        rho = float(np.sum(w[: w.size - lag] * w[lag:])) / s2
        acc += (1.0 - m / k) * rho * rho
    return 2.0 * k / (1.0 + 2.0 * acc)


def floor_median_bias(dof: float) -> float:
    """Median of χ²_ν/ν (the median of an averaged noise bin over its mean), linear.

    A noise floor read as the median of averaged bins is divided by this to give
    the mean. ν = 2 (one periodogram) gives ln 2 = 0.693 (−1.59 dB); it tends to 1
    as ν grows (Wilson-Hilferty: about (1 − 2/(9ν))³). Exact value from
    :func:`scipy.stats.chi2.median`.
    """
    nu = float(dof)
    return float(scipy.stats.chi2.median(nu) / nu)


def hann_response(delta: float | np.ndarray) -> float | np.ndarray:
    """Hann window amplitude response relative to its peak, at ``delta`` bins from a tone.

    |W(δ)/W(0)| = |sinc(δ) / (1 − δ²)| (harris 1978; the periodic Hann of a long
    segment); 1 at δ = 0, 0.8488 (−1.42 dB, the scalloping loss) at δ = 0.5,
    0.5 at δ = 1, 0 at δ = 2, 3 ...
    """
    d = np.asarray(delta, dtype=np.float64)
    den = 1.0 - d * d
    near_one = np.abs(den) < 1e-9
    out = np.where(near_one, 0.5, np.sinc(d) / np.where(near_one, 1.0, den))
    out = np.abs(out)
    return float(out) if np.ndim(delta) == 0 else out


def grandke_offset(a_left: float, a_peak: float, a_right: float) -> float:
    """Offset (bins, in [−0.5, 0.5]) of a tone from the peak bin of a Hann-windowed spectrum.

    Grandke (IEEE Trans. IM-32, 1983): α = A_neighbour/A_peak with the larger of
    the two neighbours, δ = ±(2α − 1)/(α + 1), towards that neighbour. Inputs are
    amplitudes (square roots of noise-subtracted powers), >= 0.
    """
    if not (a_peak > 0.0):
        return 0.0
    if a_right >= a_left:
        alpha, sign = a_right / a_peak, 1.0
    else:
        alpha, sign = a_left / a_peak, -1.0
    alpha = min(max(alpha, 0.0), 1.0)
    delta = sign * (2.0 * alpha - 1.0) / (alpha + 1.0)
    return float(min(max(delta, -0.5), 0.5))


def choose_resolution(rate_hz: float, samples: int, resolution_hz: float | None = None) -> tuple[int, int]:
    """Segment lengths (detection, fine) the survey uses for a capture.

    Parameters
    ----------
    rate_hz : float
        Sample rate (samples/s).
    samples : int
        Samples that will be fed.
    resolution_hz : float, optional
        Detection bin width wanted (Hz). Default: the power-of-two length nearest to
        ``rate / 60 Hz``, halved until the capture gives at least 16 averages
        (50 % overlap).

    Returns
    -------
    (nperseg, fine_nperseg) : tuple of int
        ``fine_nperseg`` is 8·nperseg, halved until it gives 4 averages, and never
        below nperseg (equal: no separate fine spectrum).

    Raises
    ------
    ParameterError
        If the rate or resolution is not positive and finite, or the capture is too
        short for two segments of the resolution asked for (or of 64 samples).
    """
    rate = float(rate_hz)
    if not (math.isfinite(rate) and rate > 0):
        raise ParameterError(f"rate_hz: must be a finite rate > 0, got {rate_hz!r}")
    n = int(samples)
    if resolution_hz is None:
        nps = 1 << max(6, int(round(math.log2(rate / TARGET_BIN_HZ))))
        while nps > 64 and n < (MIN_SEGMENTS + 1) * nps // 2:
            nps //= 2
        if n < 2 * nps:
            raise ParameterError(
                f"capture: {n} samples are too few to survey; at least {2 * nps} are needed "
                f"(two segments of {nps})"
            )
    else:
        res = float(resolution_hz)
        if not (math.isfinite(res) and res > 0):
            raise ParameterError(f"resolution_hz: must be a finite bin width > 0 Hz, got {resolution_hz!r}")
        nps = int(round(rate / res))
        if nps < 16:
            raise ParameterError(
                f"resolution_hz: {resolution_hz!r} Hz gives {nps} points at {rate:g} samples/s; "
                "it must be at most rate/16"
            )
        if n < 3 * nps // 2:
            raise ParameterError(
                f"resolution_hz: {resolution_hz!r} Hz needs segments of {nps} samples and at least "
                f"{3 * nps // 2} samples (two segments); the capture has {n}"
            )
    fine = nps * FINE_FACTOR
    while fine > nps and n < (FINE_MIN_SEGMENTS + 1) * fine // 2:
        fine //= 2
    return nps, max(fine, nps)


# ============================================================================= results


def _db(power: float) -> float:
    return 10.0 * math.log10(max(float(power), _TINY))


@dataclass(frozen=True)
class Emission:
    """One emission found by the survey.

    Frequencies are absolute RF (Hz) when the capture has a centre frequency,
    else offsets from the capture's 0 Hz; ``offset_hz`` is always the offset.

    Attributes
    ----------
    index : int
        1-based, in order of frequency.
    frequency_hz : float
        Carrier frequency (measured line for A3E/H3E/R3E; the convention for
        suppressed carriers, see ``frequency_method``).
    offset_hz : float
        ``frequency_hz`` relative to the capture centre.
    frequency_method : str
        ``"grandke-fine"``, ``"grandke-coarse"`` (line interpolated on the fine or
        detection spectrum), ``"sideband-edge"`` (J3E: 300 Hz outside the
        occupied band) or ``"band-centre"`` (DSB with suppressed carrier).
    emission_class : str
        ``"A3E"``, ``"H3E"``, ``"R3E"`` or ``"J3E"`` (a guess).
    sideband : str or None
        ``"usb"``/``"lsb"`` for single-sideband classes.
    mode : str
        Detector proposed for the plan: envelope, dsb, usb or lsb.
    confidence : str
        ``"high"`` or ``"low"``.
    note : str
        Why the class was chosen.
    level_dbfs : float
        Total power of the emission (noise subtracted), dBFS.
    peak_dbfs : float
        Strongest bin, power per detection bin, dBFS.
    peak_above_floor_db : float
        Strongest bin over the local floor (dB), scalloping-corrected for a line.
    carrier_level_dbfs : float or None
        Power of the carrier line (dBFS) when there is one.
    band_lo_hz, band_hi_hz : float
        Edges of the band the emission was measured over.
    occupied_hz, occupied_lo_hz, occupied_hi_hz : float
        99 % power bandwidth and its edges (ITU-R SM.328).
    x_db_hz : float
        26 dB bandwidth (ITU-R SM.328) relative to the strongest bin.
    bandwidth_hz : float
        Proposed channel (necessary) bandwidth, Hz.
    designator : str
        ITU emission designator, e.g. ``"6K00A3E"``.
    raster_name : str or None
        Raster the carrier was snapped to.
    raster_frequency_hz, raster_error_hz : float or None
        Nearest grid point and measured − grid (Hz).
    channel_name : str or None
        ICAO aeronautical channel name (8.33k/25k rasters, inside the band).
    """

    index: int
    frequency_hz: float
    offset_hz: float
    frequency_method: str
    emission_class: str
    sideband: str | None
    mode: str
    confidence: str
    note: str
    level_dbfs: float
    peak_dbfs: float
    peak_above_floor_db: float
    carrier_level_dbfs: float | None
    band_lo_hz: float
    band_hi_hz: float
    occupied_hz: float
    occupied_lo_hz: float
    occupied_hi_hz: float
    x_db_hz: float
    bandwidth_hz: float
    designator: str
    raster_name: str | None = None
    raster_frequency_hz: float | None = None
    raster_error_hz: float | None = None
    channel_name: str | None = None

    @property
    def nominal_frequency_hz(self) -> float:
        """The raster frequency when snapped, else the measured one (Hz)."""
        return self.raster_frequency_hz if self.raster_frequency_hz is not None else self.frequency_hz

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready view (stable keys; ``bandwidth.occupied_hz`` as in the report vocabulary)."""
        carrier = None
        if self.carrier_level_dbfs is not None:
            carrier = {"frequency_hz": self.frequency_hz, "level_dbfs": self.carrier_level_dbfs}
        raster = None
        if self.raster_name is not None:
            raster = {
                "name": self.raster_name,
                "frequency_hz": self.raster_frequency_hz,
                "error_hz": self.raster_error_hz,
            }
        return {
            "index": self.index,
            "frequency_hz": self.frequency_hz,
            "offset_hz": self.offset_hz,
            "frequency_method": self.frequency_method,
            "class": self.emission_class,
            "sideband": self.sideband,
            "mode": self.mode,
            "confidence": self.confidence,
            "note": self.note,
            "designator": self.designator,
            "bandwidth_hz": self.bandwidth_hz,
            "level_dbfs": self.level_dbfs,
            "peak_dbfs": self.peak_dbfs,
            "peak_above_floor_db": self.peak_above_floor_db,
            "carrier": carrier,
            "band": {"lo_hz": self.band_lo_hz, "hi_hz": self.band_hi_hz},
            "bandwidth": {
                "occupied_hz": self.occupied_hz,
                "occupied_lo_hz": self.occupied_lo_hz,
                "occupied_hi_hz": self.occupied_hi_hz,
                "x_db_hz": self.x_db_hz,
                "x_db": 26.0,
                "fraction": 0.99,
                "channel_hz": self.bandwidth_hz,
            },
            "raster": raster,
            "channel_name": self.channel_name,
        }


@dataclass(frozen=True, eq=False)
class SurveyResult:
    """What :func:`survey_capture` found.

    Attributes
    ----------
    emissions : list of Emission
        In order of frequency.
    noise_floor_dbfs_per_hz : float
        Median of the local noise floor over the analysed band (dBFS/Hz).
    floor_db : numpy.ndarray
        Local noise floor per detection bin (dBFS/Hz), aligned with ``spectrum``.
    spectrum : Spectrum
        The detection spectrum (density, dBFS/Hz).
    fine_spectrum : Spectrum or None
        The fine spectrum used for carrier refinement (None when the capture was
        too short for one).
    dc_offset : dict or None
        For IQ captures: ``i``, ``q``, ``level_dbfs`` (mean of the samples),
        ``spike_above_floor_db`` (the 0 Hz bin), ``visible`` (spike >= threshold),
        ``excluded_hz`` (the band left out of detection, absolute/offset as the
        frequencies).
    threshold_db : float
    dof : float
        Equivalent degrees of freedom ν of the detection spectrum.
    false_alarm_per_bin : float
        Probability that a noise bin crosses the threshold.
    expected_false_detections : float
        ``false_alarm_per_bin`` times the bins searched.
    band_hz : tuple of float
        Analysed band (lo, hi), Hz.
    center_hz : float or None
    sample_rate_hz : float
    is_complex : bool
    samples : int
        Samples analysed.
    raster : str or None
    """

    emissions: list[Emission]
    noise_floor_dbfs_per_hz: float
    floor_db: np.ndarray
    spectrum: Spectrum
    fine_spectrum: Spectrum | None
    dc_offset: dict[str, Any] | None
    threshold_db: float
    dof: float
    false_alarm_per_bin: float
    expected_false_detections: float
    band_hz: tuple[float, float]
    center_hz: float | None
    sample_rate_hz: float
    is_complex: bool
    samples: int
    raster: str | None = None
    floor_range_dbfs_per_hz: tuple[float, float] = (float("nan"), float("nan"))

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready view (spectra summarised, not listed bin by bin)."""
        s = self.spectrum
        fine = self.fine_spectrum
        return {
            "sample_rate_hz": self.sample_rate_hz,
            "center_hz": self.center_hz,
            "is_complex": self.is_complex,
            "samples": self.samples,
            "threshold_db": self.threshold_db,
            "noise_floor_dbfs_per_hz": self.noise_floor_dbfs_per_hz,
            "noise_floor_range_dbfs_per_hz": list(self.floor_range_dbfs_per_hz),
            "band_hz": list(self.band_hz),
            "spectrum": {
                "window": s.window,
                "nperseg": s.nperseg,
                "bin_width_hz": s.bin_width_hz,
                "enbw_hz": s.enbw_hz,
                "segments_averaged": s.segments_averaged,
                "dof": self.dof,
                "fine_nperseg": fine.nperseg if fine is not None else None,
                "fine_bin_width_hz": fine.bin_width_hz if fine is not None else None,
                "fine_segments_averaged": fine.segments_averaged if fine is not None else None,
            },
            "false_alarm_per_bin": self.false_alarm_per_bin,
            "expected_false_detections": self.expected_false_detections,
            "dc_offset": self.dc_offset,
            "raster": self.raster,
            "emissions": [e.to_dict() for e in self.emissions],
        }


# ============================================================================= the accumulator


def _check_threshold(threshold_db: Any) -> float:
    if isinstance(threshold_db, bool):
        raise ParameterError(f"threshold_db: expected a number of dB, got {threshold_db!r}")
    try:
        thr = float(threshold_db)
    except (TypeError, ValueError):
        raise ParameterError(f"threshold_db: expected a number of dB, got {threshold_db!r}") from None
    if not (math.isfinite(thr) and 3.0 <= thr <= 100.0):
        raise ParameterError(f"threshold_db: {threshold_db!r} dB; it must lie between 3 and 100 dB above the floor")
    return thr


class Surveyor:
    """Streaming survey of one capture: feed blocks, then read :meth:`result`.

    Parameters
    ----------
    rate_hz : float
        Sample rate (samples/s).
    samples : int
        Samples that will be fed (sets the resolution; see :func:`choose_resolution`).
    center_hz : float or None
        Capture centre frequency (Hz); None: frequencies are offsets.
    is_complex : bool
        IQ (two-sided spectrum) or real samples (one-sided).
    threshold_db : float, default 10
        Detection threshold, dB above the local noise floor (3 to 100).
    raster : str or Raster, optional
        ``"25k"``, ``"8.33k"``, ``"9k"`` or ``"10k"``; needs ``center_hz``.
    resolution_hz : float, optional
        Detection bin width (Hz).
    edge_guard : float, default 0.05
        Fraction of the rate left out at each band edge (0 to 0.2).
    merge_gap_hz : float, default 1000
        Detected runs closer than this are one emission (Hz, >= 0).

    Notes
    -----
    See the module notes for the method. Memory: the two spectrum sums (nperseg and
    8·nperseg float64) whatever the capture length.
    """

    def __init__(
        self,
        rate_hz: float,
        samples: int,
        *,
        center_hz: float | None = None,
        is_complex: bool = True,
        threshold_db: float = DEFAULT_THRESHOLD_DB,
        raster: str | Raster | None = None,
        resolution_hz: float | None = None,
        edge_guard: float = DEFAULT_EDGE_GUARD,
        merge_gap_hz: float = DEFAULT_MERGE_GAP_HZ,
    ) -> None:
        self.threshold_db = _check_threshold(threshold_db)
        self.raster = parse_raster(raster) if raster is not None else None
        if self.raster is not None and center_hz is None:
            raise ParameterError(
                f"raster {self.raster.name}: needs absolute frequencies, and the capture has no centre frequency; "
                "give it with --center"
            )
        try:
            guard = float(edge_guard)
        except (TypeError, ValueError):
            raise ParameterError(f"edge_guard: expected a fraction of the rate, got {edge_guard!r}") from None
        if not (0.0 <= guard <= 0.2):
            raise ParameterError(f"edge_guard: {edge_guard!r}; it must lie between 0 and 0.2 of the sample rate")
        self.edge_guard = guard
        try:
            gap = float(merge_gap_hz)
        except (TypeError, ValueError):
            raise ParameterError(f"merge_gap_hz: expected Hz, got {merge_gap_hz!r}") from None
        if not (math.isfinite(gap) and gap >= 0.0):
            raise ParameterError(f"merge_gap_hz: {merge_gap_hz!r}; it must be a finite number of Hz >= 0")
        self.merge_gap_hz = gap
        self.rate_hz = float(rate_hz)
        self.center_hz = None if center_hz is None else float(center_hz)
        self.is_complex = bool(is_complex)
        nps, fine = choose_resolution(rate_hz, samples, resolution_hz)
        centre = self.center_hz or 0.0
        self._coarse = WelchAccumulator(
            rate_hz, nps, 0.5, "hann", centre, name="survey", onesided=not self.is_complex
        )
        self._fine = (
            WelchAccumulator(rate_hz, fine, 0.5, "hann", centre, name="survey fine", onesided=not self.is_complex)
            if fine > nps
            else None
        )
        self._sum = 0j
        self._count = 0

    @property
    def nperseg(self) -> int:
        """Detection segment length (samples)."""
        return self._coarse.nperseg

    @property
    def fine_nperseg(self) -> int | None:
        """Fine segment length (samples), None when there is no fine spectrum."""
        return self._fine.nperseg if self._fine is not None else None

    @property
    def enbw_hz(self) -> float:
        """Equivalent noise bandwidth of a detection bin (Hz)."""
        return self._coarse.enbw_hz

    @property
    def samples_fed(self) -> int:
        """Samples fed so far."""
        return self._count

    def reset(self) -> None:
        """Forget everything fed so far."""
        self._coarse.reset()
        if self._fine is not None:
            self._fine.reset()
        self._sum = 0j
        self._count = 0

    def feed(self, block: Any) -> "Surveyor":
        """Add a block of samples (complex64 from :meth:`Capture.blocks`, or real)."""
        x = np.asarray(block)
        if x.ndim != 1:
            raise ParameterError(f"block: must be a 1-D array of samples, got shape {x.shape}")
        if x.size == 0:
            return self
        if not self.is_complex and np.iscomplexobj(x):
            x = x.real
        self._coarse.feed(x)
        if self._fine is not None:
            self._fine.feed(x)
        self._sum += complex(np.sum(x, dtype=np.complex128))
        self._count += x.size
        return self

    __call__ = feed

    def result(self) -> SurveyResult:
        """Analyse the averaged spectra: noise floor, emissions, DC offset."""
        if not self._coarse.ready:
            raise ParameterError(
                f"survey: {self._count} samples fed, fewer than one segment of {self.nperseg}; feed more samples"
            )
        spec = self._coarse.result("density")
        fine = self._fine.result("density") if self._fine is not None and self._fine.ready else None
        return _analyse(self, spec, fine)


# ============================================================================= analysis


def _noise_floor(p: np.ndarray, usable: np.ndarray, nu: float, dilate: int) -> np.ndarray:
    """Local noise floor (linear density) for every bin, from the usable bins; see the module notes."""
    idx = np.nonzero(usable)[0]
    nreg = max(1, min(_NREGIONS, idx.size // 32))
    chunks = [c for c in np.array_split(idx, nreg) if c.size]
    centres = np.array([float(np.mean(c)) for c in chunks])
    q = 0.25
    cq = float(scipy.stats.chi2.ppf(q, nu) / nu)
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
    floor: np.ndarray
    excess: np.ndarray
    sigma: np.ndarray
    ratio: np.ndarray
    dc_bins: np.ndarray
    usable: np.ndarray
    nu: float
    spec: Spectrum
    fine: Any
    owner: np.ndarray  # index of the group whose widened band holds each bin, -1 for none


@dataclass
class _Group:
    lo: int  # detected bins (inclusive)
    hi: int
    ext_lo: int = 0  # widened band (inclusive)
    ext_hi: int = 0
    peak: int = 0
    line: bool = False
    delta: float = 0.0


def _analyse(sv: Surveyor, spec: Spectrum, fine: Spectrum | None) -> SurveyResult:
    rate = sv.rate_hz
    centre = sv.center_hz
    f = spec.relative_freqs_hz
    p = spec.values_linear
    df = spec.bin_width_hz
    n = p.size
    nseg = spec.segments_averaged
    step = sv._coarse.nperseg - sv._coarse.noverlap
    nu = welch_dof(sv._coarse.window, step, nseg)

    # --- bins analysed
    lo_edge = sv.edge_guard * rate if not sv.is_complex else -(0.5 - sv.edge_guard) * rate
    hi_edge = (0.5 - sv.edge_guard) * rate
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
    groups = [part for g in widened for part in _split_carriers(g, excess, ratio, thr, sigma, dc_bins)]

    # --- measure each group
    fine_data = None
    if fine is not None:
        ff = fine.relative_freqs_hz
        pf = fine.values_linear
        floor_f = 10.0 ** (np.interp(ff, f, 10.0 * np.log10(floor)) / 10.0)
        nu_f = welch_dof(sv._fine.window, sv._fine.nperseg - sv._fine.noverlap, fine.segments_averaged)
        fine_data = (ff, pf, floor_f, fine.bin_width_hz, fine.enbw_hz, math.sqrt(2.0 / nu_f))
    owner = np.full(n, -1, dtype=np.int64)
    for i, g in enumerate(groups):
        owner[g.ext_lo : g.ext_hi + 1] = i
    ctx = _Ctx(f, p, floor, excess, sigma, ratio, dc_bins, usable, nu, spec, fine_data, owner)
    emissions = [_measure(sv, g, ctx, i) for i, g in enumerate(groups, start=1)]

    # --- DC offset (IQ only)
    dc = None
    if sv.is_complex:
        mean = sv._sum / max(sv._count, 1)
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
        }

    # --- false alarms
    searched = int(np.count_nonzero(usable))
    pfa = float(scipy.stats.chi2.sf(nu * thr * _MAX_SCALLOP**2, nu))
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
        samples=sv._count,
        raster=sv.raster.name if sv.raster is not None else None,
        floor_range_dbfs_per_hz=(float(floor_db[usable].min()), float(floor_db[usable].max())),
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


def _measure(sv: Surveyor, g: _Group, ctx: _Ctx, index: int) -> Emission:
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
        ff, pf, floor_f, dff = fine_data[:4]
        dc_hz = DC_GUARD_BINS * df * (1.0 + 1e-9) if sv.is_complex else -1.0
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
    raster_name = raster_freq = raster_err = channel_name = None
    if sv.raster is not None:
        grid = sv.raster
        raster_freq = float(grid.frequency(grid.index(freq_abs)))
        raster_err = float(freq_abs - raster_freq)
        raster_name = grid.name
        if grid.name in ("25k", "8.33k"):
            try:
                channel_name = aero_channel_name(raster_freq, grid.name, tolerance_hz=1.0)
            except ParameterError:
                channel_name = None
    return Emission(
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
        designator=_designator(bandwidth, cls),
        raster_name=raster_name,
        raster_frequency_hz=raster_freq,
        raster_error_hz=raster_err,
        channel_name=channel_name,
    )


# ============================================================================= one-shot and plan


def survey_capture(
    capture: Any,
    threshold_db: float = DEFAULT_THRESHOLD_DB,
    raster: str | Raster | None = None,
    selection: Any = None,
    resolution_hz: float | None = None,
    *,
    edge_guard: float = DEFAULT_EDGE_GUARD,
    merge_gap_hz: float = DEFAULT_MERGE_GAP_HZ,
    nonfinite: str = "error",
    wrap_blocks: Callable[[Iterator[np.ndarray], int], Iterable[np.ndarray]] | None = None,
) -> SurveyResult:
    """Survey a capture in one streaming pass (see the module notes).

    Parameters
    ----------
    capture : Capture
        From :func:`iqsift.captures.open_capture`.
    threshold_db : float, default 10
        Detection threshold, dB above the local noise floor.
    raster : str or Raster, optional
        ``"25k"``, ``"8.33k"``, ``"9k"``, ``"10k"``: snap carriers and name channels.
    selection : SampleRange, optional
        Part of the capture to survey (``capture.select(start, duration)``); default all.
    resolution_hz : float, optional
        Detection bin width (Hz); default about 60 Hz.
    edge_guard, merge_gap_hz
        See :class:`Surveyor`.
    nonfinite : {"error", "zero"}
        NaN/Inf samples: refuse, or replace by 0.
    wrap_blocks : callable, optional
        ``wrap_blocks(blocks, total_samples)`` returns the blocks to use (e.g. with a
        progress bar).

    Returns
    -------
    SurveyResult

    Raises
    ------
    ParameterError
        For bad parameters, a raster without a centre frequency, or a capture too short.
    CaptureError
        For unreadable samples.
    """
    if selection is None:
        selection = capture.select()
    centre = capture.center_for(selection)
    sv = Surveyor(
        capture.sample_rate_hz,
        selection.count,
        center_hz=centre,
        is_complex=capture.is_complex,
        threshold_db=threshold_db,
        raster=raster,
        resolution_hz=resolution_hz,
        edge_guard=edge_guard,
        merge_gap_hz=merge_gap_hz,
    )
    blocks: Iterable[np.ndarray] = capture.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)
    if wrap_blocks is not None:
        blocks = wrap_blocks(iter(blocks), selection.count)
    for block in blocks:
        sv.feed(block)
    return sv.result()


def _plan_name(index: int, e: Emission, has_centre: bool) -> str:
    if e.channel_name:
        label = e.channel_name
    elif has_centre and e.nominal_frequency_hz > 0:
        fr = e.nominal_frequency_hz
        label = f"{fr / 1e6:.3f}" if fr >= 1e6 else f"{fr / 1e3:.2f}k"
    else:
        label = f"offset{e.offset_hz / 1e3:.2f}k"
    return sanitize_name(f"ch{index:02d}-{label}")


def survey_to_plan(
    result: SurveyResult,
    *,
    use_raster: bool = True,
    audio_rate_hz: float = 16000.0,
    squelch_db: float | None = None,
    source: str = "<survey>",
) -> ChannelPlan:
    """A channel plan with one channel per emission, as :func:`iqsift.plan.parse_plan` would read it.

    Each channel is named ``chNN-<frequency in MHz, 3 decimals>`` (or ``chNN-<ICAO
    channel name>`` with an aeronautical raster, ``chNN-offset<kHz>k`` for a capture
    without a centre frequency), tuned to the raster frequency when one was used (else
    the measured carrier), with the emission designator and the proposed detector
    (A3E → envelope, DSB-SC → dsb, single sideband → usb/lsb). Frequencies are
    absolute (``freq``, or ``channel_name`` for aeronautical names) when the capture
    has a centre frequency, else ``offset``.

    Raises
    ------
    ParameterError
        If there are no emissions (a plan needs a channel).
    """
    if not result.emissions:
        raise ParameterError(
            f"{source}: no emissions found at {result.threshold_db:g} dB above the floor; there is no plan to write"
        )
    has_centre = result.center_hz is not None
    entries = []
    for i, e in enumerate(result.emissions, start=1):
        entry: dict[str, Any] = {"name": _plan_name(i, e, has_centre)}
        freq = e.nominal_frequency_hz if use_raster else e.frequency_hz
        if use_raster and e.channel_name:
            entry["channel_name"] = e.channel_name
        elif has_centre and freq > 0:
            entry["freq"] = float(freq)
        else:
            shift = result.center_hz or 0.0
            entry["offset"] = float(freq - shift)
        entry["emission"] = e.designator
        entry["mode"] = e.mode
        entry["audio_rate"] = float(audio_rate_hz)
        if squelch_db is not None:
            entry["squelch_db"] = float(squelch_db)
        entries.append(entry)
    return plan_from_dict({"channel": entries}, source)


def survey_plan_text(result: SurveyResult, *, capture_name: str = "", **kwargs: Any) -> str:
    """The plan of :func:`survey_to_plan` as TOML text (readable by :func:`iqsift.plan.parse_plan`)."""
    plan = survey_to_plan(result, **kwargs)
    what = f" of {capture_name}" if capture_name else ""
    head = (
        f"# Proposed by iqsift survey{what}: {len(result.emissions)} emission(s) at >= {result.threshold_db:g} dB "
        f"above the noise floor ({result.noise_floor_dbfs_per_hz:.1f} dBFS/Hz).\n"
        "# Classes and bandwidths are guesses from the averaged spectrum; check before relying on them.\n"
    )
    return head + format_plan(plan)

