"""Activity on a channel: bursts found in frame levels by two-threshold (hysteresis) detection.

:class:`ActivityTracker` follows the project's accumulator protocol (``feed(block) -> self``,
``result()``, ``reset()``): frame levels run on across blocks, so the bursts found do not depend on how
the input is split; :func:`detect_activity` segments a sequence of frame levels.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from .. import checks
from ..errors import ParameterError
from .results import Reportable
from .samples import TINY_POWER, as_samples, power_db

__all__ = ["ActivitySegment", "detect_activity", "ActivityTracker"]


@dataclass(frozen=True)
class ActivitySegment(Reportable):
    """One burst of activity on the channel (an item of the report's ``activity`` list).

    Attributes
    ----------
    start_s, end_s : float
        Start and end (s from the first frame), edges interpolated inside the edge frames.
    level_dbfs : float
        Mean channel power over the burst (signal plus noise), dBFS.
    """

    start_s: float
    end_s: float
    level_dbfs: float

    SECTION: ClassVar[str] = "activity"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = ("start_s", "end_s", "level_dbfs")


def detect_activity(
    levels_db: Any,
    frame_s: float,
    threshold_db: float = 10.0,
    hysteresis_db: float = 3.0,
    min_hold_s: float = 0.05,
    noise_floor_db: float | None = None,
    *,
    merge_gap_s: float = 0.2,
    floor_percentile: float = 10.0,
) -> list[ActivitySegment]:
    """Find bursts of activity in per-frame channel levels.

    Parameters
    ----------
    levels_db : array_like of float
        Channel power per frame (dBFS), e.g. 10 ms frames.
    frame_s : float
        Frame duration (s).
    threshold_db : float, default 10.0
        A burst opens when a frame reaches the noise floor plus this (dB).
    hysteresis_db : float, default 3.0
        It closes when a frame falls below the opening threshold minus this (dB).
    min_hold_s : float, default 0.05
        Bursts shorter than this (after merging) are dropped as noise blips (s).
    noise_floor_db : float or None
        Noise floor (dBFS); None estimates it as the ``floor_percentile`` percentile of
        the frame levels (robust while the channel is idle more than that share of
        the time).
    merge_gap_s : float, default 0.2
        Gaps shorter than this between bursts are bridged (syllable pauses) (s).
    floor_percentile : float, default 10.0
        Percentile used for the floor estimate.

    Returns
    -------
    list of ActivitySegment

    Notes
    -----
    Two-threshold (hysteresis) detection as squelch circuits do it (common practice).
    Edges are refined inside the frames: the share p of a frame occupied by the burst
    is (P_frame − P_floor)/(P_burst − P_floor), P_burst the median frame power of the
    burst, clipped to 0..1; the start is moved earlier by the shares of the first
    detected frame (beyond the first) and of the frame before it, the end likewise.
    """
    levels = as_samples("levels_db", levels_db, np.float64, min_len=0)
    fs = checks.positive("frame_s", frame_s)
    thr = checks.finite("threshold_db", threshold_db)
    hyst = checks.nonnegative("hysteresis_db", hysteresis_db)
    hold = checks.nonnegative("min_hold_s", min_hold_s)
    gap = checks.nonnegative("merge_gap_s", merge_gap_s)
    pct = checks.finite("floor_percentile", floor_percentile)
    if not 0.0 <= pct <= 100.0:
        raise ParameterError(f"floor_percentile: {floor_percentile!r}; it must lie within 0..100")
    given_floor = None if noise_floor_db is None else checks.finite("noise_floor_db", noise_floor_db)
    if levels.size == 0:
        return []
    floor = float(np.percentile(levels, pct)) if given_floor is None else given_floor
    on_thr = floor + thr
    off_thr = on_thr - hyst

    n = levels.size
    events = np.zeros(n, dtype=np.int8)
    events[levels < off_thr] = -1
    events[levels >= on_thr] = 1
    idx = np.where(events != 0, np.arange(n), -1)
    last = np.maximum.accumulate(idx)
    state = (last >= 0) & (events[np.maximum(last, 0)] == 1)
    if not np.any(state):
        return []
    d = np.diff(np.concatenate([[0], state.astype(np.int8), [0]]))
    starts: list[int] = np.nonzero(d == 1)[0].tolist()
    ends: list[int] = np.nonzero(d == -1)[0].tolist()  # exclusive

    merged: list[list[int]] = []
    for s, e in zip(starts, ends):
        if merged and (s - merged[-1][1]) * fs < gap:
            merged[-1][1] = e
        else:
            merged.append([s, e])

    power = 10.0 ** (levels / 10.0)
    p_floor = 10.0 ** (floor / 10.0)
    out: list[ActivitySegment] = []
    for s, e in merged:
        if (e - s) * fs < hold:
            continue
        seg_power = power[s:e]
        p_burst = float(np.median(seg_power))
        span = p_burst - p_floor

        def share(i: int) -> float:
            if i < 0 or i >= n or span <= 0.0:
                return 0.0
            return min(max((power[i] - p_floor) / span, 0.0), 1.0)

        start = s + 1 - share(s) - share(s - 1) if e - s >= 1 else float(s)
        end = e - 1 + share(e - 1) + share(e)
        start = max(start, s - 1.0)
        end = min(end, e + 1.0)
        inner = seg_power[1:-1] if e - s >= 3 else seg_power
        out.append(ActivitySegment(start * fs, end * fs, power_db(float(np.mean(inner)))))
    return out


class ActivityTracker:
    """Streaming frame levels of a channel baseband, segmented into bursts at the end.

    Parameters
    ----------
    rate_hz : float
        Sample rate of the channel baseband (samples/s).
    frame_s : float, default 0.01
        Frame length (s); rounded to whole samples (:attr:`frame_s` gives the value used).
    **detect_kwargs
        Passed to :func:`detect_activity` (threshold_db, hysteresis_db, min_hold_s,
        noise_floor_db, merge_gap_s, floor_percentile).

    Notes
    -----
    Each frame's level is 10·log10(mean |x|²) dBFS; frames run on across blocks, so the
    levels do not depend on how the input is split. Storage is one float per frame
    (100 per second at 10 ms). The unfinished last frame is not counted.
    """

    def __init__(self, rate_hz: float, frame_s: float = 0.01, **detect_kwargs: Any) -> None:
        self._rate = checks.positive("rate_hz", rate_hz)
        fs = checks.positive("frame_s", frame_s)
        self._frame_len = int(round(fs * self._rate))
        if self._frame_len < 1:
            raise ParameterError(f"frame_s: {frame_s!r} s is shorter than one sample at {self._rate:g} samples/s")
        allowed = {"threshold_db", "hysteresis_db", "min_hold_s", "noise_floor_db", "merge_gap_s", "floor_percentile"}
        unknown = set(detect_kwargs) - allowed
        if unknown:
            raise ParameterError(f"ActivityTracker: unknown option(s) {sorted(unknown)}; allowed: {sorted(allowed)}")
        self._kwargs = dict(detect_kwargs)
        detect_activity(np.zeros(0), self.frame_s, **self._kwargs)  # refuses bad option values now, not after a run
        self.reset()

    @property
    def rate_in(self) -> float:
        """Sample rate (samples/s)."""
        return self._rate

    @property
    def frame_s(self) -> float:
        """Frame duration actually used (s)."""
        return self._frame_len / self._rate

    @property
    def levels_db(self) -> np.ndarray:
        """Frame levels so far (dBFS), one per complete frame."""
        return np.concatenate(self._levels) if self._levels else np.zeros(0)

    def reset(self) -> None:
        """Forget everything fed so far (settings are kept)."""
        self._levels: list[np.ndarray] = []
        self._tail = np.zeros(0, dtype=np.float64)

    def feed(self, block: Any) -> "ActivityTracker":
        """Add a block of channel baseband (complex or real, any length)."""
        x = np.asarray(block)
        if x.ndim != 1:
            raise ParameterError(f"block: array of shape {x.shape} given; it must be one-dimensional")
        if x.size == 0:
            return self
        mag2 = (x.real.astype(np.float64) ** 2) + (x.imag.astype(np.float64) ** 2 if np.iscomplexobj(x) else 0.0)
        buf = np.concatenate([self._tail, mag2]) if self._tail.size else mag2
        nfr = buf.size // self._frame_len
        if nfr:
            frames = buf[: nfr * self._frame_len].reshape(nfr, self._frame_len)
            p = frames.mean(axis=1)
            self._levels.append(10.0 * np.log10(np.maximum(p, TINY_POWER)))
        self._tail = buf[nfr * self._frame_len :].copy()
        return self

    def result(self) -> list[ActivitySegment]:
        """Bursts found in the frames so far (see :func:`detect_activity`)."""
        return detect_activity(self.levels_db, self.frame_s, **self._kwargs)


