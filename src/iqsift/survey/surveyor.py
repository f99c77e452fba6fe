"""The streaming survey of one capture: :class:`Surveyor` (feed blocks, read the result) and :func:`survey_capture`.

One pass feeds two Welch accumulators (Hann window, 50 % overlap): a detection
spectrum of about 60 Hz bins (:func:`choose_resolution`) and a fine one with 8 times
longer segments; :meth:`Surveyor.result` hands them to
:func:`iqsift.survey.analysis.analyse_spectra`.
"""

from __future__ import annotations

import copy
import dataclasses
import math
from typing import Any, Callable, Iterable, Iterator

import numpy as np

from ..captures.stats import StatsAccumulator
from ..errors import ParameterError
from ..rasters import Raster, parse_raster
from ..reference import check_ppm, reference_factor
from ..spectra import Spectrum, WelchAccumulator
from .analysis import analyse_spectra
from .formulas import welch_dof
from .images import split_images
from .results import SurveyResult

__all__ = [
    "DEFAULT_THRESHOLD_DB",
    "TARGET_BIN_HZ",
    "MIN_SEGMENTS",
    "FINE_FACTOR",
    "FINE_MIN_SEGMENTS",
    "DEFAULT_EDGE_GUARD",
    "DEFAULT_MERGE_GAP_HZ",
    "Surveyor",
    "choose_resolution",
    "survey_capture",
    "feed_capture",
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
#: Runs of detected bins closer than this (Hz) form one emission.
DEFAULT_MERGE_GAP_HZ = 1000.0


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
    band_hz : (float, float), optional
        Search only between these frequencies relative to the centre (Hz), e.g. the passband a
        channel baseband was filtered to: outside it the noise is filtered away, and a floor taken
        across both would put the passband's own noise above the threshold.

    Notes
    -----
    See :mod:`iqsift.survey` for the method. Memory: the two spectrum sums (nperseg and
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
        band_hz: tuple[float, float] | None = None,
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
        self.band_hz: tuple[float, float] | None = None
        if band_hz is not None:
            try:
                lo, hi = (float(v) for v in band_hz)
            except (TypeError, ValueError):
                raise ParameterError(f"band_hz: expected (low, high) in Hz, got {band_hz!r}") from None
            if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
                raise ParameterError(f"band_hz: {band_hz!r}; expected finite low < high in Hz")
            self.band_hz = (lo, hi)
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
        self._moments = StatsAccumulator(True)  # the IQ imbalance, for telling mirror images

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

    @property
    def sample_mean(self) -> complex:
        """Mean of the samples fed so far (the DC offset of an IQ capture; 0 before any)."""
        return self._sum / max(self._count, 1)

    def reset(self) -> None:
        """Forget everything fed so far."""
        self._coarse.reset()
        if self._fine is not None:
            self._fine.reset()
        self._sum = 0j
        self._count = 0
        self._moments = StatsAccumulator(True)

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
        if self.is_complex:
            self._moments.update(x)
        return self

    __call__ = feed

    def result(self, *, reference_ppm: float = 0.0, snap: bool = True) -> SurveyResult:
        """Analyse the averaged spectra: noise floor, emissions, DC offset.

        Parameters
        ----------
        reference_ppm : float
            Read the spectra as from a receiver whose reference ran this much (ppm) faster than the
            rate and centre this surveyor was given (:mod:`iqsift.reference`): every bin frequency,
            the rate and the bin widths scale by ``k = 1 + ppm·1e-6`` (densities by ``1/k``), exactly
            what a second pass over the corrected capture would give, without reading it again.
        snap : bool
            Put carriers on the raster (when one was given); False analyses without it (no warnings
            about carriers left off), as a reference-error estimate wants the measured carriers.
        """
        if not self._coarse.ready:
            raise ParameterError(
                f"survey: {self._count} samples fed, fewer than one segment of {self.nperseg}; feed more samples"
            )
        spec = self._coarse.result("density")
        fine = self._fine.result("density") if self._fine is not None and self._fine.ready else None
        if not self.is_complex:
            spec = analytic_levels(spec)
            fine = None if fine is None else analytic_levels(fine)
        # equivalent degrees of freedom of each average (Welch 1967), for the noise statistics
        dof = welch_dof(self._coarse.window, self._coarse.nperseg - self._coarse.noverlap, spec.segments_averaged)
        fine_dof = None
        if fine is not None and self._fine is not None:
            fine_dof = welch_dof(self._fine.window, self._fine.nperseg - self._fine.noverlap, fine.segments_averaged)
        view = self
        if reference_ppm or not snap:
            view = copy.copy(self)  # the same sums and settings, read on another frequency scale
            view.raster = self.raster if snap else None
            if reference_ppm:
                k = reference_factor(check_ppm("reference_ppm", reference_ppm))
                view.rate_hz = self.rate_hz * k
                view.center_hz = None if self.center_hz is None else self.center_hz * k
                spec = _rescaled(spec, k)
                fine = None if fine is None else _rescaled(fine, k)
        found = analyse_spectra(view, spec, fine, dof, fine_dof)
        irr_db = self._moments.result().image_rejection_db if self.is_complex else None
        emissions, images = split_images(found.emissions, irr_db, spec.bin_width_hz)
        dc = found.dc_offset
        if dc is not None and dc.get("carrier_emission") is not None:
            # the emission numbers changed when the images were taken out: name the carrier at DC anew
            at_dc = found.emissions[dc["carrier_emission"] - 1].frequency_hz
            number = next((e.index for e in emissions if e.frequency_hz == at_dc), None)
            dc = {**dc, "carrier_emission": number}
        return dataclasses.replace(found, emissions=emissions, images=images, image_rejection_db=irr_db,
                                   dc_offset=dc)


def _rescaled(spectrum: Spectrum, k: float) -> Spectrum:
    """``spectrum`` on a frequency scale ``k`` times the original (a density falls by ``1/k``)."""
    shift_db = -10.0 * math.log10(k) if spectrum.scaling == "density" else 0.0
    return dataclasses.replace(spectrum, freqs_hz=spectrum.freqs_hz * k, values_db=spectrum.values_db + shift_db,
                               rate_hz=spectrum.rate_hz * k, center_hz=spectrum.center_hz * k,
                               enbw_hz=spectrum.enbw_hz * k)


REAL_TO_ANALYTIC_DB = 10.0 * math.log10(2.0)
"""A real signal's analytic representation x + j·H{x} carries twice its mean square (3.01 dB)."""


def analytic_levels(spectrum: Spectrum) -> Spectrum:
    """A one-sided spectrum of a real capture on iqsift's level convention (README, "Levels").

    A real sine of amplitude A reads 20·log10(A) dBFS, as its analytic signal A·e^(jωt) does
    (the full-scale-sine reference of AES17 and IEC 61606), and so as the same carrier does
    in a complex capture and in a channel's baseband: every bin above 0 Hz gains 3.01 dB.
    The 0 Hz and Nyquist bins have no mirror image and are kept.
    """
    values = np.array(spectrum.values_db)
    f = spectrum.relative_freqs_hz
    inner = (f > 0.0) & (f < 0.5 * spectrum.rate_hz)
    values[inner] += REAL_TO_ANALYTIC_DB
    return dataclasses.replace(spectrum, values_db=values)


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
    """Survey a capture in one streaming pass (see :mod:`iqsift.survey` for the method).

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
    return feed_capture(capture, threshold_db, raster, selection, resolution_hz, edge_guard=edge_guard,
                        merge_gap_hz=merge_gap_hz, nonfinite=nonfinite, wrap_blocks=wrap_blocks).result()


def feed_capture(
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
) -> Surveyor:
    """The :class:`Surveyor` of :func:`survey_capture` after its pass, before analysis (same parameters)."""
    if selection is None:
        selection = capture.select()
    centre = capture.center_for(selection)
    passband = baseband_passband_hz(capture.metadata)
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
        band_hz=passband,
    )
    blocks: Iterable[np.ndarray] = capture.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)
    if wrap_blocks is not None:
        blocks = wrap_blocks(iter(blocks), selection.count)
    for block in blocks:
        sv.feed(block)
    return sv


def baseband_passband_hz(metadata: dict[str, Any]) -> tuple[float, float] | None:
    """The passband (Hz, relative to the centre) of a channel baseband iqsift wrote, from its SigMF metadata.

    ``iqsift:channel.passband_hz`` (see :mod:`iqsift.captures.sigmf`); ``None`` for any other capture.
    """
    channel = metadata.get("iqsift:channel")
    band = channel.get("passband_hz") if isinstance(channel, dict) else None
    try:
        lo, hi = (float(v) for v in band)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        return None
    return (lo, hi) if math.isfinite(lo) and math.isfinite(hi) and lo < hi else None
