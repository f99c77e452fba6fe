"""Carrier frequency and level of a channel, far finer than an FFT bin, one-shot or streaming.

Method: averaged, zero-padded Hann spectrum; quadratic interpolation of the log power around the peak
(J. O. Smith & X. Serra, "PARSHL", ICMC 1987); then a weighted least-squares fit of the unwrapped
carrier phase against time over the whole record (S. Tretter, "Estimating the frequency of a noisy
sinusoid by linear regression", IEEE Trans. IT-31, 1985; S. Kay, IEEE Trans. ASSP-37, 1989), which at
high SNR reaches the Cramér-Rao bound of D. Rife & R. Boorstyn, "Single-tone parameter estimation from
discrete-time observations", IEEE Trans. IT-20, 1974.

:class:`CarrierAccumulator` follows the project's accumulator protocol (``feed(block) -> self``,
``result()``, ``reset()``) and gives the same answer however the input is split into blocks (to
floating-point rounding); :func:`estimate_carrier` is its one-shot form.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from .. import checks
from ..errors import ParameterError
from .peaks import next_pow2, parabolic_vertex
from .results import Reportable
from .samples import TINY_POWER, as_samples, power_db

__all__ = ["CarrierResult", "CarrierAccumulator", "estimate_carrier"]


@dataclass(frozen=True)
class CarrierResult(Reportable):
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
    REPORT_KEYS: ClassVar[tuple[str, ...]] = (
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
        self._rate = checks.positive("rate_hz", rate_hz)
        self._nominal = checks.finite("nominal_offset_hz", nominal_offset_hz)
        self._search = self._rate / 2.0 if search_hz is None else checks.positive("search_hz", search_hz)
        seg_s = checks.positive("segment_s", segment_s)
        length = int(round(seg_s * self._rate))
        if length < 16:
            raise ParameterError(
                f"segment_s: {segment_s!r} s is {length} samples at {self._rate:g} samples/s; it must span >= 16 samples"
            )
        self._len = length
        self._hop = length // 2
        self._nfft = next_pow2(4 * length)
        from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
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
        x = as_samples("block", block, np.complex128, min_len=0)
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
            from scipy import signal as _signal  # here only: keeps scipy.signal out of start-up
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
        lp = np.log(np.maximum(avg[[(b0 - 1) % nfft, b0, (b0 + 1) % nfft]], TINY_POWER))
        delta, _ = parabolic_vertex(lp[0], lp[1], lp[2])
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
                    amp2 = np.maximum(np.abs(phasors[use]) ** 2 - noise_bin, TINY_POWER) / np.maximum(kern**2, TINY_POWER)
                    level = power_db(float(np.median(amp2)))
        if not detected:
            b_freq = self._nominal + self._dist[b0]
            window_sum = _hann_kernel(np.array([freq - b_freq]), length, rate)[0]
            level = power_db(max(avg[b0] - noise_bin, TINY_POWER) / max(window_sum**2, TINY_POWER))
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

