"""Independent sidebands (ISB, emission class B8E): splitting one two-sided baseband into its two sidebands.

An ISB emission carries two different messages on one (suppressed or reduced) carrier: one in
the upper sideband, one in the lower (ITU Radio Regulations Appendix 1, first symbol B). With the
carrier at 0 Hz the baseband is ``z = (s_U + j·ŝ_U) + (s_L − j·ŝ_L)``: the upper message's analytic
signal at positive frequencies and the lower message's conjugate analytic signal at negative ones.
A one-sided complex band-pass keeps one of the two, and the real part of what it keeps is that
sideband's message (the product detector of :class:`~iqsift.dsp.detectors.SidebandDetector`;
Haykin, *Communication Systems*, single-sideband modulation). The two band-passes are mirror images
of each other (complex conjugate taps), so both sidebands leave with the same delay.

How well the split works is the opposite-sideband rejection: the band-pass's gain over its own
audio band over its largest gain over the other sideband's audio band, measured here from the taps
(:func:`opposite_sideband_rejection_db`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import checks
from ..errors import ParameterError
from .filters.audio import sideband_bandpass_taps
from .filters.kaiser import frequency_response

__all__ = ["SIDEBAND_SPLIT_ATTEN_DB", "SidebandSplit", "design_sideband_split", "opposite_sideband_rejection_db"]

SIDEBAND_SPLIT_ATTEN_DB = 60.0
"""Stopband attenuation the split band-passes are designed for (dB): 20 dB above the 40 dB of
opposite-sideband rejection an ISB receiver is asked for."""

_MIN_TRANSITION_HZ = 200.0


def opposite_sideband_rejection_db(taps: np.ndarray, rate_hz: float, sideband: str, low_hz: float,
                                   high_hz: float, points: int = 2048) -> tuple[float, float]:
    """Passband ripple (dB peak to peak) and opposite-sideband rejection (dB) of a one-sided band-pass.

    The response ``H(f) = Σ h[n]·e^{−j2πfn/fs}`` (the DTFT of the taps, evaluated with
    :func:`.filters.kaiser.frequency_response`, as ``scipy.signal.freqz``) is taken over the wanted sideband's audio band
    (``usb``: ``[low_hz, high_hz]``; ``lsb``: mirrored) and over the other sideband's. Rejection is
    the smallest gain over the wanted band over the largest gain over the unwanted band.

    Parameters
    ----------
    taps : numpy.ndarray
        Complex taps.
    rate_hz : float
        Sample rate (samples/s).
    sideband : {"usb", "lsb"}
        The sideband the taps keep.
    low_hz, high_hz : float
        The audio band (Hz) of each sideband, distance from the carrier.
    points : int
        Frequencies evaluated per band.
    """
    sign = 1.0 if sideband == "usb" else -1.0
    band = np.linspace(low_hz, high_hz, points)
    _, wanted = frequency_response(taps, sign * band, rate_hz)
    _, other = frequency_response(taps, -sign * band, rate_hz)
    mag = np.abs(wanted)
    ripple_db = 20.0 * math.log10(float(mag.max()) / float(mag.min()))
    rejection_db = 20.0 * math.log10(float(mag.min()) / max(float(np.abs(other).max()), 1e-300))
    return ripple_db, rejection_db


@dataclass(frozen=True)
class SidebandSplit:
    """The two one-sided band-passes that separate independent sidebands, with their measured figures.

    Attributes
    ----------
    rate_hz : float
        Channel rate (samples/s).
    low_hz, high_hz : float
        Audio band of each sideband (Hz from the carrier).
    transition_hz : float
        Transition width of the band-passes (Hz).
    atten_db : float
        Stopband attenuation designed for (dB).
    upper_taps, lower_taps : numpy.ndarray
        Complex taps; ``lower_taps`` is the complex conjugate of ``upper_taps``.
    ripple_db : float
        Measured passband ripple over the audio band (dB peak to peak).
    rejection_db : float
        Measured opposite-sideband rejection over the audio band (dB).
    """

    rate_hz: float
    low_hz: float
    high_hz: float
    transition_hz: float
    atten_db: float
    upper_taps: np.ndarray
    lower_taps: np.ndarray
    ripple_db: float
    rejection_db: float

    @property
    def delay_samples(self) -> int:
        """Group delay of either band-pass (samples at the channel rate)."""
        return (self.upper_taps.size - 1) // 2

    def as_dict(self) -> dict[str, Any]:
        """The design report's entry for the split (``stopband_hz``: the other sideband's nearest audio edge;
        ``measured_atten_db`` = ``measured_rejection_db``, the opposite-sideband rejection)."""
        return {
            "name": "sideband split (lower | upper)",
            "kind": "sideband_split",
            "rate_in_hz": self.rate_hz,
            "rate_out_hz": self.rate_hz,
            "passband_hz": f"{self.low_hz:g}-{self.high_hz:g}",
            "stopband_hz": -self.low_hz,
            "transition_hz": self.transition_hz,
            "num_taps": int(self.upper_taps.size),
            "designed_atten_db": self.atten_db,
            "measured_ripple_db": self.ripple_db,
            "measured_atten_db": self.rejection_db,
            "measured_rejection_db": self.rejection_db,
            "group_delay_s": self.delay_samples / self.rate_hz,
            # two complex filters on complex samples: 4 real multiply-adds per tap each
            "macs_per_input_sample": 8.0 * self.upper_taps.size,
        }


def design_sideband_split(rate_hz: float, low_hz: float, high_hz: float, *,
                          atten_db: float = SIDEBAND_SPLIT_ATTEN_DB) -> SidebandSplit:
    """Design the band-pass pair of an ISB channel at the channel rate.

    The transition is ``2·low_hz`` (at least 200 Hz), so the other sideband's band edge at
    ``−low_hz`` already lies in the stopband (:func:`~iqsift.dsp.filters.audio.sideband_bandpass_taps`).

    Parameters
    ----------
    rate_hz : float
        Channel rate (samples/s).
    low_hz, high_hz : float
        Audio band of each sideband (Hz): 0 <= low_hz < high_hz < rate_hz/2.
    atten_db : float
        Stopband attenuation to design for (dB).

    Raises
    ------
    ParameterError
        For edges that do not fit the rate.
    """
    rate = checks.positive("rate_hz", rate_hz)
    if not 0.0 <= low_hz < high_hz < rate / 2:
        raise ParameterError(f"low_hz/high_hz: got {low_hz!r}/{high_hz!r} Hz; need 0 <= low < high < rate/2 = "
                             f"{rate / 2:g} Hz", parameters=("low_hz", "high_hz"))
    transition = max(2.0 * low_hz, _MIN_TRANSITION_HZ)
    upper = sideband_bandpass_taps(rate, "usb", low_hz, high_hz, transition, atten_db)
    lower = sideband_bandpass_taps(rate, "lsb", low_hz, high_hz, transition, atten_db)
    ripple, rejection = opposite_sideband_rejection_db(upper, rate, "usb", low_hz, high_hz)
    return SidebandSplit(rate, float(low_hz), float(high_hz), transition, float(atten_db), upper, lower,
                         ripple, rejection)
