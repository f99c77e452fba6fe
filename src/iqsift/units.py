"""Parsing and formatting of frequencies, rates, bandwidths and times.

Frequencies, bandwidths and sample rates are given in hertz, either as numbers
or as text with an SI prefix: ``"118.275M"``, ``"8.33k"``, ``"2.4e6"``,
``"6 kHz"``, ``"1.2GHz"``. The prefixes are k (10^3), M (10^6) and G (10^9)
(BIPM, *The International System of Units*, 9th ed., table 7). A lower-case
``m`` (milli) is refused: a millihertz radio frequency is almost always a
mistyped ``M``. ``"mhz"`` spelt out with its unit is read as MHz.

Times are seconds (``"1.5"``, ``"1.5s"``, ``"250ms"``) or a sample count
(``"48000 samples"``, ``"48000sa"``).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from .errors import ParameterError

__all__ = [
    "parse_frequency",
    "parse_positive_hz",
    "parse_time",
    "TimeSpec",
    "format_hz",
]

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_FREQ_RE = re.compile(rf"^\s*({_NUMBER})\s*([a-zA-Z]*)\s*$")
_SCALE = {"": 1.0, "hz": 1.0, "k": 1e3, "khz": 1e3, "m": 1e6, "mhz": 1e6, "g": 1e9, "ghz": 1e9}


def parse_frequency(value: str | float | int, name: str = "frequency") -> float:
    """Parse a frequency (Hz) that may carry an SI prefix.

    Parameters
    ----------
    value : str or float
        ``118275000``, ``"118.275M"``, ``"118.275 MHz"``, ``"-2.5k"`` ...
    name : str
        What the value is, used in the error message (e.g. ``"--freq"``).

    Returns
    -------
    float
        The frequency in Hz (may be negative, e.g. an offset).

    Raises
    ------
    ParameterError
        If the text is not a number with an optional k/M/G prefix and Hz unit.
    """
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected a frequency in Hz, got {value!r}")
    if isinstance(value, (int, float)):
        result = float(value)
    else:
        text = str(value).replace("_", "")
        match = _FREQ_RE.match(text)
        if not match:
            raise ParameterError(
                f"{name}: cannot read {value!r} as a frequency; write e.g. 118.275M, 8.33k, 2.4e6 or '6 kHz'"
            )
        number, suffix = match.groups()
        if suffix == "m":
            raise ParameterError(
                f"{name}: {value!r} uses 'm' (milli); write 'M' for mega, e.g. {number}M"
            )
        key = suffix.lower()
        if key not in _SCALE:
            raise ParameterError(
                f"{name}: unknown unit {suffix!r} in {value!r}; use Hz with an optional k, M or G prefix"
            )
        result = float(number) * _SCALE[key]
    if not math.isfinite(result):
        raise ParameterError(f"{name}: {value!r} is not a finite frequency")
    return result


def parse_positive_hz(value: str | float | int, name: str) -> float:
    """Parse a strictly positive frequency, bandwidth or sample rate (Hz).

    Raises
    ------
    ParameterError
        If the value cannot be parsed or is zero or negative.
    """
    result = parse_frequency(value, name)
    if result <= 0:
        raise ParameterError(f"{name}: must be greater than 0 Hz, got {value!r}")
    return result


@dataclass(frozen=True)
class TimeSpec:
    """A time given either in seconds or as a sample count.

    Attributes
    ----------
    seconds : float or None
        Time in seconds, when given that way.
    samples : int or None
        Sample count, when given that way.
    """

    seconds: float | None = None
    samples: int | None = None

    def to_samples(self, sample_rate_hz: float) -> int:
        """The time as a whole number of samples at ``sample_rate_hz`` (rounded to nearest)."""
        if self.samples is not None:
            return self.samples
        assert self.seconds is not None
        return int(round(self.seconds * sample_rate_hz))

    def to_seconds(self, sample_rate_hz: float) -> float:
        """The time in seconds, a sample count taken at ``sample_rate_hz`` (samples/s)."""
        if self.seconds is not None:
            return self.seconds
        assert self.samples is not None
        return self.samples / sample_rate_hz


_TIME_RE = re.compile(rf"^\s*({_NUMBER})\s*(s|ms|us|sa|samples?|)\s*$", re.IGNORECASE)


def parse_time(value: str | float | int | TimeSpec, name: str = "time") -> TimeSpec:
    """Parse a non-negative time: seconds (``"1.5"``, ``"250ms"``) or samples (``"48000sa"``).

    Raises
    ------
    ParameterError
        If the text cannot be read, is negative, or a sample count is fractional.
    """
    if isinstance(value, TimeSpec):
        return value
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected a time, got {value!r}")
    if isinstance(value, (int, float)):
        seconds = float(value)
        unit = "s"
    else:
        match = _TIME_RE.match(str(value))
        if not match:
            raise ParameterError(
                f"{name}: cannot read {value!r} as a time; write seconds (1.5, 1.5s, 250ms) or samples (48000sa)"
            )
        number, unit = match.groups()
        unit = unit.lower()
        if unit in ("sa", "sample", "samples"):
            count = float(number)
            if count < 0 or count != int(count):
                raise ParameterError(f"{name}: a sample count must be a whole number >= 0, got {value!r}")
            return TimeSpec(samples=int(count))
        seconds = float(number) * {"": 1.0, "s": 1.0, "ms": 1e-3, "us": 1e-6}[unit]
    if not math.isfinite(seconds) or seconds < 0:
        raise ParameterError(f"{name}: must be a finite time >= 0 s, got {value!r}")
    return TimeSpec(seconds=seconds)


def format_hz(value: float | None, digits: int = 6) -> str:
    """Format a frequency with the SI prefix that suits its size (``"118.275000 MHz"``).

    ``digits`` is the number of decimals shown after the prefixed unit.
    """
    if value is None:
        return "unknown"
    magnitude = abs(value)
    for scale, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if magnitude >= scale:
            return f"{value / scale:.{digits}f} {prefix}Hz"
    return f"{value:.1f} Hz"
