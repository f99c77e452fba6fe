"""ITU emission designators: parsing, necessary bandwidth and detector choice.

An emission designator such as ``6K00A3E`` or ``2K70J3EJN`` is the necessary
bandwidth in four characters followed by the class of emission (three symbols,
optionally a fourth and fifth), as laid down in the ITU Radio Regulations,
Appendix 1 ("Classification of emissions and necessary bandwidths"). The
formulae for the necessary bandwidth are those of Recommendation ITU-R SM.1138
(the same table appears in the Radio Regulations' annex on necessary
bandwidths).

Bandwidth code (Appendix 1, Section I, 2)
    Three numerals and one letter; the letter stands in place of the decimal
    point and gives the unit: H (Hz), K (kHz), M (MHz), G (GHz). The first
    character is never 0, K, M or G. Bandwidths from 0.001 Hz to 999 Hz are
    written in Hz, 1.00 kHz to 999 kHz in kHz, and so on. Examples from the
    Appendix: 0.002 Hz = H002, 0.1 Hz = H100, 25.3 Hz = 25H3, 400 Hz = 400H,
    2.4 kHz = 2K40, 6 kHz = 6K00, 12.5 kHz = 12K5, 180.4 kHz = 180K,
    180.5 kHz = 181K, 1.25 MHz = 1M25, 2 MHz = 2M00, 10 MHz = 10M0,
    202 MHz = 202M, 5.65 GHz = 5G65.

What iqsift demodulates
    iqsift pulls AM-family analogue voice out of captures, so it handles the
    classes whose first symbol is

    - ``A`` double sideband (full carrier; DSB with suppressed carrier is
      written with the same symbol), default detector ``"envelope"``; the
      ``"coherent"`` and ``"dsb"`` detectors (and ``"usb"``/``"lsb"`` to take
      one sideband) are available on request;
    - ``H`` single sideband, full carrier: default ``"usb"``; ``"lsb"``,
      ``"envelope"`` and ``"coherent"`` on request;
    - ``R`` single sideband, reduced or variable carrier: ``"usb"`` or ``"lsb"``;
    - ``J`` single sideband, suppressed carrier: ``"usb"`` or ``"lsb"``;
    - ``B`` independent sidebands: default ``"isb"`` (both sidebands, two
      audio channels: left = lower, right = upper); ``"usb"`` or ``"lsb"``
      to take one. ``B7E`` is accepted as well as ``B8E``: its sidebands are
      demodulated as telephony channels all the same.

    with second symbol ``3`` (a single channel of analogue information) or
    ``8`` (two or more channels of analogue information; iqsift gives the
    composite audio and does not separate frequency-multiplexed
    sub-channels), and third symbol ``E`` (telephony, including sound
    broadcasting). Second symbol ``9`` (a composite of analogue and digital
    channels) and the digital natures ``1``, ``2`` and ``7`` are refused, as
    are all angle-modulated, pulse and other first symbols.

Detector names used across iqsift are in :data:`MODES`.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass
from decimal import ROUND_HALF_UP, Decimal, InvalidOperation
from typing import Any, Sequence

from .modes import MODES
from .errors import ParameterError

__all__ = [
    "MODES",
    "Emission",
    "parse_bandwidth_code",
    "format_bandwidth_code",
    "parse_emission",
    "parse_emission_class",
    "allowed_modes",
    "necessary_bandwidth",
    "designator",
    "HANDLED_CLASSES",
]


# Radio Regulations Appendix 1, Section II.
_FIRST = {
    "N": "unmodulated carrier",
    "A": "double sideband",
    "H": "single sideband, full carrier",
    "R": "single sideband, reduced or variable carrier",
    "J": "single sideband, suppressed carrier",
    "B": "independent sidebands",
    "C": "vestigial sideband",
    "F": "frequency modulation",
    "G": "phase modulation",
    "D": "amplitude and angle modulation",
    "P": "unmodulated pulses",
    "K": "pulses modulated in amplitude",
    "L": "pulses modulated in width/duration",
    "M": "pulses modulated in position/phase",
    "Q": "pulses with the carrier angle-modulated",
    "V": "combination of pulse modulations",
    "W": "combination of amplitude, angle and pulse modulation",
    "X": "other modulation",
}
_SECOND = {
    "0": "no modulating signal",
    "1": "single channel of digital information, no modulating sub-carrier",
    "2": "single channel of digital information, with a modulating sub-carrier",
    "3": "single channel of analogue information",
    "7": "two or more channels of digital information",
    "8": "two or more channels of analogue information",
    "9": "composite of analogue and digital channels",
    "X": "other",
}
_THIRD = {
    "N": "no information",
    "A": "aural telegraphy",
    "B": "automatic telegraphy",
    "C": "facsimile",
    "D": "data, telemetry, telecommand",
    "E": "telephony (including sound broadcasting)",
    "F": "television (video)",
    "W": "combination",
    "X": "other",
}
# Optional fourth (details of signal) and fifth (nature of multiplexing)
# symbols, Appendix 1 Section II (memory): accepted and otherwise ignored.
_FOURTH = set("ABCDEFGHJKLMNWX")
_FIFTH = set("CFNTWX")

# Detector choice per first symbol: (default mode, allowed modes, default audio low edge in Hz).
# The 300 Hz low edge for A and J telephony is the lowest modulating frequency of
# ITU-R SM.1138's J3E example (M - 300 Hz); for A3E it is common practice for voice.
# H and R keep the band down to 0 Hz because their necessary bandwidth is M
# (SM.1138), i.e. the sideband is taken to start at the carrier.
_DETECTORS: dict[str, tuple[str, tuple[str, ...], float]] = {
    "A": ("envelope", ("envelope", "coherent", "dsb", "usb", "lsb"), 300.0),
    "H": ("usb", ("usb", "lsb", "envelope", "coherent"), 0.0),
    "R": ("usb", ("usb", "lsb"), 0.0),
    "J": ("usb", ("usb", "lsb"), 300.0),
    "B": ("isb", ("isb", "usb", "lsb"), 0.0),
}
_NATURES_HANDLED = ("3", "8")
_INFORMATION_HANDLED = ("E",)

#: Classes iqsift demodulates (first, second and third symbol).
HANDLED_CLASSES: tuple[str, ...] = tuple(
    f + n + i for f in _DETECTORS for n in _NATURES_HANDLED for i in _INFORMATION_HANDLED
) + ("B7E",)

_HANDLED_TEXT = (
    "it handles A3E, H3E, R3E, J3E, B8E (AM family, analogue telephony; "
    "first symbol A/H/R/J/B, second 3 or 8, third E)"
)

_UNIT_SCALE = {"H": Decimal(1), "K": Decimal(10) ** 3, "M": Decimal(10) ** 6, "G": Decimal(10) ** 9}
_UNIT_ORDER = "HKMG"


def _rule_error(code: object, rule: str) -> ParameterError:
    return ParameterError(f"bandwidth code {code!r}: {rule}")


def parse_bandwidth_code(code: str) -> float:
    """Read the four-character necessary-bandwidth code of an emission designator.

    Parameters
    ----------
    code : str
        Three numerals and one unit letter (H, K, M, G; lower case accepted)
        standing in place of the decimal point, e.g. ``"2K40"``, ``"12K5"``,
        ``"181K"``, ``"H100"`` (ITU Radio Regulations, Appendix 1, Section I).

    Returns
    -------
    float
        The bandwidth in Hz (``"2K40"`` -> 2400.0, ``"H100"`` -> 0.1).

    Raises
    ------
    ParameterError
        If the code is not four characters, has no or more than one unit
        letter, starts with 0, K, M or G, or holds anything but digits besides
        the unit letter, or denotes 0 Hz.
    """
    if not isinstance(code, str):
        raise _rule_error(code, "must be text such as '6K00'")
    text = code.strip().upper()
    if len(text) != 4:
        raise _rule_error(code, f"must be exactly 4 characters (3 numerals and one of H, K, M, G), got {len(text)}")
    letters = [i for i, ch in enumerate(text) if ch in _UNIT_SCALE]
    if len(letters) != 1:
        what = "no unit letter" if not letters else "more than one unit letter"
        raise _rule_error(code, f"has {what}; exactly one of H, K, M, G must stand in place of the decimal point")
    pos = letters[0]
    digits = text[:pos] + text[pos + 1 :]
    if not (len(digits) == 3 and all("0" <= ch <= "9" for ch in digits)):
        raise _rule_error(code, "must hold three numerals (0-9) besides the unit letter")
    if text[0] in "0KMG":
        raise _rule_error(code, "the first character is never 0, K, M or G (Radio Regulations Appendix 1)")
    unit = text[pos]
    value = Decimal(text[:pos] + "." + text[pos + 1 :]) if pos < 3 else Decimal(text[:3])
    if value == 0:
        raise _rule_error(code, "denotes 0 Hz; a necessary bandwidth is greater than 0")
    return float(value * _UNIT_SCALE[unit])


def format_bandwidth_code(hz: float) -> str:
    """Write a bandwidth (Hz) as the four-character code of an emission designator.

    The value is rounded to three significant figures, halves rounded up as
    in the Appendix's examples (180.4 kHz -> ``"180K"``, 180.5 kHz ->
    ``"181K"``), and written in the unit that puts 1 to 3 numerals before the
    letter. Below 1 Hz the code is ``H`` followed by thousandths of a hertz
    (0.1 Hz -> ``"H100"``, 0.002 Hz -> ``"H002"``).

    Parameters
    ----------
    hz : float
        Bandwidth in Hz, from 0.0005 Hz (rounds to ``"H001"``) to just under
        999.5 GHz.

    Returns
    -------
    str
        The code, e.g. ``"2K70"``.

    Raises
    ------
    ParameterError
        If the value is not a finite number within that range.
    """
    if isinstance(hz, bool):
        raise ParameterError(f"bandwidth: expected a number of Hz, got {hz!r}")
    try:
        value = Decimal(repr(float(hz)))
    except (TypeError, ValueError, OverflowError, InvalidOperation):
        raise ParameterError(f"bandwidth: expected a number of Hz, got {hz!r}") from None
    if not value.is_finite() or value <= 0:
        raise ParameterError(f"bandwidth: must be a finite number of Hz greater than 0, got {hz!r}")
    # Three significant figures, half up.
    rounded = value.quantize(Decimal(1).scaleb(value.adjusted() - 2), rounding=ROUND_HALF_UP)
    if rounded < 1:
        # Below 1 Hz the code holds thousandths of a hertz after the letter H.
        milli = value.quantize(Decimal("0.001"), rounding=ROUND_HALF_UP)
        if milli == 0:
            raise ParameterError(
                f"bandwidth: {hz!r} Hz is below 0.001 Hz, the smallest bandwidth an emission code can state"
            )
        if milli < 1:
            return "H" + f"{int(milli * 1000):03d}"
        rounded = Decimal("1.00")
    exponent = rounded.adjusted()  # 10**exponent <= rounded < 10**(exponent + 1)
    unit_index = exponent // 3
    if unit_index >= len(_UNIT_ORDER):
        raise ParameterError(f"bandwidth: {hz!r} Hz is above 999 GHz, the largest an emission code can state")
    digits = f"{int(rounded.scaleb(2 - exponent)):03d}"
    before = exponent - 3 * unit_index + 1  # numerals before the unit letter, 1..3
    return digits[:before] + _UNIT_ORDER[unit_index] + digits[before:]


@dataclass(frozen=True)
class Emission:
    """A parsed emission designator (or class of emission).

    Attributes
    ----------
    code : str
        The designator in upper case as given, e.g. ``"2K70J3EJN"``, or the
        class alone (``"J3E"``) when parsed by :func:`parse_emission_class`.
    bandwidth_hz : float or None
        Necessary bandwidth in Hz from the four-character code; None for a
        class given without one.
    modulation : str
        First symbol: type of modulation of the main carrier (``"A"``, ``"J"`` ...).
    nature : str
        Second symbol: nature of the modulating signal (``"3"``, ``"8"``).
    information : str
        Third symbol: type of information (``"E"`` telephony).
    extra : str
        Optional fourth and fifth symbols (details of signal, multiplexing);
        accepted and ignored.
    mode : str
        Detector to use, one of :data:`MODES`: the class's default unless a
        mode was asked for.
    audio_low_hz : float
        Lower edge of the audio band in Hz (300 Hz for A and J telephony,
        0 Hz for H, R and B).
    """

    code: str
    bandwidth_hz: float | None
    modulation: str
    nature: str
    information: str
    extra: str
    mode: str
    audio_low_hz: float

    @property
    def emission_class(self) -> str:
        """The three basic symbols, e.g. ``"A3E"``."""
        return self.modulation + self.nature + self.information

    @property
    def description(self) -> str:
        """Plain-language meaning of the three basic symbols."""
        return (
            f"{_FIRST[self.modulation]}; {_SECOND[self.nature]}; {_THIRD[self.information]}"
        )

    def to_dict(self) -> dict:
        """The fields as a JSON-ready dict, plus ``emission_class``."""
        result = asdict(self)
        result["emission_class"] = self.emission_class
        return result


def allowed_modes(emission_class: str) -> tuple[str, ...]:
    """Detectors that make sense for a class of emission (first symbol decides).

    Raises
    ------
    ParameterError
        If iqsift does not demodulate the class.
    """
    emission = parse_emission_class(emission_class)
    return _DETECTORS[emission.modulation][1]


_CLASS_RE = re.compile(r"^([A-Z])([0-9A-Z])([A-Z])([A-Z]{0,2})$")


def _parse_class(text: str, shown: str, bandwidth_hz: float | None, mode: str | None) -> Emission:
    match = _CLASS_RE.match(text)
    if not match:
        raise ParameterError(
            f"emission {shown!r}: the class must be three symbols (letter, digit or X, letter) "
            "plus up to two optional letters, e.g. A3E or J3EJN"
        )
    first, second, third, extra = match.groups()
    if first not in _FIRST:
        raise ParameterError(f"emission {shown!r}: {first!r} is not a first symbol of Radio Regulations Appendix 1")
    if second not in _SECOND:
        raise ParameterError(
            f"emission {shown!r}: {second!r} is not a second symbol of Radio Regulations Appendix 1 "
            "(0, 1, 2, 3, 7, 8, 9 or X)"
        )
    if third not in _THIRD:
        raise ParameterError(f"emission {shown!r}: {third!r} is not a third symbol of Radio Regulations Appendix 1")
    if extra and extra[0] not in _FOURTH:
        raise ParameterError(f"emission {shown!r}: {extra[0]!r} is not an optional fourth symbol (details of signal)")
    if len(extra) > 1 and extra[1] not in _FIFTH:
        raise ParameterError(
            f"emission {shown!r}: {extra[1]!r} is not an optional fifth symbol (nature of multiplexing: C, F, N, T, W, X)"
        )
    cls = first + second + third
    if first not in _DETECTORS:
        raise ParameterError(
            f"emission {shown}: class {cls} ({_FIRST[first]}) cannot be demodulated by iqsift; {_HANDLED_TEXT}"
        )
    if second not in _NATURES_HANDLED and not (first == "B" and second == "7"):
        raise ParameterError(
            f"emission {shown}: class {cls} ({_SECOND[second]}) cannot be demodulated by iqsift; {_HANDLED_TEXT}"
        )
    if third not in _INFORMATION_HANDLED:
        raise ParameterError(
            f"emission {shown}: class {cls} ({_THIRD[third]}) cannot be demodulated by iqsift; {_HANDLED_TEXT}"
        )
    default_mode, modes, audio_low = _DETECTORS[first]
    if mode is None:
        chosen = default_mode
    else:
        chosen = mode.strip().lower() if isinstance(mode, str) else mode
        if chosen not in MODES:
            raise ParameterError(f"mode: {mode!r} is not a detector; use one of {', '.join(MODES)}")
        if chosen not in modes:
            raise ParameterError(
                f"mode: {chosen!r} does not suit emission {shown} ({_FIRST[first]}); use one of {', '.join(modes)}"
            )
    return Emission(
        code=text if bandwidth_hz is None else shown,
        bandwidth_hz=bandwidth_hz,
        modulation=first,
        nature=second,
        information=third,
        extra=extra,
        mode=chosen,
        audio_low_hz=audio_low,
    )


def parse_emission(code: str, mode: str | None = None) -> Emission:
    """Parse a full emission designator: bandwidth code plus class of emission.

    Parameters
    ----------
    code : str
        E.g. ``"6K00A3E"``, ``"2K70J3E"``, ``"2k70j3ejn"`` (case is ignored;
        optional fourth and fifth symbols are accepted and ignored).
    mode : str, optional
        Detector asked for (one of :data:`MODES`); it must suit the class
        (e.g. ``"dsb"`` for an A3E emission whose carrier is suppressed,
        ``"lsb"`` for J3E on the lower sideband). Default: the class's default.

    Returns
    -------
    Emission

    Raises
    ------
    ParameterError
        If the bandwidth code or the class is malformed, the class is one
        iqsift does not demodulate, or the mode does not suit it.
    """
    if not isinstance(code, str):
        raise ParameterError(f"emission: expected a designator such as '6K00A3E', got {code!r}")
    text = code.strip().upper()
    if len(text) < 7 or len(text) > 9:
        raise ParameterError(
            f"emission {code!r}: a designator is a 4-character bandwidth code and 3 to 5 class symbols, "
            "e.g. 6K00A3E"
        )
    try:
        bandwidth = parse_bandwidth_code(text[:4])
    except ParameterError as exc:
        raise ParameterError(f"emission {code!r}: {exc}") from None
    return _parse_class(text[4:], text, bandwidth, mode)


def parse_emission_class(emission_class: str, mode: str | None = None) -> Emission:
    """Parse a class of emission without the bandwidth code, e.g. ``"A3E"`` or ``"J3EJN"``.

    The returned :class:`Emission` has ``bandwidth_hz=None``. Same rules and
    errors as :func:`parse_emission`.
    """
    if not isinstance(emission_class, str):
        raise ParameterError(f"emission class: expected symbols such as 'A3E', got {emission_class!r}")
    text = emission_class.strip().upper()
    return _parse_class(text, text, None, mode)


def _positive_finite(value: Any, name: str) -> float:
    if isinstance(value, bool):
        raise ParameterError(f"{name}: expected a number of Hz, got {value!r}")
    try:
        result = float(value)
    except (TypeError, ValueError, OverflowError):
        raise ParameterError(f"{name}: expected a number of Hz, got {value!r}") from None
    if not math.isfinite(result) or result <= 0:
        raise ParameterError(f"{name}: must be a finite frequency greater than 0 Hz, got {value!r}")
    return result


def necessary_bandwidth(
    emission_class: str,
    highest_mod_hz: float | Sequence[float],
    lowest_mod_hz: float = 0.0,
    *,
    channels: int = 1,
) -> float:
    """Necessary bandwidth Bn (Hz) of an AM-family telephony emission, ITU-R SM.1138.

    Formulas (Recommendation ITU-R SM.1138, annex 1, part on amplitude
    modulation; M = highest modulating frequency):

    - ``A3E`` double sideband telephony or sound broadcasting: Bn = 2M;
    - ``H3E`` single sideband, full carrier: Bn = M;
    - ``R3E`` single sideband, reduced carrier: Bn = M;
    - ``J3E`` single sideband, suppressed carrier: Bn = M - lowest modulating
      frequency;
    - ``J8E`` several telephony channels on a suppressed-carrier single
      sideband: Bn = Nc * M - lowest modulating frequency of the lowest channel
      (``channels`` = Nc);
    - ``B8E`` independent sidebands: Bn = sum of M of the sidebands. Give
      ``highest_mod_hz`` as one M per sideband, or a single M that both
      sidebands share (Bn = 2M).

    Parameters
    ----------
    emission_class : str
        One of the classes above (case ignored; a bandwidth code in front and
        optional 4th/5th symbols are allowed and ignored).
    highest_mod_hz : float or sequence of float
        M in Hz (a sequence only for B8E).
    lowest_mod_hz : float
        Lowest modulating frequency in Hz (J3E, J8E); must be below M.
    channels : int
        Number of channels Nc (J8E only).

    Returns
    -------
    float
        Bn in Hz; :func:`format_bandwidth_code` writes it as a designator's
        first four characters.

    Raises
    ------
    ParameterError
        For a class without a formula here, or non-positive / non-finite
        frequencies, or a lowest frequency not below M.
    """
    if not isinstance(emission_class, str):
        raise ParameterError(f"emission class: expected symbols such as 'A3E', got {emission_class!r}")
    text = emission_class.strip().upper()
    if len(text) >= 7:
        cls = parse_emission(text).emission_class
    else:
        cls = parse_emission_class(text).emission_class
    formulas = ("A3E", "H3E", "R3E", "J3E", "J8E", "B8E")
    if cls not in formulas:
        raise ParameterError(
            f"necessary bandwidth: no ITU-R SM.1138 formula here for class {cls}; use one of {', '.join(formulas)}"
        )
    if isinstance(lowest_mod_hz, bool):
        raise ParameterError(f"lowest modulating frequency: expected a number of Hz, got {lowest_mod_hz!r}")
    try:
        low = float(lowest_mod_hz)
    except (TypeError, ValueError, OverflowError):
        raise ParameterError(f"lowest modulating frequency: expected a number of Hz, got {lowest_mod_hz!r}") from None
    if not math.isfinite(low) or low < 0:
        raise ParameterError(f"lowest modulating frequency: must be a finite frequency >= 0 Hz, got {lowest_mod_hz!r}")

    if cls == "B8E":
        if isinstance(highest_mod_hz, (str, bytes)) or not isinstance(highest_mod_hz, Sequence):
            sidebands = [_positive_finite(highest_mod_hz, "highest modulating frequency")] * 2
        else:
            if len(highest_mod_hz) < 1:
                raise ParameterError("highest modulating frequency: B8E needs M of at least one sideband")
            sidebands = [_positive_finite(m, "highest modulating frequency") for m in highest_mod_hz]
        return float(sum(sidebands))

    if isinstance(highest_mod_hz, Sequence) and not isinstance(highest_mod_hz, (str, bytes)):
        raise ParameterError(f"highest modulating frequency: one value for class {cls}, got {highest_mod_hz!r}")
    m = _positive_finite(highest_mod_hz, "highest modulating frequency")
    if cls == "A3E":
        return 2.0 * m
    if cls in ("H3E", "R3E"):
        return m
    if low >= m:
        raise ParameterError(
            f"lowest modulating frequency: {lowest_mod_hz!r} Hz must be below the highest, {highest_mod_hz!r} Hz"
        )
    if cls == "J3E":
        return m - low
    # J8E
    if isinstance(channels, bool) or not isinstance(channels, int) or channels < 1:
        raise ParameterError(f"channels: must be a whole number >= 1, got {channels!r}")
    return channels * m - low


def designator(bandwidth_hz: float, emission_class: str) -> str:
    """Full designator from a bandwidth (Hz) and a class: ``designator(6000, "A3E") == "6K00A3E"``.

    The class is checked with :func:`parse_emission_class` (so only classes
    iqsift handles are accepted); the bandwidth is rounded as in
    :func:`format_bandwidth_code`.
    """
    emission = parse_emission_class(emission_class)
    return format_bandwidth_code(bandwidth_hz) + emission.emission_class + emission.extra
