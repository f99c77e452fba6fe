"""A channel to extract: where it is, how wide, and how to detect it.

The stated bandwidth is the necessary bandwidth of the emission (ITU Radio
Regulations Appendix 1; ITU-R SM.1138). From it and the mode follow the
passband relative to the carrier:

* AM with carrier (``envelope``, ``coherent``), ``dsb`` and ``isb`` (independent sidebands, B8E:
  Bn = the sum of the two sidebands' M, SM.1138, so each sideband is B/2 wide): ``(-B/2, +B/2)``.
* ``usb``: ``(f_low, f_low + B)``; ``lsb``: ``(-(f_low + B), -f_low)``, where
  ``f_low`` is the lowest modulating frequency: 300 Hz for suppressed-carrier
  telephony (J3E: B = 3000 − 300 = 2700 Hz, SM.1138), 0 Hz for full or reduced
  carrier (H3E, R3E: B = M).

The audio band follows from the passband: its top is ``B/2`` for double
sideband and ``f_low + B`` for single sideband. Voice channels (audio top up to
3.4 kHz, the telephony band; common practice) get a 300–3000 Hz (or up to the
top, if lower) audio band-pass; broadcast widths keep their full audio band and
only lose DC.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

from .emission import MODES, parse_emission
from .errors import ParameterError
from .units import parse_frequency, parse_positive_hz

__all__ = ["Channel", "make_channel", "VOICE_BAND_HZ"]

VOICE_BAND_HZ = (300.0, 3000.0)
"""Default audio band-pass for voice channels (Hz): the telephony band (ITU-T G.712 passes 300–3400 Hz;
300–3000 Hz is the usual narrower voice band of AM radiotelephony, common practice)."""

_VOICE_TOP_LIMIT_HZ = 3400.0


@dataclass(frozen=True)
class Channel:
    """One channel to extract.

    Attributes
    ----------
    name : str
        Label used in reports and file names.
    frequency_hz : float or None
        Absolute carrier frequency (Hz), when given that way.
    offset_hz : float or None
        Carrier offset from the capture centre (Hz), when given that way.
    bandwidth_hz : float
        Necessary bandwidth (Hz).
    mode : str
        Detector: ``envelope``, ``coherent``, ``usb``, ``lsb`` or ``dsb``.
    emission : str or None
        The emission designator it came from, if any.
    audio_low_hz : float
        Lowest modulating frequency (Hz): 300 for suppressed-carrier SSB voice, else 0.
    audio_rate_hz : float
        Output audio rate (samples/s).
    transition_hz : float or None
        Width of the channel filter's transition band (Hz); default: see :attr:`transition`.
    audio_band_hz : tuple or None or str
        Audio band-pass (low, high) in Hz, ``None`` for none, ``"auto"`` for the default rule.
    squelch_db : float or None
        Squelch: audio is muted while the channel level is less than this many dB above the noise
        floor (:class:`iqsift.dsp.post.Squelch`); also the activity threshold of the report.
        None: no squelch, the audio carries the noise between transmissions.
    """

    bandwidth_hz: float
    mode: str = "envelope"
    frequency_hz: float | None = None
    offset_hz: float | None = None
    name: str = "channel"
    emission: str | None = None
    audio_low_hz: float = 300.0
    audio_rate_hz: float = 16000.0
    transition_hz: float | None = None
    audio_band_hz: Any = "auto"
    squelch_db: float | None = None
    extra: dict = field(default_factory=dict, compare=False)

    def __post_init__(self) -> None:
        if self.mode not in MODES:
            raise ParameterError(f"mode: got {self.mode!r}; it must be one of {', '.join(MODES)}")
        if not (math.isfinite(self.bandwidth_hz) and self.bandwidth_hz > 0):
            raise ParameterError(f"bandwidth: must be > 0 Hz, got {self.bandwidth_hz!r}")
        if (self.frequency_hz is None) == (self.offset_hz is None):
            raise ParameterError(f"channel {self.name!r}: give exactly one of frequency and offset")
        if not (math.isfinite(self.audio_rate_hz) and 1000 <= self.audio_rate_hz <= 384000):
            raise ParameterError(f"audio_rate: got {self.audio_rate_hz!r} samples/s; it must be between 1000 and "
                                 "384000 samples/s")
        if self.audio_rate_hz != round(self.audio_rate_hz):
            raise ParameterError(f"audio_rate: got {self.audio_rate_hz!r} samples/s; an audio file's rate is a whole "
                                 "number of samples/s")

    # -- geometry ------------------------------------------------------
    @property
    def is_single_sideband(self) -> bool:
        return self.mode in ("usb", "lsb")

    @property
    def passband_hz(self) -> tuple[float, float]:
        """Passband (low, high) relative to the carrier (Hz)."""
        b = self.bandwidth_hz
        if self.mode == "usb":
            return (self.audio_low_hz, self.audio_low_hz + b)
        if self.mode == "lsb":
            return (-(self.audio_low_hz + b), -self.audio_low_hz)
        return (-b / 2, b / 2)

    @property
    def audio_top_hz(self) -> float:
        """Highest modulating frequency carried (Hz)."""
        return max(abs(v) for v in self.passband_hz)

    @property
    def transition(self) -> float:
        """Channel filter transition width (Hz).

        Default: 0.35 of the bandwidth (for a 6 kHz AM channel 2.1 kHz, so the stopband starts
        5.1 kHz from the carrier, clear of the nearest sideband of a neighbour on the 8.33 kHz
        raster, which starts 8.333 − 3 = 5.33 kHz away); for single sideband at most twice the
        lowest modulating frequency, so the carrier and the opposite sideband lie in the stopband
        or the lower transition band. A wider transition means a shorter filter: the filter's
        length, and so the processing cost, is inversely proportional to it (Kaiser 1974).
        """
        if self.transition_hz is not None:
            return self.transition_hz
        t = 0.35 * self.bandwidth_hz
        if self.is_single_sideband and self.audio_low_hz > 0:
            t = min(t, 2 * self.audio_low_hz)
        return t

    @property
    def audio_band(self) -> tuple[float, float] | None:
        """Audio band-pass (low, high) in Hz, or None (then only DC is removed)."""
        if self.audio_band_hz != "auto":
            return self.audio_band_hz
        top = self.audio_top_hz
        if top > _VOICE_TOP_LIMIT_HZ:
            return None
        return (VOICE_BAND_HZ[0], min(VOICE_BAND_HZ[1], top))

    def carrier_offset(self, center_hz: float | None) -> float:
        """Carrier offset from the capture centre (Hz); absolute frequencies need a known centre."""
        if self.offset_hz is not None:
            return self.offset_hz
        # __post_init__ holds exactly one of frequency and offset
        assert self.frequency_hz is not None
        if center_hz is None:
            # no centre known: DESIGN.md says user frequencies are then offsets
            return float(self.frequency_hz)
        return float(self.frequency_hz) - center_hz

    def absolute_frequency(self, center_hz: float | None) -> float | None:
        """Absolute carrier frequency (Hz), when the capture centre is known."""
        if self.offset_hz is None:  # given as an absolute frequency (exactly one of the two is set)
            return self.frequency_hz if center_hz is not None else None
        return None if center_hz is None else center_hz + self.offset_hz

    def as_dict(self, center_hz: float | None = None) -> dict[str, Any]:
        """The report's ``channel`` object (DESIGN.md report vocabulary)."""
        return {
            "name": self.name,
            "frequency_hz": self.absolute_frequency(center_hz),
            "offset_hz": self.carrier_offset(center_hz),
            "bandwidth_hz": self.bandwidth_hz,
            "mode": self.mode,
            "emission": self.emission,
            "passband_hz": list(self.passband_hz),
            "audio_band_hz": None if self.audio_band is None else list(self.audio_band),
            "audio_rate_hz": self.audio_rate_hz,
        }

    def with_(self, **changes: Any) -> "Channel":
        """A copy with some fields changed."""
        return replace(self, **changes)


