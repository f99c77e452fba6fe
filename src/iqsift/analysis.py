"""Modulation analysis of one channel while it streams through a receiver.

A :class:`ChannelAnalyzer` sits on a receiver's channel baseband (carrier at
0 Hz, channel rate) and on its audio, and in the same pass accumulates what
:mod:`iqsift.measure` needs:

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

Memory is bounded: one analysis window of samples, the spectra, and a few
numbers per frame or segment.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from . import measure
from .modes import AM_MODES
from .spectra import WelchAccumulator

__all__ = ["ChannelAnalyzer", "ChannelMeasurement", "measure_channel"]


_NO_RESULT = (ValueError, ArithmeticError, np.linalg.LinAlgError)
"""What a measurement raises when the data cannot give a result (too short, no tone, no carrier): the
section is then reported empty. Anything else is a bug and propagates."""


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
        Test-tone frequency for the audio quality figures (None: not measured).
    weighting : {"none", "psophometric", "a"}
        Noise weighting of the audio figures (ITU-T O.41, IEC 61672-1).
    x_db : float
        x of the x-dB bandwidth (default 26 dB, ITU-R SM.328).
    window_s : float
        Analysis window for depth and audio quality (s).
    activity : dict
        Options of :func:`~iqsift.measure.detect_activity` (threshold_db, hysteresis_db, min_hold_s,
        noise_floor_db ...). Without ``noise_floor_db`` the floor is the lower of the frame-level
        percentile and the spectral estimate (:meth:`noise_floor_dbfs`).
    passband_hz : tuple, optional
        The channel's passband relative to the carrier (Hz), for the spectral noise-floor estimate.
    time_offset_s : float
        Capture time of the first sample fed (s): activity times are reported as capture times.
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
    ) -> None:
        self.rate = float(channel_rate_hz)
        self.audio_rate = float(audio_rate_hz)
        self.mode = mode
        self.nominal_hz = nominal_hz
        self.tone_hz = tone_hz
        self.weighting = weighting
        self.x_db = float(x_db)
        self.is_am = mode in AM_MODES
        search = min(0.45 * self.rate, max(0.5 * bandwidth_hz, 2500.0))
        self.carrier = measure.CarrierAccumulator(self.rate, 0.0, search_hz=search) if self.is_am else None
        nperseg = 1 << max(8, int(round(math.log2(self.rate / 8))))  # ~8 Hz bins
        self.spectrum = WelchAccumulator(self.rate, nperseg=nperseg, window="hann", name="channel")
        self._activity_options = dict(activity or {})
        self.activity = measure.ActivityTracker(self.rate, 0.01, **self._activity_options)
        self.passband_hz = passband_hz if passband_hz is not None else (-bandwidth_hz / 2, bandwidth_hz / 2)
        self.noise_floor_used_dbfs = None
        self.notes: list[str] = []
        self.time_offset_s = float(time_offset_s)
        self._win = max(1, int(round(window_s * self.rate)))
        self._awin = max(1, int(round(window_s * self.audio_rate)))
        self._audio_levels: list[float] = []
        self._env: list[np.ndarray] = []
        self._env_n = 0
        self._env_t = 0
        self._env_skip = int(round(EDGE_GUARD_S * self.rate))
        self._depths: list[tuple[float, Any]] = []
        self._aud: list[np.ndarray] = []
        self._aud_n = 0
        self._aud_t = 0
        self._aud_skip = int(round(EDGE_GUARD_S * self.audio_rate))
        self._quality: list[Any] = []

    # -- feeding -------------------------------------------------------
    def feed_baseband(self, z: np.ndarray) -> None:
        """Channel baseband block (complex, carrier at 0 Hz)."""
        if z.size == 0:
            return
        if self.carrier is not None:
            self.carrier.feed(z)
        self.spectrum.feed(z)
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
        if self.tone_hz is None or a.size == 0:
            return
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
        try:
            result = measure.measure_depth(window, self.rate)
        except _NO_RESULT:  # a window without modulation or carrier: no depth from it
            return
        t1 = self._env_t / self.rate
        self._depths.append((t1 - window.size / self.rate, t1, level, result))

    def _audio_window(self, final: bool = False) -> None:
        count = self._aud_n if final else self._awin
        window, self._aud = self._take(self._aud, count)
        self._aud_n -= window.size
        self._aud_t += window.size
        if window.size < int(0.8 * self._awin):
            return
        try:
            quality = measure.audio_quality(window, self.audio_rate, tone_hz=self.tone_hz, weighting=self.weighting)
        except _NO_RESULT:
            return
        t1 = self._aud_t / self.audio_rate
        self._quality.append((t1 - window.size / self.audio_rate, t1, float(np.mean(window**2)), quality))

    # -- results -------------------------------------------------------
    def result(self) -> dict[str, Any]:
        """Report sections: carrier, modulation, bandwidth, audio, activity (DESIGN.md vocabulary)."""
        if self._env_n:
            self._depth_window(final=True)
        if self._aud_n:
            self._audio_window(final=True)
        out: dict[str, Any] = {}
        self.notes = []
        segments = self._activity_segments()
        self._segments = [(seg.start_s, seg.end_s) for seg in segments]
        out["carrier"] = self._carrier_section()
        out["modulation"] = self._modulation_section()
        out["bandwidth"] = self._bandwidth_section()
        out["audio"] = self._audio_section()
        out["activity"] = []
        for seg in segments:
            entry = seg.to_dict()
            entry["start_s"] += self.time_offset_s
            entry["end_s"] += self.time_offset_s
            out["activity"].append(entry)
        out["noise_floor_dbfs"] = self.noise_floor_used_dbfs
        if self.notes:
            out["notes"] = list(self.notes)
        return out

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

    def _activity_segments(self) -> list[Any]:
        levels = self.activity.levels_db
        if levels.size == 0:
            return []
        options = dict(self._activity_options)
        if options.get("noise_floor_db") is None:
            spectral = self.noise_floor_dbfs()
            framewise = float(np.percentile(levels, options.get("floor_percentile", 10.0)))
            options["noise_floor_db"] = framewise if spectral is None else min(spectral, framewise)
        self.noise_floor_used_dbfs = options["noise_floor_db"]
        return measure.detect_activity(levels, self.activity.frame_s, **options)

    def _carrier_section(self) -> dict[str, Any] | None:
        if self.carrier is None:
            return None
        try:
            c = self.carrier.result()
        except _NO_RESULT:
            return None
        d = c.to_dict()
        if not c.detected:
            # no carrier stood out of the noise: a frequency would be noise, report none
            return {"detected": False, "frequency_hz": None, "error_hz": None, "level_dbfs": None,
                    "nominal_hz": self.nominal_hz}
        base = self.nominal_hz or 0.0
        d["offset_from_tuning_hz"] = c.frequency_hz
        d["frequency_hz"] = base + c.frequency_hz
        d["nominal_hz"] = self.nominal_hz
        d["error_hz"] = c.frequency_hz  # measured minus nominal: the baseband's 0 Hz is the nominal carrier
        return d

    def _modulation_section(self) -> dict[str, Any] | None:
        if not self._depths:
            self.notes.append("modulation: no analysis window of "
                              f"{self._win / self.rate:g} s fits the selection and the carrier's activity")
            return None
        chosen = _steady(self._depths, self._segments, self._env_t / self.rate)
        if not chosen:
            self.notes.append("modulation: every analysis window touches the start or end of the run")
            return None
        # one representative window (the median depth), so that every figure comes from one measurement
        order = np.argsort([r.depth_percent for r in chosen])
        rep = chosen[int(order[len(order) // 2])]
        depth = np.array([r.depth_percent for r in chosen])
        return {
            "depth_percent": rep.depth_percent,
            "depth_positive_percent": rep.depth_positive_percent,
            "depth_negative_percent": rep.depth_negative_percent,
            "tone_hz": rep.tone_hz,
            "depth_percent_range": [float(depth.min()), float(depth.max())],
            "windows": len(chosen),
            "window_s": self._win / self.rate,
            "method": f"the median window of {len(chosen)} steady window(s) of {self._win / self.rate:g} s; {rep.method}",
        }

    def _bandwidth_section(self) -> dict[str, Any] | None:
        if not self.spectrum.ready:
            return None
        spec = self.spectrum.result("spectrum")
        freqs = spec.relative_freqs_hz if hasattr(spec, "relative_freqs_hz") else spec.freqs_hz
        psd = 10 ** (np.asarray(spec.values_db) / 10)
        try:
            bw = measure.measure_bandwidth(freqs, psd, 0.99, self.x_db).to_dict()
        except _NO_RESULT:
            return None
        bw["note"] = "measured on the channel baseband (after the channel filter), relative to the tuned carrier"
        return bw

    def _audio_section(self) -> dict[str, Any] | None:
        if self.tone_hz is None:
            return None
        chosen = _steady(self._quality, self._segments, self._aud_t / self.audio_rate) if self._quality else []
        if not chosen:
            self.notes.append("audio: no steady analysis window of "
                              f"{self._awin / self.audio_rate:g} s inside the run and the channel's activity")
            return None
        # one representative window (the median SINAD): SNR, SINAD and THD come from the same measurement
        order = np.argsort([q.sinad_db for q in chosen])
        rep = chosen[int(order[len(order) // 2])]
        out: dict[str, Any] = {key: getattr(rep, key) for key in
                               ("snr_db", "sinad_db", "thd_percent", "thd_db", "receiver_sinad_db", "tone_hz")}
        sinad = np.array([q.sinad_db for q in chosen], dtype=float)
        out["sinad_db_range"] = [float(np.nanmin(sinad)), float(np.nanmax(sinad))]
        out["weighting"] = self.weighting
        out["windows"] = len(chosen)
        out["window_s"] = self._awin / self.audio_rate
        out["sinad_definition"] = "IEEE Std 1241 S/(N+D); receiver_sinad_db is (S+N+D)/(N+D)"
        return out


EDGE_GUARD_S = 0.05
"""Windows closer than this to the start or end of a run are not used: the receiver's filters are still
filling there and its audio is faded over the first and last 5 ms."""


def _steady(windows: list[tuple[float, float, float, Any]], segments: list[tuple[float, float]],
            run_s: float) -> list[Any]:
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


@dataclass(frozen=True)
class ChannelMeasurement:
    """The result of :func:`measure_channel`: one attribute per report section (DESIGN.md vocabulary).

    Attributes
    ----------
    channel : dict
        ``name``, ``frequency_hz``, ``bandwidth_hz``, ``mode``, ``level_dbfs`` ...
    carrier : dict or None
        ``frequency_hz``, ``error_hz`` (measured − nominal), ``level_dbfs``; None for suppressed-carrier modes.
    modulation : dict or None
        ``depth_percent``, ``depth_positive_percent``, ``depth_negative_percent``, ``tone_hz`` (AM only).
    bandwidth : dict or None
        ``occupied_hz`` (99 %, ITU-R SM.328), ``x_db_hz`` with ``x_db``.
    audio : dict or None
        ``snr_db``, ``sinad_db``, ``thd_percent``, ``receiver_sinad_db`` (with a test tone only).
    activity : list of dict
        ``start_s``, ``end_s``, ``level_dbfs`` per segment.
    report : dict
        The whole report (design, delay, ... as well).
    """

    channel: dict
    carrier: dict | None
    modulation: dict | None
    bandwidth: dict | None
    audio: dict | None
    activity: list
    report: dict

    def to_dict(self) -> dict[str, Any]:
        """The JSON report."""
        return self.report


def measure_channel(
    capture,
    channel,
    *,
    tone_hz: float | None = None,
    weighting: str = "none",
    x_db: float = 26.0,
    threshold_db: float = 10.0,
    start=None,
    duration=None,
    nonfinite: str = "error",
) -> ChannelMeasurement:
    """Measure one channel of a capture in one streaming pass (the library form of ``iqsift measure``).

    Parameters
    ----------
    capture : Capture
        From :func:`iqsift.open_capture`.
    channel : Channel
        From :func:`iqsift.make_channel`.
    tone_hz : float, optional
        Test-tone frequency (Hz) for SNR/SINAD/THD (IEEE Std 1241).
    weighting : {"none", "psophometric", "a"}
        Noise weighting (ITU-T O.41, IEC 61672-1).
    x_db : float
        x of the x-dB bandwidth (dB).
    threshold_db : float
        Activity threshold above the noise floor (dB).
    start, duration : seconds or str, optional
        The window to analyse (see :meth:`Capture.select`).
    """
    from .receiver import Receiver

    selection = capture.select(start, duration)
    receiver = Receiver.for_capture(capture, channel, selection, agc=False).analyze(
        tone_hz=tone_hz, weighting=weighting, x_db=x_db, activity={"threshold_db": threshold_db},
        time_offset_s=selection.start / capture.sample_rate_hz)
    for _ in receiver.stream(capture.blocks(start=selection.start, count=selection.count, nonfinite=nonfinite)):
        pass
    report = receiver.report()
    return ChannelMeasurement(report["channel"], report.get("carrier"), report.get("modulation"),
                              report.get("bandwidth"), report.get("audio"), report.get("activity") or [], report)
