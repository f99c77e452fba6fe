"""The report sections of a channel analysis: the measurement results, summarised over a run.

A :class:`~iqsift.measure.ChannelAnalyzer` measures a channel in analysis windows while it streams and
returns one :class:`AnalysisResult`. Each of its sections subclasses the one-shot result of the same
measurement (so it has the same attributes and report keys) and adds what the run adds: the carrier on
the capture's frequency axis, the spread over the steady windows and how many there were, where the
spectrum was taken.

Empty sections
--------------
A section is None (JSON ``null``), or for ``activity`` an empty list, when nothing was there to
measure or the channel's mode or the options leave it unmeasured. The report then says why in a
sibling key named after the section: ``"audio": null, "audio_reason": "not measured: no test tone
given (tone_hz)"``. A section holding a result has no ``*_reason`` key, so a reader tests
``report["audio"] is None`` as before and finds the explanation beside it.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields
from typing import Any, ClassVar

import numpy as np

from ..jsonable import to_jsonable
from .activity import ActivitySegment
from .audio import AudioQualityResult
from .bandwidth import BandwidthResult
from .carrier import CarrierResult
from .modulation import ModulationResult

__all__ = [
    "TunedCarrierResult",
    "ModulationSummary",
    "ChannelBandwidthResult",
    "AudioQualitySummary",
    "AnalysisResult",
    "SECTIONS",
]

SECTIONS: tuple[str, ...] = ("carrier", "modulation", "bandwidth", "audio", "activity")
"""The measured report sections, in report order."""


def _field_values(result: Any) -> dict[str, Any]:
    """The dataclass fields of ``result`` by name (to build a subclass instance from it)."""
    return {f.name: getattr(result, f.name) for f in fields(result)}


@dataclass(frozen=True)
class TunedCarrierResult(CarrierResult):
    """The carrier of a tuned channel (report section ``carrier``).

    ``frequency_hz`` is on the capture's axis (absolute RF when the capture's centre frequency is
    known, else the offset from the centre); ``nominal_hz`` is the frequency the channel is tuned to,
    so ``error_hz`` (measured − nominal) is also the carrier's offset from the tuning,
    ``offset_from_tuning_hz``. A carrier that did not stand out of the noise (``detected`` False) has
    no frequency, error or level: they are NaN, and the report section holds only ``detected``,
    ``frequency_hz``, ``error_hz``, ``level_dbfs`` (all null) and ``nominal_hz``.
    """

    REPORT_KEYS: ClassVar[tuple[str, ...]] = CarrierResult.REPORT_KEYS + ("offset_from_tuning_hz",)
    UNDETECTED_KEYS: ClassVar[tuple[str, ...]] = ("detected", "frequency_hz", "error_hz", "level_dbfs", "nominal_hz")

    @property
    def offset_from_tuning_hz(self) -> float:
        """Measured carrier minus the tuned frequency (Hz); equal to ``error_hz``."""
        return self.error_hz

    def to_dict(self) -> dict[str, Any]:
        """The ``carrier`` section (see the class docstring for an undetected carrier)."""
        if not self.detected:
            return {key: to_jsonable(getattr(self, key)) for key in self.UNDETECTED_KEYS}
        return super().to_dict()

    @classmethod
    def from_baseband(cls, measured: CarrierResult, nominal_hz: float | None) -> "TunedCarrierResult":
        """``measured`` on the channel baseband (0 Hz = the tuned frequency) put on the capture's axis.

        Parameters
        ----------
        measured : CarrierResult
            The carrier measured on the channel baseband with nominal offset 0 Hz.
        nominal_hz : float or None
            The tuned frequency on the capture's axis (Hz); None: unknown (the axis is the baseband's).
        """
        nominal = math.nan if nominal_hz is None else float(nominal_hz)
        if not measured.detected:
            # no carrier stood out of the noise: a frequency would be noise, report none
            return cls(math.nan, math.nan, math.nan, nominal, False, measured.segments_used, measured.method)
        return cls(
            frequency_hz=(nominal_hz or 0.0) + measured.frequency_hz,
            error_hz=measured.frequency_hz,  # the baseband's 0 Hz is the nominal carrier
            level_dbfs=measured.level_dbfs,
            nominal_hz=nominal,
            detected=True,
            segments_used=measured.segments_used,
            method=measured.method,
        )


PROGRAM_PERCENTILE = 99.9
"""Peak modulation of program material is the level exceeded 0.1 % of the active time (see
:meth:`ModulationSummary.of_program`)."""

PEAK_EDGES = np.linspace(-1.0, 2.0, 601)
"""Histogram edges of the instantaneous modulation |z|/Ec − 1: −100 % to +200 % in steps of 0.5 %."""


@dataclass(frozen=True)
class ModulationSummary(ModulationResult):
    """Modulation depth of a run (report section ``modulation``).

    The depth figures, tone, carrier level and ``method`` are those of one window, the one with the
    median depth among the steady windows, so that every figure comes from one measurement.

    Attributes
    ----------
    depth_percent_range : (float, float)
        Lowest and highest depth over the steady windows (%).
    windows : int
        Steady windows measured.
    window_s : float
        Length of an analysis window (s).
    """

    depth_percent_range: tuple[float, float]
    windows: int
    window_s: float

    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
        "depth_percent", "depth_positive_percent", "depth_negative_percent", "tone_hz",
        "depth_percent_range", "windows", "window_s", "method",
    )

    @property
    def description(self) -> str:
        """How the figures were obtained (the report's ``method``)."""
        if self.method.startswith("program"):
            return self.method
        return f"the median window of {self.windows} steady window(s) of {self.window_s:g} s; {self.method}"

    def to_dict(self) -> dict[str, Any]:
        """The ``modulation`` section; its ``method`` is :attr:`description`."""
        out = super().to_dict()
        out["method"] = self.description
        return out

    @classmethod
    def of_program(cls, counts: np.ndarray, edges: np.ndarray, windows: int, window_s: float,
                   carrier_level: float) -> "ModulationSummary":
        """Peak modulation of program material (speech, music: no dominant test tone).

        ``counts`` is the histogram, over ``edges``, of the instantaneous modulation ``|z|/Ec − 1`` of the
        envelope detector over the active windows (``Ec`` the mean envelope of each window). The positive
        peak is its 99.9th percentile, the negative peak minus its 0.1th: the level exceeded 0.1 % of the
        active time, so a single noise spike does not set the figure (common practice for peak modulation of
        program material; the 0.1 % exceedance is recalled from ITU-R practice for FM deviation, memory).
        ``depth_percent`` is (Emax − Emin)/(Emax + Emin) from those peaks; there is no tone frequency.
        """
        cdf = np.cumsum(counts, dtype=np.float64)
        cdf /= cdf[-1]

        def quantile(q: float) -> float:
            return float(np.interp(q, np.concatenate([[0.0], cdf]), edges))

        positive, negative = quantile(PROGRAM_PERCENTILE / 100), -quantile(1 - PROGRAM_PERCENTILE / 100)
        depth = (positive + negative) / max(2.0 + positive - negative, 1e-12)
        method = (f"program material: {PROGRAM_PERCENTILE:g}th and {100 - PROGRAM_PERCENTILE:g}th percentiles of the "
                  f"instantaneous modulation |z|/Ec - 1 (envelope detector, Ec the mean envelope of each "
                  f"{window_s:g} s window) over {windows} active window(s)")
        return cls(depth_percent=100 * depth, depth_positive_percent=100 * positive,
                   depth_negative_percent=100 * negative, tone_hz=None, carrier_level=carrier_level,
                   method=method, depth_percent_range=(100 * depth, 100 * depth), windows=windows, window_s=window_s)

    @classmethod
    def of_windows(cls, results: Sequence[ModulationResult], window_s: float) -> "ModulationSummary":
        """The median-depth window of ``results`` (the steady windows, at least one), with the spread."""
        order = np.argsort([r.depth_percent for r in results])
        median = results[int(order[len(order) // 2])]
        depth = np.array([r.depth_percent for r in results])
        return cls(**_field_values(median), depth_percent_range=(float(depth.min()), float(depth.max())),
                   windows=len(results), window_s=window_s)


@dataclass(frozen=True)
class ChannelBandwidthResult(BandwidthResult):
    """Bandwidths of a channel (report section ``bandwidth``), on its baseband after the channel filter.

    Edges are relative to the tuned carrier (Hz); the report adds ``note`` saying so.
    """

    NOTE: ClassVar[str] = "measured on the channel baseband (after the channel filter), relative to the tuned carrier"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = BandwidthResult.REPORT_KEYS + ("note",)

    @property
    def note(self) -> str:
        """Where the spectrum was taken (:attr:`NOTE`)."""
        return self.NOTE

    @classmethod
    def of(cls, result: BandwidthResult) -> "ChannelBandwidthResult":
        """``result``, measured on a channel baseband."""
        return cls(**_field_values(result))


@dataclass(frozen=True)
class AudioQualitySummary(AudioQualityResult):
    """Audio quality of a run (report section ``audio``).

    SNR, SINAD, THD, receiver SINAD and tone are those of one window, the one with the median SINAD
    among the steady windows, so that they come from one measurement.

    Attributes
    ----------
    sinad_db_range : (float, float)
        Lowest and highest SINAD over the steady windows (dB).
    windows : int
        Steady windows measured.
    window_s : float
        Length of an analysis window (s).
    """

    sinad_db_range: tuple[float, float]
    windows: int
    window_s: float

    SINAD_DEFINITION: ClassVar[str] = "IEEE Std 1241 S/(N+D); receiver_sinad_db is (S+N+D)/(N+D)"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
        "snr_db", "sinad_db", "thd_percent", "thd_db", "receiver_sinad_db", "tone_hz",
        "sinad_db_range", "weighting", "windows", "window_s", "sinad_definition",
    )

    @property
    def sinad_definition(self) -> str:
        """Which SINAD is which (:attr:`SINAD_DEFINITION`)."""
        return self.SINAD_DEFINITION

    @classmethod
    def of_windows(cls, results: Sequence[AudioQualityResult], window_s: float) -> "AudioQualitySummary":
        """The median-SINAD window of ``results`` (the steady windows, at least one), with the spread."""
        order = np.argsort([q.sinad_db for q in results])
        median = results[int(order[len(order) // 2])]
        sinad = np.array([q.sinad_db for q in results], dtype=float)
        return cls(**_field_values(median), sinad_db_range=(float(np.nanmin(sinad)), float(np.nanmax(sinad))),
                   windows=len(results), window_s=window_s)


@dataclass(frozen=True)
class AnalysisResult:
    """What :meth:`ChannelAnalyzer.result` returns: one attribute per report section (DESIGN.md vocabulary).

    Attributes
    ----------
    carrier : TunedCarrierResult or None
        ``frequency_hz``, ``error_hz`` (measured − nominal), ``level_dbfs``; None for suppressed-carrier
        modes.
    modulation : ModulationSummary or None
        ``depth_percent``, ``depth_positive_percent``, ``depth_negative_percent``, ``tone_hz`` (AM only).
    bandwidth : ChannelBandwidthResult or None
        ``occupied_hz`` (99 %, ITU-R SM.328), ``x_db_hz`` with ``x_db``.
    audio : AudioQualitySummary or None
        ``snr_db``, ``sinad_db``, ``thd_percent``, ``receiver_sinad_db`` (with a test tone only).
    activity : tuple of ActivitySegment
        Bursts of activity, in capture time (s).
    noise_floor_dbfs : float or None
        The noise floor the activity was measured against (dBFS).
    notes : tuple of str
        Remarks for the report's ``notes`` list.
    reasons : Mapping[str, str]
        Why each empty section (None, or no activity) is empty, by section name; written to the report
        as ``<section>_reason`` (see the module docstring). Exactly the empty sections have one.
    """

    carrier: TunedCarrierResult | None
    modulation: ModulationSummary | None
    bandwidth: ChannelBandwidthResult | None
    audio: AudioQualitySummary | None
    activity: tuple[ActivitySegment, ...]
    noise_floor_dbfs: float | None
    notes: tuple[str, ...]
    reasons: Mapping[str, str]

    def __post_init__(self) -> None:
        empty = {name for name in SECTIONS if getattr(self, name) is None}
        if not self.activity:
            empty.add("activity")
        if empty != set(self.reasons):
            raise ValueError(f"reasons: given for {sorted(self.reasons)}; the empty sections are {sorted(empty)}")

    def to_dict(self) -> dict[str, Any]:
        """The report's measurement keys: each section, its ``*_reason`` when empty, noise floor, notes."""
        out: dict[str, Any] = {}
        for name in SECTIONS:
            out[name] = to_jsonable(getattr(self, name))
            if name in self.reasons:
                out[f"{name}_reason"] = self.reasons[name]
        out["noise_floor_dbfs"] = to_jsonable(self.noise_floor_dbfs)
        if self.notes:
            out["notes"] = list(self.notes)
        return out
