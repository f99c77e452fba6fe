"""Synthetic test captures: invented AM, DSB and SSB voice channels in noise, with exact truth.

A *scenario* (TOML file or dict) describes a complex IQ capture: sample rate,
centre frequency, duration, a random seed, the stored SigMF datatype, an
optional white noise floor and any number of channels. :func:`write_synth`
renders it into a SigMF recording plus a truth file ``<stem>.truth.json``
that states every parameter as resolved numbers, so a test can check what
iqsift measures against what was put in. Everything is generated block by
block in bounded memory with all random-number, filter and oscillator state
carried between blocks: the samples do not depend on the block size, and the
same scenario and seed give the same bytes (with the same numpy and scipy
versions, which the truth file records).

Scenario schema
---------------
Top level (frequencies, rates and bandwidths accept SI suffixes: ``"2.4M"``,
``"150k"``; times accept ``"250ms"`` or ``"48000sa"``)::

    sample_rate = "2.4M"            # required, samples/s
    center = "127.5M"               # optional, Hz; without it, channel frequencies are offsets
    duration = "2s"                 # required
    seed = 1234                     # integer >= 0 (default 0)
    datatype = "ci16_le"            # complex SigMF datatype (default "cf32_le")
    noise_floor_dbfs_per_hz = -130  # optional complex white Gaussian noise over the whole band
    description = "..."             # optional, goes to core:description

    [[channel]]                     # zero or more
    name = "north-approach"         # default "ch<N>"; unique
    freq = "127.35M"                # absolute (needs `center`) ... or
    offset = "-150k"                # ... relative to the centre; exactly one of the two
    mode = "am"                     # "am" (full carrier), "dsb" (suppressed carrier), "usb", "lsb"
    emission = "6K00A3E"            # optional ITU designator: default bandwidth, checked against mode
    level_dbfs = -30                # am: carrier power; dsb/usb/lsb: average signal power (default -20)
    depth = 0.8                     # am only: modulation depth m (default 0.5; > 1 overmodulates)
    carrier_offset_hz = 120         # actual carrier minus `freq` (a tuning error to measure), Hz
    drift_hz_per_s = 0.5            # linear carrier drift, Hz/s
    phase_deg = 0                   # carrier phase at sample 0
    bandwidth = "6k"                # channel bandwidth; default: the emission's, else max(2 M, 6 kHz)
                                    # for am/dsb and max(M, 3 kHz) for usb/lsb (M = top message frequency;
                                    # ITU-R SM.1138: Bn = 2M for A3E, about M for J3E)
    cnr_db = 40                     # optional band-limited channel noise (see below)
    noise_bandwidth = "6k"          # bandwidth the CNR refers to (default `bandwidth`)
    message = { kind = "tones", freqs = [400, 1100, 2300], amplitudes = [0.5, 0.3, 0.2] }
    fading = { kind = "rayleigh", doppler_hz = 2.0 }   # or kind = "rician", k_db = 6; paths = 32
    bursts = [[0.2, 0.9], [1.3, 1.8]]                  # on/off keying, active spans in seconds
    burst_edge = "5ms"              # raised-cosine edge duration (default 5 ms)

Messages (``message.kind``):

- ``"tone"``: ``freq`` (default 1000 Hz), ``phase_deg``.
- ``"tones"``: ``freqs``, ``amplitudes`` (default equal), ``phases_deg``
  (default 0). Amplitudes are relative: the message is scaled so that the
  sum of ``|amplitudes|`` is 1, i.e. its peak (all phases 0, at t = 0) is
  exactly 1. The default message is a 1000 Hz tone.
- ``"noise"``: Gaussian noise band-limited to ``low``..``high`` (default
  300..3000 Hz) by a Kaiser-window FIR, with RMS ``rms`` (default 0.25, so
  peaks beyond 1 are 4-sigma events; they are not clipped).
- ``"file"``: ``path`` (audio file readable by soundfile, relative to the
  scenario file), ``low``/``high`` (default 300/3000 Hz; ``low = 0`` gives a
  low-pass, AM/DSB only), ``loop`` (default false: the file plays once from
  t = 0, then silence). Channels are mixed to mono, band-limited at the
  file's rate (Kaiser FIR, delay removed; applied circularly when looping, so
  the seam is as smooth as the file's own ends) and scaled so that the peak
  of the band-limited file samples is 1; values between samples may exceed it
  slightly. The truth records the file's SHA-256 and the exact processing.

Modulation (complex baseband ``b(t)`` before the carrier
``exp(j(2 pi f(t) t + phase))``, with msg the real message): ``am``
``A(1 + m msg)`` with carrier amplitude ``A`` (Haykin, *Communication
Systems*, 4th ed., ch. 3); ``dsb`` ``A msg``; ``usb`` ``A (msg + j H{msg})``
(the analytic signal, one-sided positive spectrum); ``lsb`` its complex
conjugate. For DSB and SSB ``A`` is set so the average power is
``level_dbfs``. Tone messages are made exactly in the frequency domain
(one complex exponential per tone); noise and file messages get their
analytic signal from a streaming one-sided complex band-pass FIR (the Kaiser
low-pass prototype shifted by ``exp(j w0 n)``; Oppenheim & Schafer,
*Discrete-Time Signal Processing*, ch. 7; Kaiser 1974 for the window).

Channel noise: with ``cnr_db``, complex Gaussian noise with flat density N0
is added inside the channel band only (``[-B/2, B/2]`` around the carrier for
am/dsb, ``[0, B]`` above it for usb, ``[-B, 0]`` below it for lsb, with B =
``noise_bandwidth``), so channels at different CNRs do not disturb one
another. ``cnr_db = 10 log10(C / (N0 B))`` where C is the carrier power (am)
or the average signal power (dsb/ssb) given by ``level_dbfs``. The band edges
are Kaiser-window transitions B/50 wide; N0 holds in the passband. The noise
follows the carrier (offset, drift) but is neither gated by bursts nor faded.

Fading: flat, a complex gain on the channel's whole signal. Rayleigh uses
Clarke's model as a sum of ``paths`` equal-power plane waves (R. H. Clarke,
"A statistical theory of mobile-radio reception", Bell Syst. Tech. J. 47,
1968): ``g(t) = paths^-1/2 sum_n exp(j(2 pi f_d cos(a_n) t + p_n))`` with
arrival angles ``a_n = (2 pi n + theta)/paths`` and theta, p_n drawn uniformly
from the channel's fading random stream; mean power 1, Doppler spectrum
within +-f_d, autocorrelation approaching J0(2 pi f_d tau) (Jakes,
*Microwave Mobile Communications*, 1974). Rician adds a steady line-of-sight
component: ``sqrt(K/(K+1)) + sqrt(1/(K+1)) g(t)``. The sum is evaluated
exactly at a low rate (at least f_d / 0.38) and interpolated to the sample
rate like the messages below.

Noise and file messages and channel noise are made at a low rate
``sample_rate / R`` (R a whole number up to 4096, the rate at least 2.6 times
the highest frequency) and interpolated by R with a 32-tap Kaiser-windowed
sinc kernel (100 dB design, polyphase), so band-limited filters stay short.

Bursts: the channel's signal is multiplied by a gate that is 1 inside each
``[start, end]`` span and 0 outside, with raised-cosine edges ``burst_edge``
long centred on ``start`` and ``end`` (the gate is 0.5 exactly there, so the
half-amplitude crossings of the envelope fall at the stated times). A span
starting at 0 or ending at ``duration`` has no edge there.

Random streams: every random draw comes from ``numpy.random.SeedSequence(seed,
spawn_key=...)`` (the same as spawning from ``SeedSequence(seed)``): spawn key
``(0,)`` for the noise floor, ``(i + 1, 0)`` channel i's noise message, ``(i +
1, 1)`` its fading, ``(i + 1, 2)`` its channel noise.

Annotations (SigMF): one per channel over the whole recording with
``core:freq_lower_edge``/``core:freq_upper_edge`` = the channel band around
the actual carrier (``[-B/2, B/2]`` am/dsb, ``[0, B]`` usb, ``[-B, 0]`` lsb,
widened by the drift over the capture; absolute Hz when ``center`` is given,
else offsets), and one per burst spanning ``round(start * rate)`` to
``round(end * rate)``.

Truth file: the resolved scenario (absolute and relative frequencies in Hz,
levels, noise densities, seed, datatype, sample counts, burst spans in
seconds and samples, fading draws, message descriptions with their rates and
filter designs, the clipped-component count reported by the SigMF writer, the
iqsift/numpy/scipy versions). :func:`regenerate_message` rebuilds the exact
message samples of a channel from its truth record.
"""

from __future__ import annotations

import functools
import hashlib
import json
import math
import os
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

import numpy as np
import scipy
from scipy import signal as _signal
from scipy.special import i0 as _i0

from . import __version__
from .errors import CaptureError, ParameterError
from .units import parse_frequency, parse_time

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = [
    "MODES",
    "MESSAGE_KINDS",
    "Scenario",
    "ChannelSpec",
    "SynthResult",
    "Synthesizer",
    "load_scenario",
    "parse_scenario",
    "build_truth",
    "synthesize",
    "write_synth",
    "truth_path_for",
    "regenerate_message",
    "tone_message",
    "multitone_message",
    "am_signal",
    "dsb_signal",
    "ssb_signal",
    "ssb_tones",
    "analytic_message",
    "awgn",
    "fading_gain",
]

#: Modulations the generator makes.
MODES: tuple[str, ...] = ("am", "dsb", "usb", "lsb")
#: Message kinds.
MESSAGE_KINDS: tuple[str, ...] = ("tone", "tones", "noise", "file")
FADING_KINDS: tuple[str, ...] = ("rayleigh", "rician")

DEFAULT_BLOCK = 65536
"""Samples per generated block (the output does not depend on it)."""
MAX_IN_MEMORY = 1 << 23
"""Longest scenario :func:`synthesize` returns as one array by default (samples)."""

