"""Channel rasters: aeronautical VHF channel names and AM broadcast carrier grids.

Aeronautical VHF (ICAO Annex 10, Volume V, chapter 4)
    The band 117.975-137 MHz carries air-ground voice (A3E) on 25 kHz and
    8.33 kHz (25/3 kHz) channel spacing. The lowest assignable 25 kHz channel
    is 118.000 MHz and the highest 136.975 MHz (memory). Channels are named by
    six digits (Annex 10, Volume II, since Amendment 80: "118.005" is spoken as
    "one one eight decimal zero zero five"):

    - a name ending in 00, 25, 50 or 75 (kHz digits) denotes the 25 kHz channel
      on that frequency, B;
    - B + 5 kHz, B + 10 kHz and B + 15 kHz denote the three 8.33 kHz channels
      on B, B + 8.333 kHz and B + 16.667 kHz (118.005 -> 118.0000 MHz,
      118.010 -> 118.0083 MHz, 118.015 -> 118.0167 MHz, 118.030 -> 118.0250 MHz);
    - names ending 20, 45, 70 and 95 are not used.

    This pairing is written from memory (see the project's REFERENCES.md): it
    could not be confirmed against the Annex's own table with the documents at
    hand, so the tests that use it say "(memory)".

AM broadcast (ITU Geneva 1975 plan for Regions 1 and 3; Region 2 practice)
    Regions 1 and 3: carriers on multiples of 9 kHz (531-1602 kHz in the band
    526.5-1606.5 kHz). Region 2: carriers on multiples of 10 kHz
    (530-1700 kHz) (memory).

Rasters known here, by name (:func:`parse_raster`): ``"25k"`` (multiples of
25 kHz), ``"8.33k"`` (25/3 kHz steps anchored on 118.000 MHz, so that every
25 kHz channel of the aeronautical band is also on it), ``"9k"`` and ``"10k"``.

Snapping a measured carrier to a raster (:meth:`Raster.snap_error`)
    A raster says where *assigned* carriers are; it does not move a carrier that
    is somewhere else. A measured carrier is put on a grid point only when

    - its emission class is one the raster is for (``Raster.classes``): the
      aeronautical 25 and 8.33 kHz rasters carry air-ground voice, A3E (ICAO
      Annex 10 Volume V); the 9 and 10 kHz rasters carry A3E sound broadcasting
      (ITU Geneva 1975 plan). A single-sideband or suppressed-carrier emission is
      never put on an AM raster: its frequency is not a carrier on that grid;
    - and it lies within ``Raster.snap_tolerance_hz`` of the grid point: 1 kHz
      for every raster here. That is wider than the frequency tolerances of the
      transmitters (aircraft 8.33 kHz equipment 5 ppm, 0.62 kHz at 124 MHz;
      MF broadcasting 10 Hz, RR Appendix 2; both memory) with room for a
      receiver's own calibration error, and narrow enough that a snap can never
      reach the neighbouring channel of the finest raster (half of 8.33 kHz is
      4.17 kHz) and keeps the carrier and at least 2 kHz of each sideband of a
      6 kHz A3E channel inside the channel tuned to the grid point.

    Anything else keeps its measured frequency (the survey warns, naming the
    emission and the reason).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from .errors import ParameterError
from .units import parse_frequency

__all__ = [
    "AERO_BAND_HZ",
    "AERO_LOWEST_CHANNEL_HZ",
    "AERO_HIGHEST_CHANNEL_HZ",
    "AeroChannel",
    "aero_channel",
    "aero_channel_frequency",
    "aero_channel_name",
    "aero_channel_names",
    "Raster",
    "RASTERS",
    "parse_raster",
    "raster_frequencies",
    "snap_to_raster",
]

#: Aeronautical mobile (R) VHF band, Hz (ICAO Annex 10 Volume V).
AERO_BAND_HZ: tuple[float, float] = (117.975e6, 137.0e6)
#: Lowest and highest assignable 25 kHz channel, Hz (memory).
AERO_LOWEST_CHANNEL_HZ = 118.000e6
AERO_HIGHEST_CHANNEL_HZ = 136.975e6

_KHZ_LOW = 118_000  # names as integer kHz
_KHZ_HIGH = 136_975
_STEP_833 = 25_000.0 / 3.0
# Largest distance (Hz) at which aero_channel_name still names a frequency:
# 1 kHz, about 7 ppm at 137 MHz, looser than the 5 ppm airborne transmitter
# tolerance for 8.33 kHz equipment (memory) and well inside half a channel.
_DEFAULT_TOLERANCE_HZ = 1000.0


@dataclass(frozen=True)
class AeroChannel:
    """One aeronautical VHF channel.

    Attributes
    ----------
    name : str
        Six-digit channel name, e.g. ``"118.010"``.
    frequency_hz : float
        Assigned (carrier) frequency in Hz, e.g. 118008333.33.
    spacing_hz : float
        Channel spacing in Hz: 25000.0 or 25000/3.
    """

    name: str
    frequency_hz: float
    spacing_hz: float


_NAME_RE = re.compile(r"^\s*(\d{3})(?:\.(\d{1,3}))?\s*$")


def _name_to_khz(name: str | float | int) -> int:
    """The channel name as a whole number of kHz (118.010 -> 118010)."""
    if isinstance(name, bool):
        raise ParameterError(f"channel name: expected text such as '118.010', got {name!r}")
    if isinstance(name, (int, float)):
        value = float(name)
        if not math.isfinite(value):
            raise ParameterError(f"channel name {name!r}: not a finite number of MHz")
        khz = round(value * 1000.0)
        if abs(value * 1000.0 - khz) > 1e-6:
            raise ParameterError(
                f"channel name {name!r}: a channel name has at most 3 decimals of MHz (whole kHz), e.g. 118.010"
            )
        return int(khz)
    if not isinstance(name, str):
        raise ParameterError(f"channel name: expected text such as '118.010', got {name!r}")
    match = _NAME_RE.match(name)
    if not match:
        raise ParameterError(
            f"channel name {name!r}: write the channel as MHz with up to 3 decimals, e.g. 118.010 or 121.5"
        )
    whole, frac = match.groups()
    return int(whole) * 1000 + int((frac or "").ljust(3, "0"))


def _khz_name(khz: int) -> str:
    return f"{khz // 1000}.{khz % 1000:03d}"


def aero_channel(name: str | float) -> AeroChannel:
    """Channel behind an aeronautical VHF channel name (ICAO Annex 10 pairing, memory).

    Parameters
    ----------
    name : str or float
        ``"118.000"``, ``"118.010"``, ``"121.5"`` or the float ``118.01``.

    Returns
    -------
    AeroChannel
        With the canonical six-digit name, the frequency (Hz) and the spacing.

    Raises
    ------
    ParameterError
        If the name is not whole kHz, lies outside 118.000-136.990, or is not
        a channel name (the kHz digits must be B, B+5, B+10 or B+15 for a
        25 kHz base B; names ending 20, 45, 70, 95 are unused).
    """
    khz = _name_to_khz(name)
    base = khz - khz % 25
    step = khz - base  # 0, 5, 10, 15 are names; 20 is unused; others are not names
    if not (_KHZ_LOW <= base <= _KHZ_HIGH):
        raise ParameterError(
            f"channel name {name!r}: outside the aeronautical VHF channels 118.000-136.990 "
            "(ICAO Annex 10 Volume V, band 117.975-137 MHz)"
        )
    if step == 20:
        raise ParameterError(
            f"channel name {name!r}: names ending in 20, 45, 70 or 95 are not used (ICAO 8.33 kHz naming)"
        )
    if step % 5 != 0:
        raise ParameterError(
            f"channel name {name!r}: not a channel name; the kHz digits must end in 00, 05, 10, 15, 25, 30, 35, "
            "40, 50, 55, 60, 65, 75, 80, 85 or 90"
        )
    canonical = _khz_name(khz)
    if step == 0:
        return AeroChannel(canonical, base * 1000.0, 25_000.0)
    index = step // 5 - 1  # 0, 1, 2 -> B, B + 25/3 kHz, B + 50/3 kHz
    return AeroChannel(canonical, base * 1000.0 + index * 25_000.0 / 3.0, _STEP_833)


def aero_channel_frequency(name: str | float) -> float:
    """Frequency (Hz) of an aeronautical VHF channel name: ``"118.010"`` -> 118008333.33.

    See :func:`aero_channel` for the rules and errors.
    """
    return aero_channel(name).frequency_hz


def aero_channel_name(freq_hz: float | str, spacing: str = "8.33k", tolerance_hz: float = _DEFAULT_TOLERANCE_HZ) -> str:
    """Name of the aeronautical VHF channel nearest to a frequency.

    Parameters
    ----------
    freq_hz : float or str
        Frequency in Hz (SI text such as ``"118.0083M"`` accepted).
    spacing : str
        ``"8.33k"`` names the 8.33 kHz channel (118.0 MHz -> ``"118.005"``);
        ``"25k"`` names the 25 kHz channel (118.0 MHz -> ``"118.000"``).
    tolerance_hz : float
        How far (Hz) the frequency may lie from the channel; default 1 kHz.

    Returns
    -------
    str
        Six-digit channel name.

    Raises
    ------
    ParameterError
        If the spacing is not one of the two, the frequency is off the raster
        by more than the tolerance, or the nearest channel is outside
        118.000-136.990.
    """
    freq = parse_frequency(freq_hz, "frequency")
    if isinstance(tolerance_hz, bool) or not isinstance(tolerance_hz, (int, float)) or not (
        math.isfinite(tolerance_hz) and tolerance_hz >= 0
    ):
        raise ParameterError(f"tolerance_hz: must be a finite number of Hz >= 0, got {tolerance_hz!r}")
    raster = parse_raster(spacing)
    if raster.name not in ("25k", "8.33k"):
        raise ParameterError(f"spacing: {spacing!r} is not an aeronautical spacing; use '25k' or '8.33k'")
    index = raster.index(freq)
    nearest = raster.frequency(index)
    if abs(freq - nearest) > tolerance_hz:
        raise ParameterError(
            f"frequency {freq!r} Hz: {abs(freq - nearest):.1f} Hz from the nearest {raster.name} channel "
            f"({nearest:.1f} Hz), more than the tolerance of {tolerance_hz:g} Hz"
        )
    if raster.name == "25k":
        khz = int(index) * 25
        if not (_KHZ_LOW <= khz <= _KHZ_HIGH):
            raise ParameterError(
                f"frequency {freq!r} Hz: nearest 25 kHz channel {_khz_name(khz)} is outside 118.000-136.975 MHz"
            )
        return _khz_name(khz)
    base = _KHZ_LOW + (index // 3) * 25
    khz = base + (index % 3 + 1) * 5
    if not (_KHZ_LOW <= base <= _KHZ_HIGH):
        raise ParameterError(
            f"frequency {freq!r} Hz: nearest 8.33 kHz channel is outside the aeronautical band 117.975-137 MHz"
        )
    return _khz_name(int(khz))


def aero_channel_names(spacing: str = "8.33k") -> tuple[str, ...]:
    """Every channel name of one spacing in the aeronautical VHF band, lowest first.

    ``"25k"``: 118.000, 118.025 ... 136.975 (760 names); ``"8.33k"``:
    118.005, 118.010, 118.015, 118.030 ... 136.990 (2280 names).
    """
    raster = parse_raster(spacing)
    bases = range(_KHZ_LOW, _KHZ_HIGH + 1, 25)
    if raster.name == "25k":
        return tuple(_khz_name(b) for b in bases)
    if raster.name == "8.33k":
        return tuple(_khz_name(b + s) for b in bases for s in (5, 10, 15))
    raise ParameterError(f"spacing: {spacing!r} is not an aeronautical spacing; use '25k' or '8.33k'")


@dataclass(frozen=True)
class Raster:
    """A regular grid of carrier frequencies: ``anchor_hz + k * step_hz`` for whole k.

    Attributes
    ----------
    name : str
        ``"25k"``, ``"8.33k"``, ``"9k"`` or ``"10k"``.
    step_hz : float
        Spacing in Hz (25/3 kHz for ``"8.33k"``).
    anchor_hz : float
        A frequency on the grid, Hz (118.000 MHz for ``"8.33k"``, else 0).
    description : str
        Where the raster is used.
    snap_tolerance_hz : float
        Farthest a measured carrier may lie from a grid point to be put on it, Hz
        (see the module notes).
    classes : tuple of str
        Emission classes (ITU designator symbols, e.g. ``"A3E"``) whose carriers the
        raster is for; others are never snapped to it.
    """

    name: str
    step_hz: float
    anchor_hz: float
    description: str
    snap_tolerance_hz: float = 1000.0
    classes: tuple[str, ...] = ("A3E",)

    def index(self, freq_hz: float) -> int:
        """Whole k of the grid point nearest to ``freq_hz`` (ties go up)."""
        return int(math.floor((freq_hz - self.anchor_hz) / self.step_hz + 0.5))

    def frequency(self, index: int) -> float:
        """Grid point k in Hz, computed as anchor + k * step in float64."""
        if self.name == "8.33k":
            # (k * 25000) / 3 keeps whole multiples of 25 kHz exact.
            return self.anchor_hz + (index * 25_000.0) / 3.0
        return self.anchor_hz + index * self.step_hz

    def snap_error(self, freq_hz: float, emission_class: str) -> str | None:
        """Why a carrier may not be put on this raster, or None when it may.

        Parameters
        ----------
        freq_hz : float
            Measured carrier frequency, Hz (absolute).
        emission_class : str
            Its class, e.g. ``"A3E"`` or ``"J3E"``.

        Returns
        -------
        str or None
            None when the class is one of :attr:`classes` and the nearest grid point is
            within :attr:`snap_tolerance_hz`; otherwise the reason, as a phrase.
        """
        if emission_class not in self.classes:
            return f"the {self.name} raster is for {'/'.join(self.classes)} carriers, not {emission_class}"
        nearest = self.frequency(self.index(freq_hz))
        off_hz = freq_hz - nearest
        if abs(off_hz) > self.snap_tolerance_hz:
            return (f"{off_hz:+.1f} Hz from the nearest {self.name} point {nearest / 1e6:.6f} MHz, "
                    f"more than the {self.snap_tolerance_hz:g} Hz snap tolerance")
        return None


#: The rasters iqsift knows, by name.
RASTERS: dict[str, Raster] = {
    "25k": Raster("25k", 25_000.0, 0.0, "25 kHz channels (aeronautical VHF, ICAO Annex 10 Volume V)"),
    "8.33k": Raster(
        "8.33k", _STEP_833, 118.0e6, "8.33 kHz (25/3 kHz) channels, aeronautical VHF, grid through 118.000 MHz"
    ),
    "9k": Raster("9k", 9_000.0, 0.0, "AM broadcast carriers on multiples of 9 kHz (ITU Regions 1 and 3)"),
    "10k": Raster("10k", 10_000.0, 0.0, "AM broadcast carriers on multiples of 10 kHz (ITU Region 2)"),
}

_RASTER_RE = re.compile(r"^\s*(25|8\.33|9|10)\s*k(?:hz)?\s*$", re.IGNORECASE)


def parse_raster(text: str | Raster) -> Raster:
    """Read a raster name: ``"25k"``, ``"8.33k"``, ``"9k"``, ``"10k"`` (``"kHz"`` and spaces allowed).

    Raises
    ------
    ParameterError
        For any other text.
    """
    if isinstance(text, Raster):
        return text
    match = _RASTER_RE.match(text) if isinstance(text, str) else None
    if not match:
        raise ParameterError(f"raster: {text!r} is not a known raster; use one of {', '.join(RASTERS)}")
    return RASTERS[match.group(1) + "k"]


_MAX_POINTS = 10_000_000


def raster_frequencies(spacing: str | Raster, lo_hz: float | str, hi_hz: float | str) -> np.ndarray:
    """All grid points of a raster from ``lo_hz`` to ``hi_hz`` inclusive (Hz, float64, ascending).

    A point within 1 mHz outside an edge counts as inside, so that
    ``raster_frequencies("8.33k", 118e6, 118.0166667e6)`` includes its end.

    Raises
    ------
    ParameterError
        For an unknown raster, unreadable edges, ``lo_hz > hi_hz``, or more
        than ten million points.
    """
    raster = parse_raster(spacing)
    lo = parse_frequency(lo_hz, "lo_hz")
    hi = parse_frequency(hi_hz, "hi_hz")
    if lo > hi:
        raise ParameterError(f"raster range: lo_hz {lo_hz!r} is above hi_hz {hi_hz!r}")
    eps = 1e-3 / raster.step_hz
    first = math.ceil((lo - raster.anchor_hz) / raster.step_hz - eps)
    last = math.floor((hi - raster.anchor_hz) / raster.step_hz + eps)
    count = last - first + 1
    if count > _MAX_POINTS:
        raise ParameterError(
            f"raster range: {count} points of the {raster.name} raster from {lo_hz!r} to {hi_hz!r}; limit is {_MAX_POINTS}"
        )
    if count <= 0:
        return np.zeros(0, dtype=np.float64)
    k = np.arange(first, last + 1, dtype=np.float64)
    if raster.name == "8.33k":
        return raster.anchor_hz + (k * 25_000.0) / 3.0
    return raster.anchor_hz + k * raster.step_hz


def snap_to_raster(freq_hz: float | str, raster: str | Raster, max_offset_hz: float | None = None) -> float:
    """Nearest grid point (Hz) of a raster to a frequency.

    Parameters
    ----------
    freq_hz : float or str
        Frequency in Hz (SI text accepted).
    raster : str or Raster
        ``"25k"``, ``"8.33k"``, ``"9k"`` or ``"10k"``.
    max_offset_hz : float, optional
        If given, refuse a frequency farther than this from the grid.

    Raises
    ------
    ParameterError
        For an unknown raster, an unreadable frequency, or one too far off.
    """
    grid = parse_raster(raster)
    freq = parse_frequency(freq_hz, "frequency")
    snapped = grid.frequency(grid.index(freq))
    if max_offset_hz is not None:
        if isinstance(max_offset_hz, bool) or not isinstance(max_offset_hz, (int, float)) or not (
            math.isfinite(max_offset_hz) and max_offset_hz >= 0
        ):
            raise ParameterError(f"max_offset_hz: must be a finite number of Hz >= 0, got {max_offset_hz!r}")
        if abs(freq - snapped) > max_offset_hz:
            raise ParameterError(
                f"frequency {freq_hz!r}: {abs(freq - snapped):.1f} Hz from the {grid.name} raster "
                f"(nearest {snapped:.1f} Hz), more than {max_offset_hz:g} Hz"
            )
    return snapped
