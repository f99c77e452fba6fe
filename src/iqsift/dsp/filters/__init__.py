"""Filter design: every tap set iqsift streams through is computed (and verified) here.

* :mod:`.lowpass` -- the specification (ripple, attenuation, band edges),
  Kaiser and equiripple low-pass design, measurement of taps.
* :mod:`.multistage` -- multistage polyphase decimation plans.
* :mod:`.resampler` -- rational resampler design.
* :mod:`.audio` -- voice band-pass, one-sided sideband band-pass, carrier
  low-pass, DC blocker, fractional delay.

Design-time only: nothing here streams; the stages of :mod:`iqsift.dsp.stages`,
the detectors and the channelizer consume the taps.
"""

from .audio import (
    BandpassDesign,
    carrier_lowpass_taps,
    dc_block_coefficient,
    design_audio_bandpass,
    fractional_delay_taps,
    sideband_bandpass_taps,
)
from .lowpass import (
    DEFAULT_ATTEN_DB,
    DEFAULT_RIPPLE_DB,
    MAX_EQUIRIPPLE_TAPS,
    MAX_TAPS,
    FilterTooLongError,
    LowpassDesign,
    design_lowpass,
    filter_summary,
    harris_length,
    kaiser_beta,
    kaiser_length,
    measure_lowpass,
    passband_deviation,
    stopband_deviation,
)
from .multistage import DecimationPlan, StageDesign, choose_decimation, plan_decimation
from .resampler import ResamplerDesign, design_resampler

__all__ = [
    "DEFAULT_RIPPLE_DB",
    "DEFAULT_ATTEN_DB",
    "MAX_EQUIRIPPLE_TAPS",
    "MAX_TAPS",
    "FilterTooLongError",
    "passband_deviation",
    "stopband_deviation",
    "kaiser_length",
    "kaiser_beta",
    "harris_length",
    "LowpassDesign",
    "design_lowpass",
    "measure_lowpass",
    "filter_summary",
    "StageDesign",
    "DecimationPlan",
    "plan_decimation",
    "choose_decimation",
    "ResamplerDesign",
    "design_resampler",
    "BandpassDesign",
    "design_audio_bandpass",
    "sideband_bandpass_taps",
    "carrier_lowpass_taps",
    "dc_block_coefficient",
    "fractional_delay_taps",
]