_CHUNK = 4096  # low-rate samples generated per step (fixed: keeps streams block-size independent)
_INTERP_HALF = 16  # half-length (message samples) of the interpolation kernel: 32 taps
_FILE_INTERP_HALF = 32  # file resampling kernel half-length: 64 taps
_INTERP_ATTEN_DB = 100.0  # Kaiser design attenuation of the interpolation kernels
_FIR_ATTEN_DB = 80.0  # Kaiser design attenuation of message / channel-noise band filters
_PASS = 0.38  # highest message frequency as a share of the message rate (kernel passband 0.40)
_FILE_PASS = 0.44  # same for the file's own rate (64-tap kernel passband 0.45)
_MIN_LOW_HZ = 50.0
_NOISE_EDGE_SHARE = 50.0  # channel-noise transition width = B / 50
_MAX_RATIO = 4096  # largest interpolation ratio (bounds the polyphase table to 32 x 4096 weights)
_FRAME_OUT = 65536  # interpolator output frame (samples), rounded up to whole low-rate samples

_TOP_KEYS = ("sample_rate", "center", "duration", "seed", "datatype", "noise_floor_dbfs_per_hz", "description", "channel")
_CHANNEL_KEYS = (
    "name", "freq", "offset", "mode", "emission", "level_dbfs", "depth", "carrier_offset_hz", "drift_hz_per_s",
    "phase_deg", "bandwidth", "cnr_db", "noise_bandwidth", "message", "fading", "bursts", "burst_edge",
)
_MESSAGE_KEYS = {
    "tone": ("kind", "freq", "phase_deg"),
    "tones": ("kind", "freqs", "amplitudes", "phases_deg"),
    "noise": ("kind", "low", "high", "rms"),
    "file": ("kind", "path", "low", "high", "loop"),
}
_FADING_KEYS = {"rayleigh": ("kind", "doppler_hz", "paths"), "rician": ("kind", "doppler_hz", "k_db", "paths")}


# ----------------------------------------------------------------------------------------------
# Scenario: parsing and validation
# ----------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class MessageSpec:
    """A channel's message as given in the scenario (validated, not yet resolved)."""

    kind: str
    freqs_hz: tuple[float, ...] = ()
    amplitudes: tuple[float, ...] = ()
    phases_deg: tuple[float, ...] = ()
    low_hz: float = 300.0
    high_hz: float = 3000.0
    rms: float = 0.25
    path: str | None = None
    resolved_path: str | None = None
    loop: bool = False

    @property
    def top_hz(self) -> float:
        """Highest message frequency (Hz)."""
        return max(self.freqs_hz) if self.kind in ("tone", "tones") else self.high_hz


@dataclass(frozen=True)
class FadingSpec:
    """Flat fading parameters."""

    kind: str
    doppler_hz: float
    k_db: float | None = None
    paths: int = 32


@dataclass(frozen=True)
class ChannelSpec:
    """One channel of a scenario, with every value in SI units (Hz, s, dBFS, dB)."""

    index: int
    name: str
    mode: str
    offset_hz: float
    level_dbfs: float
    depth: float | None
    carrier_offset_hz: float
    drift_hz_per_s: float
    phase_deg: float
    bandwidth_hz: float
    message: MessageSpec
    fading: FadingSpec | None = None
    bursts: tuple[tuple[float, float], ...] = ()
    burst_edge_s: float = 0.005
    cnr_db: float | None = None
    noise_bandwidth_hz: float | None = None
    emission: str | None = None


@dataclass(frozen=True)
class Scenario:
    """A validated scenario (see the module docstring for the schema).

    Attributes
    ----------
    sample_rate_hz : float
        Samples/s.
    center_hz : float or None
        Centre frequency (Hz); None when channel frequencies are offsets.
    n_samples : int
        Length of the capture (samples).
    seed : int
        Root of every random stream.
    datatype : str
        SigMF datatype of the stored recording.
    noise_floor_dbfs_per_hz : float or None
        Density of the white noise floor (dBFS/Hz).
    channels : tuple of ChannelSpec
    source : str
        Where the scenario came from (file name), for messages and the truth file.
    description : str or None
    """

    sample_rate_hz: float
    center_hz: float | None
    n_samples: int
    seed: int
    datatype: str
    noise_floor_dbfs_per_hz: float | None
    channels: tuple[ChannelSpec, ...]
    source: str = "<scenario>"
    description: str | None = None

    @property
    def duration_s(self) -> float:
        """Duration in seconds (n_samples / sample_rate_hz)."""
        return self.n_samples / self.sample_rate_hz


def _fail(where: str, key: str, rule: str, value: Any = ...) -> ParameterError:
    shown = "" if value is ... else f", got {value!r}"
    return ParameterError(f"{where}: {key}: {rule}{shown}")


def _check_keys(table: Mapping, known: Sequence[str], where: str, prefix: str = "") -> None:
    for key in table:
        if key not in known:
            raise ParameterError(
                f"{where}: {prefix}{key}: unknown key; known keys are {', '.join(prefix + k for k in known)}"
            )


def _number(table: Mapping, key: str, where: str, default: Any = ..., *, lo: float | None = None,
            hi: float | None = None, lo_open: bool = False, label: str | None = None) -> Any:
    label = label or key
    if key not in table:
        if default is ...:
            raise _fail(where, label, "is required")
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise _fail(where, label, "must be a finite number", value)
    value = float(value)
    if lo is not None and (value < lo or (lo_open and value == lo)):
        raise _fail(where, label, f"must be {'>' if lo_open else '>='} {lo:g}", table[key])
    if hi is not None and value > hi:
        raise _fail(where, label, f"must be <= {hi:g}", table[key])
    return value


def _hz(table: Mapping, key: str, where: str, default: Any = ..., *, positive: bool = False,
        label: str | None = None) -> Any:
    label = label or key
    if key not in table:
        if default is ...:
            raise _fail(where, label, "is required")
        return default
    value = parse_frequency(table[key], f"{where}: {label}")
    if positive and value <= 0:
        raise _fail(where, label, "must be greater than 0 Hz", table[key])
    if not positive and value < 0 and key not in ("freq", "offset", "center", "carrier_offset_hz"):
        raise _fail(where, label, "must be >= 0 Hz", table[key])
    return value


def _seconds(value: Any, where: str, label: str, rate: float) -> float:
    spec = parse_time(value, f"{where}: {label}")
    return spec.seconds if spec.seconds is not None else spec.samples / rate


def _freq_list(value: Any, where: str, label: str) -> list[float]:
    if not isinstance(value, list) or not value:
        raise _fail(where, label, "must be a non-empty list of frequencies", value)
    return [parse_frequency(v, f"{where}: {label}[{i}]") for i, v in enumerate(value)]


def _num_list(value: Any, where: str, label: str, length: int) -> list[float]:
    if not isinstance(value, list) or len(value) != length:
        raise _fail(where, label, f"must be a list of {length} numbers (one per frequency)", value)
    out = []
    for i, v in enumerate(value):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise _fail(where, f"{label}[{i}]", "must be a finite number", v)
        out.append(float(v))
    return out


def _parse_message(raw: Any, where: str, mode: str, rate: float, base_dir: Path) -> MessageSpec:
    if raw is None:
        return MessageSpec(kind="tone", freqs_hz=(1000.0,), amplitudes=(1.0,), phases_deg=(0.0,))
    if not isinstance(raw, dict):
        raise _fail(where, "message", "must be a table such as { kind = \"tone\", freq = 1000 }", raw)
    kind = raw.get("kind")
    if kind not in MESSAGE_KINDS:
        raise _fail(where, "message.kind", f"must be one of {', '.join(MESSAGE_KINDS)}", kind)
    _check_keys(raw, _MESSAGE_KEYS[kind], where, "message.")
    nyquist = rate / 2
    if kind in ("tone", "tones"):
        if kind == "tone":
            freqs = [_hz(raw, "freq", where, 1000.0, positive=True, label="message.freq")]
            amps = [1.0]
            phases = [_number(raw, "phase_deg", where, 0.0, label="message.phase_deg")]
        else:
            if "freqs" not in raw:
                raise _fail(where, "message.freqs", "is required for kind \"tones\"")
            freqs = _freq_list(raw["freqs"], where, "message.freqs")
            amps = _num_list(raw["amplitudes"], where, "message.amplitudes", len(freqs)) if "amplitudes" in raw \
                else [1.0] * len(freqs)
            phases = _num_list(raw["phases_deg"], where, "message.phases_deg", len(freqs)) if "phases_deg" in raw \
                else [0.0] * len(freqs)
        for i, f in enumerate(freqs):
            label = "message.freq" if kind == "tone" else f"message.freqs[{i}]"
            if not 0 < f < nyquist:
                raise _fail(where, label, f"must lie between 0 and half the sample rate ({nyquist:g} Hz)", f)
        if len(set(freqs)) != len(freqs):
            raise _fail(where, "message.freqs", "must not repeat a frequency", raw.get("freqs"))
        total = sum(abs(a) for a in amps)
        if total == 0:
            raise _fail(where, "message.amplitudes", "must not all be 0", raw.get("amplitudes"))
        return MessageSpec(kind=kind, freqs_hz=tuple(freqs), amplitudes=tuple(a / total for a in amps),
                           phases_deg=tuple(phases))
    low = _hz(raw, "low", where, 300.0, label="message.low")
    high = _hz(raw, "high", where, 3000.0, positive=True, label="message.high")
    if low != 0 and low < _MIN_LOW_HZ:
        raise _fail(where, "message.low", f"must be 0 or at least {_MIN_LOW_HZ:g} Hz", raw.get("low"))
    if low == 0 and mode in ("usb", "lsb"):
        raise _fail(where, "message.low", f"must be > 0 for mode {mode} (a one-sided spectrum needs a gap at 0 Hz)",
                    raw.get("low"))
    if high <= low or high - low < _transition(low, high):
        raise _fail(where, "message.high", f"must exceed message.low ({low:g} Hz) by at least "
                    f"{_transition(low, high):g} Hz", raw.get("high"))
    if kind == "noise":
        rms = _number(raw, "rms", where, 0.25, lo=0.0, lo_open=True, label="message.rms")
        return MessageSpec(kind="noise", low_hz=low, high_hz=high, rms=rms)
    path = raw.get("path")
    if not isinstance(path, str) or not path.strip():
        raise _fail(where, "message.path", "must name an audio file (relative to the scenario file)", path)
    resolved = (base_dir / path).resolve()
    if not resolved.is_file():
        raise _fail(where, "message.path", f"audio file not found ({resolved})", path)
    loop = raw.get("loop", False)
    if not isinstance(loop, bool):
        raise _fail(where, "message.loop", "must be true or false", loop)
    try:
        import soundfile

        file_rate = float(soundfile.info(str(resolved)).samplerate)
    except Exception as exc:  # soundfile raises several types for unreadable files
        raise _fail(where, "message.path", f"cannot read as audio ({type(exc).__name__})", path) from None
    if high + _transition(low, high) / 2 > _FILE_PASS * file_rate:
        raise _fail(where, "message.high", f"is too close to the file's Nyquist frequency; the file's rate "
                    f"{file_rate:g} Hz allows up to {_FILE_PASS * file_rate - _transition(low, high) / 2:g} Hz",
                    raw.get("high"))
    return MessageSpec(kind="file", low_hz=low, high_hz=high, path=path, resolved_path=str(resolved), loop=loop)


