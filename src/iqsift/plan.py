"""Channel plans: which channels to pull out of a capture, kept in a TOML file.

A plan is a TOML document (TOML v1.0; read with :mod:`tomllib`, or ``tomli``
on Python 3.10) with an optional ``[defaults]`` table and one ``[[channel]]``
table per channel::

    [defaults]              # optional: any channel key but name/freq/offset/channel_name
    bandwidth = "6k"
    mode = "envelope"
    audio_rate = 16000

    [[channel]]
    name = "tower-east"
    freq = "127.35M"        # or offset = "-25k" (from the capture centre)
                            # or channel_name = "118.010" (ICAO aeronautical name)
    emission = "6K00A3E"    # or bandwidth = "6k"
    mode = "coherent"       # optional
    squelch_db = 10         # optional, dB above the noise floor
    audio_rate = 16000      # optional, samples/s

Channel keys
    ``name`` (required; text, unique once made into a file name by
    :func:`sanitize_name`, compared without regard to case), exactly one of
    ``freq`` (absolute RF, Hz, > 0), ``offset`` (Hz from the capture centre)
    and ``channel_name`` (aeronautical VHF name, see
    :func:`iqsift.rasters.aero_channel`), exactly one of ``bandwidth`` (Hz,
    > 0) and ``emission`` (ITU designator, see
    :func:`iqsift.emission.parse_emission`), and optionally ``mode`` (one of
    :data:`iqsift.emission.MODES`), ``audio_low`` (lower audio edge, Hz),
    ``audio_rate`` (whole samples/s, 4000-192000) and ``squelch_db`` (finite,
    >= 0 dB above the noise floor). Frequencies are numbers of Hz or text with
    an SI prefix (``"127.35M"``, ``"8.33k"``, ``"6 kHz"``).

How defaults combine
    A channel's own key wins over ``[defaults]``. ``bandwidth`` and
    ``emission`` count as one setting: a channel that gives either one
    ignores both defaults, together with what the default emission implied
    (detector, audio low edge). In order of precedence:

    - mode: the channel's ``mode``; the default detector of the channel's
      ``emission``; ``[defaults] mode``; the default detector of the default
      emission (when used); ``"envelope"``;
    - audio low edge: the channel's ``audio_low``; the channel emission's
      (300 Hz for A and J telephony, 0 Hz for H, R, B); ``[defaults]
      audio_low``; the default emission's (when used); 300 Hz (voice band,
      common practice);
    - ``audio_rate``: channel, defaults, 16000; ``squelch_db``: channel,
      defaults, none.

    ``[defaults] ppm`` (only there: it belongs to the receiver that made the capture, not to a
    channel) is the receiver's reference error in ppm (:mod:`iqsift.reference`); ``extract``
    corrects the capture for it unless given ``ppm`` itself.

    A mode must suit the emission in force (:func:`iqsift.emission.allowed_modes`).

Errors
    Every problem raises :class:`~iqsift.errors.ParameterError` with one line
    naming the file, the channel (``channel 3 'tower-east'``, counted from 1)
    or ``[defaults]``, the key, and echoing the value, e.g.
    ``plan.toml: channel 2 'ops': key 'bandwidth': '6q' is not a frequency ...``.
    Malformed TOML names the file and the line. A missing file, a directory,
    an unreadable or non-UTF-8 file also raise ParameterError (a plan is a
    parameter of the run, not a capture).
"""

from __future__ import annotations

import math
import os
import re
import sys
import unicodedata
from dataclasses import asdict, dataclass, fields
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

from .emission import MODES, Emission, allowed_modes, parse_emission
from .errors import ParameterError
from .rasters import aero_channel
from .reference import check_ppm
from .units import parse_frequency

__all__ = [
    "PlannedChannel",
    "ChannelPlan",
    "load_plan",
    "parse_plan",
    "plan_from_dict",
    "format_plan",
    "sanitize_name",
    "CHANNEL_KEYS",
    "DEFAULT_KEYS",
    "DEFAULT_AUDIO_RATE_HZ",
    "DEFAULT_AUDIO_LOW_HZ",
    "AUDIO_RATE_RANGE_HZ",
]

