"""What a survey returns: :class:`DetectedEmission` (one emission found and measured) and :class:`SurveyResult`.

Both are frozen dataclasses with a ``to_dict()`` JSON view whose keys are stable
(``bandwidth.occupied_hz`` as in the report vocabulary).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..spectra import Spectrum

__all__ = ["DetectedEmission", "SurveyResult"]


@dataclass(frozen=True)
class DetectedEmission:
    """One emission found by the survey (not to be confused with :class:`iqsift.Emission`, a designator).

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
        Raster the carrier was snapped to (None: no raster asked for, or not snapped).
    raster_frequency_hz, raster_error_hz : float or None
        The grid point it was snapped to and measured − grid (Hz).
    channel_name : str or None
        ICAO aeronautical channel name (8.33k/25k rasters, inside the band).
    raster_tolerance_hz : float or None
        The snap tolerance that was met (Hz), when snapped.
    raster_reason : str or None
        Why a raster was asked for and the carrier was not snapped (it keeps its
        measured frequency): the raster is not for its class, the nearest point is
        beyond the tolerance, or a nearer emission took that point.
    image_of : int or None
        For a mirror image (:mod:`iqsift.survey.images`): the index of the emission it
        mirrors; None for an emission of its own.
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
    raster_tolerance_hz: float | None = None
    raster_reason: str | None = None
    image_of: int | None = None

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
                "tolerance_hz": self.raster_tolerance_hz,
            }
        reason: dict[str, Any] = {} if self.raster_reason is None else {"raster_reason": self.raster_reason}
        if self.image_of is not None:
            reason["image_of"] = self.image_of
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
            **reason,
            "channel_name": self.channel_name,
        }


@dataclass(frozen=True, eq=False)
class SurveyResult:
    """What :func:`survey_capture` found.

    Attributes
    ----------
    emissions : list of DetectedEmission
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
    raster_rule : dict or None
        The raster's snapping rule (:func:`iqsift.survey.snapping.raster_rule`): name,
        step, tolerance (Hz), emission classes it is for, description.
    images : list of DetectedEmission
        Mirror images of emissions through the IQ imbalance (``image_of`` set), left out of
        ``emissions`` and of the plan (:mod:`iqsift.survey.images`).
    image_rejection_db : float or None
        The capture's image rejection ratio estimated from its IQ moments (dB); None for a real
        capture or when no imbalance is measurable.
    """

    emissions: list[DetectedEmission]
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
    raster_rule: dict[str, Any] | None = None
    images: list[DetectedEmission] = field(default_factory=list)
    image_rejection_db: float | None = None

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
            **({} if self.raster_rule is None else {"raster_rule": self.raster_rule}),
            "emissions": [e.to_dict() for e in self.emissions],
            "image_rejection_db": self.image_rejection_db,
            "images": [e.to_dict() for e in self.images],
        }
