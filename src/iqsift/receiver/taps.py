"""Spectrum and spectrogram accumulators at a receiver's tap points (the data behind the stage plots).

:class:`StageTaps` builds one streaming Welch accumulator per tap point, plus spectrograms of
the channel baseband and the audio, and attaches them to a receiver as observers.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any, Iterable

from ..errors import ParameterError
from ..spectra import SpectrogramAccumulator, Spectrum, WelchAccumulator
from .design import ChannelDesign

if TYPE_CHECKING:
    from .receiver import Receiver

__all__ = ["TAP_NAMES", "StageTaps", "input_tap"]

TAP_NAMES = ("input", "channel", "detector", "audio")
"""Tap points where a spectrum accumulator can sit: the wideband input, the channel baseband after
the front end and fine mixing, the detector output, and the final audio."""


def input_tap(rate_hz: float, center_hz: float, real_input: bool) -> WelchAccumulator:
    """Welch accumulator for the wideband input: about 100 Hz resolution (at most 2^16 points), absolute RF axis."""
    seg = 1 << max(10, min(16, int(round(math.log2(rate_hz / 100)))))
    return WelchAccumulator(rate_hz, nperseg=seg, center_hz=center_hz, name="input", onesided=real_input)


class StageTaps:
    """Accumulators at the tap points ``names`` of a channel's chain.

    Parameters
    ----------
    design : ChannelDesign
        The channel's chain (rates).
    center_hz : float or None
        Capture centre (Hz), for the input spectrum's absolute axis.
    names : iterable of str
        Tap points among :data:`TAP_NAMES`, and ``"stages"`` for the time-domain engine's
        decimation stages.

    Raises
    ------
    ParameterError
        Naming the unknown tap points.
    """

    def __init__(self, design: ChannelDesign, center_hz: float | None, names: Iterable[str] = (*TAP_NAMES, "stages")):
        names = tuple(names)
        unknown = [n for n in names if n not in TAP_NAMES and n != "stages"]
        if unknown:
            raise ParameterError(f"spectra: unknown tap point(s) {unknown}; tap points are {', '.join(TAP_NAMES)}")
        self.names = names
        self.design = design
        ch_rate = design.channel_rate_hz
        fa = design.resampler.rate_out_hz
        # about 2.5 Hz resolution at the channel, 0.3 kHz at the input (common practice for voice channels)
        seg_ch = 1 << max(8, int(round(math.log2(ch_rate / 4))))
        self.accumulators: dict[str, Any] = {}
        if "input" in names:
            self.accumulators["input"] = input_tap(design.rate_hz, center_hz or 0.0, design.real_input)
        if "channel" in names:
            self.accumulators["channel"] = WelchAccumulator(ch_rate, nperseg=seg_ch, name="channel")
        if "detector" in names:
            self.accumulators["detector"] = WelchAccumulator(ch_rate, nperseg=seg_ch, name="detector", onesided=True)
        if "audio" in names:
            seg_a = 1 << max(8, int(round(math.log2(fa / 4))))
            self.accumulators["audio"] = WelchAccumulator(fa, nperseg=seg_a, name="audio", onesided=True)
        # time-frequency views (bounded memory: at most 400 columns, merged as the run grows)
        self.spectrograms: dict[str, SpectrogramAccumulator] = {}
        if "channel" in names:
            self.spectrograms["channel"] = SpectrogramAccumulator(
                ch_rate, nperseg=1 << max(7, int(round(math.log2(ch_rate / 40)))), max_columns=400)
        if "audio" in names:
            self.spectrograms["audio"] = SpectrogramAccumulator(
                fa, nperseg=1 << max(7, int(round(math.log2(fa / 40)))), onesided=True, max_columns=400)
        self.stage_accumulators: list[WelchAccumulator] = []
        if "stages" in names and design.polyphase_plan is not None:
            # the time-domain engine has a tap after each decimation stage (the first one also mixes)
            for i, stage in enumerate(design.polyphase_plan.stages):
                rate = stage.rate_out_hz
                acc = WelchAccumulator(rate, nperseg=1 << max(8, int(round(math.log2(rate / 20)))), name=f"stage{i + 1}")
                self.stage_accumulators.append(acc)
                self.accumulators[f"stage{i + 1}"] = acc

    def attach(self, receiver: "Receiver", *, with_input: bool = True) -> None:
        """Feed the accumulators from ``receiver``'s observers (the input one only with ``with_input``)."""
        acc = self.accumulators
        if with_input and "input" in acc:
            receiver.on_input(acc["input"].feed)
        if "channel" in acc:
            receiver.on_baseband(acc["channel"].feed)
            receiver.on_baseband(self.spectrograms["channel"].feed)
        if "detector" in acc:
            receiver.on_detector(acc["detector"].feed)
        if "audio" in acc:
            receiver.on_audio(acc["audio"].feed)
            receiver.on_audio(self.spectrograms["audio"].feed)
        for i, stage_acc in enumerate(self.stage_accumulators):
            receiver.on_decimation_stage(i, stage_acc.feed)

    def share_input(self, accumulator: WelchAccumulator) -> None:
        """Use an input accumulator fed by someone else (one shared by every channel of a bank)."""
        self.accumulators["input"] = accumulator

    def spectra(self, scaling: str = "density") -> dict[str, Spectrum]:
        """Accumulated spectra per tap point, for those with data."""
        return {name: acc.result(scaling) for name, acc in self.accumulators.items() if acc.ready}

    def spectrogram_results(self) -> dict[str, Any]:
        """Accumulated spectrograms per tap point, for those with data."""
        out = {}
        for name, acc in self.spectrograms.items():
            try:
                out[name] = acc.result()
            except ValueError:  # fewer samples than one segment (ParameterError)
                continue
        return out
