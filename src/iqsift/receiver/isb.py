"""The back end of an independent-sideband (ISB, B8E) channel: two programmes out of one two-sided baseband.

::

    baseband ─┬─► lower one-sided band-pass ─► Re ─► [AGC] ─► audio band-pass ─► ... ─► left
              └─► upper one-sided band-pass ─► Re ─► [AGC] ─► audio band-pass ─► ... ─► right

The front end passes both sidebands (its filter is two-sided, as for DSB). Each side is a whole
single-sideband back end (:class:`~iqsift.receiver.back.ChannelBackEnd` of mode ``lsb`` or ``usb``
with its detector's one-sided band-pass switched on, :mod:`iqsift.dsp.sidebands`), so each sideband
has its own AGC and audio band-pass. The two band-passes are mirror images, so both chains have the
same delay and the columns stay aligned sample for sample. Audio is ``(n, 2)``: left = lower
sideband, right = upper (the order of the spectrum).
"""

from __future__ import annotations

import dataclasses
from typing import Callable, Hashable

import numpy as np

from ..dsp.sidebands import SidebandSplit
from .back import ChannelBackEnd
from .design import ChannelDesign

__all__ = ["IsbBackEnd", "SIDEBAND_NAMES", "isb_split_for"]

SIDEBAND_NAMES = ("lower", "upper")
"""The audio channels of an ISB channel, in file order (left, right)."""


def isb_split_for(design: ChannelDesign) -> SidebandSplit:
    """The sideband split of an ISB channel design (:meth:`ChannelDesign.sideband_split`)."""
    split = design.sideband_split
    assert split is not None, "an ISB channel design"
    return split


class IsbBackEnd:
    """Two single-sideband back ends over one baseband; audio ``(n, 2)`` = (lower, upper).

    Parameters
    ----------
    design : ChannelDesign
        The ISB channel's design (mode ``"isb"``).
    front_delay_s : float
        Delay of the front end (s).
    agc : bool or None
        Per-sideband AGC (None: on, as for single sideband).
    detector_options : dict, optional
        Ignored keys are refused by the sideband detectors (see :func:`~iqsift.dsp.detectors.make_detector`).
    """

    channels = 2

    def __init__(self, design: ChannelDesign, front_delay_s: float, *, agc: bool | None = None,
                 detector_options: dict | None = None) -> None:
        self.design = design
        self.split = isb_split_for(design)
        band = design.channel.audio_band
        self.sides: list[ChannelBackEnd] = []
        for mode in ("lsb", "usb"):
            side = dataclasses.replace(design, channel=design.channel.with_(mode=mode, audio_band_hz=band))
            options = dict(detector_options or {})
            options.update(sideband_filter=True, low_hz=self.split.low_hz, high_hz=self.split.high_hz,
                           transition_hz=self.split.transition_hz, atten_db=self.split.atten_db)
            self.sides.append(ChannelBackEnd(side, front_delay_s, agc=agc, detector_options=options))
        lower, upper = self.sides
        assert lower.trim_samples == upper.trim_samples  # mirror-image chains: the same delay
        self.lower, self.upper = lower, upper
        self.agc = upper.agc
        self.audio_rate_hz = upper.audio_rate_hz
        self.delay_s = upper.delay_s
        self.trim_samples = upper.trim_samples
        self.residual_delay_s = upper.residual_delay_s
        self.settle_samples = upper.settle_samples
        self.detector = upper.detector
        self.normaliser = None

    # -- observers (the upper side's taps watch the shared baseband) -------------------------------
    def on_baseband(self, observer: Callable[[np.ndarray], object]) -> None:
        """See :meth:`ChannelBackEnd.on_baseband` (the two-sided baseband)."""
        self.upper.on_baseband(observer)

    def on_settled_baseband(self, observer: Callable[[np.ndarray], object]) -> None:
        """See :meth:`ChannelBackEnd.on_settled_baseband`."""
        self.upper.on_settled_baseband(observer)

    def on_detector(self, observer: Callable[[np.ndarray], object]) -> None:
        """Detector output of the upper sideband (the stage plots show one detector)."""
        self.upper.on_detector(observer)

    # -- streaming ---------------------------------------------------------------------------------
    def observe(self, baseband: np.ndarray) -> None:
        """See :meth:`ChannelBackEnd.observe`."""
        self.lower.observe(baseband)
        self.upper.observe(baseband)

    def process(self, baseband: np.ndarray) -> np.ndarray:
        """Channel baseband in, audio ``(n, 2)`` out (lower, upper; float32, delay-compensated)."""
        return np.stack([self.lower.process(baseband), self.upper.process(baseband)], axis=1)

    def finish(self, *padding: np.ndarray) -> np.ndarray:
        """See :meth:`ChannelBackEnd.finish`."""
        return np.stack([self.lower.finish(*padding), self.upper.finish(*padding)], axis=1)

    def trim(self, audio: np.ndarray) -> np.ndarray:  # pragma: no cover - ISB channels are never batched
        raise NotImplementedError("ISB channels are not batched")

    def observe_detector(self, detected: np.ndarray) -> None:  # pragma: no cover - never batched
        raise NotImplementedError("ISB channels are not batched")

    def batch_key(self) -> Hashable | None:
        """None: an ISB channel runs its own chains."""
        return None

    # -- results -----------------------------------------------------------------------------------
    @property
    def baseband_samples(self) -> int:
        return self.upper.baseband_samples

    @property
    def level_dbfs(self) -> float | None:
        """Mean power of the two-sided baseband after the warm-up (dBFS)."""
        return self.upper.level_dbfs

    @property
    def peak_dbfs(self) -> float | None:
        """Peak power of the two-sided baseband (dBFS)."""
        return self.upper.peak_dbfs
