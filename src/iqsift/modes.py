"""The detector (demodulation mode) vocabulary, defined once for the whole package.

A mode names how a channel's baseband becomes audio:

``"envelope"``
    AM with carrier (A3E, H3E): the magnitude of the baseband.
``"coherent"``
    AM with carrier, detected against a tracked copy of the carrier.
``"usb"``, ``"lsb"``
    Single sideband, upper or lower (J3E, R3E): the sideband itself.
``"dsb"``
    Double sideband with suppressed carrier: detected against a carrier
    recovered by squaring.
``"isb"``
    Independent sidebands (B8E, B7E): two programmes on one suppressed or
    reduced carrier, recovered as two audio channels (left = lower sideband,
    right = upper), each with its own AGC and audio band-pass.
"""

from __future__ import annotations

from typing import Literal, get_args

__all__ = ["Mode", "MODES", "AM_MODES", "is_am", "audio_channels"]

Mode = Literal["envelope", "coherent", "usb", "lsb", "dsb", "isb"]
"""A detector name (see the module docstring)."""

MODES: tuple[Mode, ...] = get_args(Mode)
"""Every detector name, in the order help texts list them."""

AM_MODES: tuple[Mode, ...] = ("envelope", "coherent")
"""Modes of AM with a carrier: audio is normalised by the carrier level, not by an AGC."""


def is_am(mode: str) -> bool:
    """True for the AM-with-carrier modes (:data:`AM_MODES`)."""
    return mode in AM_MODES


def audio_channels(mode: str) -> int:
    """Audio channels a mode delivers: 2 for independent sidebands (left = lower, right = upper), else 1."""
    return 2 if mode == "isb" else 1
