"""One channel from a wideband capture: front end, detector, audio post, with tap points.

The chain (DESIGN.md data flow)::

    IQ at fs ──► front end ──────────────► fine mix ──► detector ──► AM: carrier ──► audio band ──► resampler ──► audio
                 (mix by the carrier bin,   residual     envelope     normalisation   (300–3000 Hz)   to the audio
                  channel filter, decimate  carrier      coherent     SSB/DSB: AGC    or DC block     rate
                  to the channel rate)      offset       usb/lsb/dsb  (optional)

Two front ends implement the same contract:

* ``"fft"`` (default): a fast-convolution filter bank (Borgerding 2006; see
  :mod:`iqsift.dsp.channelizer`) with one channel. Mixing, a sharp channel
  filter and decimation in one FFT step — the engine that makes long captures
  cheap, and the same code path as multi-channel extraction.
* ``"polyphase"``: the textbook time-domain chain — a frequency-translating
  polyphase FIR decimator followed by further FIR decimation stages
  (Crochiere & Rabiner 1983; harris 2004), planned by
  :func:`iqsift.dsp.filters.plan_decimation`. Slower, used as a cross-check.

The receiver compensates its own delay: audio sample ``k`` belongs to capture
time ``start + k / audio_rate``, and ``n`` input samples give
``round(n · audio_rate / fs)`` audio samples. The compensated delay and what
is left of it (below one audio sample) are reported.
"""

from __future__ import annotations

import math
import warnings
from fractions import Fraction
from dataclasses import dataclass, field
from typing import Any, Iterator

import numpy as np

from .channel import Channel
from .dsp.channelizer import (
    BankChannel,
    FastConvChannelizer,
    choose_fft_size,
    power_of_two_decimation,
    smooth_numbers,
)
from .dsp.filters import LowpassDesign, design_lowpass, design_resampler, filter_summary, plan_decimation
from .dsp.detectors import make_detector
from .dsp.batch import BatchFir, long_fft_size
from .dsp.post import CarrierNormaliser, DelayTrim, FractionalDelay, Squelch
from .dsp.stages import AGC, AudioBandpass, FirDecimator, Mixer, RationalResampler
from .modes import AM_MODES
from .errors import IqsiftWarning, ParameterError

__all__ = ["ChannelDesign", "design_channel", "ChannelBackEnd", "Receiver", "ReceiverResult", "TAP_NAMES"]

TAP_NAMES = ("input", "channel", "detector", "audio")
"""Tap points where a spectrum accumulator can sit: the wideband input, the channel baseband after
the front end and fine mixing, the detector output, and the final audio."""

AM_AUDIO_GAIN = 0.5
"""AM audio scale: the carrier-normalised message m·s(t) is written as 0.5·m·s(t) (full scale = 200 % modulation)."""
KEEP_AUDIO_S = 1200.0
"""With spectra on, the first 20 minutes of audio are kept for the waveform plot (19 MB at 16 kHz)."""
EDGE_FADE_S = 0.005
"""Length of the raised-cosine fade-in and fade-out at the ends of the audio (s)."""


