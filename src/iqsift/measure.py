"""Measurements on one channel: carrier, modulation depth, audio quality, bandwidth, activity.

Every measurement is a pure function on arrays that returns a frozen dataclass whose
``to_dict()`` gives the stable report keys of the design notes (``carrier.*``,
``modulation.*``, ``audio.*``, ``bandwidth.*``, ``activity``). ``to_dict()`` returns
the inner mapping, to be placed under the section name held in the class attribute
``SECTION`` (``report[r.SECTION] = r.to_dict()``); non-finite numbers become None so
the mapping is valid JSON. Keys beyond the vocabulary are additions, never changes.

Two streaming accumulators cover captures too long to hold in memory:
:class:`CarrierAccumulator` and :class:`ActivityTracker`. Both follow the project's
accumulator protocol (``feed(block) -> self``, ``result()``, ``reset()``) and give the
same answer however the input is split into blocks (to floating-point rounding).

Methods and sources
-------------------
* Carrier frequency: averaged, zero-padded Hann spectrum; quadratic interpolation of
  the log power around the peak (J. O. Smith & X. Serra, "PARSHL", ICMC 1987); then a
  weighted least-squares fit of the unwrapped carrier phase against time over the
  whole record (S. Tretter, "Estimating the frequency of a noisy sinusoid by linear
  regression", IEEE Trans. IT-31, 1985; S. Kay, IEEE Trans. ASSP-37, 1989), which at
  high SNR reaches the Cramér-Rao bound of D. Rife & R. Boorstyn, "Single-tone
  parameter estimation from discrete-time observations", IEEE Trans. IT-20, 1974.
* Modulation depth: S. Haykin, *Communication Systems* (4th ed.), amplitude
  modulation: m = (Emax − Emin)/(Emax + Emin), positive (Emax − Ec)/Ec, negative
  (Ec − Emin)/Ec, Ec the mean envelope.
* Audio quality: IEEE Std 1241 (four-parameter sine fit; SINAD, SNR, THD); receiver
  SINAD (S+N+D)/(N+D) as radio practice uses it (common practice).
* Weighting: ITU-T O.41 psophometric table (interpolated), IEC 61672-1 A-weighting.
* Bandwidth: ITU Radio Regulations No. 1.153 and ITU-R SM.328 (occupied and x-dB).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
from scipy import signal as _signal

from . import checks
from .errors import ParameterError

__all__ = [
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
]

_TINY = 1e-300


# ----------------------------------------------------------------------------- helpers
def _json_number(value: Any) -> Any:
    """Finite floats as float, non-finite as None (JSON has no NaN/inf)."""
    if isinstance(value, (bool, str)) or value is None:
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    v = float(value)
    return v if math.isfinite(v) else None


class _Reportable:
    """Mixin: ``to_dict()`` from the dataclass fields named in ``_KEYS``."""

    SECTION: ClassVar[str] = ""
    _KEYS: ClassVar[tuple[str, ...]] = ()

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready mapping with the report vocabulary's keys (see module docstring)."""
        return {key: _json_number(getattr(self, key)) for key in self._KEYS}


def _positive(name: str, value: Any) -> float:
    return checks.positive(name, value)


def _finite(name: str, value: Any) -> float:
    return checks.finite(name, value)


def _nonnegative(name: str, value: Any) -> float:
    return checks.nonnegative(name, value)


def _array_1d(name: str, x: Any, dtype: Any, min_len: int = 1) -> np.ndarray:
    arr = np.asarray(x)
    if arr.ndim != 1:
        raise ParameterError(f"{name}: array of shape {arr.shape} given; it must be one-dimensional")
    if np.iscomplexobj(arr) and not np.issubdtype(np.dtype(dtype), np.complexfloating):
        raise ParameterError(f"{name}: complex array given; it must be real-valued")
    if arr.size < min_len:
        raise ParameterError(f"{name}: {arr.size} samples given; at least {min_len} are needed")
    out = arr.astype(dtype, copy=False)
    if not np.all(np.isfinite(out)):
        raise ParameterError(f"{name}: contains NaN or infinite values; all samples must be finite")
    return out


def _next_pow2(n: int) -> int:
    return 1 << max(0, int(math.ceil(math.log2(max(1, n)))))


def _parabolic_vertex(ym1: float, y0: float, yp1: float) -> tuple[float, float]:
    """Vertex (offset in bins, value) of the parabola through three equally spaced points.

    Quadratic interpolation of a spectral peak (Smith & Serra 1987); on log power it is
    exact for a Gaussian main lobe and very nearly so for a zero-padded Hann lobe.
    """
    den = ym1 - 2.0 * y0 + yp1
    if den >= 0.0 or not math.isfinite(den):
        return 0.0, y0
    delta = 0.5 * (ym1 - yp1) / den
    delta = max(-1.0, min(1.0, delta))
    return delta, y0 - 0.25 * (ym1 - yp1) * delta


def _db(power: float) -> float:
    return 10.0 * math.log10(max(float(power), _TINY))


def _interpolated_peak_hz(x: np.ndarray, rate_hz: float, lo_hz: float, hi_hz: float) -> float:
    """Frequency (Hz) of the largest spectral line of real ``x`` between ``lo_hz`` and ``hi_hz``.

    4-term Blackman-Harris window (harris 1978), FFT zero-padded to at least twice the
    length, quadratic interpolation of the log power around the peak bin.
    """
    n = x.size
    nfft = _next_pow2(2 * n)
    w = _signal.windows.blackmanharris(n, sym=False)
    p = np.abs(np.fft.rfft((x - x.mean()) * w, nfft)) ** 2
    f = np.arange(p.size) * rate_hz / nfft
    sel = np.nonzero((f >= lo_hz) & (f <= hi_hz))[0]
    if sel.size == 0:
        raise ParameterError(f"band: {lo_hz:g}..{hi_hz:g} Hz holds no FFT bin at {rate_hz:g} samples/s; widen it")
    k = int(sel[np.argmax(p[sel])])
    if 0 < k < p.size - 1:
        lp = np.log(np.maximum(p[k - 1 : k + 2], _TINY))
        delta, _ = _parabolic_vertex(lp[0], lp[1], lp[2])
    else:
        delta = 0.0
    return (k + delta) * rate_hz / nfft


# ============================================================================= carrier
@dataclass(frozen=True)
class CarrierResult(_Reportable):
    """Carrier frequency and level (report section ``carrier``).

    Attributes
    ----------
    frequency_hz : float
        Measured carrier frequency (Hz), on the same axis as the nominal offset: relative
        to the baseband's 0 Hz unless the caller adds the centre frequency.
    error_hz : float
        ``frequency_hz − nominal_hz`` (measured minus nominal).
    level_dbfs : float
        Carrier power (dBFS, 10·log10 of the carrier's squared complex amplitude): the
        median over the segments where the carrier was present (segments straddling
        the start or end of a burst do not pull it down); the noise power in the
        analysis bin is subtracted.
    nominal_hz : float
        The nominal frequency the error refers to.
    detected : bool
        True when the carrier stood at least 13 dB above the noise in the analysis bin
        in at least one segment.
    segments_used : int
        Segments that entered the phase fit (0: the interpolated spectral peak is reported).
    method : str
        ``"phase-slope"`` or ``"interpolated-peak"``.
    """

    frequency_hz: float
    error_hz: float
    level_dbfs: float
    nominal_hz: float
    detected: bool
    segments_used: int
    method: str

    SECTION: ClassVar[str] = "carrier"
    _KEYS: ClassVar[tuple[str, ...]] = (
        "frequency_hz", "error_hz", "level_dbfs", "nominal_hz", "detected", "segments_used", "method",
    )


