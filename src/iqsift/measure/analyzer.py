"""Modulation analysis of one channel while it streams through a receiver.

A :class:`ChannelAnalyzer` sits on a receiver's channel baseband (carrier at
0 Hz, channel rate) and on its audio, and in the same pass accumulates what
the measurements need:

* carrier frequency and level — :class:`~iqsift.measure.CarrierAccumulator`
  (phase-slope fit, far finer than a bin), AM modes only;
* modulation depth — :func:`~iqsift.measure.measure_depth` on the envelope in
  windows of ``window_s``; the reported depth is the median over the steady
  windows — those inside one activity segment whose level is within 1 dB of
  the 90th percentile of window levels, so pauses, off periods and windows
  straddling a burst edge do not count — with the spread reported alongside;
* occupied and x-dB bandwidth (ITU-R SM.328) — from a Welch spectrum of the
  channel baseband (so never wider than the channel filter);
* audio quality with a test tone (IEEE Std 1241 SNR/SINAD/THD, receiver SINAD)
  — :func:`~iqsift.measure.audio_quality` on the audio in windows (steady ones,
  as for depth), median;
* activity — :class:`~iqsift.measure.ActivityTracker` (10 ms frame levels).

Everything a caller can get wrong (weighting, test tone, x of the x-dB
bandwidth, window) is refused when the analyzer is built, before any sample
is fed. Memory is bounded: one analysis window of samples, the spectra, and a
few numbers per frame or segment.
"""

from __future__ import annotations

import math
from types import MappingProxyType
from typing import Any

import numpy as np

from .. import checks
from ..errors import ParameterError
from ..modes import AM_MODES
from ..spectra import WelchAccumulator
from .activity import ActivitySegment, ActivityTracker, detect_activity
from .audio import AudioQualityResult, audio_quality
from .bandwidth import measure_bandwidth
from .carrier import CarrierAccumulator
from .modulation import ModulationResult, measure_depth
from .sections import (
    PEAK_EDGES,
    AnalysisResult,
    AudioQualitySummary,
    ChannelBandwidthResult,
    ModulationSummary,
    TunedCarrierResult,
)
from .weighting import check_weighting

__all__ = ["ChannelAnalyzer", "EDGE_GUARD_S"]


_NO_RESULT = (ValueError, ArithmeticError, np.linalg.LinAlgError)
"""What a measurement raises when the data cannot give a result (too short, no tone, no carrier): the
section is then reported empty, with the reason. Anything else is a bug and propagates."""

EDGE_GUARD_S = 0.05
"""Windows closer than this to the start or end of a run are not used: the receiver's filters are still
filling there and its audio is faded over the first and last 5 ms."""

Window = tuple[float, float, float, Any]
"""One analysis window: start (s), end (s), mean power, its measurement result."""


