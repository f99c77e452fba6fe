"""Measurements on one channel: carrier, modulation depth, audio quality, bandwidth, activity.

Every measurement is a pure function on arrays that returns a frozen dataclass whose ``to_dict()``
gives the stable report keys of the design notes (``carrier.*``, ``modulation.*``, ``audio.*``,
``bandwidth.*``, ``activity``); :mod:`iqsift.measure.results` describes the shared base. Two streaming
accumulators cover captures too long to hold in memory: :class:`CarrierAccumulator` and
:class:`ActivityTracker`. :class:`ChannelAnalyzer` runs them all on a receiver's channel while it
streams and returns an :class:`AnalysisResult`, whose empty sections say why they are empty
(:mod:`iqsift.measure.sections`); :func:`iqsift.jobs.measure_channel` is the whole ``iqsift measure`` in one call.

Modules, one measurement each
-----------------------------
* :mod:`~iqsift.measure.carrier` — carrier frequency (Smith & Serra 1987 peak interpolation, Tretter
  1985 phase slope; Rife & Boorstyn 1974 bound) and level;
* :mod:`~iqsift.measure.modulation` — AM depth and sideband levels (Haykin, *Communication Systems*);
* :mod:`~iqsift.measure.audio` — SNR, SINAD, THD (IEEE Std 1241), on :mod:`~iqsift.measure.sinefit`;
* :mod:`~iqsift.measure.weighting` — ITU-T O.41 psophometric and IEC 61672-1 A-weighting;
* :mod:`~iqsift.measure.bandwidth` — occupied and x-dB bandwidth (ITU RR No. 1.153, ITU-R SM.328);
* :mod:`~iqsift.measure.activity` — bursts by two-threshold detection;
* :mod:`~iqsift.measure.analyzer`, :mod:`~iqsift.measure.sections`, :mod:`~iqsift.measure.channel` —
  the streaming analysis of a receiver's channel and its report sections.
"""

from .activity import ActivitySegment, ActivityTracker, detect_activity
from .analyzer import ChannelAnalyzer
from .audio import AudioQualityResult, audio_quality
from .bandwidth import BandwidthResult, measure_bandwidth, occupied_bandwidth, x_db_bandwidth
from .carrier import CarrierAccumulator, CarrierResult, estimate_carrier
from .modulation import ModulationResult, measure_depth, sideband_levels_dbc
from .reference import Alignment, ReferenceScore, align_reference, score_reference, segmental_snr_db
from .results import Reportable
from .sections import (
    AnalysisResult,
    AudioQualitySummary,
    ChannelBandwidthResult,
    ModulationSummary,
    TunedCarrierResult,
)
from .sinefit import SineFitResult, sine_fit
from .weighting import WEIGHTINGS, Weighting, a_weight_db, check_weighting, psophometric_weight_db, weight_db

__all__ = [
    "Alignment",
    "ReferenceScore",
    "align_reference",
    "score_reference",
    "segmental_snr_db",
    "CarrierResult",
    "CarrierAccumulator",
    "estimate_carrier",
    "ModulationResult",
    "measure_depth",
    "sideband_levels_dbc",
    "SineFitResult",
    "sine_fit",
    "AudioQualityResult",
    "audio_quality",
    "Weighting",
    "WEIGHTINGS",
    "check_weighting",
    "psophometric_weight_db",
    "a_weight_db",
    "weight_db",
    "BandwidthResult",
    "occupied_bandwidth",
    "x_db_bandwidth",
    "measure_bandwidth",
    "ActivitySegment",
    "detect_activity",
    "ActivityTracker",
    "Reportable",
    "ChannelAnalyzer",
    "AnalysisResult",
    "TunedCarrierResult",
    "ModulationSummary",
    "ChannelBandwidthResult",
    "AudioQualitySummary",
]