def make_channel(
    *,
    freq: str | float | None = None,
    offset: str | float | None = None,
    bandwidth: str | float | None = None,
    emission: str | None = None,
    mode: str | None = None,
    audio_rate: str | float = 16000,
    name: str = "channel",
    transition: str | float | None = None,
    audio_band: Any = "auto",
    squelch_db: float | None = None,
) -> Channel:
    """Build a :class:`Channel` from user-level values (SI strings allowed).

    Exactly one of ``freq``/``offset`` and at most one of ``bandwidth``/``emission``
    (default: 6 kHz AM, the common double-sideband voice channel, 6K00A3E). The
    mode defaults to the emission's (A3E → envelope, J3E → usb ...).

    Parameters
    ----------
    freq : float or str, optional
        Absolute carrier frequency (Hz; ``"124.15M"``). Used as an offset when the
        capture has no centre frequency.
    offset : float or str, optional
        Carrier offset from the capture centre (Hz; ``"-25k"``).
    bandwidth : float or str, optional
        Necessary bandwidth (Hz; ``"6k"``).
    emission : str, optional
        ITU emission designator (``"6K00A3E"``, ``"2K70J3E"``).
    mode : {"envelope", "coherent", "usb", "lsb", "dsb", "isb"}, optional
        Detector.
    audio_rate : float or str
        Output audio rate (samples/s).
    name : str
        Label for reports and file names.
    transition : float or str, optional
        Channel filter transition width (Hz); default see :attr:`Channel.transition`.
    audio_band : tuple of float, None or "auto"
        Audio band-pass (low, high) in Hz; None for none.
    squelch_db : float, optional
        Mute the audio while the channel is less than this many dB above its noise floor.
    """
    if (freq is None) == (offset is None):
        raise ParameterError("give exactly one of freq (absolute, Hz) and offset (relative to the capture centre)",
                             parameters=("freq", "offset"))
    if bandwidth is not None and emission is not None:
        raise ParameterError("give bandwidth or emission, not both", parameters=("bandwidth", "emission"))
    if mode is not None:
        mode = str(mode).strip().lower()
        if mode not in MODES:
            raise ParameterError(f"mode: got {mode!r}; it must be one of {', '.join(MODES)}")
    audio_low = 300.0
    code = None
    if emission is not None:
        em = parse_emission(emission, mode=mode)
        code = em.code
        bw = em.bandwidth_hz
        if bw is None:
            raise ParameterError(f"emission: {emission!r} lacks the bandwidth part of the designator; write e.g. 6K00A3E")
        mode = mode or em.mode
        audio_low = em.audio_low_hz
    else:
        bw = 6000.0 if bandwidth is None else parse_positive_hz(bandwidth, "bandwidth")
        mode = mode or "envelope"
    return Channel(
        bandwidth_hz=bw,
        mode=mode,
        frequency_hz=None if freq is None else parse_frequency(freq, "freq"),
        offset_hz=None if offset is None else parse_frequency(offset, "offset"),
        name=name,
        emission=code,
        audio_low_hz=audio_low,
        audio_rate_hz=parse_positive_hz(audio_rate, "audio_rate"),
        transition_hz=None if transition is None else parse_positive_hz(transition, "transition"),
        audio_band_hz=audio_band,
        squelch_db=squelch_db,
    )