def _hann_kernel(delta_hz: np.ndarray, length: int, rate_hz: float) -> np.ndarray:
    """Σ_m w[m]·cos(2π·Δ·(m − (L−1)/2)/fs) for the symmetric Hann window of length L.

    The DTFT of the centred window at an offset Δ (Hz); real because the window is
    symmetric. Closed form from the Dirichlet kernel D(θ) = sin(Lθ/2)/sin(θ/2) and
    w = ½ + ½·cos(2πu/(L−1)) (Oppenheim & Schafer, windows chapter).
    """
    theta = 2.0 * np.pi * np.asarray(delta_hz, dtype=np.float64) / rate_hz

    def dirichlet(th: np.ndarray) -> np.ndarray:
        s = np.sin(th / 2.0)
        small = np.abs(s) < 1e-12
        out = np.empty_like(th)
        out[~small] = np.sin(length * th[~small] / 2.0) / s[~small]
        # limit: ±L (sign follows cos of the wrapped multiple of 2π)
        out[small] = length * np.cos((length - 1) * th[small] / 2.0)
        return out

    if length < 2:
        return np.ones_like(theta)
    phi = 2.0 * np.pi / (length - 1)
    return 0.5 * dirichlet(theta) + 0.25 * (dirichlet(theta + phi) + dirichlet(theta - phi))