def _parse_fading(raw: Any, where: str) -> FadingSpec | None:
    if raw is None:
        return None
    if not isinstance(raw, dict):
        raise _fail(where, "fading", "must be a table such as { kind = \"rayleigh\", doppler_hz = 2 }", raw)
    kind = raw.get("kind")
    if kind not in FADING_KINDS:
        raise _fail(where, "fading.kind", f"must be one of {', '.join(FADING_KINDS)}", kind)
    _check_keys(raw, _FADING_KEYS[kind], where, "fading.")
    doppler = _number(raw, "doppler_hz", where, lo=0.0, lo_open=True, label="fading.doppler_hz")
    paths = raw.get("paths", 32)
    if isinstance(paths, bool) or not isinstance(paths, int) or not 8 <= paths <= 256:
        raise _fail(where, "fading.paths", "must be a whole number from 8 to 256", paths)
    k_db = _number(raw, "k_db", where, 6.0, label="fading.k_db") if kind == "rician" else None
    return FadingSpec(kind=kind, doppler_hz=doppler, k_db=k_db, paths=paths)


def _parse_bursts(raw: Any, where: str, rate: float, duration: float, edge: float) -> tuple[tuple[float, float], ...]:
    if raw is None:
        return ()
    if not isinstance(raw, list) or not raw:
        raise _fail(where, "bursts", "must be a non-empty list of [start, end] pairs in seconds", raw)
    spans = []
    for i, pair in enumerate(raw):
        if not isinstance(pair, list) or len(pair) != 2:
            raise _fail(where, f"bursts[{i}]", "must be a [start, end] pair", pair)
        start = _seconds(pair[0], where, f"bursts[{i}][0]", rate)
        end = _seconds(pair[1], where, f"bursts[{i}][1]", rate)
        if end > duration + 0.5 / rate:
            raise _fail(where, f"bursts[{i}]", f"must end within the capture ({duration:g} s)", pair)
        if end - start < max(edge, 1 / rate):
            raise _fail(where, f"bursts[{i}]", f"must last at least burst_edge ({edge:g} s) and end after it starts",
                        pair)
        if spans and start - spans[-1][1] < edge:
            raise _fail(where, f"bursts[{i}]", f"must start at least burst_edge ({edge:g} s) after the previous "
                        "burst ends (spans sorted, not overlapping)", pair)
        spans.append((start, min(end, duration)))
    return tuple(spans)


def _parse_channel(raw: Any, i: int, source: str, center: float | None, rate: float, duration: float,
                   base_dir: Path, names: set[str]) -> ChannelSpec:
    where = f"{source}: channel {i + 1}"
    if not isinstance(raw, dict):
        raise ParameterError(f"{where}: must be a table ([[channel]])")
    name = raw.get("name", f"ch{i + 1}")
    if not isinstance(name, str) or not name.strip() or any(c in name for c in "/\\\n"):
        raise _fail(where, "name", "must be a non-empty one-line text without path separators", name)
    where = f"{source}: channel {i + 1} '{name}'"
    if name in names:
        raise _fail(where, "name", "is used by another channel; names must be unique", name)
    names.add(name)
    _check_keys(raw, _CHANNEL_KEYS, where)

    mode = raw.get("mode")
    if mode not in MODES:
        raise _fail(where, "mode", f"must be one of {', '.join(MODES)}", mode)
    if ("freq" in raw) == ("offset" in raw):
        raise _fail(where, "freq", "give exactly one of freq (absolute) or offset (relative to the centre)")
    if "freq" in raw:
        if center is None:
            raise _fail(where, "freq", "an absolute frequency needs the scenario's center; give offset instead",
                        raw["freq"])
        offset = _hz(raw, "freq", where) - center
    else:
        offset = _hz(raw, "offset", where)

    emission = raw.get("emission")
    emission_bw = None
    if emission is not None:
        emission_bw = _check_emission(emission, mode, where)
    level = _number(raw, "level_dbfs", where, -20.0, hi=60.0)
    if mode == "am":
        depth = _number(raw, "depth", where, 0.5, lo=0.0)
    elif "depth" in raw:
        raise _fail(where, "depth", f"applies to mode am only (this channel is {mode})", raw["depth"])
    else:
        depth = None
    carrier_offset = _hz(raw, "carrier_offset_hz", where, 0.0)
    drift = _number(raw, "drift_hz_per_s", where, 0.0)
    phase = _number(raw, "phase_deg", where, 0.0)
    message = _parse_message(raw.get("message"), where, mode, rate, base_dir)
    top = message.top_hz
    need = 2 * top if mode in ("am", "dsb") else top
    default_bw = emission_bw if emission_bw is not None else max(need, 6000.0 if mode in ("am", "dsb") else 3000.0)
    bandwidth = _hz(raw, "bandwidth", where, default_bw, positive=True)
    if bandwidth < need * (1 - 1e-12):
        raise _fail(where, "bandwidth", f"is too narrow for the message: its highest frequency {top:g} Hz needs "
                    f"{need:g} Hz in mode {mode}", raw.get("bandwidth", bandwidth))
    cnr = _number(raw, "cnr_db", where, None)
    noise_bw = None
    if cnr is not None:
        noise_bw = _hz(raw, "noise_bandwidth", where, bandwidth, positive=True)
    elif "noise_bandwidth" in raw:
        raise _fail(where, "noise_bandwidth", "only applies together with cnr_db", raw["noise_bandwidth"])
    edge = _seconds(raw.get("burst_edge", 0.005), where, "burst_edge", rate)
    bursts = _parse_bursts(raw.get("bursts"), where, rate, duration, edge)
    fading = _parse_fading(raw.get("fading"), where)
    if fading is not None and fading.doppler_hz > _PASS * rate:
        raise _fail(where, "fading.doppler_hz", f"must be at most {_PASS * rate:g} Hz at this sample rate",
                    fading.doppler_hz)

    spec = ChannelSpec(
        index=i, name=name, mode=mode, offset_hz=offset, level_dbfs=level, depth=depth,
        carrier_offset_hz=carrier_offset, drift_hz_per_s=drift, phase_deg=phase, bandwidth_hz=bandwidth,
        message=message, fading=fading, bursts=bursts, burst_edge_s=edge, cnr_db=cnr,
        noise_bandwidth_hz=noise_bw, emission=emission,
    )
    # Everything (signal band, noise band, fading spread, drift) must stay inside the captured band.
    lo, hi = _occupied_rel(spec, duration)
    if lo <= -rate / 2 or hi >= rate / 2:
        key = "freq" if "freq" in raw else "offset"
        raise _fail(where, key, f"the channel occupies {lo:g}..{hi:g} Hz relative to the centre (band, noise, "
                    f"drift and Doppler included), beyond the captured band +-{rate / 2:g} Hz",
                    raw.get(key))
    # Noise and file messages, and channel noise, are made at a lower rate and interpolated up.
    if message.kind in ("noise", "file"):
        needed = (message.high_hz + _transition(message.low_hz, message.high_hz) / 2) / _PASS
        if rate < needed:
            raise _fail(where, "message.high", f"needs a sample rate of at least {needed:g} samples/s "
                        f"(the scenario's is {rate:g})", message.high_hz)
    if cnr is not None and rate < _noise_extent(spec) / _PASS:
        raise _fail(where, "noise_bandwidth", f"needs a sample rate of at least {_noise_extent(spec) / _PASS:g} "
                    f"samples/s (the scenario's is {rate:g})", noise_bw)
    return spec


def _check_emission(code: Any, mode: str, where: str) -> float | None:
    try:
        from . import emission as _emission
    except ImportError:  # pragma: no cover - emission module not present
        raise _fail(where, "emission", "designators need iqsift.emission, which is not installed", code) from None
    try:
        parsed = _emission.parse_emission(code)
    except ParameterError as exc:
        raise ParameterError(f"{where}: emission: {exc}") from None
    allowed = {"am": ("A",), "dsb": ("A",), "usb": ("J",), "lsb": ("J",)}[mode]
    if parsed.modulation not in allowed:
        raise _fail(where, "emission", f"class {parsed.emission_class} does not describe mode {mode} "
                    f"(first symbol must be {' or '.join(allowed)})", code)
    return parsed.bandwidth_hz


def _noise_extent(spec: ChannelSpec) -> float:
    if spec.cnr_db is None:
        return 0.0
    lo, hi = _noise_band(spec.mode, spec.noise_bandwidth_hz)
    return max(abs(lo), abs(hi)) + _noise_transition(spec.noise_bandwidth_hz) / 2


