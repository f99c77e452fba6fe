"""Streaming sources of the synthesizer: band filters, interpolation, messages and fading gains.

Everything here works from *truth records* (the dicts :func:`iqsift.synth.build_truth`
writes), so :func:`regenerate_message` rebuilds exactly the samples a capture used.
Noise and file messages, channel noise and fading gains are made at a low rate in
fixed chunks (so the output does not depend on how it is read) and interpolated up
by a whole ratio with a 32-tap Kaiser-windowed sinc kernel (100 dB design,
polyphase); band filters are Kaiser-window FIRs (Kaiser 1974; Oppenheim & Schafer,
*Discrete-Time Signal Processing*, ch. 7). See :mod:`iqsift.synth` for the method.
"""

from __future__ import annotations

import functools
import math
import os
from typing import Any, Callable, Mapping, Sequence

import numpy as np
from scipy import signal as _signal
from scipy.special import i0 as _i0

from ..errors import ParameterError

__all__ = [
    "INTERP_HALF",
    "FILE_INTERP_HALF",
    "INTERP_ATTEN_DB",
    "FIR_ATTEN_DB",
    "PASS_FRACTION",
    "FRAC_PHASES",
    "Interpolator",
    "ToneMessage",
    "band_fir",
    "build_message",
    "clarke_fading",
    "file_filtered",
    "filtered_noise_source",
    "message_transition_hz",
    "noise_filter",
    "noise_gain",
    "rate_ratio",
    "regenerate_message",
    "rng_for",
]

_CHUNK = 4096  # low-rate samples generated per step (fixed: keeps streams block-size independent)
INTERP_HALF = 16  # half-length (message samples) of the interpolation kernel: 32 taps
FILE_INTERP_HALF = 32  # file resampling kernel half-length: 64 taps
INTERP_ATTEN_DB = 100.0  # Kaiser design attenuation of the interpolation kernels
FIR_ATTEN_DB = 80.0  # Kaiser design attenuation of message / channel-noise band filters
PASS_FRACTION = 0.38  # highest message frequency as a share of the message rate (kernel passband 0.40)

_MAX_RATIO = 4096  # largest interpolation ratio (bounds the polyphase table to 32 x 4096 weights)
_FRAME_OUT = 65536  # interpolator output frame (samples), rounded up to whole low-rate samples
FRAC_PHASES = 1024  # phases of the file resampling table (linear interpolation between them)


# ----------------------------------------------------------------------------------------------
# Filters, interpolation, streaming sources
# ----------------------------------------------------------------------------------------------
def _kernel(tau: np.ndarray, half: int, beta: float) -> np.ndarray:
    """Kaiser-windowed sinc interpolation kernel (cutoff at half the input rate), ``tau`` in input samples."""
    x = np.clip(1.0 - (tau / half) ** 2, 0.0, None)
    w = _i0(beta * np.sqrt(x)) / _i0(beta)
    return np.where(np.abs(tau) < half, np.sinc(tau) * w, 0.0)


@functools.lru_cache(maxsize=16)
def _polyphase_table(ratio: int) -> np.ndarray:
    """Weights (2L, ratio) of the interpolator for output phase p/ratio; each column sums to 1."""
    beta = float(_signal.kaiser_beta(INTERP_ATTEN_DB))
    mu = np.arange(ratio) / ratio
    j = np.arange(-INTERP_HALF + 1, INTERP_HALF + 1)
    w = _kernel(mu[None, :] - j[:, None], INTERP_HALF, beta)
    w /= w.sum(axis=0, keepdims=True)
    w.setflags(write=False)
    return w


def band_fir(rate: float, low: float, high: float, transition: float, *, one_sided: bool) -> np.ndarray:
    """Kaiser-window band filter, gain 1 in ``low..high`` Hz (-6 dB at the edges).

    ``one_sided`` gives the complex filter ``exp(j w0 n) h_lp[n]`` that passes
    only positive frequencies (Oppenheim & Schafer, ch. 7); otherwise a real
    band-pass ``2 cos(w0 n) h_lp[n]`` or, with ``low == 0``, the low-pass.
    Length and beta from Kaiser's formulas (scipy.signal.kaiserord).
    """
    numtaps, beta = _signal.kaiserord(FIR_ATTEN_DB, transition / (rate / 2))
    numtaps |= 1
    if low <= 0 and not one_sided:
        return _signal.firwin(numtaps, high, window=("kaiser", beta), fs=rate)
    half_width = (high - low) / 2
    centre = (high + low) / 2
    lowpass = _signal.firwin(numtaps, half_width, window=("kaiser", beta), fs=rate)
    n = np.arange(numtaps) - (numtaps - 1) / 2
    if one_sided:
        return lowpass * np.exp(2j * np.pi * centre * n / rate)
    return 2 * lowpass * np.cos(2 * np.pi * centre * n / rate)