class CarrierAccumulator:
    """Streaming carrier-frequency and level estimator with bounded work per sample.

    Parameters
    ----------
    rate_hz : float
        Sample rate of the complex baseband (samples/s).
    nominal_offset_hz : float, default 0.0
        Where the carrier should be (Hz, relative to the baseband's 0 Hz).
    search_hz : float or None
        Half-width of the search window around the nominal (Hz); None searches the
        whole band (±rate/2). The carrier must be the strongest line in the window.
    segment_s : float, default 0.05
        Analysis segment length (s); segments overlap by half.

    Notes
    -----
    Each Hann-windowed segment (length L, hop L/2) is transformed with an FFT
    zero-padded to at least 4·L. The power spectra are summed (a Welch average over
    the whole run, one array whatever the run length) and, per segment, the complex
    value at that segment's own peak bin is kept, referred to the segment's centre:
    for a symmetric window its phase is the carrier phase at the segment centre
    whatever the small mismatch between bin and carrier (the window transform is real
    and positive inside the main lobe). This is the "demodulated phasor" of the
    segment; storage grows by 32 bytes per hop (40 hops a second at the default
    50 ms: about 5 MB per hour), the spectrum sum is one array of 4·L floats.

    :meth:`result` then

    1. takes the peak of the averaged spectrum inside the search window and refines it
       by quadratic interpolation of the log power (Smith & Serra 1987) — the coarse
       frequency f_c, good to a few hundredths of a bin;
    2. keeps the segments whose peak is within one bin of f_c and whose power is
       within 10 dB of the carrier's typical level and at least 13 dB above the noise
       per bin (so gaps in a push-to-talk carrier drop out);
    3. unwraps the phase of those phasors against f_c run by run (a run is a sequence
       of consecutive segments; a gap starts a new run with its own phase) and fits
       one common slope by weighted least squares (weights ∝ segment power): the
       phase-slope estimator of Tretter (1985), which approaches the Cramér-Rao bound
       of Rife & Boorstyn (1974) at high SNR;
    4. reads the level from the same phasors divided by the window transform at the
       measured offset (no scalloping loss), noise power per bin subtracted.

    A record shorter than one segment is analysed as one segment of its own length;
    otherwise the unfinished tail after the last whole segment is not analysed.
    """

    _GATE_DB_BELOW_TYPICAL = 10.0
    _GATE_DB_OVER_NOISE = 13.0

    def __init__(
        self,
        rate_hz: float,
        nominal_offset_hz: float = 0.0,
        search_hz: float | None = None,
        segment_s: float = 0.05,
    ) -> None:
        self._rate = _positive("rate_hz", rate_hz)
        self._nominal = _finite("nominal_offset_hz", nominal_offset_hz)
        self._search = self._rate / 2.0 if search_hz is None else _positive("search_hz", search_hz)
        seg_s = _positive("segment_s", segment_s)
        length = int(round(seg_s * self._rate))
        if length < 16:
            raise ParameterError(
                f"segment_s: {segment_s!r} s is {length} samples at {self._rate:g} samples/s; it must span >= 16 samples"
            )
        self._len = length
        self._hop = length // 2
        self._nfft = _next_pow2(4 * length)
        self._window = _signal.windows.hann(length, sym=True)
        freqs = np.fft.fftfreq(self._nfft, 1.0 / self._rate)
        self._dist = (freqs - self._nominal + self._rate / 2.0) % self._rate - self._rate / 2.0
        self._mask = np.abs(self._dist) <= self._search
        if not np.any(self._mask):
            raise ParameterError(f"search_hz: {search_hz!r} Hz holds no FFT bin; it must be wider")
        self.reset()

    # -- protocol -----------------------------------------------------------
    @property
    def rate_in(self) -> float:
        """Sample rate (samples/s)."""
        return self._rate

    @property
    def segment_length(self) -> int:
        """Analysis segment length (samples)."""
        return self._len

    @property
    def samples_fed(self) -> int:
        """Samples fed since the last reset."""
        return self._fed

    def reset(self) -> None:
        """Forget everything fed so far (settings are kept)."""
        self._buf = np.zeros(0, dtype=np.complex128)
        self._buf_start = 0
        self._next_seg = 0
        self._psd_sum = np.zeros(self._nfft, dtype=np.float64)
        self._nseg = 0
        self._bins: list[np.ndarray] = []
        self._phasors: list[np.ndarray] = []
        self._powers: list[np.ndarray] = []
        self._fed = 0

    def feed(self, block: Any) -> "CarrierAccumulator":
        """Add a block of complex baseband samples (any length, including 0)."""
        x = _array_1d("block", block, np.complex128, min_len=0)
        if x.size == 0:
            return self
        self._fed += x.size
        self._buf = np.concatenate([self._buf, x]) if self._buf.size else x.copy()
        L, hop = self._len, self._hop
        while True:
            off = self._next_seg * hop - self._buf_start
            avail = self._buf.size - off
            if avail < L:
                break
            count = min(max(1, (1 << 21) // self._nfft), (avail - L) // hop + 1)
            frames = np.lib.stride_tricks.sliding_window_view(self._buf[off : off + (count - 1) * hop + L], L)[::hop]
            self._analyse(frames)
            self._next_seg += count
        keep_from = self._next_seg * hop - self._buf_start
        if keep_from > 0:
            self._buf = self._buf[keep_from:].copy()
            self._buf_start += keep_from
        return self

    def _analyse(self, frames: np.ndarray) -> None:
        spec = np.fft.fft(frames * self._window, self._nfft, axis=1)
        power = spec.real**2 + spec.imag**2
        for row in power:  # summed row by row: the same order however the input was split
            self._psd_sum += row
        self._nseg += frames.shape[0]
        masked = np.where(self._mask, power, -1.0)
        bins = np.argmax(masked, axis=1)
        rows = np.arange(frames.shape[0])
        centre = (self._len - 1) / 2.0
        ref = np.exp(2j * np.pi * ((bins * centre) % self._nfft) / self._nfft)
        self._bins.append(bins)
        self._phasors.append(spec[rows, bins] * ref)
        self._powers.append(power[rows, bins])

    # -- result -------------------------------------------------------------
    def result(self) -> CarrierResult:
        """Carrier estimate from everything fed so far (the accumulator is not changed)."""
        if self._nseg == 0:
            n = self._buf.size
            if n < 16:
                raise ParameterError(
                    f"carrier: {self._fed} samples fed; at least 16 are needed to estimate a carrier"
                )
            window = _signal.windows.hann(n, sym=True)
            spec = np.fft.fft(self._buf * window, self._nfft)
            avg = spec.real**2 + spec.imag**2
            return self._finish(avg, n, np.zeros(0, int), np.zeros(0, complex), np.zeros(0))
        bins = np.concatenate(self._bins)
        phasors = np.concatenate(self._phasors)
        powers = np.concatenate(self._powers)
        return self._finish(self._psd_sum / self._nseg, self._len, bins, phasors, powers)

    def _finish(
        self, avg: np.ndarray, length: int, bins: np.ndarray, phasors: np.ndarray, powers: np.ndarray
    ) -> CarrierResult:
        rate, nfft = self._rate, self._nfft
        idx = np.nonzero(self._mask)[0]
        b0 = int(idx[np.argmax(avg[idx])])
        lp = np.log(np.maximum(avg[[(b0 - 1) % nfft, b0, (b0 + 1) % nfft]], _TINY))
        delta, _ = _parabolic_vertex(lp[0], lp[1], lp[2])
        coarse = self._nominal + self._dist[b0] + delta * rate / nfft
        noise_bin = float(np.median(avg[idx]))

        freq, used, method = coarse, 0, "interpolated-peak"
        detected = False
        seg_freqs = self._nominal + self._dist[bins] if bins.size else np.zeros(0)
        if bins.size:
            near = np.abs(seg_freqs - coarse) <= rate / length
            if np.any(near):
                typical = float(np.percentile(powers[near], 90))
                use = (
                    near
                    & (powers >= typical * 10.0 ** (-self._GATE_DB_BELOW_TYPICAL / 10.0))
                    & (powers >= noise_bin * 10.0 ** (self._GATE_DB_OVER_NOISE / 10.0))
                )
                detected = bool(np.any(use))
                slope = self._phase_slope(use, phasors, powers, coarse)
                if slope is not None and abs(slope[0] / (2.0 * np.pi)) <= 0.5 * rate / length:
                    freq = coarse + slope[0] / (2.0 * np.pi)
                    used, method = slope[1], "phase-slope"
                if detected:
                    kern = _hann_kernel(freq - seg_freqs[use], length, rate)
                    amp2 = np.maximum(np.abs(phasors[use]) ** 2 - noise_bin, _TINY) / np.maximum(kern**2, _TINY)
                    level = _db(float(np.median(amp2)))
        if not detected:
            b_freq = self._nominal + self._dist[b0]
            window_sum = _hann_kernel(np.array([freq - b_freq]), length, rate)[0]
            level = _db(max(avg[b0] - noise_bin, _TINY) / max(window_sum**2, _TINY))
            detected = bool(avg[b0] >= noise_bin * 10.0 ** (self._GATE_DB_OVER_NOISE / 10.0))
        return CarrierResult(
            frequency_hz=float(freq),
            error_hz=float(freq - self._nominal),
            level_dbfs=float(level),
            nominal_hz=self._nominal,
            detected=detected,
            segments_used=int(used),
            method=method,
        )

    def _phase_slope(
        self, use: np.ndarray, phasors: np.ndarray, powers: np.ndarray, coarse_hz: float
    ) -> tuple[float, int] | None:
        """Weighted LS slope (rad/s) of the unwrapped phase, one intercept per run."""
        k = np.nonzero(use)[0]
        if k.size < 3:
            return None
        breaks = np.nonzero(np.diff(k) != 1)[0] + 1
        hop_s = self._hop / self._rate
        rot = np.exp(-2j * np.pi * coarse_hz * hop_s)
        num = den = 0.0
        npts = 0
        for run in np.split(k, breaks):
            if run.size < 2:
                continue
            c = phasors[run]
            steps = np.angle(c[1:] * np.conj(c[:-1]) * rot)
            psi = np.concatenate([[0.0], np.cumsum(steps)])
            t = run * hop_s
            w = powers[run]
            tm = np.sum(w * t) / np.sum(w)
            pm = np.sum(w * psi) / np.sum(w)
            num += float(np.sum(w * (t - tm) * (psi - pm)))
            den += float(np.sum(w * (t - tm) ** 2))
            npts += run.size
        if npts < 3 or den <= 0.0:
            return None
        return num / den, npts


def estimate_carrier(
    z: Any,
    rate_hz: float,
    nominal_offset_hz: float = 0.0,
    search_hz: float | None = None,
    segment_s: float = 0.05,
) -> CarrierResult:
    """Measure a carrier's frequency (far finer than an FFT bin) and level.

    Parameters
    ----------
    z : array_like of complex
        Complex baseband of the channel (complex magnitude 1.0 = 0 dBFS).
    rate_hz : float
        Sample rate (samples/s).
    nominal_offset_hz : float, default 0.0
        Nominal carrier frequency (Hz, relative to the baseband's 0 Hz); the error is
        measured minus this.
    search_hz : float or None
        Half-width (Hz) of the search window around the nominal; None: the whole band.
    segment_s : float, default 0.05
        Analysis segment length (s).

    Returns
    -------
    CarrierResult

    Notes
    -----
    One-shot form of :class:`CarrierAccumulator` (same numbers): averaged Hann spectrum
    peak with quadratic interpolation of the log power (Smith & Serra 1987), then a
    least-squares fit of the unwrapped carrier phase over the record (Tretter 1985),
    efficient in the sense of Rife & Boorstyn (1974) at high SNR.
    """
    return CarrierAccumulator(rate_hz, nominal_offset_hz, search_hz, segment_s).feed(z).result()


# ============================================================================= modulation
@dataclass(frozen=True)
class ModulationResult(_Reportable):
    """AM modulation depth (report section ``modulation``).

    Attributes
    ----------
    depth_percent : float
        100·(Emax − Emin)/(Emax + Emin) (Haykin).
    depth_positive_percent : float
        100·(Emax − Ec)/Ec.
    depth_negative_percent : float
        100·(Ec − Emin)/Ec.
    tone_hz : float
        Dominant modulating frequency (Hz).
    carrier_level : float
        Ec, the mean envelope (same unit as the envelope).
    method : str
        ``"tone-fit"`` or ``"cycle-peaks"`` (see :func:`measure_depth`).
    """

    depth_percent: float
    depth_positive_percent: float
    depth_negative_percent: float
    tone_hz: float
    carrier_level: float
    method: str

    SECTION: ClassVar[str] = "modulation"
    _KEYS: ClassVar[tuple[str, ...]] = (
        "depth_percent", "depth_positive_percent", "depth_negative_percent", "tone_hz", "method",
    )


_LS_CHUNK = 1 << 16


def _chunked_lstsq(make_columns: Any, y: np.ndarray, keep: np.ndarray | None = None) -> np.ndarray:
    """Least squares through normal equations summed over chunks of samples.

    ``make_columns(start, stop)`` returns the design rows for samples start..stop-1; the
    memory used is one chunk of the design matrix whatever the record length. The
    columns used here (a constant, harmonics over many cycles, a centred and scaled
    time ramp) are close to orthogonal, so forming AᵀA loses no useful precision.
    """
    ata = aty = None
    for start in range(0, y.size, _LS_CHUNK):
        stop = min(y.size, start + _LS_CHUNK)
        a = make_columns(start, stop)
        yy = y[start:stop]
        if keep is not None:
            k = keep[start:stop]
            a, yy = a[k], yy[k]
        ata = a.T @ a if ata is None else ata + a.T @ a
        aty = a.T @ yy if aty is None else aty + a.T @ yy
    coef, *_ = np.linalg.lstsq(ata, aty, rcond=None)
    return coef


def _harmonic_design(t: np.ndarray, freq_hz: float, orders: int) -> np.ndarray:
    cols = [np.ones_like(t)]
    for h in range(1, orders + 1):
        arg = 2.0 * np.pi * h * freq_hz * t
        cols.append(np.cos(arg))
        cols.append(np.sin(arg))
    return np.column_stack(cols)


def measure_depth(
    envelope: Any,
    rate_hz: float,
    *,
    tone_hz: float | None = None,
    method: str = "auto",
    audio_band_hz: tuple[float, float] = (30.0, 4000.0),
    harmonics: int = 10,
) -> ModulationResult:
    """Modulation depth of full-carrier AM from its envelope.

    Parameters
    ----------
    envelope : array_like of float
        Envelope |z| of the filtered channel (any linear amplitude unit), ideally
        without the filter's start-up transient.
    rate_hz : float
        Sample rate of the envelope (samples/s).
    tone_hz : float or None
        Modulating frequency if known (Hz); None finds the dominant one.
    method : {"auto", "tone-fit", "cycle-peaks"}
        ``"tone-fit"``: least-squares fit of DC plus the tone and its harmonics (up to
        ``harmonics`` and the band top) at the tone frequency refined by the IEEE 1241
        four-parameter sine fit; Emax and Emin are the extremes of the fitted
        waveform over one period. Noise averages out over the whole record instead of
        riding on the peaks.
        ``"cycle-peaks"``: the envelope is low-passed to the audio band (zero-phase
        windowed-sinc FIR), interpolated (scipy.signal.resample_poly) to at least 64
        samples a cycle, cut into cycles of the dominant frequency, and Emax/Emin are
        the medians of the per-cycle maxima/minima: a spike touches only the few
        cycles it falls in. Noise riding on the peaks biases this method outward a
        little (about half the envelope noise rms).
        ``"auto"``: tone-fit when the fit explains at least half of the audio-band
        envelope variance (a steady test tone), else cycle-peaks.
        Before either method, impulsive spikes are blanked: samples whose residual from
        the harmonic fit exceeds 6 robust standard deviations (σ = 1.4826·MAD) are
        replaced by linear interpolation between their neighbours (a noise blanker,
        common practice), so they move neither the extremes nor Ec.
    audio_band_hz : (float, float)
        Band (Hz) in which the modulating frequency is sought; the top is also the
        low-pass edge and the highest harmonic fitted.
    harmonics : int
        Highest harmonic order used by the tone fit.

    Returns
    -------
    ModulationResult

    Notes
    -----
    Definitions from S. Haykin, *Communication Systems*: m = (Emax − Emin)/(Emax + Emin);
    positive peak (Emax − Ec)/Ec; negative peak (Ec − Emin)/Ec, with Ec the carrier
    level, taken as the mean envelope.
    """
    rate = _positive("rate_hz", rate_hz)
    e = _array_1d("envelope", envelope, np.float64, min_len=64)
    if method not in ("auto", "tone-fit", "cycle-peaks"):
        raise ParameterError(f"method: {method!r} is not known; it must be 'auto', 'tone-fit' or 'cycle-peaks'")
    lo, hi = (_nonnegative("audio_band_hz[0]", audio_band_hz[0]), _positive("audio_band_hz[1]", audio_band_hz[1]))
    hi = min(hi, 0.5 * rate)
    if lo >= hi:
        raise ParameterError(f"audio_band_hz: {audio_band_hz!r} is empty at {rate:g} samples/s; it needs low < high <= rate/2")
    if int(harmonics) < 1:
        raise ParameterError(f"harmonics: {harmonics!r}; it must be an integer >= 1")
    if float(np.mean(e)) <= 0.0:
        raise ParameterError(f"envelope: mean {float(np.mean(e)):g}; an AM envelope must have a positive mean (the carrier)")
    n = e.size
    floor_hz = max(lo, 6.0 * rate / n)
    if tone_hz is None:
        f0 = _interpolated_peak_hz(e, rate, floor_hz, hi)
    else:
        f0 = _positive("tone_hz", tone_hz)
    f0 = _four_param_fit(e, rate, f0)[0]
    if not (0.0 < f0 < 0.5 * rate):
        raise ParameterError(f"tone_hz: fitted {f0:g} Hz lies outside 0..{rate / 2:g} Hz")
    if n * f0 / rate < 2.0:
        raise ParameterError(f"envelope: {n} samples hold {n * f0 / rate:.2f} cycles of {f0:g} Hz; at least 2 are needed")

    # harmonic least-squares fit; samples far off it (impulsive spikes) are blanked and
    # bridged by linear interpolation, then the fit is repeated on the cleaned envelope
    orders = max(1, min(int(harmonics), int(hi // f0)))

    def columns(start: int, stop: int) -> np.ndarray:
        return _harmonic_design((np.arange(start, stop) - (n - 1) / 2.0) / rate, f0, orders)

    def model(c: np.ndarray) -> np.ndarray:
        out = np.empty(n)
        for start in range(0, n, _LS_CHUNK):
            stop = min(n, start + _LS_CHUNK)
            out[start:stop] = columns(start, stop) @ c
        return out

    coef = _chunked_lstsq(columns, e)
    resid = e - model(coef)
    sigma = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    # a floor for the spread: on a clean (float) capture the residual is ~1e-7 of the carrier and tiny
    # numerical steps would otherwise count as "spikes"; nothing below 1e-3 of the carrier is a spike
    sigma = max(sigma, 1e-3 * abs(float(coef[0])) / 6.0)
    bad = np.abs(resid) > 6.0 * sigma if sigma > 0.0 else np.zeros(n, dtype=bool)
    del resid
    if np.any(bad) and np.count_nonzero(~bad) > 4 * (2 * orders + 1):
        # blanked samples are filled from the harmonic model (not straight lines, which shave peaks)
        idx = np.nonzero(bad)[0]
        e = e.copy()
        filled = np.empty(idx.size)
        for start in range(0, idx.size, _LS_CHUNK):
            part = idx[start:start + _LS_CHUNK]
            filled[start:start + part.size] = _harmonic_design((part - (n - 1) / 2.0) / rate, f0, orders) @ coef
        e[idx] = filled
        coef = _chunked_lstsq(columns, e)
    ec = float(np.mean(e))
    lp = _lowpass_zero_phase(e, rate, hi)
    ac_var = float(np.var(lp))
    fit_var = 0.5 * float(np.sum(coef[1:] ** 2))  # power of the fitted harmonics
    explained = fit_var / ac_var if ac_var > 0 else 0.0
    chosen = method if method != "auto" else ("tone-fit" if explained >= 0.5 else "cycle-peaks")

    if chosen == "tone-fit":
        phase = np.linspace(0.0, 1.0 / f0, 4096, endpoint=False)
        wave = _harmonic_design(phase, f0, orders) @ coef
        emax, emin = float(wave.max()), float(wave.min())
    else:
        emax, emin = _cycle_extremes(lp, rate, f0, _lowpass_numtaps(rate, hi) // 2)
    return ModulationResult(
        depth_percent=100.0 * (emax - emin) / (emax + emin),
        depth_positive_percent=100.0 * (emax - ec) / ec,
        depth_negative_percent=100.0 * (ec - emin) / ec,
        tone_hz=float(f0),
        carrier_level=ec,
        method=chosen,
    )


def _cycle_extremes(lp: np.ndarray, rate_hz: float, f0: float, edge: int) -> tuple[float, float]:
    """Medians of the per-cycle maxima and minima of a low-passed envelope.

    The record (less ``edge`` samples at each end, the filter's start-up) is taken in
    chunks; each chunk is interpolated (scipy.signal.resample_poly, band-limited) to at
    least 64 samples a cycle so sampling does not clip the peaks, then cut into
    consecutive windows one period long, each holding one maximum and one minimum.
    """
    up = int(min(16, max(1, math.ceil(64.0 * f0 / rate_hz))))
    cycle_up = max(4, int(round(up * rate_hz / f0)))
    n = lp.size
    if n - 2 * edge < 2 * cycle_up / up:
        edge = 0
    pad = 32  # resample_poly's filter reaches about 10 input samples either side
    chunk = max(1 << 14, int(math.ceil(8 * cycle_up / up)))
    maxima: list[np.ndarray] = []
    minima: list[np.ndarray] = []
    for start in range(edge, n - edge, chunk):
        stop = min(n - edge, start + chunk)
        lo, hi = max(0, start - pad), min(n, stop + pad)
        piece = lp[lo:hi]
        fine = _signal.resample_poly(piece - piece.mean(), up, 1) + piece.mean() if up > 1 else piece
        fine = fine[(start - lo) * up : (stop - lo) * up]
        ncyc = fine.size // cycle_up
        if ncyc == 0:
            continue
        cycles = fine[: ncyc * cycle_up].reshape(ncyc, cycle_up)
        maxima.append(cycles.max(axis=1))
        minima.append(cycles.min(axis=1))
    if not maxima:
        raise ParameterError(f"envelope: {n} samples hold no whole cycle of {f0:g} Hz after the filter edges")
    return float(np.median(np.concatenate(maxima))), float(np.median(np.concatenate(minima)))


def _lowpass_numtaps(rate_hz: float, cutoff_hz: float) -> int:
    # transition width 10 % of the cutoff (at least 1 % of the rate); Kaiser 60 dB
    width = max(0.1 * cutoff_hz, 0.01 * rate_hz)
    numtaps, _ = _signal.kaiserord(60.0, width / (0.5 * rate_hz))
    return int(numtaps) | 1


def _lowpass_zero_phase(x: np.ndarray, rate_hz: float, cutoff_hz: float) -> np.ndarray:
    """Zero-phase low-pass: odd-length linear-phase FIR applied centred (mode 'same').

    The mean is taken out before filtering and put back after, so the zero padding at
    the ends does not pull the edges towards 0.
    """
    mean = float(np.mean(x))
    if cutoff_hz >= 0.45 * rate_hz:
        return x.copy()
    numtaps = _lowpass_numtaps(rate_hz, cutoff_hz)
    width = max(0.1 * cutoff_hz, 0.01 * rate_hz)
    _, beta = _signal.kaiserord(60.0, width / (0.5 * rate_hz))
    taps = _signal.firwin(numtaps, cutoff_hz + width / 2.0, window=("kaiser", beta), fs=rate_hz)
    return _signal.fftconvolve(x - mean, taps, mode="same") + mean


def sideband_levels_dbc(
    z: Any, rate_hz: float, tone_hz: float, carrier_hz: float | None = None
) -> tuple[float, float]:
    """Lower and upper first-order sideband levels relative to the carrier (dBc).

    Parameters
    ----------
    z : array_like of complex
        Complex baseband holding the AM signal.
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float
        Modulating frequency (Hz): the sidebands are read at carrier ± tone.
    carrier_hz : float or None
        Carrier frequency (Hz); None takes the strongest line.

    Returns
    -------
    (lower_dbc, upper_dbc) : tuple of float
        For single-tone AM of depth m both are 20·log10(m/2) dBc (Haykin).

    Notes
    -----
    One FFT over the whole record with a flat-top window (scipy.signal.windows.flattop,
    scalloping loss below 0.02 dB, so the peak bin reads the line amplitude); each line
    is the largest bin within ±2 bins of where it should be. The tone must lie at least
    8 bins (8·rate/N Hz) from the carrier for the flat-top main lobes to separate.
    """
    rate = _positive("rate_hz", rate_hz)
    x = _array_1d("z", z, np.complex128, min_len=64)
    fm = _positive("tone_hz", tone_hz)
    n = x.size
    df = rate / n
    if fm < 8.0 * df:
        raise ParameterError(
            f"tone_hz: {fm:g} Hz is closer than 8 bins ({8 * df:g} Hz) to the carrier for a {n}-sample record; use a longer record"
        )
    w = _signal.windows.flattop(n, sym=False)
    amp = np.abs(np.fft.fft(x * w)) / np.sum(w)

    def line(f_hz: float) -> tuple[float, int]:
        k = int(round(f_hz / df))
        ks = np.arange(k - 2, k + 3) % n
        j = int(ks[np.argmax(amp[ks])])
        return float(amp[j]), j

    if carrier_hz is None:
        kc = int(np.argmax(amp))
    else:
        _, kc = line(_finite("carrier_hz", carrier_hz))
    fc = (kc if kc < n // 2 else kc - n) * df
    a_c = float(amp[kc])
    a_lo, _ = line(fc - fm)
    a_hi, _ = line(fc + fm)
    return 20.0 * math.log10(max(a_lo, _TINY) / a_c), 20.0 * math.log10(max(a_hi, _TINY) / a_c)


# ============================================================================= audio quality
@dataclass(frozen=True)
class SineFitResult:
    """IEEE 1241 four-parameter sine fit: x ≈ amplitude·cos(2π·f·t + phase) + offset.

    Attributes
    ----------
    frequency_hz, amplitude, phase_rad, offset : float
        Fitted parameters; ``t`` is measured from the record's centre.
    residual_rms : float
        rms of x minus the fitted sine (noise + distortion), same unit as x.
    """

    frequency_hz: float
    amplitude: float
    phase_rad: float
    offset: float
    residual_rms: float


def _four_param_fit(
    x: np.ndarray, rate_hz: float, f_init: float, max_iter: int = 30
) -> tuple[float, float, float, float, np.ndarray]:
    """Four-parameter sine fit (IEEE Std 1241, 4.1.4.3 (memory for the clause number)).

    Returns (frequency, a, b, c, model) with model = a·cos(ωt) + b·sin(ωt) + c, t measured
    from the record's centre. Gauss-Newton as the standard describes it: at each step
    the columns cos, sin, 1 and t·(−a·sin + b·cos) are solved by least squares and ω is
    corrected by the fourth coefficient; a final three-parameter fit at the converged ω
    gives a, b, c. Normal equations are summed over chunks (bounded memory).
    """
    n = x.size
    half = (n - 1) / 2.0
    span = max(n - 1, 1) / rate_hz

    def times(start: int, stop: int) -> np.ndarray:
        return (np.arange(start, stop) - half) / rate_hz

    def three(w: float) -> np.ndarray:
        def cols(start: int, stop: int) -> np.ndarray:
            t = times(start, stop)
            return np.column_stack([np.cos(w * t), np.sin(w * t), np.ones(t.size)])

        return _chunked_lstsq(cols, x)

    w = 2.0 * np.pi * f_init
    a, b, c = three(w)
    for _ in range(max_iter):

        def cols4(start: int, stop: int, w=w, a=a, b=b) -> np.ndarray:
            t = times(start, stop)
            cw, sw = np.cos(w * t), np.sin(w * t)
            return np.column_stack([cw, sw, np.ones(t.size), (t / span) * (-a * sw + b * cw)])

        a, b, c, dw = _chunked_lstsq(cols4, x)
        dw = float(dw) / span
        # a step beyond a quarter of a resolution bin means a wrong start or no tone: clamp it
        dw = float(np.clip(dw, -0.5 * np.pi / span, 0.5 * np.pi / span))
        w += dw
        if abs(dw) * span < 1e-9:
            break
    a, b, c = three(w)
    t = times(0, n)
    model = a * np.cos(w * t) + b * np.sin(w * t) + c
    return w / (2.0 * np.pi), float(a), float(b), float(c), model


def sine_fit(x: Any, rate_hz: float, tone_hz: float | None = None) -> SineFitResult:
    """Four-parameter least-squares sine fit (IEEE Std 1241).

    Parameters
    ----------
    x : array_like of float
        Record (real).
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float or None
        Starting frequency (Hz); None takes the interpolated peak of a Blackman-Harris
        spectrum.

    Returns
    -------
    SineFitResult
    """
    rate = _positive("rate_hz", rate_hz)
    data = _array_1d("x", x, np.float64, min_len=16)
    f0 = _interpolated_peak_hz(data, rate, 0.0, rate / 2.0) if tone_hz is None else _positive("tone_hz", tone_hz)
    f, a, b, c, model = _four_param_fit(data, rate, f0)
    return SineFitResult(
        frequency_hz=float(f),
        amplitude=float(math.hypot(a, b)),
        phase_rad=float(math.atan2(-b, a)),
        offset=float(c),
        residual_rms=float(np.sqrt(np.mean((data - model) ** 2))),
    )


# Psophometric weighting, ITU-T O.41 (0 dB at 800 Hz), dB. Values as listed in the project's
# REFERENCES.md (read there in a secondary copy of the O.41 table); 16.66 Hz −85 dB from a
# secondary description of O.41 (memory-grade). Between points: linear in dB against
# log-frequency (a tabulated interpolation, not the standard's network).
_O41_TABLE = np.array(
    [
        (16.66, -85.0), (50.0, -63.0), (100.0, -41.0), (200.0, -21.0), (300.0, -10.6), (400.0, -6.3),
        (500.0, -3.6), (600.0, -2.0), (700.0, -0.9), (800.0, 0.0), (900.0, 0.6), (1000.0, 1.0),
        (1200.0, 0.0), (1400.0, -0.9), (1600.0, -1.7), (1800.0, -2.4), (2000.0, -3.0), (2500.0, -4.2),
        (3000.0, -5.6), (3500.0, -8.5), (4000.0, -15.0), (4500.0, -25.0), (5000.0, -36.0), (6000.0, -43.0),
    ]
)


def psophometric_weight_db(f_hz: Any) -> Any:
    """Psophometric weighting (dB) after ITU-T O.41, 0 dB at 800 Hz.

    Parameters
    ----------
    f_hz : float or array_like
        Frequency (Hz).

    Returns
    -------
    float or ndarray
        Weight (dB). Interpolated linearly in dB against log-frequency between the
        tabulated points of O.41 (16.66 Hz to 6 kHz); outside the table the end
        segments' slopes are extended; f <= 0 gives −inf.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    lf = np.log10(np.maximum(f, _TINY))
    tf, tw = np.log10(_O41_TABLE[:, 0]), _O41_TABLE[:, 1]
    out = np.interp(lf, tf, tw)
    lo_slope = (tw[1] - tw[0]) / (tf[1] - tf[0])
    hi_slope = (tw[-1] - tw[-2]) / (tf[-1] - tf[-2])
    out = np.where(lf < tf[0], tw[0] + lo_slope * (lf - tf[0]), out)
    out = np.where(lf > tf[-1], tw[-1] + hi_slope * (lf - tf[-1]), out)
    out = np.where(f > 0.0, out, -np.inf)
    return float(out) if out.ndim == 0 else out


def a_weight_db(f_hz: Any) -> Any:
    """A-weighting (dB) from the closed form of IEC 61672-1.

    A(f) = 20·log10[12194²·f⁴ / ((f² + 20.6²)·√((f² + 107.7²)(f² + 737.9²))·(f² + 12194²))] + 2.00 dB.

    Parameters
    ----------
    f_hz : float or array_like
        Frequency (Hz).

    Returns
    -------
    float or ndarray
        Weight (dB); f <= 0 gives −inf.
    """
    f = np.asarray(f_hz, dtype=np.float64)
    f2 = f * f
    with np.errstate(divide="ignore", invalid="ignore"):
        ra = (12194.0**2 * f2**2) / (
            (f2 + 20.6**2) * np.sqrt((f2 + 107.7**2) * (f2 + 737.9**2)) * (f2 + 12194.0**2)
        )
        out = np.where(f > 0.0, 20.0 * np.log10(np.maximum(ra, _TINY)) + 2.00, -np.inf)
    return float(out) if out.ndim == 0 else out


def weight_db(f_hz: Any, weighting: str) -> Any:
    """Weighting curve by name: ``"none"`` (0 dB), ``"psophometric"`` (ITU-T O.41) or ``"a"`` (IEC 61672-1)."""
    if weighting == "none":
        f = np.asarray(f_hz, dtype=np.float64)
        out = np.zeros_like(f)
        return float(out) if out.ndim == 0 else out
    if weighting == "psophometric":
        return psophometric_weight_db(f_hz)
    if weighting == "a":
        return a_weight_db(f_hz)
    raise ParameterError(f"weighting: {weighting!r} is not known; it must be 'none', 'psophometric' or 'a'")


@dataclass(frozen=True)
class AudioQualityResult(_Reportable):
    """Audio quality with a test tone (report section ``audio``).

    Attributes
    ----------
    snr_db : float
        Signal over noise, harmonics excluded (IEEE 1241), dB.
    sinad_db : float
        Signal over noise-and-distortion, S/(N+D) (IEEE 1241), dB.
    thd_percent, thd_db : float
        Total harmonic distortion rss(harmonics)/rms(fundamental), % and dB.
    receiver_sinad_db : float
        (S+N+D)/(N+D) as radio receiver practice reads SINAD, dB.
    tone_hz : float
        Fitted tone frequency (Hz).
    weighting : str
        Weighting applied to signal, harmonics and noise: "none", "psophometric" or "a".
    """

    snr_db: float
    sinad_db: float
    thd_percent: float
    thd_db: float
    receiver_sinad_db: float
    tone_hz: float
    weighting: str

    SECTION: ClassVar[str] = "audio"
    _KEYS: ClassVar[tuple[str, ...]] = (
        "snr_db", "sinad_db", "thd_percent", "thd_db", "receiver_sinad_db", "tone_hz", "weighting",
    )


_BH_HALF_LOBE = 4.5  # bins: the 4-term Blackman-Harris main lobe is ±4 bins wide


def audio_quality(
    x: Any,
    rate_hz: float,
    tone_hz: float | None = None,
    weighting: str = "none",
    harmonics: int = 10,
    band: tuple[float, float] | None = None,
) -> AudioQualityResult:
    """SNR, SINAD and THD of a recorded test tone (IEEE Std 1241 definitions).

    Parameters
    ----------
    x : array_like of float
        Audio record holding a steady test tone.
    rate_hz : float
        Sample rate (samples/s).
    tone_hz : float or None
        Tone frequency (Hz), used as the fit's starting point; None finds the strongest
        line in the band.
    weighting : {"none", "psophometric", "a"}
        Weighting curve (ITU-T O.41 / IEC 61672-1) applied, as a meter behind a
        weighting filter would see them, to the tone, the harmonics and the noise.
    harmonics : int, default 10
        Highest harmonic order counted in the distortion (orders 2..harmonics that fall
        inside the band and below rate/2; aliased harmonics are not folded back).
    band : (float, float) or None
        Measurement band (Hz) for noise and harmonics; None: DC excluded up to rate/2.

    Returns
    -------
    AudioQualityResult

    Notes
    -----
    1. The fundamental and the DC offset come from the IEEE 1241 four-parameter sine
       fit (started at the interpolated Blackman-Harris peak); S = A²/2 (weighted by
       the curve at the tone frequency).
    2. The fit residual (noise + distortion) is analysed in the frequency domain with a
       4-term Blackman-Harris window (harris 1978; sidelobes −92 dB, so leakage is
       known and negligible), scaled so that the bins sum to the mean power.
    3. Each harmonic's power is the sum of the bins within ±4.5 bins of h·f0 minus the
       noise expected there (the mean of the 12 bins on either side).
    4. Noise is the sum of the in-band bins outside the harmonic lobes, each weighted,
       plus the expected noise inside those lobes.
    SINAD = S/(N+D), SNR = S/N, THD = √(D/S) (IEEE 1241); receiver SINAD = (S+N+D)/(N+D).
    """
    rate = _positive("rate_hz", rate_hz)
    data = _array_1d("x", x, np.float64, min_len=256)
    weight_db(1000.0, weighting)  # validates the name
    nyq = rate / 2.0
    if band is None:
        lo, hi = 0.0, nyq
    else:
        lo, hi = _nonnegative("band[0]", band[0]), _positive("band[1]", band[1])
        if not lo < hi <= nyq:
            raise ParameterError(f"band: {band!r} Hz; it needs 0 <= low < high <= rate/2 = {nyq:g} Hz")
    if int(harmonics) < 1:
        raise ParameterError(f"harmonics: {harmonics!r}; it must be an integer >= 1")
    n = data.size
    df = rate / n
    f_start = (
        _interpolated_peak_hz(data, rate, max(lo, 6.0 * df), hi) if tone_hz is None else _positive("tone_hz", tone_hz)
    )
    f0, a, b, _, model = _four_param_fit(data, rate, f_start)
    if not (lo <= f0 <= hi):
        raise ParameterError(f"tone_hz: fitted tone at {f0:g} Hz lies outside the band {lo:g}..{hi:g} Hz")

    def g(f: Any) -> Any:
        return 10.0 ** (np.asarray(weight_db(f, weighting)) / 10.0)

    signal_power = 0.5 * (a * a + b * b) * float(g(f0))

    resid = data - model
    win = _signal.windows.blackmanharris(n, sym=False)
    spec = np.fft.rfft(resid * win)
    pbin = (np.abs(spec) ** 2) / (n * np.sum(win**2))
    pbin[1 : (n + 1) // 2] *= 2.0  # one-sided: fold negative frequencies (not DC, not Nyquist)
    freqs = np.arange(pbin.size) * df
    inband = (freqs >= lo) & (freqs <= hi)
    inband[0] = False  # DC excluded
    gain = np.where(inband, g(np.where(freqs > 0, freqs, 1.0)), 0.0)

    lobes = np.zeros(pbin.size, dtype=bool)
    harmonic_list: list[tuple[float, np.ndarray]] = []
    for h in range(2, int(harmonics) + 1):
        fh = h * f0
        if fh > hi or fh >= nyq - _BH_HALF_LOBE * df:
            break
        k = np.nonzero(np.abs(freqs / df - fh / df) <= _BH_HALF_LOBE)[0]
        harmonic_list.append((fh, k))
        lobes[k] = True

    distortion = 0.0
    fill = 0.0
    for fh, k in harmonic_list:
        flank = np.r_[np.arange(k[0] - 12, k[0]), np.arange(k[-1] + 1, k[-1] + 13)]
        flank = flank[(flank > 0) & (flank < pbin.size)]
        flank = flank[~lobes[flank]]
        noise_density = float(np.mean(pbin[flank])) if flank.size else 0.0
        expected_noise = noise_density * k.size
        distortion += max(float(np.sum(pbin[k])) - expected_noise, 0.0) * float(g(fh))
        fill += float(np.sum(noise_density * gain[k]))
    noise = float(np.sum(pbin[inband & ~lobes] * gain[inband & ~lobes])) + fill

    nd = noise + distortion
    sinad = 10.0 * math.log10(signal_power / max(nd, _TINY))
    return AudioQualityResult(
        snr_db=10.0 * math.log10(signal_power / max(noise, _TINY)),
        sinad_db=sinad,
        thd_percent=100.0 * math.sqrt(distortion / signal_power),
        thd_db=10.0 * math.log10(max(distortion, _TINY) / signal_power),
        receiver_sinad_db=10.0 * math.log10((signal_power + nd) / max(nd, _TINY)),
        tone_hz=float(f0),
        weighting=weighting,
    )


# ============================================================================= bandwidth
def _check_spectrum(freqs_hz: Any, psd: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    f = _array_1d("freqs_hz", freqs_hz, np.float64, min_len=2)
    p = _array_1d("psd", psd, np.float64, min_len=2)
    if f.size != p.size:
        raise ParameterError(f"psd: {p.size} values for {f.size} frequencies; the lengths must match")
    if np.any(np.diff(f) <= 0.0):
        raise ParameterError("freqs_hz: not strictly increasing; sort the spectrum (e.g. numpy.fft.fftshift) first")
    if np.any(p < 0.0):
        raise ParameterError("psd: negative values; it must be a power spectrum (linear power per bin)")
    if not np.any(p > 0.0):
        raise ParameterError("psd: all zero; there is no power to measure")
    mid = 0.5 * (f[1:] + f[:-1])
    edges = np.concatenate([[f[0] - (mid[0] - f[0])], mid, [f[-1] + (f[-1] - mid[-1])]])
    return f, p, edges


def occupied_bandwidth(freqs_hz: Any, psd: Any, fraction: float = 0.99) -> tuple[float, float, float]:
    """Occupied bandwidth: the band holding ``fraction`` of the power, the rest split evenly outside.

    Parameters
    ----------
    freqs_hz : array_like
        Bin centre frequencies (Hz), strictly increasing.
    psd : array_like
        Power per bin (linear; a density on uniform bins works the same).
    fraction : float, default 0.99
        Power fraction inside the band (ITU: β/2 = 0.5 % below and above).

    Returns
    -------
    (bw_hz, lo_hz, hi_hz) : tuple of float

    Notes
    -----
    ITU Radio Regulations No. 1.153 and ITU-R SM.328: the lower edge has (1 − fraction)/2
    of the total mean power below it, the upper edge as much above it. Each bin's power
    is taken as spread evenly over the bin (edges halfway between centres), so the
    edges are interpolated inside bins rather than snapped to them.
    """
    frac = _finite("fraction", fraction)
    if not 0.0 < frac < 1.0:
        raise ParameterError(f"fraction: {fraction!r}; it must lie strictly between 0 and 1")
    _, p, edges = _check_spectrum(freqs_hz, psd)
    cum = np.concatenate([[0.0], np.cumsum(p)])
    total = cum[-1]
    tail = 0.5 * (1.0 - frac) * total

    def locate(target: float) -> float:
        j = int(np.searchsorted(cum, target, side="left"))
        j = min(max(j, 1), p.size)
        i = j - 1
        while p[i] <= 0.0 and i > 0:  # cannot happen for cum[i] < target <= cum[j], kept for safety
            i -= 1
        share = (target - cum[i]) / p[i] if p[i] > 0 else 0.0
        return float(edges[i] + min(max(share, 0.0), 1.0) * (edges[i + 1] - edges[i]))

    lo = locate(tail)
    hi = locate(total - tail)
    return hi - lo, lo, hi


def x_db_bandwidth(freqs_hz: Any, psd: Any, x_db: float = 26.0) -> tuple[float, float, float]:
    """x-dB bandwidth: between the outermost points where the spectrum is x dB below its peak.

    Parameters
    ----------
    freqs_hz : array_like
        Bin centre frequencies (Hz), strictly increasing.
    psd : array_like
        Power per bin (linear).
    x_db : float, default 26.0
        Level below the reference (the spectrum's peak), dB.

    Returns
    -------
    (bw_hz, lo_hz, hi_hz) : tuple of float

    Notes
    -----
    ITU-R SM.328 (x-dB bandwidth): beyond the band every discrete component and the
    continuous density lie at least x dB below the 0 dB reference, here the peak bin.
    The outermost bins at or above the threshold are found, and each edge is placed by
    linear interpolation in dB between that bin and its outer neighbour. If the
    spectrum never falls x dB below the peak at an end, that end's bin centre is used.
    """
    x = _positive("x_db", x_db)
    f, p, _ = _check_spectrum(freqs_hz, psd)
    level = 10.0 * np.log10(np.maximum(p, _TINY))
    thr = float(level.max()) - x
    above = np.nonzero(level >= thr)[0]
    i_lo, i_hi = int(above[0]), int(above[-1])

    def cross(i_in: int, i_out: int) -> float:
        l_in, l_out = level[i_in], level[i_out]
        share = (l_in - thr) / (l_in - l_out) if l_in > l_out else 0.0
        return float(f[i_in] + share * (f[i_out] - f[i_in]))

    lo = cross(i_lo, i_lo - 1) if i_lo > 0 else float(f[0])
    hi = cross(i_hi, i_hi + 1) if i_hi < f.size - 1 else float(f[-1])
    return hi - lo, lo, hi


@dataclass(frozen=True)
class BandwidthResult(_Reportable):
    """Occupied and x-dB bandwidths (report section ``bandwidth``); edges in Hz on the input axis."""

    occupied_hz: float
    occupied_lo_hz: float
    occupied_hi_hz: float
    x_db_hz: float
    x_db: float
    x_db_lo_hz: float
    x_db_hi_hz: float
    fraction: float

    SECTION: ClassVar[str] = "bandwidth"
    _KEYS: ClassVar[tuple[str, ...]] = (
        "occupied_hz", "x_db_hz", "x_db", "occupied_lo_hz", "occupied_hi_hz", "x_db_lo_hz", "x_db_hi_hz", "fraction",
    )


def measure_bandwidth(freqs_hz: Any, psd: Any, fraction: float = 0.99, x_db: float = 26.0) -> BandwidthResult:
    """Both ITU-R SM.328 bandwidths of one spectrum (see :func:`occupied_bandwidth`, :func:`x_db_bandwidth`)."""
    bw, lo, hi = occupied_bandwidth(freqs_hz, psd, fraction)
    xbw, xlo, xhi = x_db_bandwidth(freqs_hz, psd, x_db)
    return BandwidthResult(bw, lo, hi, xbw, float(x_db), xlo, xhi, float(fraction))


# ============================================================================= activity
@dataclass(frozen=True)
class ActivitySegment(_Reportable):
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
    _KEYS: ClassVar[tuple[str, ...]] = ("start_s", "end_s", "level_dbfs")


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
    levels = _array_1d("levels_db", levels_db, np.float64, min_len=0)
    fs = _positive("frame_s", frame_s)
    thr = _finite("threshold_db", threshold_db)
    hyst = _nonnegative("hysteresis_db", hysteresis_db)
    hold = _nonnegative("min_hold_s", min_hold_s)
    gap = _nonnegative("merge_gap_s", merge_gap_s)
    pct = _finite("floor_percentile", floor_percentile)
    if not 0.0 <= pct <= 100.0:
        raise ParameterError(f"floor_percentile: {floor_percentile!r}; it must lie within 0..100")
    if levels.size == 0:
        return []
    floor = float(np.percentile(levels, pct)) if noise_floor_db is None else _finite("noise_floor_db", noise_floor_db)
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
    starts = list(np.nonzero(d == 1)[0])
    ends = list(np.nonzero(d == -1)[0])  # exclusive

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
        out.append(ActivitySegment(start * fs, end * fs, _db(float(np.mean(inner)))))
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
        self._rate = _positive("rate_hz", rate_hz)
        fs = _positive("frame_s", frame_s)
        self._frame_len = int(round(fs * self._rate))
        if self._frame_len < 1:
            raise ParameterError(f"frame_s: {frame_s!r} s is shorter than one sample at {self._rate:g} samples/s")
        allowed = {"threshold_db", "hysteresis_db", "min_hold_s", "noise_floor_db", "merge_gap_s", "floor_percentile"}
        unknown = set(detect_kwargs) - allowed
        if unknown:
            raise ParameterError(f"ActivityTracker: unknown option(s) {sorted(unknown)}; allowed: {sorted(allowed)}")
        self._kwargs = dict(detect_kwargs)
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
            self._levels.append(10.0 * np.log10(np.maximum(p, _TINY)))
        self._tail = buf[nfr * self._frame_len :].copy()
        return self

    def result(self) -> list[ActivitySegment]:
        """Bursts found in the frames so far (see :func:`detect_activity`)."""
        return detect_activity(self.levels_db, self.frame_s, **self._kwargs)