def _noise_transition(bandwidth: float) -> float:
    """Transition width (Hz) of the channel-noise band edges: B/50, at least 1 Hz."""
    return max(bandwidth / _NOISE_EDGE_SHARE, 1.0)


def _signal_band(mode: str, bandwidth: float) -> tuple[float, float]:
    """Signal band edges relative to the carrier (Hz)."""
    return {"am": (-bandwidth / 2, bandwidth / 2), "dsb": (-bandwidth / 2, bandwidth / 2),
            "usb": (0.0, bandwidth), "lsb": (-bandwidth, 0.0)}[mode]


def _noise_band(mode: str, bandwidth: float) -> tuple[float, float]:
    return _signal_band(mode, bandwidth)


def _occupied_rel(spec: ChannelSpec, duration: float) -> tuple[float, float]:
    carrier = spec.offset_hz + spec.carrier_offset_hz
    lo, hi = _signal_band(spec.mode, spec.bandwidth_hz)
    if spec.cnr_db is not None:
        nlo, nhi = _noise_band(spec.mode, spec.noise_bandwidth_hz)
        edge = _noise_transition(spec.noise_bandwidth_hz) / 2
        lo, hi = min(lo, nlo - edge), max(hi, nhi + edge)
    spread = spec.fading.doppler_hz if spec.fading else 0.0
    drift = spec.drift_hz_per_s * duration
    return carrier + lo - spread + min(0.0, drift), carrier + hi + spread + max(0.0, drift)


def _transition(low: float, high: float) -> float:
    """Transition width (Hz) of a message band filter: the smaller of low and high/10."""
    return min(low, 0.1 * high) if low > 0 else 0.1 * high


def parse_scenario(data: str | Mapping[str, Any], source: str = "<scenario>",
                   base_dir: str | os.PathLike | None = None) -> Scenario:
    """Validate a scenario given as TOML text or as an already-parsed dict.

    Parameters
    ----------
    data : str or dict
        TOML text, or the table it parses to.
    source : str
        Name used in error messages and the truth file (normally the file name).
    base_dir : path, optional
        Folder that relative ``message.path`` entries are resolved against
        (default: the current folder).

    Returns
    -------
    Scenario

    Raises
    ------
    ParameterError
        One line naming ``source``, the channel (number and name) and the key,
        echoing the value and stating the rule.
    """
    if isinstance(data, str):
        try:
            data = tomllib.loads(data)
        except tomllib.TOMLDecodeError as exc:
            raise ParameterError(f"{source}: not valid TOML: {' '.join(str(exc).split())}") from None
    if not isinstance(data, Mapping):
        raise ParameterError(f"{source}: a scenario must be a TOML table, got {type(data).__name__}")
    base = Path(base_dir) if base_dir is not None else Path.cwd()
    _check_keys(data, _TOP_KEYS, source)
    rate = _hz(data, "sample_rate", source, positive=True)
    center = _hz(data, "center", source, None)
    if "duration" not in data:
        raise _fail(source, "duration", "is required (seconds, e.g. \"2s\", or samples, e.g. \"48000sa\")")
    n = parse_time(data["duration"], f"{source}: duration").to_samples(rate)
    if n < 1:
        raise _fail(source, "duration", "must be at least one sample long", data["duration"])
    seed = data.get("seed", 0)
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise _fail(source, "seed", "must be a whole number >= 0", seed)
    datatype = data.get("datatype", "cf32_le")
    from .captures.datatypes import parse_datatype

    try:
        dt = parse_datatype(datatype, f"{source}: datatype")
    except (CaptureError, ParameterError) as exc:
        raise ParameterError(str(exc)) from None
    if not dt.is_complex:
        raise _fail(source, "datatype", "must be a complex (c...) SigMF datatype; a synthetic capture is IQ",
                    datatype)
    floor = _number(data, "noise_floor_dbfs_per_hz", source, None, hi=0.0)
    description = data.get("description")
    if description is not None and not isinstance(description, str):
        raise _fail(source, "description", "must be text", description)
    raw_channels = data.get("channel", [])
    if isinstance(raw_channels, dict):
        raw_channels = [raw_channels]
    if not isinstance(raw_channels, list):
        raise _fail(source, "channel", "must be a list of tables ([[channel]])", raw_channels)
    names: set[str] = set()
    duration = n / rate
    channels = tuple(
        _parse_channel(raw, i, source, center, rate, duration, base, names) for i, raw in enumerate(raw_channels)
    )
    if not channels and floor is None:
        raise ParameterError(f"{source}: the scenario has no channel and no noise_floor_dbfs_per_hz; nothing to make")
    return Scenario(sample_rate_hz=rate, center_hz=center, n_samples=n, seed=seed, datatype=dt.name,
                    noise_floor_dbfs_per_hz=floor, channels=channels, source=source, description=description)


