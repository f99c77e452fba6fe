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

    Sidebands apart from their carrier (a tone of 1.5 kHz or more leaves only
    noise between the carrier and its lines, more than ``merge_gap_hz``) are
    joined back to it: starting from the strongest carrier line, the nearest
    separate emission on either side, out to 5 kHz (the highest modulating
    frequency of A3E sound broadcasting in ITU-R SM.1138's examples), is taken
    for a sideband when the spectrum mirrored about the carrier holds the same
    power within 3 dB (AM by a real message has a spectrum mirrored about its
    carrier) and each side is at least 2.5 dB below the carrier line (with at
    most 100 % modulation a sideband holds at most half the carrier power,
    −3.01 dB; Haykin). Emissions in the mirrored span go with it; a one-sided
    neighbour (SSB) or a DSB-SC signal centred elsewhere has no mirror image
    and stays its own emission.

    Carrier at 0 Hz: a baseband centred on its AM channel (as ``iqsift demod
    --baseband`` writes one) has its carrier in the bins left to the DC offset.
    A line there shaped like a Hann main lobe and above the threshold is taken
    for the carrier of the emission around it when sideband power is found on
    both sides within ±6 dB of each other and each side is at least 2.5 dB
    below the line (the A3E rule below); the DC guard is then lifted for that
    emission and ``dc_offset.carrier_emission`` names it. Otherwise (a DC
    offset amid an SSB or DSB-SC signal) the line stays the DC offset's.

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

Channel basebands
    A baseband iqsift wrote (``--baseband``) records the passband it was filtered to
    (``iqsift:channel.passband_hz``); only that band is searched, since outside it lies
    filtered-away noise that would pull the noise floor down.

Channel bandwidth (``bandwidth_hz``, used in the designator and the plan)
    The measured width needed around the carrier, rounded up (to 100 Hz for
    single sideband, 500 Hz for double sideband up to 20 kHz, else 1 kHz), and
    never less than ITU-R SM.1138's telephony value for the class: A3E 6 kHz
    (2M, M = 3 kHz), H3E/R3E 3 kHz (M), J3E 2.7 kHz (M − 300 Hz). A weak AM
    signal whose sidebands are under the noise thus still gets a voice channel.

Rasters (``raster``)
    ``25k``, ``8.33k``, ``9k``, ``10k`` (:func:`iqsift.rasters.parse_raster`):
    a carrier is snapped to the nearest grid point (``raster.frequency_hz``,
    ``raster.error_hz`` = measured − grid, ``raster.tolerance_hz``) only when
    the raster is for its class and the point is within the raster's tolerance
    (:meth:`iqsift.rasters.Raster.snap_error`: A3E only, 1 kHz; ICAO Annex 10
    Volume V for the aeronautical rasters, the ITU Geneva 1975 plan for the
    broadcast ones), and only one carrier per grid point (the nearer). For the
    aeronautical rasters it is then named by ICAO Annex 10
    (:func:`iqsift.rasters.aero_channel_name`, e.g. ``"127.355"``). Every
    other emission keeps its measured frequency, with ``raster: null``, a
    ``raster_reason`` and a one-line warning, so no two emissions share a plan
    channel and none is tuned away from its carrier; the rule is reported as
    ``raster_rule``. A raster needs absolute frequencies, so the capture's
    centre must be known (:mod:`~iqsift.survey.snapping`).

Receiver reference error
    With a raster or a known reference carrier, the carriers found also estimate the
    receiver's reference error (:mod:`~iqsift.survey.reference`); unless the error was given
    (``ppm``), the spectra are then read on the corrected frequency scale
    (:meth:`Surveyor.result`), so frequencies, raster snapping and the plan are true ones.

Known limits
    Emissions whose spectra touch without a carrier line in both (two adjacent
    SSB signals, or an SSB signal next to an AM one) are reported as one. A
    carrier within ±2 bins of the centre of an IQ capture without sidebands
    mirrored about it is taken for the DC offset, and a DC offset that drifts
    during the capture spreads beyond ±2 bins and may show as a narrow emission
    beside 0 Hz. An LSB and a USB signal of equal power placed mirror-wise
    within 5 kHz of an AM carrier are taken for its sidebands. The channel
    width of a strong AM signal whose sidebands reach 3 kHz may come out as
    8 kHz: the window's spread widens the measured band. Frequencies of suppressed
    carriers are conventions (see above). Bursty emissions are averaged over
    the whole capture, so a short burst reads lower than while it was on.

Modules
    :mod:`~iqsift.survey.formulas` (Welch degrees of freedom, median bias, Hann
    response, Grandke), :mod:`~iqsift.survey.surveyor` (:class:`Surveyor`, the
    resolution rule, :func:`survey_capture`), :mod:`~iqsift.survey.analysis` (floor,
    detection, grouping, measurement), :mod:`~iqsift.survey.results`
    (:class:`DetectedEmission`, :class:`SurveyResult`), :mod:`~iqsift.survey.snapping`
    (carriers on a raster), :mod:`~iqsift.survey.proposal` (the proposed channel plan),
    :mod:`~iqsift.survey.reference` (the receiver's reference error from the carriers found).
"""

from __future__ import annotations

from .analysis import DC_GUARD_BINS, LOWEST_MODULATING_HZ
from .formulas import floor_median_bias, grandke_offset, hann_response, welch_dof
from .proposal import survey_plan_text, survey_to_plan
from .reference import FrequencyReference, estimate_from_carrier, estimate_from_raster
from .results import DetectedEmission, SurveyResult
from .surveyor import (
    DEFAULT_EDGE_GUARD,
    DEFAULT_MERGE_GAP_HZ,
    DEFAULT_THRESHOLD_DB,
    FINE_FACTOR,
    FINE_MIN_SEGMENTS,
    MIN_SEGMENTS,
    TARGET_BIN_HZ,
    Surveyor,
    choose_resolution,
    feed_capture,
    survey_capture,
)

__all__ = [
    "DEFAULT_THRESHOLD_DB",
    "DEFAULT_EDGE_GUARD",
    "DEFAULT_MERGE_GAP_HZ",
    "TARGET_BIN_HZ",
    "MIN_SEGMENTS",
    "FINE_FACTOR",
    "FINE_MIN_SEGMENTS",
    "DC_GUARD_BINS",
    "LOWEST_MODULATING_HZ",
    "DetectedEmission",
    "SurveyResult",
    "Surveyor",
    "choose_resolution",
    "welch_dof",
    "floor_median_bias",
    "grandke_offset",
    "hann_response",
    "survey_capture",
    "feed_capture",
    "FrequencyReference",
    "estimate_from_raster",
    "estimate_from_carrier",
    "survey_to_plan",
    "survey_plan_text",
]
