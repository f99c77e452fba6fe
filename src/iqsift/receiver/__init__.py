"""One channel from a wideband capture: design, front end, back end, taps.

The chain (DESIGN.md data flow)::

    IQ at fs ──► front end ──────────────► fine mix ──► detector ──► AM: carrier ──► audio band ──► resampler ──► audio
                 (mix by the carrier bin,   residual     envelope     normalisation   (300–3000 Hz)   to the audio
                  channel filter, decimate  carrier      coherent     SSB/DSB: AGC    or DC block     rate
                  to the channel rate)      offset       usb/lsb/dsb  (optional)

* :mod:`.design` -- :class:`ChannelDesign`, :func:`design_channel`: everything fixed before the first sample.
* :mod:`.front` -- the fast-convolution and polyphase front ends.
* :mod:`.back` -- :class:`ChannelBackEnd`, the detector-to-audio chain.
* :mod:`.isb` -- :class:`IsbBackEnd`, the two sideband chains of an independent-sideband channel.
* :mod:`.taps` -- :class:`StageTaps`, the spectrum accumulators behind the stage plots.
* :mod:`.receiver` -- :class:`Receiver`: the chain with its observers.
"""

from .back import AM_AUDIO_GAIN, ChannelBackEnd
from .design import ChannelDesign, design_channel, fft_decimation
from .isb import SIDEBAND_NAMES, IsbBackEnd
from .front import FftFrontEnd, PolyphaseFrontEnd, bank_channel, front_end_for
from .receiver import EDGE_FADE_S, Receiver, ReceiverReport, ReceiverResult
from .taps import TAP_NAMES, StageTaps, input_tap

__all__ = [
    "AM_AUDIO_GAIN",
    "ChannelBackEnd",
    "ChannelDesign",
    "EDGE_FADE_S",
    "FftFrontEnd",
    "IsbBackEnd",
    "SIDEBAND_NAMES",
    "PolyphaseFrontEnd",
    "Receiver",
    "ReceiverReport",
    "ReceiverResult",
    "StageTaps",
    "TAP_NAMES",
    "bank_channel",
    "design_channel",
    "fft_decimation",
    "front_end_for",
    "input_tap",
]
