"""Audio-rate stages: DC blocker, automatic gain control, voice band-pass."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ... import checks
from ...errors import ParameterError
from ..filters import BandpassDesign, dc_block_coefficient, design_audio_bandpass
from .base import Stage, run_once
from .fir import FirFilter
from .linear import first_order_recursion

__all__ = ["DCBlock", "dc_block", "AGC", "agc", "AudioBandpass", "audio_bandpass"]


class DCBlock(Stage):
    """First-order DC-removal high-pass, ``y[n] = x[n] − x[n−1] + a·y[n−1]``.

    R. Lyons, *Understanding Digital Signal Processing* (3rd ed.), DC removal
    section (§13.23, memory for the number): a zero at DC and a pole at ``a``
    just inside the unit circle. ``a`` puts the −3.01 dB point (absolute,
    |H| = 1/√2) at ``cutoff_hz`` (:func:`dc_block_coefficient`). Computed in
    float64 as the difference ``u[n] = x[n] − x[n−1]`` followed by the recursion
    ``y[n] = u[n] + a·y[n−1]`` (:func:`.linear.first_order_recursion`, vectorised),
    equal to ``scipy.signal.lfilter([1, −1], [1, −a], x)`` to float64 rounding.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    cutoff_hz : float
        −3 dB frequency, Hz, 0 < cutoff < rate/8 (default 30 Hz: below the
        300 Hz lower edge of the voice band, settling time constant ≈ 5 ms;
        common practice).

    Notes
    -----
    Real or complex input. ``delay`` = 0 (the phase lead is confined to the
    region near the cutoff).
    """

    def __init__(self, rate_hz: float, cutoff_hz: float = 30.0):
        fs = checks.positive("rate_hz", rate_hz)
        fc = checks.finite("cutoff_hz", cutoff_hz)
        if not (0.0 < fc < fs / 8.0):
            raise ParameterError(
                f"cutoff_hz: must be > 0 and < rate_hz/8 = {fs / 8.0:g} Hz, got {cutoff_hz!r}"
            )
        self._rate_in = self._rate_out = fs
        self._delay = 0.0
        self._cutoff = fc
        self._a = dc_block_coefficient(fs, fc)
        self.reset()

    @property
    def cutoff_hz(self) -> float:
        return self._cutoff

    @property
    def pole(self) -> float:
        """The feedback coefficient a."""
        return self._a

    def reset(self) -> None:
        self._complex_seen = False
        self._x_prev: complex | float = 0.0  # last input
        self._y_prev: complex | float = 0.0  # last output

    def process(self, block: ArrayLike) -> np.ndarray:
        x = self._prep(block)
        if x.size == 0:
            return self._empty()
        u = np.empty(x.size, np.result_type(x, np.float64))
        u[0] = x[0] - self._x_prev
        np.subtract(x[1:], x[:-1], out=u[1:])
        y = first_order_recursion(u, self._a, self._y_prev)
        self._x_prev, self._y_prev = x[-1].item(), y[-1].item()
        return self._out(y)


def dc_block(x: ArrayLike, rate_hz: float, cutoff_hz: float = 30.0) -> np.ndarray:
    """One-shot :class:`DCBlock`."""
    return run_once(DCBlock(rate_hz, cutoff_hz), x)


# --------------------------------------------------------------------------
# AGC
# --------------------------------------------------------------------------


class AGC(Stage):
    """Frame-based automatic gain control.

    The input is cut into frames of F = round(frame_s · rate_hz) samples on a
    grid that continues across blocks (a partial frame is held until it
    completes; ``flush`` releases it). Per frame a level L is measured
    (``"peak"``: max |x|; ``"rms"``: sqrt(mean |x|²)) and smoothed into the
    level estimate E by a one-pole recursion with separate coefficients::

        E_i = E_{i−1} + α (L_i − E_{i−1}),  α = 1 − exp(−T/τ),  T = F/rate_hz

    with τ = ``attack_s`` when L_i > E_{i−1} and τ = ``decay_s`` otherwise.
    After a step in level E covers 1 − 1/e (63.2 %) of the step in τ seconds
    (at frame resolution): these are the attack and decay time constants.
    The first frame sets E directly (no start-up transient).

    The gain of frame i is G_i = min(A_t / E_i, max_gain), A_t = 10^(target/20);
    within frame i the gain moves linearly from G_{i−1} to G_i (reached at its
    last sample), so it has no steps. With a steady input the output level
    is ``target_dbfs`` (peak or RMS, as the detector), unless max_gain limits.

    Samples are not delayed relative to each other (``delay`` = 0), but up to
    F − 1 input samples are held (latency of one frame).

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    target_dbfs : float
        Output level, dBFS (peak or RMS by ``detector``).
    attack_s, decay_s : float
        Time constants (s) for rising / falling level, > 0.
    max_gain_db : float
        Gain ceiling, dB (reached on silence).
    frame_s : float
        Frame length, s (default 1 ms).
    detector : {"peak", "rms"}
    """

    def __init__(
        self,
        rate_hz: float,
        target_dbfs: float = -6.0,
        attack_s: float = 0.01,
        decay_s: float = 0.5,
        max_gain_db: float = 60.0,
        frame_s: float = 0.001,
        detector: str = "peak",
    ):
        fs = checks.positive("rate_hz", rate_hz)
        target = checks.finite("target_dbfs", target_dbfs)
        if target > 0.0:
            raise ParameterError(f"target_dbfs: must be <= 0 dBFS, got {target_dbfs!r}")
        for name, v in (("attack_s", attack_s), ("decay_s", decay_s), ("frame_s", frame_s)):
            vv = checks.finite(name, v)
            if vv <= 0.0:
                raise ParameterError(f"{name}: must be > 0 s, got {v!r}")
        mg = checks.finite("max_gain_db", max_gain_db)
        if detector not in ("peak", "rms"):
            raise ParameterError(f"detector: expected 'peak' or 'rms', got {detector!r}")
        self._rate_in = self._rate_out = fs
        self._delay = 0.0
        self._frame = max(1, int(round(frame_s * fs)))
        self._attack = float(attack_s)
        self._decay = float(decay_s)
        self._target = 10.0 ** (target / 20.0)
        self._max_gain = 10.0 ** (mg / 20.0)
        self._detector = detector
        self.reset()

    @property
    def frame_len(self) -> int:
        """Frame length F, samples."""
        return self._frame

    @property
    def level(self) -> float | None:
        """Current level estimate E (linear, full scale 1.0), None before the first frame."""
        return self._env

    def reset(self) -> None:
        self._complex_seen = False
        self._held = np.zeros(0, dtype=np.float64)
        self._env: float | None = None
        self._g_prev: float | None = None

    def _levels(self, frames: np.ndarray) -> np.ndarray:
        a = np.abs(frames)
        if self._detector == "peak":
            return a.max(axis=1)
        return np.sqrt(np.mean(a * a, axis=1))

    def _run(self, frames: np.ndarray) -> np.ndarray:
        """Gain-apply whole frames (rows of equal length); updates the recursion state."""
        nfr, flen = frames.shape
        t = flen / self._rate_in
        alpha_a = -math.expm1(-t / self._attack)
        alpha_d = -math.expm1(-t / self._decay)
        lv = self._levels(frames)
        g = np.empty(nfr)
        g_start = np.empty(nfr)
        env, g_prev = self._env, self._g_prev
        tgt, gmax = self._target, self._max_gain
        for i, li in enumerate(lv.tolist()):  # loop over frames, not samples
            if env is None:
                env = li
            else:
                env += (alpha_a if li > env else alpha_d) * (li - env)
            gi = gmax if env * gmax <= tgt else tgt / env
            g_start[i] = gi if g_prev is None else g_prev
            g[i] = gi
            g_prev = gi
        self._env, self._g_prev = env, g_prev
        ramp = np.arange(1, flen + 1, dtype=np.float64) / flen
        gains = g_start[:, None] + (g - g_start)[:, None] * ramp[None, :]
        return (frames * gains).ravel()

    def process(self, block: ArrayLike) -> np.ndarray:
        x = self._prep(block)
        if x.dtype.kind == "c" and self._held.dtype.kind != "c":
            self._held = self._held.astype(np.complex128)
        buf = np.concatenate([self._held, x]) if self._held.size else x
        f = self._frame
        nfull = buf.size // f
        self._held = buf[nfull * f :].copy()
        if nfull == 0:
            return self._empty()
        return self._out(self._run(buf[: nfull * f].reshape(nfull, f)))

    def flush(self) -> np.ndarray:
        if self._held.size:
            out = self._out(self._run(self._held.reshape(1, -1)))
        else:
            out = self._empty()
        self.reset()
        return out


def agc(x: ArrayLike, rate_hz: float, **kwargs: Any) -> np.ndarray:
    """One-shot :class:`AGC` (keyword arguments as the class)."""
    return run_once(AGC(rate_hz, **kwargs), x)


class AudioBandpass(FirFilter):
    """Linear-phase Kaiser-window band-pass FIR for the voice band.

    The taps come from :func:`iqsift.dsp.filters.design_audio_bandpass`
    (Kaiser window, checked on the taps: the measured stop band is at or below
    −atten_db; ``measured_stopband_db``, ``measured_ripple_db``). Applied with
    the overlap-save path of :class:`FirFilter`. ``delay`` = (N − 1)/2 samples.

    Parameters
    ----------
    rate_hz : float
        Sample rate, Hz.
    low_hz, high_hz : float
        Pass-band edges, Hz.
    atten_db : float
        Stop-band attenuation A, dB (> 0).
    transition_hz : float, optional
        Transition width, Hz; default min(200, low_hz/2, (rate/2 − high_hz)/2).
    """

    def __init__(
        self,
        rate_hz: float,
        low_hz: float = 300.0,
        high_hz: float = 3000.0,
        atten_db: float = 60.0,
        transition_hz: float | None = None,
    ):
        design = design_audio_bandpass(rate_hz, low_hz, high_hz, atten_db, transition_hz)
        self._design = design
        super().__init__(design.taps, design.rate_hz, method="fft")
        self._delay = (design.taps.size - 1) / 2.0

    @property
    def design(self) -> BandpassDesign:
        """The band-pass design (specification, taps, measured figures)."""
        return self._design

    @property
    def low_hz(self) -> float:
        return self._design.low_hz

    @property
    def high_hz(self) -> float:
        return self._design.high_hz

    @property
    def atten_db(self) -> float:
        return self._design.atten_db

    @property
    def transition_hz(self) -> float:
        return self._design.transition_hz

    @property
    def kaiser_beta(self) -> float:
        return self._design.kaiser_beta

    @property
    def design_atten_db(self) -> float:
        """Attenuation given to kaiserord (atten_db plus any margin the check added), dB."""
        return self._design.design_atten_db

    @property
    def measured_stopband_db(self) -> float:
        """Highest stop-band gain measured on the taps (freqz), dB (<= −atten_db)."""
        return self._design.measured_stopband_db

    @property
    def measured_ripple_db(self) -> float:
        """Largest pass-band deviation from 0 dB measured on the taps, dB."""
        return self._design.measured_ripple_db

    @property
    def num_taps(self) -> int:
        return self._h.size


def audio_bandpass(
    x: ArrayLike,
    rate_hz: float,
    low_hz: float = 300.0,
    high_hz: float = 3000.0,
    atten_db: float = 60.0,
    transition_hz: float | None = None,
) -> np.ndarray:
    """One-shot :class:`AudioBandpass`."""
    return run_once(AudioBandpass(rate_hz, low_hz, high_hz, atten_db, transition_hz), x)