LOCATION_KEYS = ("freq", "offset", "channel_name")
#: Keys a [[channel]] table may hold.
CHANNEL_KEYS = ("name", *LOCATION_KEYS, "emission", "bandwidth", "mode", "audio_low", "audio_rate", "squelch_db")
#: Keys the [defaults] table may hold.
DEFAULT_KEYS = ("emission", "bandwidth", "mode", "audio_low", "audio_rate", "squelch_db", "ppm")
DEFAULT_AUDIO_RATE_HZ = 16000.0
#: Lower audio edge for voice when nothing else says (common practice: 300-3400 Hz telephony band).
DEFAULT_AUDIO_LOW_HZ = 300.0
AUDIO_RATE_RANGE_HZ = (4000.0, 192000.0)
_NAME_MAX_CHARS = 100
_STEM_MAX_CHARS = 64
_STEM_MAX_BYTES = 200
_ECHO_MAX = 60
_WINDOWS_RESERVED = {"CON", "PRN", "AUX", "NUL", *(f"COM{i}" for i in range(1, 10)), *(f"LPT{i}" for i in range(1, 10))}


# --------------------------------------------------------------------------- names


def sanitize_name(name: str) -> str:
    """Turn a channel name into a safe file-name stem.

    Rules: Unicode NFKC normalisation; letters and digits kept, as are
    ``-``, ``_`` and ``.``; every other character (spaces, path separators,
    control and format characters, punctuation) becomes ``_``; runs of ``_``
    and runs of dots shrink to one (so no ``..``); leading and trailing dots,
    dashes and underscores are dropped (no hidden files, nothing that looks
    like an option); Windows device names (CON, NUL, COM1 ...) get a trailing
    ``_``; at most 64 characters and 200 UTF-8 bytes. The result is stable:
    ``sanitize_name(sanitize_name(x)) == sanitize_name(x)``.

    Raises
    ------
    ParameterError
        If ``name`` is not text or nothing usable is left.
    """
    if not isinstance(name, str):
        raise ParameterError(f"name: expected text, got {_echo(name)}")
    text = unicodedata.normalize("NFKC", name)
    out: list[str] = []
    for ch in text:
        if ch in "-_." or (ch.isalnum() and unicodedata.category(ch)[0] in "LN"):
            out.append(ch)
        else:
            out.append("_")
    stem = re.sub(r"\.{2,}", ".", re.sub(r"_{2,}", "_", "".join(out)))
    stem = stem.strip(".-_")
    if stem.split(".")[0].upper() in _WINDOWS_RESERVED:
        first, dot, rest = stem.partition(".")
        stem = first + "_" + dot + rest
    while len(stem) > _STEM_MAX_CHARS or len(stem.encode("utf-8")) > _STEM_MAX_BYTES:
        stem = stem[:-1].rstrip(".-_")
    if not stem:
        raise ParameterError(f"name {_echo(name)}: has no letters or digits to make a file name from")
    return stem


# --------------------------------------------------------------------------- records


