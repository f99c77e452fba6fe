"""Front ends: the wideband capture to one channel's baseband, carrier at 0 Hz.

Two engines implement the same :class:`~iqsift.dsp.stages.Stage` contract:

* :class:`FftFrontEnd` (default): a fast-convolution filter bank (Borgerding 2006;
  :mod:`iqsift.dsp.channelizer`) with one channel, then a fine mixer for the residual
  carrier offset.
* :class:`PolyphaseFrontEnd`: the textbook time-domain chain, a frequency-translating
  polyphase FIR decimator and further FIR decimation stages (Crochiere & Rabiner 1983;
  harris 2004), then a mixer putting the carrier at 0 Hz. Slower; kept as a cross-check,
  with a tap point after each decimation stage.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from numpy.typing import ArrayLike

from ..dsp.channelizer import BankChannel, FastConvChannelizer
from ..dsp.stages import FirDecimator, Mixer, Stage, TapPoint
from .design import ChannelDesign

__all__ = ["FftFrontEnd", "PolyphaseFrontEnd", "bank_channel", "front_end_for"]


class PolyphaseFrontEnd(Stage):
    """Translating FIR decimator + FIR decimation stages + a mixer putting the carrier at 0 Hz."""

    def __init__(self, design: ChannelDesign) -> None:
        stages = []
        for stage in design.plan.stages:
            gain = 2.0 if (stage.index == 0 and design.real_input) else 1.0
            translate = design.filter_centre_hz if stage.index == 0 else None
            stages.append(FirDecimator(stage.lowpass.taps * gain, stage.down, stage.rate_in_hz, translate_hz=translate))
        self.stages = stages
        self.stage_taps = [TapPoint(stage.rate_out) for stage in stages]
        lo, hi = design.channel.passband_hz
        # after translation the carrier sits at -(lo + hi)/2; mix it to 0
        self.mixer = Mixer(design.channel_rate_hz, -0.5 * (lo + hi))
        self.delay_s = design.front_end_delay_s()
        # the translating stage mixed by the passband centre before its delay; moving the carrier to 0 Hz
        # afterwards must refer to the same (delayed) time, else a one-sided channel gets a constant phase
        self.rotation = np.complex64(np.exp(-2j * np.pi * 0.5 * (lo + hi) * self.delay_s))
        self._rate_in = design.rate_hz
        self._rate_out = design.channel_rate_hz
        self._delay = self.delay_s * design.channel_rate_hz
        self._observing = True

    def on_stage(self, index: int, observer: Callable[[np.ndarray], object]) -> None:
        """Call ``observer`` with the output of decimation stage ``index`` (0-based), signal only."""
        self.stage_taps[index].attach(observer)

    def signal_ends(self, samples_in: int) -> None:
        """What follows is padding: the stage observers see no more of it."""
        self._observing = False

    def process(self, block: ArrayLike) -> np.ndarray:
        block = np.asarray(block)
        for stage, tap in zip(self.stages, self.stage_taps):
            block = stage.process(block)
            if self._observing:
                tap.process(block)
        return self.mixer.process(block) * self.rotation

    def flush(self) -> np.ndarray:
        out = np.zeros(0, np.complex64)
        for i, stage in enumerate(self.stages):
            held = stage.flush()
            for later in self.stages[i + 1 :]:
                held = later.process(held)
            out = np.concatenate([out, held]) if held.size else out
        result = self.mixer.process(out) * self.rotation if out.size else out
        self.reset()
        return result

    def reset(self) -> None:
        for stage in self.stages:
            stage.reset()
        self.mixer.reset()
        self._observing = True


class FftFrontEnd(Stage):
    """A one-channel fast-convolution bank plus the fine mixer for the residual carrier offset."""

    def __init__(self, design: ChannelDesign, workers: int | None = None) -> None:
        self.bank = FastConvChannelizer(
            design.rate_hz,
            [bank_channel(design)],
            real_input=design.real_input,
            fft_size=design.fft_size,
            workers=workers,
        )
        self.mixer = Mixer(design.channel_rate_hz, self.bank.residual_hz(0))
        self.delay_s = design.front_end_delay_s()
        self._rate_in = design.rate_hz
        self._rate_out = design.channel_rate_hz
        self._delay = self.delay_s * design.channel_rate_hz

    def process(self, block: ArrayLike) -> np.ndarray:
        return self.mixer.process(self.bank.process(np.asarray(block))[0])

    def flush(self) -> np.ndarray:
        return self.mixer.process(self.bank.flush()[0])

    def reset(self) -> None:
        self.bank.reset()
        self.mixer.reset()


def bank_channel(design: ChannelDesign) -> BankChannel:
    """The filter-bank entry for a designed channel."""
    return design.bank_channel()


def front_end_for(design: ChannelDesign, workers: int | None = None) -> Stage:
    """The front end of a design's engine."""
    return FftFrontEnd(design, workers) if design.engine == "fft" else PolyphaseFrontEnd(design)