class ChannelAnalyzer:
    """Accumulate the measurements of one channel.

    Parameters
    ----------
    channel_rate_hz : float
        Rate of the channel baseband (samples/s).
    audio_rate_hz : float
        Rate of the audio (samples/s).
    mode : str
        The channel's detector mode (carrier and depth only for AM with carrier).
    bandwidth_hz : float
        The channel's stated bandwidth (Hz); bounds the carrier search.
    nominal_hz : float or None
        Absolute nominal carrier frequency (Hz), or the offset when the capture
        centre is unknown; the carrier is reported on the same axis.
    tone_hz : float or None
        Test-tone frequency for the audio quality figures (None: not measured); it must
        lie in the audio band the channel delivers, 0 < tone_hz <= the highest modulating
        frequency of the passband (and below half the audio rate).
    weighting : {"none", "psophometric", "a"}
        Noise weighting of the audio figures (ITU-T O.41, IEC 61672-1).
    x_db : float
        x of the x-dB bandwidth (default 26 dB, ITU-R SM.328); > 0.
    window_s : float
        Analysis window for depth and audio quality (s); > 0.
    activity : dict
        Options of :func:`~iqsift.measure.detect_activity` (threshold_db, hysteresis_db, min_hold_s,
        noise_floor_db ...). Without ``noise_floor_db`` the floor is the lower of the frame-level
        percentile and the spectral estimate (:meth:`noise_floor_dbfs`).
    passband_hz : tuple, optional
        The channel's passband relative to the carrier (Hz), for the spectral noise-floor estimate.
    time_offset_s : float
        Capture time of the first sample fed (s): activity times are reported as capture times.
    find_tone : bool
        Without ``tone_hz``, measure the audio figures at the strongest tone of each window
        (:func:`~iqsift.measure.audio_quality`) instead of leaving them out.
    audio_reason : str, optional
        Why the audio section is empty when it is not measured (default: no test tone given).

    Raises
    ------
    ParameterError
        For an unknown ``weighting``, a ``tone_hz`` outside the channel's audio band, ``x_db <= 0``,
        ``window_s <= 0`` or bad ``activity`` options, naming the parameter.
    """

    def __init__(
        self,
        channel_rate_hz: float,
        audio_rate_hz: float,
        mode: str,
        bandwidth_hz: float,
        nominal_hz: float | None = 0.0,
        *,
        tone_hz: float | None = None,
        weighting: str = "none",
        x_db: float = 26.0,
        window_s: float = 0.5,
        activity: dict | None = None,
        passband_hz: tuple[float, float] | None = None,
        time_offset_s: float = 0.0,
        find_tone: bool = False,
        audio_reason: str | None = None,
    ) -> None:
        self.rate = checks.positive("channel_rate_hz", channel_rate_hz)
        self.audio_rate = checks.positive("audio_rate_hz", audio_rate_hz)
        self.mode = mode
        self.nominal_hz = nominal_hz
        self.passband_hz = passband_hz if passband_hz is not None else (-bandwidth_hz / 2, bandwidth_hz / 2)
        self.tone_hz = None if tone_hz is None else self._check_tone(tone_hz)
        self.find_tone = bool(find_tone)
        self._audio_reason = audio_reason
        self.weighting = check_weighting(weighting)
        self.x_db = checks.positive("x_db", x_db)
        window_s = checks.positive("window_s", window_s)
        self.is_am = mode in AM_MODES
        search = min(0.45 * self.rate, max(0.5 * bandwidth_hz, 2500.0))
        self.carrier = CarrierAccumulator(self.rate, 0.0, search_hz=search) if self.is_am else None
        nperseg = 1 << max(8, int(round(math.log2(self.rate / 8))))  # ~8 Hz bins
        self.spectrum = WelchAccumulator(self.rate, nperseg=nperseg, window="hann", name="channel")
        self._activity_options = dict(activity or {})
        self.activity = ActivityTracker(self.rate, 0.01, **self._activity_options)
        self.noise_floor_used_dbfs: float | None = None
        self.notes: list[str] = []
        self.time_offset_s = float(time_offset_s)
        self._activity_fed = False
        self._win = max(1, int(round(window_s * self.rate)))
        self._awin = max(1, int(round(window_s * self.audio_rate)))
        self._env: list[np.ndarray] = []
        self._env_n = 0
        self._env_t = 0
        self._env_skip = int(round(EDGE_GUARD_S * self.rate))
        self._depths: list[Window] = []
        self._peaks: list[Window] = []  # (start_s, end_s, carrier level, histogram of |z|/Ec - 1)
        self._depth_failures = _Failures()
        self._aud: list[np.ndarray] = []
        self._aud_n = 0
        self._aud_t = 0
        self._aud_skip = int(round(EDGE_GUARD_S * self.audio_rate))
        self._quality: list[Window] = []
        self._quality_failures = _Failures()
        self._segments: list[tuple[float, float]] = []
        self._reasons: dict[str, str] = {}
        self._result: AnalysisResult | None = None

    def _check_tone(self, tone_hz: Any) -> float:
        """``tone_hz`` if the channel's audio can hold it: 0 < tone <= the passband's highest modulating
        frequency (the channel's audio top) and <= half the audio rate."""
        tone = checks.positive("tone_hz", tone_hz)
        top = min(max(abs(float(v)) for v in self.passband_hz), 0.5 * self.audio_rate)
        if tone > top:
            raise ParameterError(f"tone_hz: got {tone_hz!r} Hz; it must lie in the audio band the channel "
                                 f"delivers, 0 < tone_hz <= {top:g} Hz")
        return tone

    # -- feeding -------------------------------------------------------
    def feed_activity(self, z: np.ndarray) -> None:
        """Channel baseband block for the activity tracker: every sample from the start of the run, so that
        activity times are capture times."""
        if z.size:
            self._result = None
            self.activity.feed(z)
            self._activity_fed = True

    def feed_baseband(self, z: np.ndarray) -> None:
        """Channel baseband block (complex, carrier at 0 Hz) for the carrier, spectrum and depth; the
        activity tracker is fed too unless :meth:`feed_activity` feeds it."""
        if z.size == 0:
            return
        self._result = None
        if self.carrier is not None:
            self.carrier.feed(z)
        self.spectrum.feed(z)
        if not self._activity_fed:
            self.activity.feed(z)
        if self.is_am:
            env = np.abs(z).astype(np.float64)
            skip = min(env.size, self._env_skip)  # the run's start (filters filling) is not analysed
            self._env_skip -= skip
            self._env_t += skip
            if env.size > skip:
                self._env.append(env[skip:])
                self._env_n += env.size - skip
            while self._env_n >= self._win:
                self._depth_window()

    def feed_audio(self, a: np.ndarray) -> None:
        """Audio block (float)."""
        if (self.tone_hz is None and not self.find_tone) or a.size == 0:
            return
        self._result = None
        a = np.asarray(a, dtype=np.float64)
        skip = min(a.size, self._aud_skip)  # the run's start (filters filling, fade-in) is not analysed
        self._aud_skip -= skip
        self._aud_t += skip
        if a.size > skip:
            self._aud.append(a[skip:])
            self._aud_n += a.size - skip
        while self._aud_n >= self._awin:
            self._audio_window()

    def _take(self, parts: list[np.ndarray], count: int) -> tuple[np.ndarray, list[np.ndarray]]:
        joined = np.concatenate(parts)
        return joined[:count], [joined[count:]] if joined.size > count else []

    def _depth_window(self, final: bool = False) -> None:
        count = self._env_n if final else self._win
        window, self._env = self._take(self._env, count)
        self._env_n -= window.size
        self._env_t += window.size
        if window.size < max(64, int(0.8 * self._win)):
            return
        level = float(np.mean(window**2))
        t1 = self._env_t / self.rate
        carrier = float(np.mean(window))
        if carrier > 0:  # the instantaneous modulation, kept as a histogram for program material
            counts = np.histogram(window / carrier - 1.0, bins=PEAK_EDGES)[0].astype(np.uint32)
            self._peaks.append((t1 - window.size / self.rate, t1, carrier, counts))
        try:
            result = measure_depth(window, self.rate)
        except _NO_RESULT as exc:  # a window without modulation or carrier: no depth from it
            self._depth_failures.add(exc)
            return
        self._depths.append((t1 - window.size / self.rate, t1, level, result))

    def _audio_window(self, final: bool = False) -> None:
        count = self._aud_n if final else self._awin
        window, self._aud = self._take(self._aud, count)
        self._aud_n -= window.size
        self._aud_t += window.size
        if window.size < int(0.8 * self._awin):
            return
        try:
            quality = audio_quality(window, self.audio_rate, tone_hz=self.tone_hz, weighting=self.weighting)
        except _NO_RESULT as exc:  # a window without the tone: no figures from it
            self._quality_failures.add(exc)
            return
        t1 = self._aud_t / self.audio_rate
        self._quality.append((t1 - window.size / self.audio_rate, t1, float(np.mean(window**2)), quality))

    # -- results -------------------------------------------------------
    def result(self) -> AnalysisResult:
        """Report sections: carrier, modulation, bandwidth, audio, activity (DESIGN.md vocabulary).

        ``result().to_dict()`` gives the report's keys; an empty section carries its reason
        (:mod:`iqsift.measure.sections`). The result is kept until more samples are fed.
        """
        if self._result is None:
            self._result = self._measure()
        return self._result

    def audio_result(self) -> tuple[AudioQualitySummary | None, str | None]:
        """The audio section alone and, when it is empty, why (see :meth:`result`)."""
        result = self.result()
        return result.audio, result.reasons.get("audio")

    def _measure(self) -> AnalysisResult:
        if self._env_n:
            self._depth_window(final=True)
        if self._aud_n:
            self._audio_window(final=True)
        self.notes = []
        self._reasons = {}
        segments = self._activity_segments()
        self._segments = [(seg.start_s, seg.end_s) for seg in segments]
        carrier = self._carrier_section()
        modulation = self._modulation_section()
        bandwidth = self._bandwidth_section()
        audio = self._audio_section()
        activity = tuple(ActivitySegment(seg.start_s + self.time_offset_s, seg.end_s + self.time_offset_s,
                                         seg.level_dbfs) for seg in segments)
        if not activity:
            self._reasons["activity"] = self._no_activity_reason()
        return AnalysisResult(carrier, modulation, bandwidth, audio, activity, self.noise_floor_used_dbfs,
                              tuple(self.notes), MappingProxyType(dict(self._reasons)))

    def noise_floor_dbfs(self) -> float | None:
        """Noise power in the channel (dBFS), from the 10th percentile of the baseband PSD over the passband.

        Most of an AM voice channel's passband holds noise most of the time (the carrier is one line,
        speech energy is concentrated), so a low percentile of the averaged density times the passband
        width estimates the noise even when the channel is busy the whole time (common practice).
        """
        if not self.spectrum.ready:
            return None
        spec = self.spectrum.result("density")
        f = np.asarray(spec.relative_freqs_hz if hasattr(spec, "relative_freqs_hz") else spec.freqs_hz)
        lo, hi = self.passband_hz
        band = (f >= lo) & (f <= hi)
        if band.sum() < 8:
            return None
        density = 10 ** (np.asarray(spec.values_db)[band] / 10)
        return float(10 * np.log10(np.percentile(density, 10) * (hi - lo)))

    def _activity_segments(self) -> list[ActivitySegment]:
        levels = self.activity.levels_db
        if levels.size == 0:
            return []
        options = dict(self._activity_options)
        if options.get("noise_floor_db") is None:
            spectral = self.noise_floor_dbfs()
            framewise = float(np.percentile(levels, options.get("floor_percentile", 10.0)))
            options["noise_floor_db"] = framewise if spectral is None else min(spectral, framewise)
        self.noise_floor_used_dbfs = options["noise_floor_db"]
        return detect_activity(levels, self.activity.frame_s, **options)

    def _no_activity_reason(self) -> str:
        if self.activity.levels_db.size == 0:
            return f"no complete activity frame of {self.activity.frame_s:g} s was fed"
        return (f"no burst rose the activity threshold above the noise floor of {self.noise_floor_used_dbfs:.1f} dBFS "
                "for long enough (threshold_db, min_hold_s)")

    def _carrier_section(self) -> TunedCarrierResult | None:
        if self.carrier is None:
            self._reasons["carrier"] = f"not measured: {self.mode} is a suppressed-carrier mode"
            return None
        try:
            measured = self.carrier.result()
        except _NO_RESULT as exc:
            self._reasons["carrier"] = f"no carrier estimate: {exc}"
            return None
        return TunedCarrierResult.from_baseband(measured, self.nominal_hz)

    def _modulation_section(self) -> ModulationSummary | None:
        window_s = self._win / self.rate
        if not self._depths:
            self.notes.append("modulation: no analysis window of "
                              f"{window_s:g} s fits the selection and the carrier's activity")
            if not self.is_am:
                reason = f"not measured: modulation depth is defined for AM with a carrier, not the {self.mode} mode"
            else:
                reason = self._depth_failures.explain(f"no analysis window of {window_s:g} s fits the selection "
                                                      "and the carrier's activity")
            self._reasons["modulation"] = reason
            return None
        chosen: list[ModulationResult] = _steady(self._depths, self._segments, self._env_t / self.rate)
        if not chosen:
            self.notes.append("modulation: every analysis window touches the start or end of the run")
            self._reasons["modulation"] = "every analysis window touches the start or end of the run"
            return None
        summary = ModulationSummary.of_windows(chosen, window_s)
        if summary.method != "tone-fit":  # no dominant test tone: program material, peaks over the active time
            active = _inside(self._peaks, self._segments, self._env_t / self.rate)
            if active:
                counts = np.sum([w[3] for w in active], axis=0)
                return ModulationSummary.of_program(counts, PEAK_EDGES, len(active), window_s,
                                                    float(np.median([w[2] for w in active])))
        return summary

    def _bandwidth_section(self) -> ChannelBandwidthResult | None:
        if not self.spectrum.ready:
            self._reasons["bandwidth"] = "no spectrum: the run is shorter than one analysis segment of the channel spectrum"
            return None
        spec = self.spectrum.result("spectrum")
        freqs = spec.relative_freqs_hz if hasattr(spec, "relative_freqs_hz") else spec.freqs_hz
        psd = 10 ** (np.asarray(spec.values_db) / 10)
        try:
            measured = measure_bandwidth(freqs, psd, 0.99, self.x_db)
        except _NO_RESULT as exc:
            self._reasons["bandwidth"] = f"no bandwidth: {exc}"
            return None
        return ChannelBandwidthResult.of(measured)

    def _audio_section(self) -> AudioQualitySummary | None:
        if self.tone_hz is None and not self.find_tone:
            self._reasons["audio"] = self._audio_reason or "not measured: no test tone given (tone_hz)"
            return None
        window_s = self._awin / self.audio_rate
        chosen: list[AudioQualityResult] = (
            _steady(self._quality, self._segments, self._aud_t / self.audio_rate) if self._quality else [])
        if not chosen:
            self.notes.append("audio: no steady analysis window of "
                              f"{window_s:g} s inside the run and the channel's activity")
            self._reasons["audio"] = self._quality_failures.explain(
                f"no steady analysis window of {window_s:g} s inside the run and the channel's activity")
            return None
        return AudioQualitySummary.of_windows(chosen, window_s)