@dataclass(frozen=True)
class PlannedChannel:
    """One channel of a plan, with every setting resolved.

    Attributes
    ----------
    name : str
        Channel name as written in the plan.
    freq_hz : float or None
        Absolute RF carrier frequency, Hz (from ``freq`` or ``channel_name``).
    offset_hz : float or None
        Carrier offset from the capture centre, Hz (from ``offset``).
    bandwidth_hz : float
        Channel (RF) bandwidth, Hz: given, or the emission's necessary bandwidth.
    mode : str
        Detector, one of :data:`iqsift.emission.MODES`.
    emission : str or None
        ITU emission designator in upper case, when the plan gave one.
    audio_low_hz : float
        Lower edge of the audio band, Hz.
    audio_rate_hz : float
        Audio output sample rate, samples/s (a whole number).
    squelch_db : float or None
        Squelch threshold in dB above the noise floor, or None for none.
    channel_name : str or None
        Aeronautical VHF channel name (canonical six digits) when given.
    """

    name: str
    freq_hz: float | None
    offset_hz: float | None
    bandwidth_hz: float
    mode: str
    emission: str | None = None
    audio_low_hz: float = DEFAULT_AUDIO_LOW_HZ
    audio_rate_hz: float = DEFAULT_AUDIO_RATE_HZ
    squelch_db: float | None = None
    channel_name: str | None = None

    @property
    def file_stem(self) -> str:
        """The name made safe for file names (:func:`sanitize_name`)."""
        return sanitize_name(self.name)

    def tuning_offset_hz(self, center_hz: float | None) -> float:
        """Carrier offset (Hz) from a capture's centre frequency.

        ``offset`` is used as it is. ``freq`` is absolute when the capture has a
        centre frequency (offset = freq - centre) and, following iqsift's
        convention for captures without one, read as an offset otherwise. A
        ``channel_name`` is always absolute and needs the centre.

        Raises
        ------
        ParameterError
            For a channel_name channel when ``center_hz`` is None.
        """
        if self.offset_hz is not None:
            return self.offset_hz
        assert self.freq_hz is not None
        if center_hz is None:
            if self.channel_name is not None:
                raise ParameterError(
                    f"channel {_echo(self.name)}: channel_name {self.channel_name} is an absolute frequency "
                    "and the capture has no centre frequency; give the centre or use offset"
                )
            return self.freq_hz
        return self.freq_hz - float(center_hz)

    def to_dict(self) -> dict[str, Any]:
        """The fields as a JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True)
class ChannelPlan:
    """The channels of a plan, in file order, and where they came from.

    Attributes
    ----------
    channels : tuple of PlannedChannel
    source : str
        The file name (or ``"<string>"``) used in error messages.
    ppm : float or None
        ``[defaults] ppm``: the receiver reference error of the capture the plan is for (ppm).
    """

    channels: tuple[PlannedChannel, ...]
    source: str = "<string>"
    ppm: float | None = None

    def __len__(self) -> int:
        return len(self.channels)

    def __iter__(self) -> Iterator[PlannedChannel]:
        return iter(self.channels)

    @property
    def names(self) -> tuple[str, ...]:
        """Channel names in file order."""
        return tuple(ch.name for ch in self.channels)

    def by_name(self, name: str) -> PlannedChannel:
        """The channel called ``name`` (exact match).

        Raises
        ------
        ParameterError
            If there is none.
        """
        for ch in self.channels:
            if ch.name == name:
                return ch
        raise ParameterError(f"{self.source}: no channel named {_echo(name)}; channels are {', '.join(self.names)}")

    def to_dict(self) -> dict[str, Any]:
        """``{"source": ..., "channels": [...]}`` ready for JSON."""
        return {"source": self.source, "channels": [ch.to_dict() for ch in self.channels]}


# --------------------------------------------------------------------------- helpers


def _echo(value: Any) -> str:
    """repr() of a value, kept to one short line."""
    try:
        text = repr(value)
    except Exception:  # noqa: BLE001 - a broken __repr__ must not hide the real error
        text = f"<{type(value).__name__}>"
    text = "".join(ch if ch.isprintable() else f"\\x{ord(ch):02x}" if ord(ch) < 256 else f"\\u{ord(ch):04x}" for ch in text)
    if len(text) > _ECHO_MAX:
        text = text[: _ECHO_MAX - 3] + "..."
    return text


def _clean_source(source: Any) -> str:
    text = str(source)
    return "".join(ch if ch.isprintable() else "?" for ch in text)


class _Where:
    """Builds the 'file: channel 2 'ops': key 'x':' prefix of messages."""

    def __init__(self, source: str, label: str) -> None:
        self.source = source
        self.label = label

    def error(self, message: str, key: str | None = None) -> ParameterError:
        head = f"{self.source}: {self.label}"
        if key is not None:
            head += f": key '{key}'"
        return ParameterError(f"{head}: {message}")


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _frequency(where: _Where, key: str, value: Any, *, positive: bool = False, nonnegative: bool = False) -> float:
    if not (_is_number(value) or isinstance(value, str)):
        raise where.error(f"{_echo(value)} is not a frequency; write a number of Hz or text such as 6k, 127.35M", key)
    try:
        result = parse_frequency(value, key)
    except (ParameterError, OverflowError, ValueError):
        raise where.error(
            f"{_echo(value)} is not a frequency; write a number of Hz or text such as 6k, 127.35M", key
        ) from None
    if positive and result <= 0:
        raise where.error(f"{_echo(value)} must be greater than 0 Hz", key)
    if nonnegative and result < 0:
        raise where.error(f"{_echo(value)} must be 0 Hz or more", key)
    return result


def _emission(where: _Where, value: Any) -> Emission:
    if not isinstance(value, str):
        raise where.error(f"{_echo(value)} is not an emission designator; write e.g. '6K00A3E'", "emission")
    try:
        return parse_emission(value)
    except ParameterError as exc:
        raise where.error(str(exc), "emission") from None


def _mode(where: _Where, value: Any) -> str:
    mode = value.strip().lower() if isinstance(value, str) else None
    if mode not in MODES:
        raise where.error(f"{_echo(value)} is not a detector; use one of {', '.join(MODES)}", "mode")
    return mode


def _audio_rate(where: _Where, value: Any) -> float:
    rate = _frequency(where, "audio_rate", value, positive=True)
    lo, hi = AUDIO_RATE_RANGE_HZ
    if rate != math.floor(rate) or not (lo <= rate <= hi):
        raise where.error(
            f"{_echo(value)} must be a whole number of samples/s from {lo:.0f} to {hi:.0f}", "audio_rate"
        )
    return float(rate)


def _squelch(where: _Where, value: Any) -> float:
    if not _is_number(value):
        raise where.error(f"{_echo(value)} is not a number of dB", "squelch_db")
    try:
        result = float(value)
    except OverflowError:
        result = math.inf
    if not math.isfinite(result) or result < 0:
        raise where.error(f"{_echo(value)} must be a finite number of dB >= 0 (above the noise floor)", "squelch_db")
    return result


def _check_keys(where: _Where, table: Mapping[Any, Any], allowed: tuple[str, ...], kind: str) -> None:
    for key in table:
        if key not in allowed:
            if kind == "[defaults]" and key in ("name", *LOCATION_KEYS):
                raise where.error("belongs in a [[channel]] table, not in [defaults]", str(key))
            raise where.error(f"unknown key; {kind} keys are {', '.join(allowed)}", _echo(key).strip("'\""))


@dataclass
class _Defaults:
    emission: Emission | None = None
    bandwidth_hz: float | None = None
    mode: str | None = None
    audio_low_hz: float | None = None
    audio_rate_hz: float | None = None
    squelch_db: float | None = None
    ppm: float | None = None


def _read_defaults(source: str, table: Any) -> _Defaults:
    where = _Where(source, "[defaults]")
    if not isinstance(table, Mapping):
        raise ParameterError(f"{source}: [defaults] must be a table of keys, got {_echo(table)}")
    _check_keys(where, table, DEFAULT_KEYS, "[defaults]")
    result = _Defaults()
    if "emission" in table and "bandwidth" in table:
        raise where.error("give either 'bandwidth' or 'emission' in [defaults], not both", "bandwidth")
    if "emission" in table:
        result.emission = _emission(where, table["emission"])
    if "bandwidth" in table:
        result.bandwidth_hz = _frequency(where, "bandwidth", table["bandwidth"], positive=True)
    if "mode" in table:
        result.mode = _mode(where, table["mode"])
        if result.emission is not None and result.mode not in allowed_modes(result.emission.emission_class):
            raise where.error(
                f"{_echo(result.mode)} does not suit emission {result.emission.code}; use one of "
                f"{', '.join(allowed_modes(result.emission.emission_class))}",
                "mode",
            )
    if "audio_low" in table:
        result.audio_low_hz = _frequency(where, "audio_low", table["audio_low"], nonnegative=True)
    if "audio_rate" in table:
        result.audio_rate_hz = _audio_rate(where, table["audio_rate"])
    if "squelch_db" in table:
        result.squelch_db = _squelch(where, table["squelch_db"])
    if "ppm" in table:
        try:
            result.ppm = check_ppm("ppm", table["ppm"])
        except ParameterError as exc:
            raise where.error(str(exc).removeprefix("ppm: "), "ppm") from None
    return result


def _read_channel(source: str, index: int, entry: Any, defaults: _Defaults) -> PlannedChannel:
    if not isinstance(entry, Mapping):
        raise ParameterError(f"{source}: channel {index}: must be a table of keys, got {_echo(entry)}")
    raw_name = entry.get("name")
    label = f"channel {index}"
    if isinstance(raw_name, str) and raw_name.strip():
        label += f" {_echo(raw_name)}"
    where = _Where(source, label)
    _check_keys(where, entry, CHANNEL_KEYS, "[[channel]]")

    # name
    if "name" not in entry:
        raise where.error("missing; every channel needs a name", "name")
    name = entry["name"]
    if not isinstance(name, str):
        raise where.error(f"{_echo(name)} is not text", "name")
    if not name.strip():
        raise where.error(f"{_echo(name)} is empty", "name")
    if len(name) > _NAME_MAX_CHARS:
        raise where.error(f"{_echo(name)} is longer than {_NAME_MAX_CHARS} characters", "name")
    if any(unicodedata.category(ch) in ("Cc", "Cs", "Zl", "Zp") for ch in name):
        raise where.error(f"{_echo(name)} holds control or line-break characters", "name")
    try:
        sanitize_name(name)
    except ParameterError:
        raise where.error(f"{_echo(name)} has no letters or digits to make a file name from", "name") from None

    # where the carrier is
    given = [k for k in LOCATION_KEYS if k in entry]
    if not given:
        raise where.error("no frequency; give one of the keys 'freq', 'offset' or 'channel_name'")
    if len(given) > 1:
        raise where.error(f"give only one of 'freq', 'offset', 'channel_name' (found {', '.join(given)})", given[1])
    freq_hz = offset_hz = None
    channel_name = None
    if "freq" in entry:
        freq_hz = _frequency(where, "freq", entry["freq"], positive=True)
    elif "offset" in entry:
        offset_hz = _frequency(where, "offset", entry["offset"])
    else:
        value = entry["channel_name"]
        if not (isinstance(value, str) or _is_number(value)):
            raise where.error(f"{_echo(value)} is not an aeronautical channel name such as '118.010'", "channel_name")
        try:
            aero = aero_channel(value)
        except ParameterError as exc:
            raise where.error(str(exc), "channel_name") from None
        channel_name = aero.name
        freq_hz = aero.frequency_hz

    # bandwidth / emission: the channel's own setting replaces the default one
    emission: Emission | None = None
    own_emission = False
    if "emission" in entry and "bandwidth" in entry:
        raise where.error("give either 'bandwidth' or 'emission', not both", "bandwidth")
    if "emission" in entry:
        emission = _emission(where, entry["emission"])
        own_emission = True
        bandwidth_hz = emission.bandwidth_hz
    elif "bandwidth" in entry:
        bandwidth_hz = _frequency(where, "bandwidth", entry["bandwidth"], positive=True)
    elif defaults.emission is not None:
        emission = defaults.emission
        bandwidth_hz = emission.bandwidth_hz
    elif defaults.bandwidth_hz is not None:
        bandwidth_hz = defaults.bandwidth_hz
    else:
        raise where.error("no bandwidth; give the key 'bandwidth' or 'emission' here or in [defaults]")
    assert bandwidth_hz is not None

    # detector
    if "mode" in entry:
        mode = _mode(where, entry["mode"])
    elif own_emission:
        assert emission is not None
        mode = emission.mode
    elif defaults.mode is not None:
        mode = defaults.mode
    elif emission is not None:
        mode = emission.mode
    else:
        mode = "envelope"
    if emission is not None:
        modes = allowed_modes(emission.emission_class)
        if mode not in modes:
            raise where.error(
                f"{_echo(mode)} does not suit emission {emission.code} ({emission.emission_class}); "
                f"use one of {', '.join(modes)}",
                "mode",
            )

    # audio
    if "audio_low" in entry:
        audio_low = _frequency(where, "audio_low", entry["audio_low"], nonnegative=True)
    elif own_emission:
        assert emission is not None
        audio_low = emission.audio_low_hz
    elif defaults.audio_low_hz is not None:
        audio_low = defaults.audio_low_hz
    elif emission is not None:
        audio_low = emission.audio_low_hz
    else:
        audio_low = DEFAULT_AUDIO_LOW_HZ
    if "audio_rate" in entry:
        audio_rate = _audio_rate(where, entry["audio_rate"])
    elif defaults.audio_rate_hz is not None:
        audio_rate = defaults.audio_rate_hz
    else:
        audio_rate = DEFAULT_AUDIO_RATE_HZ
    # The audio band must fit: below Nyquist of the audio rate and inside the
    # detected band (half the RF bandwidth for double-sideband detectors).
    audio_top = bandwidth_hz if mode in ("usb", "lsb") else bandwidth_hz / 2.0
    if not audio_low < audio_rate / 2.0:
        raise where.error(
            f"{audio_low!r} Hz must be below half the audio rate ({audio_rate / 2.0:g} Hz)", "audio_low"
        )
    if not audio_low < audio_top:
        raise where.error(
            f"{audio_low!r} Hz must be below the top of the detected audio band ({audio_top:g} Hz for "
            f"mode {mode} and bandwidth {bandwidth_hz:g} Hz)",
            "audio_low",
        )

    squelch: float | None
    if "squelch_db" in entry:
        squelch = _squelch(where, entry["squelch_db"])
    else:
        squelch = defaults.squelch_db

    return PlannedChannel(
        name=name,
        freq_hz=freq_hz,
        offset_hz=offset_hz,
        bandwidth_hz=float(bandwidth_hz),
        mode=mode,
        emission=emission.code if emission is not None else None,
        audio_low_hz=float(audio_low),
        audio_rate_hz=float(audio_rate),
        squelch_db=squelch,
        channel_name=channel_name,
    )


# --------------------------------------------------------------------------- entry points


def plan_from_dict(data: Any, source: str = "<dict>") -> ChannelPlan:
    """Validate a plan already read into Python objects (as :mod:`tomllib` returns it).

    Parameters
    ----------
    data : mapping
        ``{"defaults": {...}, "channel": [{...}, ...]}``.
    source : str
        Name used at the start of error messages.

    Raises
    ------
    ParameterError
        On the first problem found (see the module notes).
    """
    src = _clean_source(source)
    if not isinstance(data, Mapping):
        raise ParameterError(f"{src}: a plan must be a table with [defaults] and [[channel]] entries, got {_echo(data)}")
    for key in data:
        if key not in ("defaults", "channel"):
            raise ParameterError(
                f"{src}: unknown top-level key {_echo(key)}; a plan holds an optional [defaults] table "
                "and [[channel]] tables"
            )
    defaults = _read_defaults(src, data["defaults"]) if "defaults" in data else _Defaults()
    entries = data.get("channel")
    if entries is None:
        raise ParameterError(f"{src}: no channels; add a [[channel]] table for each channel")
    if isinstance(entries, Mapping):
        raise ParameterError(f"{src}: write each channel as [[channel]] (an array of tables), not [channel]")
    if not isinstance(entries, (list, tuple)):
        raise ParameterError(f"{src}: 'channel' must be an array of [[channel]] tables, got {_echo(entries)}")
    if not entries:
        raise ParameterError(f"{src}: no channels; add a [[channel]] table for each channel")
    channels: list[PlannedChannel] = []
    stems: dict[str, tuple[int, str]] = {}
    for index, entry in enumerate(entries, start=1):
        channel = _read_channel(src, index, entry, defaults)
        stem = channel.file_stem.casefold()
        if stem in stems:
            other_index, other_name = stems[stem]
            raise ParameterError(
                f"{src}: channel {index} {_echo(channel.name)}: key 'name': file name {channel.file_stem!r} "
                f"clashes with channel {other_index} {_echo(other_name)} (names must differ once made file-safe, "
                "ignoring case)"
            )
        stems[stem] = (index, channel.name)
        channels.append(channel)
    return ChannelPlan(tuple(channels), src, defaults.ppm)


def parse_plan(text: str | bytes, source: str = "<string>") -> ChannelPlan:
    """Read a plan from TOML text.

    Parameters
    ----------
    text : str or bytes
        The TOML document (bytes are decoded as UTF-8).
    source : str
        Name used at the start of error messages (a file name).

    Raises
    ------
    ParameterError
        For malformed TOML (naming the line) or any rule the plan breaks.
    """
    src = _clean_source(source)
    if isinstance(text, (bytes, bytearray)):
        raw = bytes(text)
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError as exc:
            line = raw[: exc.start].count(b"\n") + 1
            raise ParameterError(f"{src}: line {line}: not UTF-8 text (TOML files are UTF-8)") from None
    if not isinstance(text, str):
        raise ParameterError(f"{src}: expected TOML text, got {_echo(text)}")
    if text.startswith("\ufeff"):
        text = text[1:]
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = " ".join(str(exc).split())
        if "line" not in message:
            lineno = getattr(exc, "lineno", None)
            if lineno is None:  # "at end of document"
                lineno = text.count("\n") + 1
            message += f" (line {lineno})"
        raise ParameterError(f"{src}: malformed TOML: {message}") from None
    except RecursionError:
        raise ParameterError(f"{src}: malformed TOML: values nested too deeply") from None
    return plan_from_dict(data, src)


def load_plan(path: str | os.PathLike[str]) -> ChannelPlan:
    """Read and validate a plan file.

    Raises
    ------
    ParameterError
        If the file does not exist, is a directory, cannot be read, is not
        UTF-8, is not valid TOML, or breaks a plan rule. Messages start with
        the path as given.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise ParameterError(f"plan file: expected a path, got {_echo(path)}")
    p = Path(path)
    shown = _clean_source(os.fspath(path))
    if p.is_dir():
        raise ParameterError(f"{shown}: is a directory, not a plan file")
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise ParameterError(f"{shown}: plan file does not exist") from None
    except OSError as exc:
        raise ParameterError(f"{shown}: plan file cannot be read ({exc.strerror or type(exc).__name__})") from None
    return parse_plan(raw, shown)