def load_scenario(path: str | os.PathLike) -> Scenario:
    """Read and validate a scenario TOML file (see the module docstring for the schema).

    Raises
    ------
    ParameterError
        If the file is missing, is not TOML, or breaks a rule (the message names the file).
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ParameterError(f"{path}: scenario file not found") from None
    except IsADirectoryError:
        raise ParameterError(f"{path}: is a directory, not a scenario file") from None
    except UnicodeDecodeError:
        raise ParameterError(f"{path}: scenario file is not UTF-8 text") from None
    return parse_scenario(text, str(path), path.parent)


# ----------------------------------------------------------------------------------------------
# Building blocks: filters, interpolation, streaming sources
# ----------------------------------------------------------------------------------------------
def _kernel(tau: np.ndarray, half: int, beta: float) -> np.ndarray:
    """Kaiser-windowed sinc interpolation kernel (cutoff at half the input rate), ``tau`` in input samples."""
    x = np.clip(1.0 - (tau / half) ** 2, 0.0, None)
    w = _i0(beta * np.sqrt(x)) / _i0(beta)
    return np.where(np.abs(tau) < half, np.sinc(tau) * w, 0.0)


@functools.lru_cache(maxsize=16)
def _polyphase_table(ratio: int) -> np.ndarray:
    """Weights (2L, ratio) of the interpolator for output phase p/ratio; each column sums to 1."""
    beta = float(_signal.kaiser_beta(_INTERP_ATTEN_DB))
    mu = np.arange(ratio) / ratio
    j = np.arange(-_INTERP_HALF + 1, _INTERP_HALF + 1)
    w = _kernel(mu[None, :] - j[:, None], _INTERP_HALF, beta)
    w /= w.sum(axis=0, keepdims=True)
    w.setflags(write=False)
    return w


def _band_fir(rate: float, low: float, high: float, transition: float, *, one_sided: bool) -> np.ndarray:
    """Kaiser-window band filter, gain 1 in ``low..high`` Hz (-6 dB at the edges).

    ``one_sided`` gives the complex filter ``exp(j w0 n) h_lp[n]`` that passes
    only positive frequencies (Oppenheim & Schafer, ch. 7); otherwise a real
    band-pass ``2 cos(w0 n) h_lp[n]`` or, with ``low == 0``, the low-pass.
    Length and beta from Kaiser's formulas (scipy.signal.kaiserord).
    """
    numtaps, beta = _signal.kaiserord(_FIR_ATTEN_DB, transition / (rate / 2))
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


def _rate_ratio(sample_rate: float, needed: float) -> int:
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


class _Interpolator:
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
        x = self.source.get(k0 - _INTERP_HALF + 1, k0 + self.frame_k + _INTERP_HALF)
        if np.iscomplexobj(x):
            re = np.lib.stride_tricks.sliding_window_view(np.ascontiguousarray(x.real), 2 * _INTERP_HALF)
            im = np.lib.stride_tricks.sliding_window_view(np.ascontiguousarray(x.imag), 2 * _INTERP_HALF)
            y = np.empty((self.frame_k, self.ratio), dtype=np.complex128)
            y.real = re @ self.table
            y.imag = im @ self.table
        else:
            y = np.lib.stride_tricks.sliding_window_view(x, 2 * _INTERP_HALF) @ self.table
        y = y.reshape(-1)
        self._cache = (i, y)
        return y

    def take(self, n0: int, n1: int) -> np.ndarray:
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


_FRAC_PHASES = 1024  # phases of the file resampling table (linear interpolation between them)


@functools.lru_cache(maxsize=2)
def _fractional_table() -> np.ndarray:
    """(1025, 64) weights of the 64-tap Kaiser-windowed sinc kernel for fractional delays 0, 1/1024 .. 1."""
    beta = float(_signal.kaiser_beta(_INTERP_ATTEN_DB))
    mu = np.arange(_FRAC_PHASES + 1) / _FRAC_PHASES
    j = np.arange(-_FILE_INTERP_HALF + 1, _FILE_INTERP_HALF + 1)
    w = _kernel(mu[:, None] - j[None, :], _FILE_INTERP_HALF, beta)
    w /= w.sum(axis=1, keepdims=True)
    w.setflags(write=False)
    return w


# ----------------------------------------------------------------------------------------------
# Messages (built from truth records, so regenerate_message rebuilds exactly what was used)
# ----------------------------------------------------------------------------------------------
def _rng_for(entropy: int, key: Sequence[int]) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(entropy, spawn_key=tuple(int(k) for k in key)))


class _ToneMessage:
    def __init__(self, rec: Mapping[str, Any], rate: float) -> None:
        self.freqs = [float(f) for f in rec["frequencies_hz"]]
        self.amps = [float(a) for a in rec["amplitudes"]]
        self.phases = [math.radians(float(p)) for p in rec["phases_deg"]]
        self.rate = float(rate)

    def _cycles(self, f: float, n0: int, n1: int) -> np.ndarray:
        cycles = f * np.arange(n0, n1, dtype=np.float64) / self.rate
        return cycles - np.floor(cycles)

    def real(self, n0: int, n1: int) -> np.ndarray:
        out = np.zeros(n1 - n0)
        for f, a, p in zip(self.freqs, self.amps, self.phases):
            out += a * np.cos(2 * np.pi * self._cycles(f, n0, n1) + p)
        return out

    def analytic(self, n0: int, n1: int) -> np.ndarray:
        out = np.zeros(n1 - n0, dtype=np.complex128)
        for f, a, p in zip(self.freqs, self.amps, self.phases):
            out += a * np.exp(1j * (2 * np.pi * self._cycles(f, n0, n1) + p))
        return out


class _InterpMessage:
    """A message made at a low rate (real, or complex analytic for SSB) and interpolated up."""

    def __init__(self, source: Any, ratio: int) -> None:
        self.interp = _Interpolator(source, ratio)

    def real(self, n0: int, n1: int) -> np.ndarray:
        return self.interp.take(n0, n1)

    analytic = real


def _noise_filter(rec: Mapping[str, Any], analytic: bool) -> np.ndarray:
    h = _band_fir(rec["rate_hz"], rec["low_hz"], rec["high_hz"], rec["transition_hz"], one_sided=analytic)
    return 2 * h if analytic else h


def _noise_gain(h: np.ndarray, analytic: bool) -> float:
    """Power of the (real part of the) filter output for unit white input."""
    return float(np.sum(np.abs(h) ** 2) / 2) if analytic else float(np.sum(h ** 2))


def _filtered_noise_source(h: np.ndarray, sigma: float, rng: np.random.Generator, complex_input: bool) -> _StreamSource:
    out_dtype = np.complex128 if (complex_input or np.iscomplexobj(h)) else np.float64
    state = {"zi": np.zeros(h.shape[0] - 1, dtype=out_dtype)}

    def make() -> np.ndarray:
        if complex_input:
            w = rng.standard_normal(2 * _CHUNK).view(np.complex128) * (sigma / math.sqrt(2))
        else:
            w = rng.standard_normal(_CHUNK) * sigma
        y, state["zi"] = _signal.lfilter(h, 1.0, w, zi=state["zi"])
        return y

    return _StreamSource(make, -_INTERP_HALF, h.shape[0] - 1)


@functools.lru_cache(maxsize=4)
def _file_filtered(path: str, sha256: str, low: float, high: float, transition: float, analytic: bool,
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

    if _sha256(path) != sha256:
        raise ParameterError(f"{path}: the audio file changed since the truth was made (SHA-256 differs)")
    data, file_rate = soundfile.read(path, dtype="float64", always_2d=True)
    x = data.mean(axis=1)
    frames = x.shape[0]
    if frames == 0:
        raise ParameterError(f"{path}: the audio file holds no samples")
    h = _band_fir(float(file_rate), low, high, transition, one_sided=analytic)
    if analytic:
        h = 2 * h
    delay = (h.shape[0] - 1) // 2
    if loop:
        wrapped = np.zeros(frames, dtype=h.dtype)
        np.add.at(wrapped, (np.arange(h.shape[0]) - delay) % frames, h)
        y = np.fft.ifft(np.fft.fft(x) * np.fft.fft(wrapped))
        y = y if analytic else y.real
        first = 0
    else:
        y = _signal.lfilter(h, 1.0, np.concatenate([x, np.zeros(h.shape[0] - 1)]))
        first = -delay
    y.setflags(write=False)
    return y, first, float(file_rate), frames


def _file_source(rec: Mapping[str, Any], analytic: bool) -> _StreamSource:
    """Message-rate samples of a file message: 64-tap Kaiser-windowed sinc evaluation at k * file_rate / rate."""
    y, first, file_rate, frames = _file_filtered(rec["resolved_path"], rec["sha256"], rec["low_hz"], rec["high_hz"],
                                                 rec["transition_hz"], analytic, rec["loop"])
    table = _fractional_table()
    j = np.arange(-_FILE_INTERP_HALF + 1, _FILE_INTERP_HALF + 1)
    step = file_rate / rec["rate_hz"]
    scale = rec["scale"]
    state = {"k": -_INTERP_HALF}

    def make() -> np.ndarray:
        k = np.arange(state["k"], state["k"] + _CHUNK, dtype=np.float64)
        state["k"] += _CHUNK
        pos = k * step
        base = np.floor(pos)
        u = (pos - base) * _FRAC_PHASES
        i = np.minimum(np.floor(u).astype(np.int64), _FRAC_PHASES - 1)
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

    return _StreamSource(make, -_INTERP_HALF, 0)


def _sha256(path: str) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def _build_message(channel: Mapping[str, Any], rate: float) -> Any:
    rec = channel["message"]
    analytic = channel["mode"] in ("usb", "lsb")
    if rec["kind"] in ("tone", "tones"):
        return _ToneMessage(rec, rate)
    ratio = _check_ratio(rec, rate)
    if rec["kind"] == "noise":
        h = _noise_filter(rec, analytic)
        sigma = rec["rms"] / math.sqrt(_noise_gain(h, analytic))
        rng = _rng_for(rec["rng"]["entropy"], rec["rng"]["spawn_key"])
        return _InterpMessage(_filtered_noise_source(h, sigma, rng, complex_input=False), ratio)
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
    message = _build_message(rec, float(rate))
    n = int(n)
    if truth_channel["mode"] in ("usb", "lsb"):
        return message.analytic(0, n)
    return message.real(0, n)


def _message_record(spec: ChannelSpec, rate: float, entropy: int) -> dict[str, Any]:
    msg = spec.message
    analytic = spec.mode in ("usb", "lsb")
    if msg.kind in ("tone", "tones"):
        amps = list(msg.amplitudes)
        return {
            "kind": msg.kind,
            "frequencies_hz": list(msg.freqs_hz),
            "amplitudes": amps,
            "phases_deg": list(msg.phases_deg),
            "normalisation": "amplitudes scaled so that sum(|amplitudes|) = 1: peak 1 (at t = 0 with all phases 0)",
            "rms": math.sqrt(sum(a * a for a in amps) / 2),
            "peak": 1.0,
            "formula": "msg(n) = sum_i a_i cos(2 pi f_i n / rate + phase_i)",
        }
    transition = _transition(msg.low_hz, msg.high_hz)
    ratio = _rate_ratio(rate, (msg.high_hz + transition / 2) / _PASS)
    rec: dict[str, Any] = {
        "kind": msg.kind,
        "low_hz": msg.low_hz,
        "high_hz": msg.high_hz,
        "transition_hz": transition,
        "rate_hz": rate / ratio,
        "ratio": ratio,
        "interpolation": f"Kaiser-windowed sinc, {2 * _INTERP_HALF} taps, {_INTERP_ATTEN_DB:g} dB design, "
                         f"from rate_hz up by {ratio}",
    }
    if msg.kind == "noise":
        rec_probe = {**rec}
        h = _noise_filter(rec_probe, analytic)
        rec.update({
            "rms": msg.rms,
            "normalisation": "Gaussian, scaled to the stated rms; not clipped",
            "filter": {"taps": int(h.shape[0]), "design": f"Kaiser window, {_FIR_ATTEN_DB:g} dB, "
                       + ("one-sided complex band-pass (analytic)" if analytic else "real band-pass")},
            "white_sigma": msg.rms / math.sqrt(_noise_gain(h, analytic)),
            "warm_up_samples": int(h.shape[0] - 1),
            "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 0]},
        })
        return rec
    sha = _sha256(msg.resolved_path)
    rec.update({"path": msg.path, "resolved_path": msg.resolved_path, "sha256": sha, "loop": msg.loop})
    y, first, file_rate, frames = _file_filtered(msg.resolved_path, sha, msg.low_hz, msg.high_hz, transition,
                                                 analytic, msg.loop)
    real = y.real if analytic else y
    peak = float(np.max(np.abs(real)))
    if not peak > 0:
        raise ParameterError(f"{msg.path}: the audio file is silent in {msg.low_hz:g}..{msg.high_hz:g} Hz")
    span = real[-first:-first + frames]
    taps = _band_fir(file_rate, msg.low_hz, msg.high_hz, transition, one_sided=analytic).shape[0]
    rec.update({
        "file_rate_hz": file_rate,
        "file_samples": frames,
        "scale": 1.0 / peak,
        "peak": 1.0,
        "rms": float(np.sqrt(np.mean((span / peak) ** 2))),
        "filter": {"taps": int(taps), "design": f"Kaiser window, {_FIR_ATTEN_DB:g} dB, "
                   + ("one-sided complex band-pass (analytic)" if analytic else
                      "real band-pass" if msg.low_hz > 0 else "low-pass") + ", at the file's rate, delay removed"
                   + (", applied circularly (seamless loop)" if msg.loop else ", full output kept (no truncation)")},
        "resampling": f"Kaiser-windowed sinc, {2 * _FILE_INTERP_HALF} taps, {_INTERP_ATTEN_DB:g} dB design, "
                      f"{_FRAC_PHASES}-phase table with linear interpolation, file_rate_hz -> rate_hz",
        "normalisation": "mono mix, band-limited, scaled so the peak of the band-limited samples at the file's rate "
                         "is 1 (values between samples may exceed it slightly); rms over the file's span",
    })
    return rec


# ----------------------------------------------------------------------------------------------
# Truth: the resolved scenario
# ----------------------------------------------------------------------------------------------
def _fading_record(spec: ChannelSpec, entropy: int, rate: float) -> dict[str, Any] | None:
    fad = spec.fading
    if fad is None:
        return None
    ratio = _rate_ratio(rate, fad.doppler_hz / _PASS)
    rng = _rng_for(entropy, (spec.index + 1, 1))
    theta = float(rng.uniform(-np.pi, np.pi))
    phases = rng.uniform(-np.pi, np.pi, fad.paths)
    return {
        "kind": fad.kind,
        "doppler_hz": fad.doppler_hz,
        "k_db": fad.k_db,
        "paths": fad.paths,
        "model": "Clarke sum of equal-power plane waves: g(t) = paths^-1/2 sum_n exp(j(2 pi doppler cos(a_n) t + "
                 "p_n)), a_n = (2 pi n + theta)/paths"
                 + ("; Rician: sqrt(K/(K+1)) + sqrt(1/(K+1)) g(t), steady line-of-sight, phase 0" if fad.kind ==
                    "rician" else ""),
        "theta_rad": theta,
        "phases_rad": [float(p) for p in phases],
        "mean_power": 1.0,
        "rate_hz": rate / ratio,
        "ratio": ratio,
        "evaluation": "sum evaluated at rate_hz, interpolated up by ratio (Kaiser-windowed sinc, 32 taps, "
                      f"{_INTERP_ATTEN_DB:g} dB design)",
        "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 1]},
    }


def _level_scale(spec: ChannelSpec, msg_rms: float) -> tuple[float, float]:
    """(baseband scale A, expected average power while on) for a channel."""
    power = 10 ** (spec.level_dbfs / 10)
    if spec.mode == "am":
        return math.sqrt(power), power * (1 + spec.depth ** 2 * msg_rms ** 2)
    if spec.mode == "dsb":
        return math.sqrt(power) / msg_rms, power
    return math.sqrt(power) / (math.sqrt(2) * msg_rms), power


def _channel_record(spec: ChannelSpec, scen: Scenario) -> dict[str, Any]:
    rate = scen.sample_rate_hz
    center = scen.center_hz
    entropy = scen.seed
    message = _message_record(spec, rate, entropy)
    scale, expected = _level_scale(spec, message["rms"])
    carrier_rel = spec.offset_hz + spec.carrier_offset_hz
    lo, hi = _signal_band(spec.mode, spec.bandwidth_hz)
    drift = spec.drift_hz_per_s * scen.duration_s
    band_lo = carrier_rel + lo + min(0.0, drift)
    band_hi = carrier_rel + hi + max(0.0, drift)

    def absolute(rel: float) -> float | None:
        return None if center is None else center + rel

    noise = None
    if spec.cnr_db is not None:
        power = 10 ** (spec.level_dbfs / 10)
        density = power / (10 ** (spec.cnr_db / 10) * spec.noise_bandwidth_hz)
        nlo, nhi = _noise_band(spec.mode, spec.noise_bandwidth_hz)
        transition = _noise_transition(spec.noise_bandwidth_hz)
        ratio = _rate_ratio(rate, (max(abs(nlo), abs(nhi)) + transition / 2) / _PASS)
        noise_rate = rate / ratio
        taps = _band_fir(noise_rate, nlo, nhi, transition, one_sided=True).shape[0]
        noise = {
            "cnr_db": spec.cnr_db,
            "bandwidth_hz": spec.noise_bandwidth_hz,
            "band_hz": [nlo, nhi],
            "band_meaning": "relative to the (drifting) carrier; flat density inside, Kaiser transitions "
                            "transition_hz wide centred on the edges",
            "density_dbfs_per_hz": 10 * math.log10(density),
            "power_dbfs": 10 * math.log10(density * spec.noise_bandwidth_hz),
            "reference": "cnr_db = 10 log10(C / (N0 B)), C = carrier power (am) or average signal power",
            "rate_hz": noise_rate,
            "ratio": ratio,
            "transition_hz": transition,
            "taps": int(taps),
            "gated_or_faded": False,
            "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 2]},
        }
    bursts = [
        {"start_s": s, "end_s": e, "start_sample": int(round(s * rate)),
         "end_sample": min(int(round(e * rate)), scen.n_samples)}
        for s, e in spec.bursts
    ]
    return {
        "index": spec.index,
        "name": spec.name,
        "mode": spec.mode,
        "emission": spec.emission,
        "frequency_hz": absolute(spec.offset_hz),
        "offset_hz": spec.offset_hz,
        "carrier": {
            "frequency_hz": absolute(carrier_rel),
            "offset_hz": carrier_rel,
            "error_hz": spec.carrier_offset_hz,
            "drift_hz_per_s": spec.drift_hz_per_s,
            "phase_deg": spec.phase_deg,
            "formula": "phase(n) = 2 pi (offset_hz n/rate + drift_hz_per_s (n/rate)^2 / 2) + phase_deg",
            "suppressed": spec.mode != "am",
        },
        "level_dbfs": spec.level_dbfs,
        "level_meaning": "carrier power" if spec.mode == "am" else "average signal power",
        "depth": spec.depth,
        "bandwidth_hz": spec.bandwidth_hz,
        "band": {"lower_hz": absolute(band_lo), "upper_hz": absolute(band_hi),
                 "lower_offset_hz": band_lo, "upper_offset_hz": band_hi},
        "baseband_scale": scale,
        "baseband": {"am": "A (1 + depth msg)", "dsb": "A msg", "usb": "A (msg + j H{msg})",
                     "lsb": "A (msg - j H{msg})"}[spec.mode],
        "expected_power_dbfs": 10 * math.log10(expected),
        "message": message,
        "fading": _fading_record(spec, entropy, rate),
        "bursts": bursts,
        "burst_edge_s": spec.burst_edge_s if spec.bursts else None,
        "noise": noise,
    }


def build_truth(scenario: Scenario) -> dict[str, Any]:
    """The truth document of a scenario (``clipped_components`` and ``output`` stay None until written)."""
    rate = scenario.sample_rate_hz
    noise = None
    if scenario.noise_floor_dbfs_per_hz is not None:
        noise = {
            "density_dbfs_per_hz": scenario.noise_floor_dbfs_per_hz,
            "power_dbfs": scenario.noise_floor_dbfs_per_hz + 10 * math.log10(rate),
            "kind": "complex white Gaussian over the whole band, I and Q independent, equal power",
            "rng": {"entropy": scenario.seed, "spawn_key": [0]},
        }
    return {
        "generator": "iqsift.synth",
        "iqsift_version": __version__,
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "scenario": Path(scenario.source).name,
        "description": scenario.description,
        "sample_rate_hz": rate,
        "center_hz": scenario.center_hz,
        "duration_s": scenario.duration_s,
        "samples": scenario.n_samples,
        "seed": scenario.seed,
        "datatype": scenario.datatype,
        "full_scale": "complex magnitude 1.0 = 0 dBFS; power dBFS = 10 log10(mean |x|^2)",
        "noise": noise,
        "channels": [_channel_record(ch, scenario) for ch in scenario.channels],
        "clipped_components": None,
        "output": None,
    }


# ----------------------------------------------------------------------------------------------
# Streaming generator
# ----------------------------------------------------------------------------------------------
def _fading_gain(rec: Mapping[str, Any], rate: float) -> _Interpolator:
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
    state = {"k": -_INTERP_HALF}

    def make() -> np.ndarray:
        k = np.arange(state["k"], state["k"] + _CHUNK, dtype=np.float64)
        state["k"] += _CHUNK
        cycles = np.outer(k, freqs / low_rate)
        cycles -= np.floor(cycles)
        g = norm * np.exp(1j * (2 * np.pi * cycles + phases)).sum(axis=1)
        return los + scatter * g if los else g

    return _Interpolator(_StreamSource(make, -_INTERP_HALF, 0), ratio)


def _gate(bursts: Sequence[Mapping[str, Any]], edge: float, rate: float, total: int, n0: int, n1: int) -> np.ndarray:
    """On/off gate: 1 inside each burst, raised-cosine edges centred on start/end (0.5 there)."""
    t = np.arange(n0, n1, dtype=np.float64) / rate
    duration = total / rate
    gate = np.zeros(n1 - n0)

    def ramp(u: np.ndarray) -> np.ndarray:
        if edge <= 0:
            return (u >= 0.5).astype(np.float64)
        return 0.5 - 0.5 * np.cos(np.pi * np.clip(u, 0.0, 1.0))

    for b in bursts:
        s, e = b["start_s"], b["end_s"]
        if e + edge / 2 < t[0] or s - edge / 2 > t[-1]:
            continue
        scale = edge if edge > 0 else 1.0
        rise = np.ones_like(t) if s <= 0 else ramp((t - s) / scale + 0.5)
        fall = np.ones_like(t) if e >= duration else ramp((e - t) / scale + 0.5)
        gate += rise * fall
    return gate


class _ChannelGen:
    def __init__(self, rec: Mapping[str, Any], rate: float, total: int) -> None:
        self.rec = rec
        self.rate = rate
        self.total = total
        self.mode = rec["mode"]
        self.message = _build_message(rec, rate)
        self.scale = rec["baseband_scale"]
        self.depth = rec["depth"]
        self.carrier = rec["carrier"]["offset_hz"]
        self.drift = rec["carrier"]["drift_hz_per_s"]
        self.phase = math.radians(rec["carrier"]["phase_deg"])
        self.fading = _fading_gain(rec["fading"], rate) if rec["fading"] else None
        self.noise = None
        if rec["noise"]:
            nrec = rec["noise"]
            lo, hi = nrec["band_hz"]
            h = _band_fir(nrec["rate_hz"], lo, hi, nrec["transition_hz"], one_sided=True)
            sigma = math.sqrt(10 ** (nrec["density_dbfs_per_hz"] / 10) * nrec["rate_hz"])
            rng = _rng_for(nrec["rng"]["entropy"], nrec["rng"]["spawn_key"])
            self.noise = _Interpolator(_filtered_noise_source(h, sigma, rng, complex_input=True), nrec["ratio"])

    def take(self, n0: int, n1: int) -> np.ndarray:
        if self.mode == "am":
            bb = self.scale * (1.0 + self.depth * self.message.real(n0, n1))
        elif self.mode == "dsb":
            bb = self.scale * self.message.real(n0, n1)
        elif self.mode == "usb":
            bb = self.scale * self.message.analytic(n0, n1)
        else:
            bb = self.scale * np.conj(self.message.analytic(n0, n1))
        if self.rec["bursts"]:
            bb = bb * _gate(self.rec["bursts"], self.rec["burst_edge_s"], self.rate, self.total, n0, n1)
        if self.fading is not None:
            bb = bb * self.fading.take(n0, n1)
        if self.noise is not None:
            bb = bb + self.noise.take(n0, n1)
        t = np.arange(n0, n1, dtype=np.float64) / self.rate
        cycles = self.carrier * t + 0.5 * self.drift * t * t
        cycles -= np.floor(cycles)
        return bb * np.exp(1j * (2 * np.pi * cycles + self.phase))


class Synthesizer:
    """Streaming renderer of a scenario: :meth:`read` the next samples, or iterate :meth:`blocks`.

    The output (complex64, full scale = magnitude 1) does not depend on how it
    is split into reads.

    Parameters
    ----------
    scenario : Scenario
    truth : dict, optional
        A truth document made by :func:`build_truth` for this scenario (made if absent).
    """

    def __init__(self, scenario: Scenario, truth: dict[str, Any] | None = None) -> None:
        self.scenario = scenario
        self.truth = truth if truth is not None else build_truth(scenario)
        self.rate = scenario.sample_rate_hz
        self.total = scenario.n_samples
        self._channels = [_ChannelGen(rec, self.rate, self.total) for rec in self.truth["channels"]]
        self._noise_sigma = None
        if self.truth["noise"] is not None:
            self._noise_sigma = math.sqrt(10 ** (self.truth["noise"]["density_dbfs_per_hz"] / 10) * self.rate / 2)
            self._noise_rng = _rng_for(scenario.seed, (0,))
        self.position = 0

    @property
    def remaining(self) -> int:
        """Samples not yet read."""
        return self.total - self.position

    def read(self, n: int) -> np.ndarray:
        """The next ``min(n, remaining)`` samples as complex64."""
        n0 = self.position
        n1 = min(self.total, n0 + max(int(n), 0))
        out = np.zeros(n1 - n0, dtype=np.complex128)
        if n1 > n0:
            for ch in self._channels:
                out += ch.take(n0, n1)
            if self._noise_sigma is not None:
                out += self._noise_rng.standard_normal(2 * (n1 - n0)).view(np.complex128) * self._noise_sigma
        self.position = n1
        return out.astype(np.complex64)

    def blocks(self, block_size: int = DEFAULT_BLOCK) -> Iterator[np.ndarray]:
        """Yield the remaining samples in blocks of ``block_size`` (the last may be shorter)."""
        if int(block_size) < 1:
            raise ParameterError(f"block_size: must be >= 1, got {block_size!r}")
        while self.remaining:
            yield self.read(block_size)


@dataclass
class SynthResult:
    """What :func:`synthesize` returns.

    Attributes
    ----------
    truth : dict
        The truth document (``clipped_components`` is None: nothing was quantised).
    sample_rate_hz : float
    center_hz : float or None
    n_samples : int
    samples : ndarray of complex64 or None
        All samples, unless the scenario is long (then None: use ``blocks``).
    blocks : iterator of ndarray
        The samples block by block (single use; over ``samples`` when held in memory).
    """

    truth: dict[str, Any]
    sample_rate_hz: float
    center_hz: float | None
    n_samples: int
    samples: np.ndarray | None
    blocks: Iterator[np.ndarray] = field(repr=False)


def _as_scenario(scenario: Any) -> Scenario:
    if isinstance(scenario, Scenario):
        return scenario
    if isinstance(scenario, Mapping):
        return parse_scenario(scenario)
    if isinstance(scenario, (str, os.PathLike)):
        return load_scenario(scenario)
    raise ParameterError(f"scenario: expected a Scenario, a dict or a TOML file path, got {type(scenario).__name__}")


def synthesize(scenario: Scenario | Mapping[str, Any] | str | os.PathLike, *, block_size: int = DEFAULT_BLOCK,
               in_memory: bool | None = None) -> SynthResult:
    """Render a scenario to complex64 samples.

    Parameters
    ----------
    scenario : Scenario, dict or path
        A parsed scenario, a dict (see :func:`parse_scenario`) or a TOML file path.
    block_size : int
        Samples generated per step (the output does not depend on it).
    in_memory : bool, optional
        Return all samples as one array (default: when the scenario has at
        most :data:`MAX_IN_MEMORY` samples); otherwise only a block generator.
    """
    scen = _as_scenario(scenario)
    synth = Synthesizer(scen)
    keep = scen.n_samples <= MAX_IN_MEMORY if in_memory is None else bool(in_memory)
    if keep:
        samples = np.concatenate(list(synth.blocks(block_size)))

        def chunks() -> Iterator[np.ndarray]:
            for start in range(0, samples.shape[0], block_size):
                yield samples[start:start + block_size]

        blocks = chunks()
    else:
        samples = None
        blocks = synth.blocks(block_size)
    return SynthResult(truth=synth.truth, sample_rate_hz=scen.sample_rate_hz, center_hz=scen.center_hz,
                       n_samples=scen.n_samples, samples=samples, blocks=blocks)


# ----------------------------------------------------------------------------------------------
# Writing
# ----------------------------------------------------------------------------------------------
def truth_path_for(out_meta_path: str | os.PathLike) -> Path:
    """``<stem>.truth.json`` beside the SigMF pair named by ``out_meta_path``."""
    from .captures.sigmf import sigmf_paths

    meta, _ = sigmf_paths(out_meta_path)
    return meta.with_name(meta.name[: -len(".sigmf-meta")] + ".truth.json")


def _annotations(truth: Mapping[str, Any]) -> list[dict[str, Any]]:
    rate = truth["sample_rate_hz"]
    items = []
    for ch in truth["channels"]:
        band = ch["band"]
        lower = band["lower_hz"] if band["lower_hz"] is not None else band["lower_offset_hz"]
        upper = band["upper_hz"] if band["upper_hz"] is not None else band["upper_offset_hz"]
        where = (f"{ch['carrier']['frequency_hz'] / 1e6:.6f} MHz" if ch["carrier"]["frequency_hz"] is not None
                 else f"{ch['carrier']['offset_hz']:+.1f} Hz offset")
        level = f"{ch['level_dbfs']:.1f} dBFS {ch['level_meaning']}"
        detail = f", depth {ch['depth']:g}" if ch["mode"] == "am" else ""
        common = {"core:freq_lower_edge": lower, "core:freq_upper_edge": upper, "core:generator": "iqsift synth"}
        items.append({"core:sample_start": 0, "core:sample_count": truth["samples"], **common,
                      "core:label": ch["name"],
                      "core:comment": f"synthetic {ch['mode']} channel, carrier {where}, {level}{detail}"})
        for j, b in enumerate(ch["bursts"]):
            count = b["end_sample"] - b["start_sample"]
            if count <= 0:
                continue
            items.append({"core:sample_start": b["start_sample"], "core:sample_count": count, **common,
                          "core:label": f"{ch['name']} burst {j + 1}",
                          "core:comment": f"burst {b['start_s']:g}..{b['end_s']:g} s (half-amplitude points, "
                                          f"{rate:g} samples/s)"})
    items.sort(key=lambda a: (a["core:sample_start"], a["core:label"]))
    return items


def write_synth(scenario: Scenario | Mapping[str, Any] | str | os.PathLike, out_meta_path: str | os.PathLike,
                force: bool = False, *, block_size: int = DEFAULT_BLOCK,
                progress: Callable[[int], None] | None = None) -> list[Path]:
    """Render a scenario into a SigMF recording and its truth file, all committed atomically.

    Parameters
    ----------
    scenario : Scenario, dict or path
    out_meta_path : path
        The ``.sigmf-meta`` (or ``.sigmf-data``, or stem) to write; the truth
        goes to ``<stem>.truth.json`` beside it.
    force : bool
        Overwrite existing files.
    block_size : int
        Samples per generated block (the output does not depend on it).
    progress : callable, optional
        Called with the number of samples written after each block.

    Returns
    -------
    list of Path
        ``[meta, data, truth]`` paths.
    """
    from .captures.atomic import OutputSet
    from .captures.sigmf import SigMFWriter, sigmf_paths

    scen = _as_scenario(scenario)
    synth = Synthesizer(scen)
    truth = synth.truth
    if not str(out_meta_path).endswith((".sigmf-meta", ".sigmf-data")):
        raise ParameterError(f"{out_meta_path}: the output is a SigMF recording; name it OUT.sigmf-meta")
    meta_path, data_path = sigmf_paths(out_meta_path)
    truth_path = truth_path_for(out_meta_path)
    inputs = [Path(scen.source)] if scen.source and Path(str(scen.source)).exists() else []
    inputs += [Path(ch.message.resolved_path) for ch in scen.channels
               if getattr(ch.message, "resolved_path", None)]
    description = scen.description or (
        f"iqsift synthetic test capture (invented scenario): {len(scen.channels)} channel(s), seed {scen.seed}"
    )
    with OutputSet(force=force, protect=tuple(inputs)) as outputs:
        truth_tmp = outputs.reserve(truth_path)
        writer = SigMFWriter(
            meta_path, scen.sample_rate_hz, center_hz=scen.center_hz, datatype=scen.datatype,
            description=description,
            extra={"iqsift:source": {"generator": "iqsift synth", "scenario": truth["scenario"], "seed": scen.seed,
                                     "truth": truth_path.name}},
            annotations=_annotations(truth), outputs=outputs,
        )
        try:
            for block in synth.blocks(block_size):
                writer.write(block)
                if progress is not None:
                    progress(block.shape[0])
            writer.close()
        except BaseException:
            writer.abort()
            raise
        truth["clipped_components"] = int(writer.clipped_components)
        truth["output"] = {"meta": meta_path.name, "data": data_path.name,
                           "data_sha512": writer.metadata()["global"]["core:sha512"]}
        written = json.loads(json.dumps(truth, allow_nan=False))
        for channel in written.get("channels", []):
            message = channel.get("message") or {}
            if message.get("resolved_path"):
                # relative to the truth file's folder, so a clone elsewhere regenerates the same bytes
                message["resolved_path"] = os.path.relpath(message["resolved_path"], meta_path.parent.resolve())
        with open(truth_tmp, "w", encoding="utf-8") as handle:
            json.dump(written, handle, indent=2, allow_nan=False)
            handle.write("\n")
    return [meta_path, data_path, truth_path]


# ----------------------------------------------------------------------------------------------
# Library helpers for test benches
# ----------------------------------------------------------------------------------------------
def tone_message(freq_hz: float, rate_hz: float, n: int, *, amplitude: float = 1.0, phase_deg: float = 0.0,
                 start: int = 0) -> np.ndarray:
    """``amplitude cos(2 pi freq_hz k / rate_hz + phase)`` for k = start .. start + n - 1 (float64)."""
    return multitone_message([freq_hz], rate_hz, n, amplitudes=[amplitude], phases_deg=[phase_deg],
                             normalise=False, start=start)


def multitone_message(freqs_hz: Sequence[float], rate_hz: float, n: int, *,
                      amplitudes: Sequence[float] | None = None, phases_deg: Sequence[float] | None = None,
                      normalise: bool = True, start: int = 0) -> np.ndarray:
    """Sum of cosines (float64); with ``normalise`` the amplitudes are scaled so ``sum(|a|) = 1`` (peak 1).

    This is exactly the ``tones`` message of a scenario.
    """
    rec = _tone_record(freqs_hz, amplitudes, phases_deg, normalise)
    return _ToneMessage(rec, rate_hz).real(int(start), int(start) + int(n))


def _carrier(n: int, carrier_hz: float, rate_hz: float | None, phase_deg: float) -> np.ndarray | complex:
    if carrier_hz == 0:
        return complex(np.exp(1j * math.radians(phase_deg)))
    if not rate_hz:
        raise ParameterError("rate_hz: needed when carrier_hz is not 0")
    cycles = carrier_hz * np.arange(n, dtype=np.float64) / rate_hz
    cycles -= np.floor(cycles)
    return np.exp(1j * (2 * np.pi * cycles + math.radians(phase_deg)))


def am_signal(message: np.ndarray, depth: float, *, level_dbfs: float = 0.0, carrier_hz: float = 0.0,
              rate_hz: float | None = None, phase_deg: float = 0.0) -> np.ndarray:
    """Full-carrier AM ``A (1 + depth msg) exp(j(2 pi carrier_hz t + phase))`` (Haykin ch. 3), complex64.

    ``level_dbfs`` is the carrier power (A = 10^(level/20)); ``message`` is
    used as given (peak 1 makes ``depth`` the modulation depth).
    """
    msg = np.asarray(message, dtype=np.float64)
    a = 10 ** (level_dbfs / 20)
    return (a * (1 + depth * msg) * _carrier(msg.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def dsb_signal(message: np.ndarray, *, level_dbfs: float = 0.0, carrier_hz: float = 0.0,
               rate_hz: float | None = None, phase_deg: float = 0.0) -> np.ndarray:
    """Suppressed-carrier DSB ``A msg exp(j...)`` scaled to average power ``level_dbfs`` (complex64)."""
    msg = np.asarray(message, dtype=np.float64)
    power = float(np.mean(msg ** 2)) if msg.size else 0.0
    if power <= 0:
        raise ParameterError("message: is silent (zero power); cannot set a DSB level")
    a = math.sqrt(10 ** (level_dbfs / 10) / power)
    return (a * msg * _carrier(msg.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def _sideband(sideband: str) -> str:
    if sideband not in ("usb", "lsb"):
        raise ParameterError(f"sideband: must be 'usb' or 'lsb', got {sideband!r}")
    return sideband


def _tone_record(freqs_hz: Sequence[float], amplitudes: Sequence[float] | None,
                 phases_deg: Sequence[float] | None, normalise: bool) -> dict[str, list[float]]:
    freqs = [float(f) for f in freqs_hz]
    amps = [1.0] * len(freqs) if amplitudes is None else [float(a) for a in amplitudes]
    phases = [0.0] * len(freqs) if phases_deg is None else [float(p) for p in phases_deg]
    if not freqs or len(amps) != len(freqs) or len(phases) != len(freqs):
        raise ParameterError("freqs_hz: give one or more frequencies, with as many amplitudes and phases")
    if normalise:
        total = sum(abs(a) for a in amps)
        if total == 0:
            raise ParameterError("amplitudes: must not all be 0")
        amps = [a / total for a in amps]
    return {"frequencies_hz": freqs, "amplitudes": amps, "phases_deg": phases}


def ssb_tones(freqs_hz: Sequence[float], rate_hz: float, n: int, *, amplitudes: Sequence[float] | None = None,
              phases_deg: Sequence[float] | None = None, sideband: str = "usb", level_dbfs: float = 0.0,
              carrier_hz: float = 0.0, phase_deg: float = 0.0) -> np.ndarray:
    """Exact SSB of a tone message: one complex exponential per tone, on one side of the carrier (complex64).

    The message is :func:`multitone_message` (normalised); the result has
    average power ``level_dbfs`` and no opposite sideband (beyond float32 rounding).
    """
    rec = _tone_record(freqs_hz, amplitudes, phases_deg, True)
    z = _ToneMessage(rec, rate_hz).analytic(0, int(n))
    if _sideband(sideband) == "lsb":
        z = np.conj(z)
    a = math.sqrt(10 ** (level_dbfs / 10) / sum(x * x for x in rec["amplitudes"]))
    return (a * z * _carrier(int(n), carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def analytic_message(message: np.ndarray, rate_hz: float, *, low_hz: float = 300.0,
                     high_hz: float = 3000.0) -> np.ndarray:
    """Analytic signal ``msg + j H{msg}`` of a real message band-limited to ``low_hz..high_hz`` (complex128).

    Uses the one-sided complex band-pass FIR (Kaiser window, 80 dB; the
    low-pass prototype shifted by ``exp(j w0 n)``, Oppenheim & Schafer ch. 7)
    with its delay removed; negative frequencies are suppressed by at least
    the design attenuation. Unlike ``scipy.signal.hilbert`` it assumes no
    periodicity; the first and last ``taps/2`` samples carry the filter's
    start and end transients.
    """
    if not 0 < low_hz < high_hz < rate_hz / 2:
        raise ParameterError(f"low_hz/high_hz: need 0 < low < high < rate/2, got {low_hz!r}, {high_hz!r}")
    x = np.asarray(message, dtype=np.float64)
    h = 2 * _band_fir(rate_hz, low_hz, high_hz, _transition(low_hz, high_hz), one_sided=True)
    delay = (h.shape[0] - 1) // 2
    return _signal.lfilter(h, 1.0, np.concatenate([x, np.zeros(delay)]))[delay:]


def ssb_signal(message: np.ndarray, rate_hz: float, *, sideband: str = "usb", level_dbfs: float = 0.0,
               carrier_hz: float = 0.0, phase_deg: float = 0.0, low_hz: float = 300.0,
               high_hz: float = 3000.0) -> np.ndarray:
    """SSB (suppressed carrier) of an arbitrary real message via :func:`analytic_message` (complex64).

    Scaled to average power ``level_dbfs``; ``lsb`` is the conjugate of the analytic message.
    """
    z = analytic_message(message, rate_hz, low_hz=low_hz, high_hz=high_hz)
    if _sideband(sideband) == "lsb":
        z = np.conj(z)
    power = float(np.mean(np.abs(z) ** 2)) if z.size else 0.0
    if power <= 0:
        raise ParameterError("message: is silent in the chosen band; cannot set an SSB level")
    a = math.sqrt(10 ** (level_dbfs / 10) / power)
    return (a * z * _carrier(z.shape[0], carrier_hz, rate_hz, phase_deg)).astype(np.complex64)


def awgn(n: int, *, rate_hz: float | None = None, density_dbfs_per_hz: float | None = None,
         power_dbfs: float | None = None, seed: int | np.random.Generator | None = 0) -> np.ndarray:
    """Complex white Gaussian noise (complex64), I and Q independent with equal power.

    Give either ``power_dbfs`` (total power) or ``density_dbfs_per_hz`` with
    ``rate_hz`` (power = density + 10 log10(rate)).
    """
    if (power_dbfs is None) == (density_dbfs_per_hz is None):
        raise ParameterError("awgn: give exactly one of power_dbfs or density_dbfs_per_hz")
    if density_dbfs_per_hz is not None:
        if not rate_hz or rate_hz <= 0:
            raise ParameterError(f"rate_hz: needed (> 0) with density_dbfs_per_hz, got {rate_hz!r}")
        power_dbfs = density_dbfs_per_hz + 10 * math.log10(rate_hz)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    sigma = math.sqrt(10 ** (power_dbfs / 10) / 2)
    return (rng.standard_normal(2 * int(n)).view(np.complex128) * sigma).astype(np.complex64)


def fading_gain(n: int, rate_hz: float, doppler_hz: float, *, seed: int = 0, paths: int = 32,
                k_db: float | None = None) -> np.ndarray:
    """Flat-fading complex gain (complex128, mean power 1): Rayleigh, or Rician with ``k_db``.

    The same Clarke sum-of-sinusoids model the scenarios use, with theta and
    the path phases drawn from ``numpy.random.default_rng(seed)``.
    """
    if not doppler_hz > 0 or not 8 <= int(paths) <= 256:
        raise ParameterError(f"doppler_hz/paths: need doppler > 0 and 8..256 paths, got {doppler_hz!r}, {paths!r}")
    rng = np.random.default_rng(seed)
    ratio = _rate_ratio(rate_hz, doppler_hz / _PASS)
    rec = {"kind": "rayleigh" if k_db is None else "rician", "doppler_hz": float(doppler_hz), "k_db": k_db,
           "paths": int(paths), "theta_rad": float(rng.uniform(-np.pi, np.pi)),
           "phases_rad": rng.uniform(-np.pi, np.pi, int(paths)), "rate_hz": rate_hz / ratio}
    return _fading_gain(rec, rate_hz).take(0, int(n))
