"""The back end of one channel: baseband (carrier at 0 Hz) to delay-compensated audio, as one chain.

::

    baseband ─► detector ─► [carrier normaliser | DC removal] ─► [AGC] ─► audio band-pass ∘ fractional delay
                   │              (AM: divide by the carrier)                 (one linear-phase FIR)
               tap point                                       ─► gain ─► resampler to the audio rate ─► trim

Every element is a :class:`~iqsift.dsp.stages.Stage`, so the back end is a
:class:`~iqsift.dsp.stages.Chain`: ``process`` feeds it, ``finish`` marks where the signal ends
(the padding that brings the delayed tail out is left out of the carrier level) and flushes it.
The trim at the end drops the chain's whole delay, front end included, so audio sample ``k``
belongs to input time ``k / audio rate``.
"""

from __future__ import annotations

import math
from typing import Callable, Hashable, cast

import numpy as np

from ..dsp.batch import BatchFir, long_fft_size
from ..dsp.detectors import make_detector
from ..dsp.post import CarrierNormaliser, DelayTrim, FractionalDelay
from ..dsp.stages import AGC, AudioBandpass, Chain, RationalResampler, Scale, Stage, TapPoint
from ..modes import is_am
from .design import ChannelDesign

__all__ = ["AM_AUDIO_GAIN", "ChannelBackEnd"]

AM_AUDIO_GAIN = 0.5
"""AM audio scale: the carrier-normalised message m·s(t) is written as 0.5·m·s(t) (full scale = 200 % modulation)."""

FRACTIONAL_HALF_LENGTH = 16
"""Half-length (channel samples) of the windowed-sinc fractional delay that aligns the audio."""