# ----------------------------------------------------------------------------------------------
# Design
# ----------------------------------------------------------------------------------------------
@dataclass
class ChannelDesign:
    """Everything fixed before the first sample: rates, filters, stages.

    Attributes
    ----------
    rate_hz : float
        Input rate (samples/s).
    carrier_offset_hz : float
        Carrier relative to the capture centre (Hz).
    channel : Channel
        The channel.
    decimation : int
        Input samples per channel-rate sample.
    channel_rate_hz : float
        Rate of the channel baseband (samples/s).
    prototype : LowpassDesign
        Channel filter prototype at the input rate (half-width passband).
    engine : str
        ``"fft"`` or ``"polyphase"``.
    resampler : ResamplerDesign
        Channel rate to audio rate.
    """

    rate_hz: float
    carrier_offset_hz: float
    channel: Channel
    decimation: int
    channel_rate_hz: float
    prototype: LowpassDesign | None
    engine: str
    resampler: Any
    ripple_db: float
    atten_db: float
    real_input: bool = False
    polyphase_plan: Any = None
    fft_size: int | None = None
    fft_hop: int | None = None
    extra: dict = field(default_factory=dict)

    @property
    def filter_centre_hz(self) -> float:
        """Centre of the channel filter relative to the capture centre (Hz)."""
        lo, hi = self.channel.passband_hz
        return self.carrier_offset_hz + 0.5 * (lo + hi)

    @property
    def half_width_hz(self) -> float:
        lo, hi = self.channel.passband_hz
        return 0.5 * (hi - lo)

    def front_end_delay_s(self) -> float:
        """Group delay of the front end (s)."""
        if self.engine == "fft":
            return self.prototype.group_delay_s
        return sum(stage.lowpass.group_delay_s for stage in self.polyphase_plan.stages)

    def stages(self) -> list[dict[str, Any]]:
        """The chain as a list of stage descriptions (for reports and ``iqsift design``)."""
        lo, hi = self.channel.passband_hz
        out: list[dict[str, Any]] = []
        if self.engine == "fft":
            p = self.prototype
            n, hop = self.fft_size, self.fft_hop
            # cost estimate: complex FFT ~ 5 N log2 N real flops (Cooley-Tukey count), half of them multiply-adds
            fwd = 2.5 * n * math.log2(n) / hop
            k = n // self.decimation
            inv = (2.5 * k * math.log2(max(k, 2)) + 4 * k) / hop
            out.append({
                "name": "fast-convolution channel filter",
                "kind": "fft_channelizer",
                "rate_in_hz": self.rate_hz,
                "rate_out_hz": self.channel_rate_hz,
                "down": self.decimation,
                "fft_size": n,
                "hop": hop,
                "mix_hz": self.carrier_offset_hz,
                "filter_centre_hz": self.filter_centre_hz,
                "channel_passband_hz": [lo, hi],
                **filter_summary(p),
                "macs_per_input_sample": fwd + inv,
                "macs_per_chain_input_sample": fwd + inv,
            })
        else:
            for stage in self.polyphase_plan.stages:
                entry = stage.to_dict()
                del entry["lowpass"]
                entry["name"] = f"FIR decimator /{stage.down}" + (" (translating)" if stage.index == 0 else "")
                entry["mix_hz"] = self.filter_centre_hz if stage.index == 0 else None
                out.append(entry)
        ch_rate = self.channel_rate_hz
        out.append({"name": f"detector ({self.channel.mode})", "kind": "detector", "rate_in_hz": ch_rate,
                    "rate_out_hz": ch_rate})
        band = self.channel.audio_band
        out.append({
            "name": "audio band-pass" if band else "DC removal (linear phase)",
            "kind": "audio_filter",
            "rate_in_hz": ch_rate,
            "rate_out_hz": ch_rate,
            "passband_hz": f"{band[0]:g}-{band[1]:g}" if band else None,
        })
        r = self.resampler.to_dict()
        r["name"] = f"resampler x{self.resampler.up}/{self.resampler.down}"
        r["macs_per_chain_input_sample"] = self.resampler.macs_per_input_sample / self.decimation
        out.append(r)
        return out

    def as_dict(self, center_hz: float | None = None) -> dict[str, Any]:
        """The report's ``design`` object."""
        stages = self.stages()
        macs = sum(s.get("macs_per_chain_input_sample") or 0.0 for s in stages)
        return {
            "engine": self.engine,
            "rate_in_hz": self.rate_hz,
            "channel_rate_hz": self.channel_rate_hz,
            "audio_rate_hz": self.resampler.rate_out_hz,
            "decimation": self.decimation,
            "carrier_offset_hz": self.carrier_offset_hz,
            "ripple_db": self.ripple_db,
            "atten_db": self.atten_db,
            "transition_hz": self.channel.transition,
            "real_input": self.real_input,
            "macs_per_input_sample": macs,
            "stages": stages,
        }