# --------------------------------------------------------------------------- writing


def _toml_string(value: str) -> str:
    out = ['"']
    for ch in value:
        code = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif code < 0x20 or code == 0x7F:
            out.append(f"\\u{code:04X}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_float(value: float) -> str:
    number = float(value)
    if not math.isfinite(number):
        raise ParameterError(f"format_plan: {number!r} cannot be written to a plan")
    return repr(number)  # shortest text that reads back to the same float


def format_plan(plan_or_channels: ChannelPlan | Iterable[PlannedChannel]) -> str:
    """Write channels as plan TOML that :func:`parse_plan` reads back to the same channels.

    Every setting is written out per channel (``[defaults]`` holds only ``ppm``); numbers are
    written in Hz with Python's shortest round-trip float text. The text is
    read back before it is returned, so the promise is checked, not assumed.

    Raises
    ------
    ParameterError
        If an item is not a :class:`PlannedChannel`, or a channel breaks a plan
        rule (so it would not read back the same).
    """
    channels = plan_or_channels.channels if isinstance(plan_or_channels, ChannelPlan) else tuple(plan_or_channels)
    lines = ["# iqsift channel plan (TOML). Frequencies and bandwidths in Hz.", ""]
    ppm = plan_or_channels.ppm if isinstance(plan_or_channels, ChannelPlan) else None
    if ppm is not None:  # the only setting written as a default: it is the capture's, not a channel's
        lines += ["[defaults]", f"ppm = {_toml_float(ppm)}  # receiver reference error, ppm (fast > 0)", ""]
    for index, ch in enumerate(channels, start=1):
        if not isinstance(ch, PlannedChannel):
            raise ParameterError(f"format_plan: item {index} is not a PlannedChannel, got {_echo(ch)}")
        if not isinstance(ch.name, str):
            raise ParameterError(f"format_plan: channel {index}: name {_echo(ch.name)} is not text")
        lines.append("[[channel]]")
        lines.append(f"name = {_toml_string(ch.name)}")
        if ch.channel_name is not None:
            lines.append(f"channel_name = {_toml_string(str(ch.channel_name))}")
        elif ch.freq_hz is not None:
            lines.append(f"freq = {_toml_float(ch.freq_hz)}")
        elif ch.offset_hz is not None:
            lines.append(f"offset = {_toml_float(ch.offset_hz)}")
        if ch.emission is not None:
            lines.append(f"emission = {_toml_string(str(ch.emission))}")
        else:
            lines.append(f"bandwidth = {_toml_float(ch.bandwidth_hz)}")
        lines.append(f"mode = {_toml_string(str(ch.mode))}")
        lines.append(f"audio_low = {_toml_float(ch.audio_low_hz)}")
        rate = float(ch.audio_rate_hz)
        lines.append(f"audio_rate = {int(rate) if rate.is_integer() else _toml_float(rate)}")
        if ch.squelch_db is not None:
            lines.append(f"squelch_db = {_toml_float(ch.squelch_db)}")
        lines.append("")
    text = "\n".join(lines)
    back = parse_plan(text, "<format_plan>").channels
    for index, (want, got) in enumerate(zip(channels, back), start=1):
        if want != got:
            differing = [f.name for f in fields(PlannedChannel) if getattr(want, f.name) != getattr(got, f.name)]
            raise ParameterError(
                f"format_plan: channel {index} {_echo(want.name)}: field(s) {', '.join(differing)} would not read "
                "back the same (e.g. a bandwidth that differs from its emission's)"
            )
    return text