class _Failures:
    """How many analysis windows gave no result, and why the last one did not (for a section's reason)."""

    def __init__(self) -> None:
        self.count = 0
        self.last = ""

    def add(self, exc: Exception) -> None:
        self.count += 1
        self.last = str(exc)

    def explain(self, reason: str) -> str:
        """``reason``, plus the failed windows if there were any."""
        if not self.count:
            return reason
        return f"{reason}; {self.count} window(s) gave no result, the last: {self.last}"


def _inside(windows: list[Window], segments: list[tuple[float, float]], run_s: float) -> list[Window]:
    """The windows away from the run's ends (EDGE_GUARD_S) and inside an activity segment (10 ms margin)."""
    return [w for w in windows if w[0] >= EDGE_GUARD_S and w[1] <= run_s - EDGE_GUARD_S
            and any(a - 0.01 <= w[0] and w[1] <= b + 0.01 for a, b in segments)]


def _steady(windows: list[Window], segments: list[tuple[float, float]], run_s: float) -> list[Any]:
    """Results of the steady windows: away from the run's ends (EDGE_GUARD_S), inside one activity segment
    (10 ms margin) when any window is, and with a mean power within 1 dB of the 90th percentile."""
    pool = [w for w in windows if w[0] >= EDGE_GUARD_S and w[1] <= run_s - EDGE_GUARD_S]
    if not pool:
        return []
    inside = [w for w in pool if any(a - 0.01 <= w[0] and w[1] <= b + 0.01 for a, b in segments)]
    pool = inside or pool
    levels = np.array([w[2] for w in pool])
    ref = np.percentile(levels, 90)
    return [w[3] for w in pool if w[2] >= ref * 10 ** (-0.1)]