def fft_decimation(rate_hz: float, min_rate_hz: float, audio_rate_hz: float) -> int:
    """Decimation for the FFT engine: a whole number with no prime factor above 5 (so it divides a fast FFT
    size) keeping the channel rate at least ``min_rate_hz``, chosen for the least work after the bank:
    a low channel rate, and a simple exact ratio to the audio rate (2.4 MS/s -> 8 kS/s -> 16 kHz audio:
    decimation 300, audio resampling x2)."""
    best, best_cost = 1, math.inf
    for d in smooth_numbers(max(1, int(rate_hz // min_rate_hz))):
        ch = rate_hz / d
        if ch < min_rate_hz:
            continue
        ratio = Fraction(audio_rate_hz / ch).limit_denominator(1000)
        exact = abs(float(ratio) * ch - audio_rate_hz) <= 1e-9 * audio_rate_hz
        cost = ch * (1.0 + 0.01 * (ratio.numerator + ratio.denominator)) * (1.0 if exact else 1.5)
        if cost < best_cost:
            best, best_cost = d, cost
    return best


def design_channel(
    rate_hz: float,
    channel: Channel,
    *,
    center_hz: float | None = None,
    real_input: bool = False,
    engine: str = "fft",
    ripple_db: float = 0.1,
    atten_db: float = 80.0,
) -> ChannelDesign:
    """Design the chain for ``channel`` in a capture at ``rate_hz`` centred on ``center_hz``.

    The channel rate is the input rate divided by the largest power of two
    that keeps it at least ``max(3 × top, top + edge)``, where ``top`` is the
    outermost passband edge and ``edge`` the outermost stopband edge relative
    to the carrier: the passband sits inside the middle two thirds of the
    channel band, and in the polyphase engine nothing beyond the stopband edge
    can fold back into the passband. (The FFT engine discards everything
    outside the channel's bins, so its channel filter is, in effect, cut off
    at half the channel rate.) The prototype's passband edge is the passband
    half-width and its stopband edge lies one transition further out.

    Raises
    ------
    ParameterError
        If the channel's filter reaches beyond the capture band, the capture
        is too slow for the channel, or the engine is unknown.
    """
    if engine not in ("fft", "polyphase"):
        raise ParameterError(f"engine: got {engine!r}; it must be 'fft' or 'polyphase'")
    offset = channel.carrier_offset(center_hz)
    lo, hi = channel.passband_hz
    t = channel.transition
    low_edge, high_edge = offset + lo - t, offset + hi + t
    nyquist = rate_hz / 2
    band_lo = 0.0 if real_input else -nyquist
    where = _channel_where(channel, center_hz)
    if low_edge < band_lo or high_edge > nyquist:
        span = (f"{_fmt(center_hz + band_lo)}..{_fmt(center_hz + nyquist)}" if center_hz is not None
                else f"offsets {_fmt(band_lo)}..{_fmt(nyquist)}")
        raise ParameterError(
            f"channel {where}: its filter ({_fmt_rel(low_edge, center_hz)}..{_fmt_rel(high_edge, center_hz)}) "
            f"reaches outside the capture band ({span})"
        )
    edge = max(abs(lo - t), abs(hi + t))
    top = max(abs(lo), abs(hi))
    if engine == "fft":
        # The bank keeps only the channel's own bins, so nothing outside them can alias; but cutting the
        # filter's response off at the edge of those bins lengthens its impulse response, which then wraps
        # around the overlap-save frame. The cut must therefore fall well down the transition band, where
        # the response is already > 60 dB down: at least 80 % of the way to the stopband edge (measured:
        # a neighbour 40 dB stronger 8.33 kHz away stays > 70 dB down). And the passband keeps a fifth of
        # the channel band spare on each side for the audio filters.
        min_rate = max(2.5 * top, 2.0 * (top + 0.8 * t))
    else:
        # decimating stages fold everything beyond the stopband edge: it must land outside the passband
        min_rate = max(3.0 * top, top + edge)
    if min_rate > rate_hz:
        raise ParameterError(
            f"channel {where}: needs a capture rate of at least {min_rate:g} samples/s, the capture has {rate_hz:g}"
        )
    if engine == "fft":
        decimation = fft_decimation(rate_hz, min_rate, channel.audio_rate_hz)
    else:
        decimation = power_of_two_decimation(rate_hz, min_rate)
    ch_rate = rate_hz / decimation
    half = 0.5 * (hi - lo)
    prototype = plan = None
    fft_size = hop = None
    if engine == "fft":
        # Kaiser window: its passband ripple equals its stopband deviation (0.002 dB p-p at 80 dB), far inside
        # the ripple specification. An equiripple design that spends the whole 0.1 dB would by itself limit
        # the recovered message to about 45 dB SNR (tones falling on ripple peaks and troughs), and its
        # exchange search costs start-up time.
        prototype = design_lowpass(rate_hz, half, half + t, ripple_db, atten_db, method="kaiser")
        history = int(math.ceil((prototype.num_taps - 1) / decimation)) * decimation
        fft_size = choose_fft_size(history, decimation)
        hop = ((fft_size - history) // decimation) * decimation
    else:
        plan = plan_decimation(rate_hz, half, half + t, decimation, ripple_db, atten_db)
    audio_top = channel.audio_top_hz
    audio_rate = channel.audio_rate_hz
    if audio_top >= 0.5 * min(ch_rate, audio_rate):
        raise ParameterError(
            f"channel {where}: audio up to {audio_top:g} Hz does not fit an audio rate of {audio_rate:g} samples/s"
        )
    res_pass = audio_top
    # Only what would land inside the audio band [0, top] must be stopped: an image (or alias) of content
    # at f <= top falls at min(rates) - f >= min(rates) - top. So the stopband may start there (but never
    # below the lower Nyquist frequency): a transition about twice as wide, half the taps.
    low = min(ch_rate, audio_rate)
    res_stop = max(low / 2, low - audio_top)
    # ... but inside the band of the filter's own rate (rate_in x up); with equal rates (up = down = 1) that
    # is simply the Nyquist frequency of the channel rate
    up = Fraction(audio_rate / ch_rate).limit_denominator(1000).numerator
    res_stop = min(res_stop, 0.5 * ch_rate * up)
    # the audio resampler gets a tighter ripple than the channel filter: with 0.1 dB peak-to-peak an
    # equiripple design alone would limit the message SNR to about 45 dB
    # (Kaiser: one design and one verification; the resampler runs at the channel rate, so the few extra
    # taps an equiripple design would save cost almost nothing, while its search costs a noticeable start-up)
    resampler = design_resampler(ch_rate, audio_rate, res_pass, min(ripple_db, 0.01), atten_db, stopband_hz=res_stop,
                                 method="kaiser")
    return ChannelDesign(
        rate_hz=rate_hz,
        carrier_offset_hz=offset,
        channel=channel,
        decimation=decimation,
        channel_rate_hz=ch_rate,
        prototype=prototype,
        engine=engine,
        resampler=resampler,
        ripple_db=ripple_db,
        atten_db=atten_db,
        real_input=real_input,
        polyphase_plan=plan,
        fft_size=fft_size,
        fft_hop=hop,
    )


def _fmt(hz: float) -> str:
    from .units import format_hz

    return format_hz(hz)


def _fmt_rel(offset: float, center: float | None) -> str:
    return _fmt(offset if center is None else center + offset)


def _channel_where(channel: Channel, center_hz: float | None) -> str:
    freq = channel.absolute_frequency(center_hz)
    at = _fmt(freq) if freq is not None else f"offset {_fmt(channel.carrier_offset(center_hz))}"
    return f"'{channel.name}' at {at}"


# ----------------------------------------------------------------------------------------------
# Front ends (wideband → channel baseband, carrier at 0 Hz)
# ----------------------------------------------------------------------------------------------
class _PolyphaseFrontEnd:
    """Translating FIR decimator + FIR decimation stages + a mixer putting the carrier at 0 Hz."""

    def __init__(self, design: ChannelDesign) -> None:
        fs = design.rate_hz
        stages = []
        for stage in design.polyphase_plan.stages:
            gain = 2.0 if (stage.index == 0 and design.real_input) else 1.0
            translate = design.filter_centre_hz if stage.index == 0 else None
            stages.append(FirDecimator(stage.lowpass.taps * gain, stage.down, stage.rate_in_hz, translate_hz=translate))
        self.stages = stages
        lo, hi = design.channel.passband_hz
        # after translation the carrier sits at -(lo + hi)/2; mix it to 0
        self.mixer = Mixer(design.channel_rate_hz, -0.5 * (lo + hi))
        self.delay_s = design.front_end_delay_s()
        # the translating stage mixed by the passband centre before its delay; moving the carrier to 0 Hz
        # afterwards must refer to the same (delayed) time, else a one-sided channel gets a constant phase
        self.rotation = np.complex64(np.exp(-2j * np.pi * 0.5 * (lo + hi) * self.delay_s))
        self.rate_hz = fs

        self.taps: list[Any] = [None] * len(stages)  # optional spectrum accumulators after each stage

    def process(self, block: np.ndarray, tap: bool = True) -> np.ndarray:
        for stage, acc in zip(self.stages, self.taps):
            block = stage.process(block)
            if tap and acc is not None and block.size:
                acc.feed(block)
        return self.mixer.process(block) * self.rotation

    def flush(self) -> np.ndarray:
        out = np.zeros(0, np.complex64)
        for i, stage in enumerate(self.stages):
            held = stage.flush()
            for later in self.stages[i + 1 :]:
                held = later.process(held)
            out = np.concatenate([out, held]) if held.size else out
        return self.mixer.process(out) * self.rotation if out.size else out

    def reset(self) -> None:
        for stage in self.stages:
            stage.reset()
        self.mixer.reset()


class _FftFrontEnd:
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

    def process(self, block: np.ndarray) -> np.ndarray:
        return self.mixer.process(self.bank.process(block)[0])

    def flush(self) -> np.ndarray:
        return self.mixer.process(self.bank.flush()[0])

    def reset(self) -> None:
        self.bank.reset()
        self.mixer.reset()


def bank_channel(design: ChannelDesign) -> BankChannel:
    """The filter-bank entry for a designed channel."""
    return BankChannel(design.carrier_offset_hz, design.channel.passband_hz, design.prototype.taps, design.decimation)


# ----------------------------------------------------------------------------------------------
# Back end (channel baseband → audio)
# ----------------------------------------------------------------------------------------------
def valid_mask(first: int, count: int, lag: int, real_total: int | None) -> np.ndarray | None:
    """Which of detector outputs ``first .. first + count − 1`` stem from real input: not the detector's
    start-up (``lag`` samples) nor the padding after the ``real_total`` input samples. None: all do."""
    stop = np.inf if real_total is None else real_total + lag
    if first >= lag and first + count <= stop:
        return None  # all valid (the usual case): no mask needed
    idx = first + np.arange(count)
    return (idx >= lag) & (idx < stop)


class _Delayed:
    """A stage with its delay stated by its builder (for merged filters)."""

    def __init__(self, stage: Any, delay: float) -> None:
        self.stage = stage
        self.delay = float(delay)

    def process(self, block: np.ndarray) -> np.ndarray:
        return np.asarray(self.stage.process(block), dtype=np.float32)

    def flush(self) -> np.ndarray:
        return np.zeros(0, np.float32)

    def reset(self) -> None:
        self.stage.reset()


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
    """

    def __init__(
        self,
        design: ChannelDesign,
        front_delay_s: float,
        *,
        agc: bool | None = None,
        detector_options: dict | None = None,
        taps: dict | None = None,
    ) -> None:
        ch = design.channel
        rate = design.channel_rate_hz
        self.design = design
        options = dict(detector_options or {})
        if ch.mode in ("usb", "lsb"):
            # the front end's one-sided channel filter already rejects the opposite sideband (>= atten_db)
            options.setdefault("sideband_filter", False)
        self.detector = make_detector(ch.mode, rate, **options)
        self.post: list[Any] = []
        if ch.mode in AM_MODES:
            # the carrier level follows fading and push-to-talk keying; for voice (audio from 300 Hz) it may
            # be fast (passes 15 Hz, stops 200 Hz: keying transients last ~10 ms instead of ~50 ms); for
            # broadcast audio, which reaches down to ~50 Hz, it must be slower (passes 4 Hz, stops 40 Hz)
            check = ch.mode != "envelope"  # only a coherent detector can output a zero-mean signal
            if ch.audio_band and ch.audio_band[0] >= 250:
                self.post.append(CarrierNormaliser(rate, pass_hz=15.0, stop_hz=200.0, check_carrier=check))
            else:
                self.post.append(CarrierNormaliser(rate, pass_hz=4.0, stop_hz=40.0, check_carrier=check))
        # AM audio: full scale is 200 % modulation (6 dB of headroom for overmodulation, keying
        # transients and noise peaks); so 100 % modulation peaks at 0.5
        self.audio_gain = AM_AUDIO_GAIN if ch.mode in AM_MODES else 1.0
        if agc is None:
            agc = ch.mode not in AM_MODES
        self.agc = bool(agc)
        if self.agc:
            self.post.append(AGC(rate, target_dbfs=-12.0, attack_s=0.005, decay_s=1.0, max_gain_db=60.0))
        band = ch.audio_band
        if band:
            self.post.append(AudioBandpass(rate, band[0], band[1]))
        elif ch.mode not in AM_MODES:
            # broadcast-width SSB/DSB: remove DC with linear phase (AM modes lose it in the normaliser)
            self.post.insert(0, CarrierNormaliser(rate, normalise=False))
        r = design.resampler
        self.resampler = RationalResampler(r.taps, r.up, r.down, rate)
        self.audio_rate_hz = r.rate_out_hz
        delay_s = front_delay_s + self.detector.delay / rate
        delay_s += sum(stage.delay for stage in self.post) / rate
        delay_s += self.resampler.delay / self.audio_rate_hz
        # a windowed-sinc fractional delay tops the chain's delay up to a whole number of audio samples,
        # so audio sample k belongs exactly to input time k / audio rate
        half = 16
        fa = self.audio_rate_hz
        whole = math.ceil((delay_s + half / rate) * fa - 1e-9)
        extra = max(float(half), (whole / fa - delay_s) * rate)  # channel samples, >= half
        fractional = FractionalDelay(rate, extra, half_length=half)
        if self.post and isinstance(self.post[-1], AudioBandpass):
            # one linear-phase FIR for both: the band-pass convolved with the fractional delay
            band = self.post.pop()
            joint = np.convolve(band.taps, fractional.taps)
            merged = BatchFir(joint, 1, long_fft_size(joint.size))
            self.post.append(_Delayed(merged, band.delay + fractional.delay))
        else:
            self.post.append(fractional)
        delay_s += extra / rate
        self.delay_s = delay_s
        self.trim_samples = int(round(delay_s * self.audio_rate_hz))
        self.residual_delay_s = delay_s - self.trim_samples / self.audio_rate_hz
        self._trim = DelayTrim(self.trim_samples)
        self.taps = taps or {}
        self.on_baseband = None  # optional callable receiving each channel baseband block (e.g. a SigMF writer)
        self.analyzer = None  # optional iqsift.measure.ChannelAnalyzer
        # mute the audio while the channel holds only noise (Channel.squelch_db dB above the floor)
        self.squelch = Squelch(rate, ch.squelch_db) if ch.squelch_db is not None else None
        self.reset_levels()

    def reset_levels(self) -> None:
        self._detector_out = 0
        self._real_total = None
        self.power_sum = 0.0
        self.peak_power = 0.0
        self.baseband_samples = 0

    def _valid(self, count: int) -> np.ndarray:
        """Which of the next ``count`` detector outputs stem from real input (not start-up or padding)."""
        first = self._detector_out
        self._detector_out += count
        return valid_mask(first, count, int(round(self.detector.delay)), self._real_total)

    def _post(self, d: np.ndarray, final: bool) -> np.ndarray:
        tap = self.taps.get("detector")
        if tap is not None and d.size:
            tap.feed(d)
        valid = self._valid(d.size)
        for i, stage in enumerate(self.post):
            if isinstance(stage, CarrierNormaliser):
                d = stage.process(d, valid)
            else:
                d = stage.process(d)
            if final:
                held = stage.flush()
                if held.size:
                    for later in self.post[i + 1 :]:
                        held = later.process(held)
                    d = np.concatenate([d, held])
        if self.audio_gain != 1.0:
            d = np.asarray(d, dtype=np.float32) * np.float32(self.audio_gain)
        audio = self.resampler.process(np.asarray(d, dtype=np.float32))
        return self._trim.process(audio)

    def process(self, baseband: np.ndarray, count_level: bool = True) -> np.ndarray:
        """Channel baseband (carrier at 0 Hz) in, audio out (float32, delay-compensated).

        ``count_level=False`` marks padding pushed in at the end (not signal): it is excluded from
        the level measurement and from the carrier-level estimate.
        """
        self.account(baseband, count_level)
        return self._post(self.detector.process(baseband), final=False)

    def account(self, baseband: np.ndarray, count_level: bool = True) -> None:
        """The bookkeeping of :meth:`process` without the signal processing: level, taps, baseband
        writer, analyzer, squelch (used as well when a batch of identical channels is processed at once)."""
        if not count_level and self._real_total is None:
            self._real_total = self.baseband_samples
        if count_level and baseband.size:
            p = np.square(baseband.real)
            p += np.square(baseband.imag)
            self.power_sum += float(p.sum(dtype=np.float64))
            self.peak_power = max(self.peak_power, float(p.max()))
            self.baseband_samples += baseband.size
        if baseband.size and count_level:
            for key in ("channel", "channel_spectrogram"):
                tap = self.taps.get(key)
                if tap is not None:
                    tap.feed(baseband)
        if self.on_baseband is not None and baseband.size and count_level:
            self.on_baseband(baseband)
        if self.analyzer is not None and baseband.size and count_level:
            self.analyzer.feed_baseband(baseband)
        if self.squelch is not None and baseband.size and count_level:
            self.squelch.feed(baseband)

    def flush(self) -> np.ndarray:
        """Release what the detector and post stages hold."""
        d = self.detector.flush()
        return self._post(d, final=True)

    @property
    def level_dbfs(self) -> float | None:
        """Mean power of the channel baseband (dBFS)."""
        if not self.baseband_samples or self.power_sum <= 0:
            return None
        return 10 * math.log10(self.power_sum / self.baseband_samples)

    @property
    def peak_dbfs(self) -> float | None:
        return 10 * math.log10(self.peak_power) if self.peak_power > 0 else None


# ----------------------------------------------------------------------------------------------
# Receiver
# ----------------------------------------------------------------------------------------------
def input_tap(rate_hz: float, center_hz: float, real_input: bool):
    """Welch accumulator for the wideband input: about 100 Hz resolution (at most 2^16 points), absolute RF axis."""
    from .spectra import WelchAccumulator

    seg = 1 << max(10, min(16, int(round(math.log2(rate_hz / 100)))))
    return WelchAccumulator(rate_hz, nperseg=seg, center_hz=center_hz, name="input", onesided=real_input)


@dataclass
class ReceiverResult:
    """Audio and report of a finished run."""

    audio: np.ndarray
    audio_rate_hz: float
    report: dict[str, Any]
    spectra: dict[str, Any] = field(default_factory=dict)


class Receiver:
    """One channel of a capture, streamed block by block.

    Parameters
    ----------
    rate_hz : float
        Input sample rate (samples/s).
    channel : Channel
        What to receive.
    center_hz : float, optional
        Capture centre frequency (Hz); needed when the channel is given by
        absolute frequency.
    real_input : bool
        The input is a real signal (real IF).
    engine : {"fft", "polyphase"}
        Front end (see module docstring).
    ripple_db, atten_db : float
        Channel filter specification (passband ripple peak-to-peak, stopband attenuation).
    agc : bool or None
        See :class:`ChannelBackEnd`.
    spectra : bool or sequence of str
        Accumulate spectra at these tap points (``True`` = all of :data:`TAP_NAMES`).
    detector_options : dict, optional
        Passed to the detector.

    Examples
    --------
    >>> from iqsift import Receiver, make_channel, open_capture          # doctest: +SKIP
    >>> capture = open_capture("sample_captures/vhf_airband.sigmf-meta")
    >>> rx = Receiver.for_capture(capture, make_channel(freq="127.35M", emission="6K00A3E"))
    >>> result = rx.run(capture)
    >>> result.audio.shape, result.report["channel"]["level_dbfs"]
    """

    def __init__(
        self,
        rate_hz: float,
        channel: Channel,
        *,
        center_hz: float | None = None,
        real_input: bool = False,
        engine: str = "fft",
        ripple_db: float = 0.1,
        atten_db: float = 80.0,
        agc: bool | None = None,
        spectra: bool | tuple[str, ...] = False,
        detector_options: dict | None = None,
        workers: int | None = None,
        own_front: bool = True,
    ) -> None:
        self.rate_hz = float(rate_hz)
        self.center_hz = center_hz
        self.channel = channel
        self.design = design_channel(
            rate_hz, channel, center_hz=center_hz, real_input=real_input, engine=engine,
            ripple_db=ripple_db, atten_db=atten_db,
        )
        if not own_front:
            self.front = None  # fed by a shared filter bank (see iqsift.extract)
        elif engine == "fft":
            self.front = _FftFrontEnd(self.design, workers)
        else:
            self.front = _PolyphaseFrontEnd(self.design)
        self.spectrograms: dict[str, Any] = {}
        self._keep_audio = False
        self._kept_audio: list[np.ndarray] = []
        self._kept = 0
        self.taps = self._make_taps(spectra)
        if spectra and isinstance(self.front, _PolyphaseFrontEnd) and (spectra is True or "stages" in spectra):
            from .spectra import WelchAccumulator

            # the time-domain engine has a tap after each decimation stage (the first one also mixes)
            for i, stage in enumerate(self.design.polyphase_plan.stages):
                name = f"stage{i + 1}"
                rate = stage.rate_out_hz
                acc = WelchAccumulator(rate, nperseg=1 << max(8, int(round(math.log2(rate / 20)))), name=name)
                self.front.taps[i] = acc
                self.taps[name] = acc
        back_taps = dict(self.taps)
        if "channel" in self.spectrograms:
            back_taps["channel_spectrogram"] = self.spectrograms["channel"]
        self.back = ChannelBackEnd(self.design, self.design.front_end_delay_s(), agc=agc,
                                   detector_options=detector_options, taps=back_taps)
        self.audio_rate_hz = self.back.audio_rate_hz
        self.samples_in = 0
        self.audio_out = 0

    @classmethod
    def for_capture(cls, capture, channel: Channel, selection=None, **options: Any) -> "Receiver":
        """A receiver matching a capture's rate, centre (over ``selection``) and kind.

        Raises
        ------
        ParameterError
            Naming the capture file, when the channel cannot be received from it.
        """
        try:
            return cls(capture.sample_rate_hz, channel, center_hz=capture.center_for(selection),
                       real_input=not capture.is_complex, **options)
        except ParameterError as exc:
            raise ParameterError(f"{capture.path}: {exc}") from None

    def _make_taps(self, spectra) -> dict[str, Any]:
        if not spectra:
            return {}
        from .spectra import WelchAccumulator

        names = TAP_NAMES if spectra is True else tuple(spectra)
        unknown = [n for n in names if n not in TAP_NAMES and n != "stages"]
        if unknown:
            raise ParameterError(f"spectra: unknown tap point(s) {unknown}; tap points are {', '.join(TAP_NAMES)}")
        d = self.design
        centre = self.center_hz or 0.0
        taps: dict[str, Any] = {}
        ch_rate = d.channel_rate_hz
        # about 2.5 Hz resolution at the channel, 0.3 kHz at the input (common practice for voice channels)
        seg_ch = 1 << max(8, int(round(math.log2(ch_rate / 4))))
        if "input" in names:
            taps["input"] = input_tap(self.rate_hz, centre, d.real_input)
        if "channel" in names:
            taps["channel"] = WelchAccumulator(ch_rate, nperseg=seg_ch, name="channel")
        if "detector" in names:
            taps["detector"] = WelchAccumulator(ch_rate, nperseg=seg_ch, name="detector", onesided=True)
        if "audio" in names:
            seg_a = 1 << max(8, int(round(math.log2(d.resampler.rate_out_hz / 4))))
            taps["audio"] = WelchAccumulator(d.resampler.rate_out_hz, nperseg=seg_a, name="audio", onesided=True)
        from .spectra import SpectrogramAccumulator

        # time-frequency views (bounded memory: at most 800 columns, merged as the run grows)
        if "channel" in names:
            self.spectrograms["channel"] = SpectrogramAccumulator(ch_rate, nperseg=1 << max(7, int(round(
                math.log2(ch_rate / 40)))), max_columns=400)
        if "audio" in names:
            fa = d.resampler.rate_out_hz
            self.spectrograms["audio"] = SpectrogramAccumulator(fa, nperseg=1 << max(7, int(round(math.log2(fa / 40)))),
                                                                onesided=True, max_columns=400)
            self._keep_audio = True
        return taps

    # -- streaming -----------------------------------------------------
    def process(self, block: np.ndarray) -> np.ndarray:
        """Feed IQ samples (complex64, or real for a real capture); returns new audio (float32)."""
        block = np.asarray(block)
        self.samples_in += block.shape[0]
        tap = self.taps.get("input")
        if tap is not None and block.size:
            tap.feed(block)
        audio = self.back.process(self.front.process(block))
        return self._emit(audio)

    def _fade(self, audio: np.ndarray, at_end: bool) -> np.ndarray:
        """Raised-cosine fade over the first and last EDGE_FADE_S of the stream.

        A stream starts and stops abruptly; the audio filters ring on those steps (Gibbs overshoot
        up to ~30 % of full scale). The fades confine the edits to 5 ms at each end.
        """
        n_fade = int(round(EDGE_FADE_S * self.audio_rate_hz))
        head = n_fade - self.audio_out
        if (head <= 0 and not at_end) or not audio.size:
            return audio
        audio = np.array(audio, dtype=np.float32, copy=True)
        if head > 0 and audio.size:
            k = np.arange(self.audio_out, self.audio_out + min(head, audio.size))
            audio[: k.size] *= (0.5 - 0.5 * np.cos(np.pi * (k + 0.5) / n_fade)).astype(np.float32)
        if at_end and audio.size:
            m = min(n_fade, audio.size)
            k = np.arange(m)[::-1]
            audio[-m:] *= (0.5 - 0.5 * np.cos(np.pi * (k + 0.5) / n_fade)).astype(np.float32)
        return audio

    def analyze(self, **options: Any) -> "Receiver":
        """Measure the channel while it runs (see :class:`iqsift.measure.ChannelAnalyzer` for options).

        The report then carries the ``carrier``, ``modulation``, ``bandwidth``, ``audio`` and
        ``activity`` sections. Returns the receiver, for chaining.
        """
        from .measure.analyzer import ChannelAnalyzer

        nominal = self.channel.absolute_frequency(self.center_hz)
        if nominal is None:
            nominal = self.design.carrier_offset_hz
        self.back.analyzer = ChannelAnalyzer(
            self.design.channel_rate_hz, self.audio_rate_hz, self.channel.mode, self.channel.bandwidth_hz,
            nominal, passband_hz=self.channel.passband_hz, **options,
        )
        return self

    def _emit(self, audio: np.ndarray, at_end: bool = False) -> np.ndarray:
        audio = self._fade(audio, at_end)
        squelch = self.back.squelch
        if squelch is not None and audio.size:
            times = (self.audio_out + np.arange(audio.size)) / self.audio_rate_hz
            audio = audio * squelch.gain(times)
        if self.back.analyzer is not None and audio.size:
            self.back.analyzer.feed_audio(audio)
        tap = self.taps.get("audio")
        if tap is not None and audio.size:
            tap.feed(audio)
        gram = self.spectrograms.get("audio")
        if gram is not None and audio.size:
            gram.feed(audio)
        if self._keep_audio and audio.size:
            room = int(KEEP_AUDIO_S * self.audio_rate_hz) - self._kept
            if room > 0:
                self._kept_audio.append(audio[:room].copy())
                self._kept += min(room, audio.size)
        self.audio_out += audio.size
        return audio

    @property
    def flush_padding(self) -> int:
        """Zero input samples needed at the end to push the chain's delayed tail out."""
        return int(math.ceil(self.back.delay_s * self.rate_hz)) + 4 * self.design.decimation

    def process_baseband(self, baseband: np.ndarray) -> np.ndarray:
        """Feed channel baseband from an outside front end (e.g. a shared filter bank); returns audio."""
        return self._emit(self.back.process(baseband))

    def flush(self) -> np.ndarray:
        """Finish: push the delayed tail out; total audio = round(samples_in · audio_rate / fs)."""
        zeros = np.zeros(self.flush_padding, np.complex64)
        if isinstance(self.front, _PolyphaseFrontEnd):
            tail = self.front.process(zeros, tap=False)  # padding is not signal: keep it out of the spectra
        else:
            tail = self.front.process(zeros)
        return self.finish_baseband(tail, self.front.flush())

    def finish_baseband(self, tail: np.ndarray, flushed: np.ndarray) -> np.ndarray:
        """Finish from the front end's output for the end padding (``tail``) and its flush."""
        self._warn_if_short()
        real_left = self.real_baseband_left(tail.size)
        pieces = [self.back.process(tail[:real_left]), self.back.process(tail[real_left:], count_level=False)]
        pieces.append(self.back.process(flushed, count_level=False))
        pieces.append(self.back.flush())
        return self.emit_last(np.concatenate(pieces))

    def real_baseband_left(self, available: int) -> int:
        """How many of the next ``available`` baseband samples still stem from the input (the front end
        emits ceil(n / D) of them for n input samples); the rest is end padding."""
        left = -(-self.samples_in // self.design.decimation) - self.back.baseband_samples
        return max(0, min(left, available))

    def emit_last(self, audio: np.ndarray) -> np.ndarray:
        """Emit the final audio, cut or zero-padded to round(samples_in × audio rate / input rate) in all."""
        audio = np.asarray(audio, dtype=np.float32)
        need = max(0, self.expected_audio_samples - self.audio_out)
        if audio.size < need:
            audio = np.concatenate([audio, np.zeros(need - audio.size, np.float32)])
        return self._emit(audio[:need], at_end=True)

    def _warn_if_short(self) -> None:
        settle = int(math.ceil(self.back.delay_s * self.rate_hz))
        if self.samples_in < settle:
            warnings.warn(
                f"channel {self.channel.name!r}: {self.samples_in} input samples are fewer than the receiver needs "
                f"to settle ({settle} samples, {self.back.delay_s * 1e3:.1f} ms); the audio and the level are "
                "mostly filter start-up", IqsiftWarning)

    @property
    def expected_audio_samples(self) -> int:
        """Audio samples the whole run yields: round(samples_in × audio rate / input rate)."""
        return int(round(self.samples_in * self.audio_rate_hz / self.rate_hz))

    def stream(self, blocks) -> Iterator[np.ndarray]:
        """Run over an iterable of IQ blocks, yielding audio blocks; flushes at the end."""
        for block in blocks:
            out = self.process(block)
            if out.size:
                yield out
        tail = self.flush()
        if tail.size:
            yield tail

    def run(self, capture=None, samples: np.ndarray | None = None, *, selection=None,
            nonfinite: str = "error", block_size: int | None = None) -> ReceiverResult:
        """Run to completion over a capture (or an array) and return the audio and the report."""
        if samples is not None:
            blocks = [np.asarray(samples)]
        else:
            kwargs = {"nonfinite": nonfinite}
            if selection is not None:
                kwargs.update(start=selection.start, count=selection.count)
            if block_size:
                kwargs["block_size"] = block_size
            blocks = capture.blocks(**kwargs)
        audio = list(self.stream(blocks))
        audio = np.concatenate(audio) if audio else np.zeros(0, np.float32)
        return ReceiverResult(audio, self.audio_rate_hz, self.report(), self.spectra())

    # -- results -------------------------------------------------------
    def kept_audio(self) -> np.ndarray:
        """The audio kept for the waveform plot (the first KEEP_AUDIO_S seconds, with spectra on)."""
        return np.concatenate(self._kept_audio) if self._kept_audio else np.zeros(0, np.float32)

    def spectrogram_results(self) -> dict[str, Any]:
        """Accumulated spectrograms (``SpectrogramResult``) per tap, for those with data."""
        out = {}
        for name, acc in self.spectrograms.items():
            try:
                out[name] = acc.result()
            except ValueError:  # fewer samples than one segment (ParameterError)
                continue
        return out

    def spectra(self, scaling: str = "density") -> dict[str, Any]:
        """Accumulated spectra per tap point (``Spectrum`` objects), for those with data."""
        return {name: acc.result(scaling) for name, acc in self.taps.items() if acc.ready}

    def report(self) -> dict[str, Any]:
        """The run's report: channel, design, measured level, delay."""
        ch = self.channel.as_dict(self.center_hz)
        ch["level_dbfs"] = self.back.level_dbfs
        ch["peak_dbfs"] = self.back.peak_dbfs
        det = self.back.detector
        detector: dict[str, Any] = {"mode": self.channel.mode}
        track = getattr(det, "carrier_offset_hz", None)
        if track is not None:
            detector["carrier_offset_hz"] = track
        report = {
            "channel": ch,
            "design": self.design.as_dict(self.center_hz),
            "detector": detector,
            "agc": self.back.agc,
            "delay": {
                "compensated_s": self.back.trim_samples / self.audio_rate_hz,
                "chain_s": self.back.delay_s,
                "residual_s": self.back.residual_delay_s,
            },
            "input_samples": self.samples_in,
            "audio_samples": self.audio_out,
            "audio_rate_hz": self.audio_rate_hz,
        }
        if self.back.analyzer is not None:
            report.update(self.back.analyzer.result().to_dict())
        return report
