"""Scenarios of the synthesizer: the TOML schema read, checked and resolved to SI units.

:func:`parse_scenario` and :func:`load_scenario` turn a scenario (TOML text, a dict or
a file; the schema is in :mod:`iqsift.synth`) into a frozen :class:`Scenario` of
:class:`ChannelSpec` records, refusing anything that breaks a rule with one line that
names the source, the channel and the key, echoes the value and states the rule.
"""

from __future__ import annotations

import math
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, Sequence

from ..errors import CaptureError, ParameterError
from ..units import parse_frequency, parse_time
from .sources import PASS_FRACTION, message_transition_hz

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

__all__ = [
    "MODES",
    "MESSAGE_KINDS",
    "FADING_KINDS",
    "MessageSpec",
    "FadingSpec",
    "ChannelSpec",
    "Scenario",
    "as_scenario",
    "load_scenario",
    "noise_transition_hz",
    "parse_scenario",
    "signal_band",
]

#: Modulations the generator makes.
MODES: tuple[str, ...] = ("am", "dsb", "usb", "lsb")
#: Message kinds.
MESSAGE_KINDS: tuple[str, ...] = ("tone", "tones", "noise", "file")
FADING_KINDS: tuple[str, ...] = ("rayleigh", "rician")

_FILE_PASS = 0.44  # highest file-message frequency as a share of the file's rate (64-tap kernel passband 0.45)
_MIN_LOW_HZ = 50.0
_NOISE_EDGE_SHARE = 50.0  # channel-noise transition width = B / 50

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

    @property
    def channel_noise(self) -> tuple[float, float] | None:
        """``(cnr_db, noise_bandwidth_hz)`` of the band-limited channel noise, or None without it."""
        if self.cnr_db is None:
            return None
        # the parser sets noise_bandwidth_hz (default: the channel bandwidth) whenever cnr_db is given
        assert self.noise_bandwidth_hz is not None
        return self.cnr_db, self.noise_bandwidth_hz


@dataclass(frozen=True)
class Scenario:
    """A validated scenario (see :mod:`iqsift.synth` for the schema).

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
    return parse_time(value, f"{where}: {label}").to_seconds(rate)


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
    if high <= low or high - low < message_transition_hz(low, high):
        raise _fail(where, "message.high", f"must exceed message.low ({low:g} Hz) by at least "
                    f"{message_transition_hz(low, high):g} Hz", raw.get("high"))
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
    half_transition = message_transition_hz(low, high) / 2
    if high + half_transition > _FILE_PASS * file_rate:
        raise _fail(where, "message.high", f"is too close to the file's Nyquist frequency; the file's rate "
                    f"{file_rate:g} Hz allows up to {_FILE_PASS * file_rate - half_transition:g} Hz",
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
    spans: list[tuple[float, float]] = []
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
    if fading is not None and fading.doppler_hz > PASS_FRACTION * rate:
        raise _fail(where, "fading.doppler_hz", f"must be at most {PASS_FRACTION * rate:g} Hz at this sample rate",
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
        needed = (message.high_hz + message_transition_hz(message.low_hz, message.high_hz) / 2) / PASS_FRACTION
        if rate < needed:
            raise _fail(where, "message.high", f"needs a sample rate of at least {needed:g} samples/s "
                        f"(the scenario's is {rate:g})", message.high_hz)
    if cnr is not None and rate < _noise_extent(spec) / PASS_FRACTION:
        raise _fail(where, "noise_bandwidth", f"needs a sample rate of at least "
                    f"{_noise_extent(spec) / PASS_FRACTION:g} samples/s (the scenario's is {rate:g})", noise_bw)
    return spec


def _check_emission(code: Any, mode: str, where: str) -> float | None:
    from ..emission import parse_emission

    try:
        parsed = parse_emission(code)
    except ParameterError as exc:
        raise ParameterError(f"{where}: emission: {exc}") from None
    allowed = {"am": ("A",), "dsb": ("A",), "usb": ("J",), "lsb": ("J",)}[mode]
    if parsed.modulation not in allowed:
        raise _fail(where, "emission", f"class {parsed.emission_class} does not describe mode {mode} "
                    f"(first symbol must be {' or '.join(allowed)})", code)
    return parsed.bandwidth_hz


def _noise_extent(spec: ChannelSpec) -> float:
    noise = spec.channel_noise
    if noise is None:
        return 0.0
    _, noise_bandwidth = noise
    lo, hi = signal_band(spec.mode, noise_bandwidth)
    return max(abs(lo), abs(hi)) + noise_transition_hz(noise_bandwidth) / 2


def noise_transition_hz(bandwidth: float) -> float:
    """Transition width (Hz) of the channel-noise band edges: B/50, at least 1 Hz."""
    return max(bandwidth / _NOISE_EDGE_SHARE, 1.0)


def signal_band(mode: str, bandwidth: float) -> tuple[float, float]:
    """Band edges relative to the carrier (Hz) of a channel of ``bandwidth`` Hz in ``mode``.

    The channel noise (with its own noise bandwidth) occupies a band of the same shape.
    """
    return {"am": (-bandwidth / 2, bandwidth / 2), "dsb": (-bandwidth / 2, bandwidth / 2),
            "usb": (0.0, bandwidth), "lsb": (-bandwidth, 0.0)}[mode]


def _occupied_rel(spec: ChannelSpec, duration: float) -> tuple[float, float]:
    carrier = spec.offset_hz + spec.carrier_offset_hz
    lo, hi = signal_band(spec.mode, spec.bandwidth_hz)
    noise = spec.channel_noise
    if noise is not None:
        _, noise_bandwidth = noise
        nlo, nhi = signal_band(spec.mode, noise_bandwidth)
        edge = noise_transition_hz(noise_bandwidth) / 2
        lo, hi = min(lo, nlo - edge), max(hi, nhi + edge)
    spread = spec.fading.doppler_hz if spec.fading else 0.0
    drift = spec.drift_hz_per_s * duration
    return carrier + lo - spread + min(0.0, drift), carrier + hi + spread + max(0.0, drift)

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
    from ..captures.datatypes import parse_datatype

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
    """Read and validate a scenario TOML file (see :mod:`iqsift.synth` for the schema).

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


def as_scenario(scenario: Any) -> Scenario:
    """A :class:`Scenario` given as one, as a dict (:func:`parse_scenario`) or as a TOML file path."""
    if isinstance(scenario, Scenario):
        return scenario
    if isinstance(scenario, Mapping):
        return parse_scenario(scenario)
    if isinstance(scenario, (str, os.PathLike)):
        return load_scenario(scenario)
    raise ParameterError(f"scenario: expected a Scenario, a dict or a TOML file path, got {type(scenario).__name__}")