def message_transition_hz(low: float, high: float) -> float:
    """Transition width (Hz) of a message band filter: the smaller of low and high/10."""
    return min(low, 0.1 * high) if low > 0 else 0.1 * high


def rate_ratio(sample_rate: float, needed: float) -> int:
    """Largest integer R <= 4096 with sample_rate / R >= needed (the low rate is sample_rate / R)."""
    ratio = min(int(math.floor(sample_rate / needed * (1 + 1e-12))), _MAX_RATIO)
    if ratio < 1:
        raise ParameterError(f"sample_rate: {sample_rate:g} samples/s is below the {needed:g} samples/s a message needs")
    return ratio


class _StreamSource:
    """Low-rate samples made in fixed-size chunks; sample ``first`` is the first one kept.

    ``skip`` samples produced before ``first`` (filter warm-up) are never served.
    Requests must not go back before an earlier request's start.
    """

    def __init__(self, make_chunk: Callable[[], np.ndarray], first: int, skip: int) -> None:
        self._make = make_chunk
        self._buf: np.ndarray | None = None
        self._base = first - skip

    def get(self, k0: int, k1: int) -> np.ndarray:
        if self._buf is None:
            self._buf = self._make()
        if k0 < self._base:
            raise RuntimeError("stream source asked to go back in time")  # internal invariant
        while self._base + self._buf.shape[0] < k1:
            self._buf = np.concatenate([self._buf, self._make()])
        out = self._buf[k0 - self._base:k1 - self._base].copy()
        if k0 > self._base:
            self._buf = self._buf[k0 - self._base:]
            self._base = k0
        return out


