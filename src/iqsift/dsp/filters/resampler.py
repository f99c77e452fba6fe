"""Rational polyphase resampler design: the ratio ``up/down`` and its anti-alias / anti-image low-pass.

References
----------
* f. harris, *Multirate Signal Processing for Communication Systems* (2004),
  ch. 7: polyphase interpolation and resampling.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Any

import numpy as np

from ... import checks
from ...errors import ParameterError
from .lowpass import DEFAULT_ATTEN_DB, DEFAULT_RIPPLE_DB, LowpassDesign, design_lowpass, filter_summary

__all__ = ["ResamplerDesign", "design_resampler"]


@dataclass(frozen=True, eq=False)
class ResamplerDesign:
    """A rational polyphase resampler ``up/down`` and its anti-alias / anti-image low-pass.

    Attributes
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    rate_out_hz : float
        Achieved output rate, exactly ``rate_in * up / down`` (rounded once to float).
    requested_rate_out_hz : float
        The rate asked for; differs from ``rate_out_hz`` when the ratio had to be approximated.
    up, down : int
        Interpolation and decimation factors (coprime).
    lowpass : LowpassDesign
        Filter at ``rate_in * up`` with unity DC gain.
    macs_per_input_sample : float
        Real MACs per complex input sample for a polyphase implementation: ``2 * taps / down``.
    """

    rate_in_hz: float
    rate_out_hz: float
    requested_rate_out_hz: float
    up: int
    down: int
    lowpass: LowpassDesign
    macs_per_input_sample: float

    @property
    def taps(self) -> np.ndarray:
        """The polyphase taps: the low-pass scaled by ``up`` (DC gain ``up`` restores the level)."""
        return self.lowpass.taps * self.up

    @property
    def ratio(self) -> Fraction:
        return Fraction(self.up, self.down)

    @property
    def rate_error_hz(self) -> float:
        """Achieved minus requested output rate (Hz)."""
        return self.rate_out_hz - self.requested_rate_out_hz

    @property
    def exact(self) -> bool:
        """True when the requested rate is reached exactly."""
        return Fraction(self.requested_rate_out_hz) == Fraction(self.rate_in_hz) * self.ratio

    @property
    def group_delay_s(self) -> float:
        return self.lowpass.group_delay_s

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        lp = self.lowpass
        out = {
            "name": f"FIR x{self.up}/{self.down}",
            "kind": "fir_resampler",
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "requested_rate_out_hz": self.requested_rate_out_hz,
            "rate_error_hz": self.rate_error_hz,
            "up": self.up,
            "down": self.down,
            **filter_summary(lp),
            "macs_per_input_sample": self.macs_per_input_sample,
            "lowpass": lp.to_dict(include_taps=False),
        }
        if include_taps:
            out["taps"] = [float(v) for v in self.taps]
        return out


def design_resampler(
    rate_in_hz: float,
    rate_out_hz: float,
    passband_hz: float,
    ripple_db: float = DEFAULT_RIPPLE_DB,
    atten_db: float = DEFAULT_ATTEN_DB,
    max_denominator: int = 1000,
    stopband_hz: float | None = None,
    method: str = "auto",
) -> ResamplerDesign:
    """Design a rational resampler ``rate_in * up / down``.

    ``up/down`` is ``Fraction(rate_out/rate_in).limit_denominator(max_denominator)``
    computed from the exact binary values of the two rates. The low-pass runs at
    ``rate_in * up`` (after zero-stuffing, before keeping every ``down``-th
    sample; harris 2004 ch. 7) with passband ``passband_hz`` and, by default,
    stopband ``min(rate_in, rate_out)/2``: images of the input (upsampling)
    and components that would alias (downsampling) are all attenuated by
    ``atten_db``. A ``stopband_hz`` up to ``min(rate_in, rate_out) - passband_hz``
    may be given instead: the transition band then folds onto itself, the
    passband stays clean.

    Parameters
    ----------
    rate_in_hz, rate_out_hz : float
        Input rate and requested output rate (samples/s).
    passband_hz : float
        Highest frequency to keep (Hz); must be below both Nyquist frequencies.
    ripple_db, atten_db : float
        Specification (dB peak to peak; dB).
    max_denominator : int
        Largest ``down`` allowed in the rational approximation.
    stopband_hz : float, optional
        Stopband edge (Hz); default ``min(rate_in, rate_out)/2``.
    method : {"auto", "kaiser", "equiripple"}

    Returns
    -------
    ResamplerDesign
        ``rate_out_hz`` is the achieved rate; compare ``requested_rate_out_hz``.
    """
    rin = checks.positive("rate_in_hz", rate_in_hz)
    rout = checks.positive("rate_out_hz", rate_out_hz)
    fp = checks.positive("passband_hz", passband_hz)
    if isinstance(max_denominator, bool) or not isinstance(max_denominator, (int, np.integer)) \
            or max_denominator < 1:
        raise ParameterError(f"max_denominator: must be an integer >= 1, got {max_denominator!r}")
    ratio = (Fraction(rout) / Fraction(rin)).limit_denominator(int(max_denominator))
    if ratio == 0:
        raise ParameterError(
            f"rate_out_hz={rate_out_hz!r}: ratio to rate_in_hz={rate_in_hz!r} rounds to 0 "
            f"with max_denominator={max_denominator}"
        )
    up, down = ratio.numerator, ratio.denominator
    achieved = float(Fraction(rin) * ratio)
    nyq = min(rin, achieved) / 2.0
    if not fp < nyq:
        raise ParameterError(
            f"passband_hz={passband_hz!r}: must be below both Nyquist frequencies "
            f"(min(rate_in, rate_out)/2 = {nyq:g} Hz)"
        )
    if stopband_hz is None:
        fst = nyq
    else:
        fst = checks.positive("stopband_hz", stopband_hz)
        if not fp < fst <= 2 * nyq - fp:
            raise ParameterError(
                f"stopband_hz={stopband_hz!r}: need passband_hz ({fp:g}) < stopband_hz <= "
                f"min(rate_in, rate_out) - passband_hz ({2 * nyq - fp:g} Hz)"
            )
    lp = design_lowpass(rin * up, fp, fst, ripple_db, atten_db, method)
    return ResamplerDesign(rate_in_hz=rin, rate_out_hz=achieved, requested_rate_out_hz=rout, up=up,
                           down=down, lowpass=lp, macs_per_input_sample=2.0 * lp.num_taps / down)