class ChannelBackEnd:
    """Detector, audio post-processing and resampling for one channel, with delay compensation.

    Parameters
    ----------
    design : ChannelDesign
        The designed chain.
    front_delay_s : float
        Delay of the front end feeding this back end (s).
    agc : bool or None
        Automatic gain control (peak level, target −12 dBFS, attack 5 ms,
        decay 1 s, at most 60 dB of gain; :class:`iqsift.dsp.stages.AGC`);
        None = on for suppressed-carrier modes (usb, lsb, dsb), off for AM with
        carrier, whose audio is normalised by the carrier level instead.
    detector_options : dict
        Passed to :func:`iqsift.dsp.detectors.make_detector`.

    Attributes
    ----------
    chain : Chain
        Detector to trimmed audio.
    normaliser : CarrierNormaliser or None
        The carrier normaliser (AM) or linear-phase DC remover (wide SSB/DSB), when there is one.
    band_filter : BatchFir or FractionalDelay
        The audio band-pass merged with the fractional delay (or the fractional delay alone).
    resampler : RationalResampler
        Channel rate to audio rate.
    """

    def __init__(
        self,
        design: ChannelDesign,
        front_delay_s: float,
        *,
        agc: bool | None = None,
        detector_options: dict | None = None,
    ) -> None:
        ch = design.channel
        rate = design.channel_rate_hz
        self.design = design
        options = dict(detector_options or {})
        if ch.mode in ("usb", "lsb"):
            # the front end's one-sided channel filter already rejects the opposite sideband (>= atten_db)
            options.setdefault("sideband_filter", False)
        if ch.mode == "coherent":
            options.setdefault("channel_name", ch.name)  # its lock warning names the channel
        self.detector = make_detector(ch.mode, rate, **options)
        settle = int(round(self.detector.delay))  # the detector's start-up is not signal
        post: list[Stage] = []
        self.normaliser: CarrierNormaliser | None = None
        if is_am(ch.mode):
            # the carrier level follows fading and push-to-talk keying; for voice (audio from 300 Hz) it may
            # be fast (passes 15 Hz, stops 200 Hz: keying transients last ~10 ms instead of ~50 ms); for
            # broadcast audio, which reaches down to ~50 Hz, it must be slower (passes 4 Hz, stops 40 Hz)
            check = ch.mode != "envelope"  # only a coherent detector can output a zero-mean signal
            fast = bool(ch.audio_band and ch.audio_band[0] >= 250)
            self.normaliser = CarrierNormaliser(rate, pass_hz=15.0 if fast else 4.0, stop_hz=200.0 if fast else 40.0,
                                                check_carrier=check, settle_samples=settle)
            post.append(self.normaliser)
        # AM audio: full scale is 200 % modulation (6 dB of headroom for overmodulation, keying
        # transients and noise peaks); so 100 % modulation peaks at 0.5
        self.audio_gain = AM_AUDIO_GAIN if is_am(ch.mode) else 1.0
        self.agc = bool(not is_am(ch.mode) if agc is None else agc)
        if self.agc:
            post.append(AGC(rate, target_dbfs=-12.0, attack_s=0.005, decay_s=1.0, max_gain_db=60.0))
        band = ch.audio_band
        bandpass = AudioBandpass(rate, band[0], band[1]) if band else None
        if bandpass is None and not is_am(ch.mode):
            # broadcast-width SSB/DSB: remove DC with linear phase (AM modes lose it in the normaliser)
            self.normaliser = CarrierNormaliser(rate, normalise=False, settle_samples=settle)
            post.insert(0, self.normaliser)
        r = design.resampler
        self.resampler = RationalResampler(r.taps, r.up, r.down, rate)
        self.audio_rate_hz = r.rate_out_hz
        delay_s = front_delay_s + self.detector.delay / rate
        delay_s += sum(stage.delay for stage in (*post, *([bandpass] if bandpass is not None else []))) / rate
        delay_s += self.resampler.delay / self.audio_rate_hz
        # a windowed-sinc fractional delay tops the chain's delay up to a whole number of audio samples,
        # so audio sample k belongs exactly to input time k / audio rate
        half = FRACTIONAL_HALF_LENGTH
        fa = self.audio_rate_hz
        whole = math.ceil((delay_s + half / rate) * fa - 1e-9)
        extra = max(float(half), (whole / fa - delay_s) * rate)  # channel samples, >= half
        fractional = FractionalDelay(rate, extra, half_length=half)
        self.band_filter: Stage
        if bandpass is not None:
            # one linear-phase FIR for both: the band-pass convolved with the fractional delay
            joint = np.convolve(bandpass.taps, fractional.taps)
            self.band_filter = BatchFir(joint, 1, long_fft_size(joint.size), rate_hz=rate,
                                        delay_samples=bandpass.delay + fractional.delay)
        else:
            self.band_filter = fractional
        post.append(self.band_filter)
        delay_s += extra / rate
        self.delay_s = delay_s
        self.trim_samples = int(round(delay_s * self.audio_rate_hz))
        self.residual_delay_s = delay_s - self.trim_samples / self.audio_rate_hz
        self.baseband_tap = TapPoint(rate)
        self.settled_tap = TapPoint(rate)
        self.settle_samples = design.settle_samples
        self.detector_tap = TapPoint(rate)
        self._trim = DelayTrim(self.trim_samples, self.audio_rate_hz)
        stages: list[Stage] = [self.detector, self.detector_tap, *post]
        if self.audio_gain != 1.0:
            stages.append(Scale(self.audio_gain, rate))
        stages += [self.resampler, self._trim]
        self.chain = Chain(stages)
        self.power_sum = 0.0
        self.peak_power = 0.0
        self.baseband_samples = 0
        self.level_samples = 0

    # -- observers -------------------------------------------------------------------------------
    def on_baseband(self, observer: Callable[[np.ndarray], object]) -> None:
        """Call ``observer`` with every block of channel baseband that carries signal (not end padding)."""
        self.baseband_tap.attach(observer)

    def on_settled_baseband(self, observer: Callable[[np.ndarray], object]) -> None:
        """Like :meth:`on_baseband`, without the front end's warm-up (:attr:`ChannelDesign.settle_samples`):
        what levels and measurements see."""
        self.settled_tap.attach(observer)

    def on_detector(self, observer: Callable[[np.ndarray], object]) -> None:
        """Call ``observer`` with every block of detector output."""
        self.detector_tap.attach(observer)

    # -- streaming ---------------------------------------------------------------------------------
    def observe(self, baseband: np.ndarray) -> None:
        """Count a block of signal baseband in the level (after the warm-up) and show it to the observers
        (done by :meth:`process`; called directly when a batch of channels is processed together)."""
        if not baseband.size:
            return
        warm = min(baseband.size, max(0, self.settle_samples - self.baseband_samples))
        self.baseband_samples += baseband.size
        self.baseband_tap.process(baseband)
        settled = baseband[warm:]
        if settled.size:
            p = np.square(settled.real)
            p += np.square(settled.imag)
            self.power_sum += float(p.sum(dtype=np.float64))
            self.peak_power = max(self.peak_power, float(p.max()))
            self.level_samples += settled.size
            self.settled_tap.process(settled)

    def process(self, baseband: np.ndarray) -> np.ndarray:
        """Channel baseband (carrier at 0 Hz) in, audio out (float32, delay-compensated)."""
        self.observe(baseband)
        return self.chain.process(baseband)

    def finish(self, *padding: np.ndarray) -> np.ndarray:
        """The last audio: the signal ends here; ``padding`` blocks (not signal) push the delayed tail
        out, then the chain is flushed."""
        self.chain.signal_ends(self.baseband_samples)
        pieces = [self.chain.process(block) for block in padding]
        pieces.append(self.chain.flush())
        return np.concatenate(pieces)

    def trim(self, audio: np.ndarray) -> np.ndarray:
        """Drop the compensated delay from the start of audio made outside :attr:`chain` (batches)."""
        return self._trim.process(audio)

    def observe_detector(self, detected: np.ndarray) -> None:
        """Show detector output made outside :attr:`chain` (batches) to the detector observers."""
        self.detector_tap.process(detected)

    def batch_key(self) -> Hashable | None:
        """Back ends with equal keys run identical audio chains (the same stages with the same taps), so a
        batch can process them as rows of one array; None when this one cannot be batched (only
        envelope-detected AM without AGC, with an audio band-pass, is)."""
        if self.design.channel.mode != "envelope" or self.agc or self.normaliser is None:
            return None
        if not self.design.channel.audio_band:
            return None
        fir = cast(BatchFir, self.band_filter)  # with an audio band it is the merged FIR
        r = self.resampler
        return (self.design.channel_rate_hz, tuple(sorted(self.normaliser.settings.items())), fir.taps.tobytes(),
                fir.nfft, fir.delay, r.up, r.down, r.taps.tobytes(), self.audio_gain, self.trim_samples)

    # -- results -----------------------------------------------------------------------------------
    @property
    def level_dbfs(self) -> float | None:
        """Mean power of the channel baseband after the front end's warm-up (dBFS)."""
        if not self.level_samples or self.power_sum <= 0:
            return None
        return 10 * math.log10(self.power_sum / self.level_samples)

    @property
    def peak_dbfs(self) -> float | None:
        """Peak power of the channel baseband (dBFS)."""
        return 10 * math.log10(self.peak_power) if self.peak_power > 0 else None