class Interpolator:
    """Band-limited interpolation by an integer ratio R from a low-rate source.

    Output sample n is the Kaiser-windowed sinc interpolation (32 taps, 100 dB
    design) of the source at position n/R: passband to 0.40, stopband from
    0.60 of the low rate. Polyphase form: the outputs for low-rate samples
    k .. k+K-1 are the matrix product of the (K, 32) sliding window of the
    source with the (32, R) weight table. Outputs are made in fixed frames
    aligned to sample 0, so they do not depend on how they are read.
    """

    def __init__(self, source: Any, ratio: int) -> None:
        self.source = source
        self.ratio = int(ratio)
        self.table = _polyphase_table(self.ratio)
        self.frame_k = max(4, -(-_FRAME_OUT // self.ratio))
        self.frame_n = self.frame_k * self.ratio
        self._cache: tuple[int, np.ndarray] | None = None

    def _frame(self, i: int) -> np.ndarray:
        if self._cache is not None and self._cache[0] == i:
            return self._cache[1]
        k0 = i * self.frame_k
        x = self.source.get(k0 - INTERP_HALF + 1, k0 + self.frame_k + INTERP_HALF)
        if np.iscomplexobj(x):
            re = np.lib.stride_tricks.sliding_window_view(np.ascontiguousarray(x.real), 2 * INTERP_HALF)
            im = np.lib.stride_tricks.sliding_window_view(np.ascontiguousarray(x.imag), 2 * INTERP_HALF)
            y = np.empty((self.frame_k, self.ratio), dtype=np.complex128)
            y.real = re @ self.table
            y.imag = im @ self.table
        else:
            y = np.lib.stride_tricks.sliding_window_view(x, 2 * INTERP_HALF) @ self.table
        frame = y.reshape(-1)
        self._cache = (i, frame)
        return frame

    def take(self, n0: int, n1: int) -> np.ndarray:
        """Output samples ``n0 .. n1 - 1`` at the full rate."""
        parts = []
        pos = n0
        while pos < n1:
            i = pos // self.frame_n
            stop = min(n1, (i + 1) * self.frame_n)
            parts.append(self._frame(i)[pos - i * self.frame_n:stop - i * self.frame_n])
            pos = stop
        if not parts:
            return np.zeros(0)
        return parts[0].copy() if len(parts) == 1 else np.concatenate(parts)


@functools.lru_cache(maxsize=2)
def _fractional_table() -> np.ndarray:
    """(1025, 64) weights of the 64-tap Kaiser-windowed sinc kernel for fractional delays 0, 1/1024 .. 1."""
    beta = float(_signal.kaiser_beta(INTERP_ATTEN_DB))
    mu = np.arange(FRAC_PHASES + 1) / FRAC_PHASES
    j = np.arange(-FILE_INTERP_HALF + 1, FILE_INTERP_HALF + 1)
    w = _kernel(mu[:, None] - j[None, :], FILE_INTERP_HALF, beta)
    w /= w.sum(axis=1, keepdims=True)
    w.setflags(write=False)
    return w


# ----------------------------------------------------------------------------------------------
# Messages (built from truth records, so regenerate_message rebuilds exactly what was used)
# ----------------------------------------------------------------------------------------------
def rng_for(entropy: int, key: Sequence[int]) -> np.random.Generator:
    """The random stream of ``SeedSequence(entropy, spawn_key=key)`` (as spawned from ``SeedSequence(entropy)``)."""
    return np.random.default_rng(np.random.SeedSequence(entropy, spawn_key=tuple(int(k) for k in key)))


class ToneMessage:
    """A tone or multitone message made exactly, sample by sample, from its truth record (no interpolation).

    ``real(n0, n1)`` is ``sum_i a_i cos(2 pi f_i n / rate + phase_i)`` for n = n0 .. n1 - 1 (float64);
    ``analytic(n0, n1)`` is the same sum of complex exponentials (one per tone, complex128).
    """

    def __init__(self, rec: Mapping[str, Any], rate: float) -> None:
        self.freqs = [float(f) for f in rec["frequencies_hz"]]
        self.amps = [float(a) for a in rec["amplitudes"]]
        self.phases = [math.radians(float(p)) for p in rec["phases_deg"]]
        self.rate = float(rate)

    def _cycles(self, f: float, n0: int, n1: int) -> np.ndarray:
        cycles = f * np.arange(n0, n1, dtype=np.float64) / self.rate
        return cycles - np.floor(cycles)

    def real(self, n0: int, n1: int) -> np.ndarray:
        """The real message for samples ``n0 .. n1 - 1``."""
        out = np.zeros(n1 - n0)
        for f, a, p in zip(self.freqs, self.amps, self.phases):
            out += a * np.cos(2 * np.pi * self._cycles(f, n0, n1) + p)
        return out

    def analytic(self, n0: int, n1: int) -> np.ndarray:
        """The analytic message ``msg + j H{msg}`` for samples ``n0 .. n1 - 1``."""
        out = np.zeros(n1 - n0, dtype=np.complex128)
        for f, a, p in zip(self.freqs, self.amps, self.phases):
            out += a * np.exp(1j * (2 * np.pi * self._cycles(f, n0, n1) + p))
        return out


class _InterpMessage:
    """A message made at a low rate (real, or complex analytic for SSB) and interpolated up."""

    def __init__(self, source: Any, ratio: int) -> None:
        self.interp = Interpolator(source, ratio)

    def real(self, n0: int, n1: int) -> np.ndarray:
        return self.interp.take(n0, n1)

    analytic = real


def noise_filter(rec: Mapping[str, Any], analytic: bool) -> np.ndarray:
    """Band filter of a noise message at its low rate; doubled one-sided complex filter for an analytic message."""
    h = band_fir(rec["rate_hz"], rec["low_hz"], rec["high_hz"], rec["transition_hz"], one_sided=analytic)
    return 2 * h if analytic else h


def noise_gain(h: np.ndarray, analytic: bool) -> float:
    """Power of the (real part of the) filter output for unit white input."""
    return float(np.sum(np.abs(h) ** 2) / 2) if analytic else float(np.sum(h ** 2))


def filtered_noise_source(h: np.ndarray, sigma: float, rng: np.random.Generator, complex_input: bool) -> _StreamSource:
    """White Gaussian noise (standard deviation ``sigma`` per real or complex sample) filtered by ``h``."""
    out_dtype = np.complex128 if (complex_input or np.iscomplexobj(h)) else np.float64
    state = {"zi": np.zeros(h.shape[0] - 1, dtype=out_dtype)}

    def make() -> np.ndarray:
        w: np.ndarray
        if complex_input:
            w = rng.standard_normal(2 * _CHUNK).view(np.complex128) * (sigma / math.sqrt(2))
        else:
            w = rng.standard_normal(_CHUNK) * sigma
        y, state["zi"] = _signal.lfilter(h, [1.0], w, zi=state["zi"])
        return y

    return _StreamSource(make, -INTERP_HALF, h.shape[0] - 1)


@functools.lru_cache(maxsize=4)
def file_filtered(path: str, sha256: str, low: float, high: float, transition: float, analytic: bool,
                  loop: bool) -> tuple[np.ndarray, int, float, int]:
    """Band-limited file audio at the file's own rate.

    Returns ``(y, first, file_rate, frames)``: ``y[i]`` is the message at file
    sample ``i + first``. Without ``loop`` the full filter output is kept
    (``first`` = -delay, start and end transients included, zero outside), so
    nothing is truncated; with ``loop`` the file is filtered circularly (one
    seamless period, ``first`` = 0). The filter is the Kaiser band filter with
    its delay removed; ``analytic`` gives ``2 (h_c * x)``, the analytic signal.
    """
    import soundfile

    from ..captures.integrity import sha256_of_file  # here, like soundfile: synth loads no reader it does not use

    if sha256_of_file(path) != sha256:
        raise ParameterError(f"{path}: the audio file changed since the truth was made (SHA-256 differs)")
    data, file_rate = soundfile.read(path, dtype="float64", always_2d=True)
    x = data.mean(axis=1)
    frames = x.shape[0]
    if frames == 0:
        raise ParameterError(f"{path}: the audio file holds no samples")
    h = band_fir(float(file_rate), low, high, transition, one_sided=analytic)
    if analytic:
        h = 2 * h
    delay = (h.shape[0] - 1) // 2
    y: np.ndarray
    if loop:
        wrapped = np.zeros(frames, dtype=h.dtype)
        np.add.at(wrapped, (np.arange(h.shape[0]) - delay) % frames, h)
        circular = np.fft.ifft(np.fft.fft(x) * np.fft.fft(wrapped))
        y = circular if analytic else circular.real
        first = 0
    else:
        y = _signal.lfilter(h, [1.0], np.concatenate([x, np.zeros(h.shape[0] - 1)]))
        first = -delay
    y.setflags(write=False)
    return y, first, float(file_rate), frames


def _file_source(rec: Mapping[str, Any], analytic: bool) -> _StreamSource:
    """Message-rate samples of a file message: 64-tap Kaiser-windowed sinc evaluation at k * file_rate / rate."""
    y, first, file_rate, frames = file_filtered(rec["resolved_path"], rec["sha256"], rec["low_hz"], rec["high_hz"],
                                                rec["transition_hz"], analytic, rec["loop"])
    table = _fractional_table()
    j = np.arange(-FILE_INTERP_HALF + 1, FILE_INTERP_HALF + 1)
    step = file_rate / rec["rate_hz"]
    scale = rec["scale"]
    state = {"k": -INTERP_HALF}

    def make() -> np.ndarray:
        k = np.arange(state["k"], state["k"] + _CHUNK, dtype=np.float64)
        state["k"] += _CHUNK
        pos = k * step
        base = np.floor(pos)
        u = (pos - base) * FRAC_PHASES
        i = np.minimum(np.floor(u).astype(np.int64), FRAC_PHASES - 1)
        a = (u - i)[:, None]
        w = (1 - a) * table[i] + a * table[i + 1]
        idx = base.astype(np.int64)[:, None] + j[None, :]
        if rec["loop"]:
            vals = y[idx % frames]
        else:
            at = idx - first
            ok = (at >= 0) & (at < y.shape[0])
            vals = np.zeros(idx.shape, dtype=y.dtype)
            vals[ok] = y[at[ok]]
        return scale * (w * vals).sum(axis=1)

    return _StreamSource(make, -INTERP_HALF, 0)


def build_message(channel: Mapping[str, Any], rate: float) -> Any:
    """The message source of a truth channel record at ``rate`` samples/s (``real``/``analytic`` by sample range)."""
    rec = channel["message"]
    analytic = channel["mode"] in ("usb", "lsb")
    if rec["kind"] in ("tone", "tones"):
        return ToneMessage(rec, rate)
    ratio = _check_ratio(rec, rate)
    if rec["kind"] == "noise":
        h = noise_filter(rec, analytic)
        sigma = rec["rms"] / math.sqrt(noise_gain(h, analytic))
        rng = rng_for(rec["rng"]["entropy"], rec["rng"]["spawn_key"])
        return _InterpMessage(filtered_noise_source(h, sigma, rng, complex_input=False), ratio)
    return _InterpMessage(_file_source(rec, analytic), ratio)


def _check_ratio(rec: Mapping[str, Any], rate: float) -> int:
    ratio = rate / rec["rate_hz"]
    if abs(ratio - round(ratio)) > 1e-9 * ratio or round(ratio) < 1:
        raise ParameterError(
            f"rate: {rate:g} samples/s is not a whole multiple of the message rate {rec['rate_hz']:g} samples/s"
        )
    return int(round(ratio))


def regenerate_message(truth_channel: Mapping[str, Any], rate: float, n: int, base_dir: str | os.PathLike | None = None
                       ) -> np.ndarray:
    """The exact message samples a synthetic channel used, rebuilt from its truth record.

    Parameters
    ----------
    truth_channel : dict
        One entry of the truth file's ``channels`` list.
    rate : float
        Sample rate (samples/s): the capture's rate. Tone messages accept any
        rate; noise and file messages need a whole multiple of
        ``message.rate_hz``.
    n : int
        Number of samples from sample 0.
    base_dir : path, optional
        Folder of the truth file: a file message's ``resolved_path`` written by
        :func:`write_synth` is relative to it (default: the current folder).

    Returns
    -------
    ndarray
        float64 message ``msg`` (peak-normalised as the truth states) for
        am/dsb channels; complex128 analytic message ``msg + j H{msg}`` for
        usb/lsb (its real part is the message; lsb uses its conjugate).
    """
    if not isinstance(truth_channel, Mapping) or "message" not in truth_channel or "mode" not in truth_channel:
        raise ParameterError("truth_channel: expected one entry of a truth file's 'channels' list")
    rec = truth_channel
    msg = truth_channel.get("message") or {}
    if msg.get("resolved_path") and not os.path.isabs(msg["resolved_path"]):
        rec = dict(truth_channel)
        rec["message"] = dict(msg, resolved_path=os.path.join(os.fspath(base_dir or "."), msg["resolved_path"]))
    message = build_message(rec, float(rate))
    n = int(n)
    if truth_channel["mode"] in ("usb", "lsb"):
        return message.analytic(0, n)
    return message.real(0, n)


# ----------------------------------------------------------------------------------------------
# Fading gain (built from a truth record)
# ----------------------------------------------------------------------------------------------
def clarke_fading(rec: Mapping[str, Any], rate: float) -> Interpolator:
    """Clarke sum-of-sinusoids gain, evaluated exactly at ``rec['rate_hz']`` and interpolated up.

    The gain is band-limited to the Doppler frequency, so evaluating the sum
    at a low rate (at least doppler / 0.38) and interpolating with the 100 dB
    kernel reproduces it at the full rate.
    """
    paths = int(rec["paths"])
    alpha = (2 * np.pi * np.arange(paths) + rec["theta_rad"]) / paths
    freqs = rec["doppler_hz"] * np.cos(alpha)
    phases = np.asarray(rec["phases_rad"], dtype=np.float64)
    ratio = _check_ratio(rec, rate)
    low_rate = rate / ratio
    norm = 1 / math.sqrt(paths)
    if rec["kind"] == "rician":
        k_lin = 10 ** (rec["k_db"] / 10)
        los, scatter = math.sqrt(k_lin / (k_lin + 1)), math.sqrt(1 / (k_lin + 1))
    else:
        los, scatter = 0.0, 1.0
    state = {"k": -INTERP_HALF}

    def make() -> np.ndarray:
        k = np.arange(state["k"], state["k"] + _CHUNK, dtype=np.float64)
        state["k"] += _CHUNK
        cycles = np.outer(k, freqs / low_rate)
        cycles -= np.floor(cycles)
        g = norm * np.exp(1j * (2 * np.pi * cycles + phases)).sum(axis=1)
        return los + scatter * g if los else g

    return Interpolator(_StreamSource(make, -INTERP_HALF, 0), ratio)
