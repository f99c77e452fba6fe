"""Stateful streaming DSP stages, each with a one-shot function beside it.

* :mod:`.base` -- the :class:`Stage` protocol, :class:`Chain`, :class:`TapPoint` (observers),
  :class:`Scale`, :func:`run_once`.
* :mod:`.oscillator` -- exact-phase oscillator, :class:`Mixer`.
* :mod:`.fir` -- :class:`FirFilter`, :class:`FirDecimator`,
  :class:`RationalResampler` and their polyphase core :class:`UpFirDn`.
* :mod:`.audio` -- :class:`DCBlock`, :class:`AGC`, :class:`AudioBandpass`.

The taps these stages apply are designed in :mod:`iqsift.dsp.filters`.
"""

from .audio import AGC, AudioBandpass, DCBlock, agc, audio_bandpass, dc_block
from .base import Chain, Scale, Stage, TapPoint, checked_taps, run_once
from .fir import FirDecimator, FirFilter, RationalResampler, UpFirDn, fir_decimate, fir_filter, resample
from .oscillator import ExactPhase, Mixer, exact_ratio, mix

__all__ = [
    "Stage",
    "Chain",
    "TapPoint",
    "Scale",
    "Mixer",
    "FirFilter",
    "FirDecimator",
    "RationalResampler",
    "UpFirDn",
    "DCBlock",
    "AGC",
    "AudioBandpass",
    "ExactPhase",
    "run_once",
    "checked_taps",
    "mix",
    "fir_filter",
    "fir_decimate",
    "resample",
    "dc_block",
    "agc",
    "audio_bandpass",
    "exact_ratio",
]
