"""What is fixed before the first sample: a channel's rates, filters and stages (:class:`ChannelDesign`).

:func:`design_channel` chooses the decimation, designs the channel filter (a Kaiser-window
low-pass prototype for the fast-convolution engine, a multistage polyphase plan for the
time-domain engine) and the audio resampler, and checks that the channel fits the capture.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Any

from ..channel import Channel
from ..dsp.channelizer import BankChannel, FastConvChannelizer, choose_fft_size, power_of_two_decimation, smooth_numbers
from ..dsp.filters import (
    MAX_TAPS,
    FilterTooLongError,
    DecimationPlan,
    LowpassDesign,
    ResamplerDesign,
    design_lowpass,
    design_resampler,
    filter_summary,
    plan_decimation,
)
from ..dsp.sidebands import SidebandSplit, design_sideband_split
from ..errors import ParameterError
from ..units import format_hz

__all__ = ["ChannelDesign", "design_channel", "fft_decimation", "MIN_TRANSITION_SHARE", "FFT_ATTEN_MARGIN_DB"]

MIN_TRANSITION_SHARE = 0.25
"""Narrowest transition a channel filter is fitted to when the channel's own does not fit the capture band,
as a share of the channel's: the filter is then at most four times longer, and its stopband starts at the
band edge (a narrower one would put the passband edge against the capture's own band edge)."""

FFT_ATTEN_MARGIN_DB = 2.0
"""Extra attenuation the fast-convolution prototype is designed for: the bank drops every bin beyond the
channel's, and the prototype's response cut off there (at its stopband level) leaks a little through the
frames' edges (measured end to end: up to 1.5 dB above the prototype's own stopband)."""


@dataclass(frozen=True)
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
    ripple_db, atten_db : float
        The channel filter's specification (passband ripple peak to peak, stopband attenuation).
    real_input : bool
        Designed for a real-valued (real IF) input.
    polyphase_plan : DecimationPlan or None
        The time-domain engine's decimation stages.
    fft_size, fft_hop : int or None
        The fast-convolution bank's transform length and hop (input samples); a shared bank
        sets its own (:meth:`with_bank`).
    transition_hz : float or None
        The channel filter's transition as designed (Hz); None: the channel's own. Narrower when the
        channel's does not fit the capture band, or (fast-convolution engine) when the bank's cut-off
        would fall inside it; ``transition_reason`` then says which.
    """

    rate_hz: float
    carrier_offset_hz: float
    channel: Channel
    decimation: int
    channel_rate_hz: float
    prototype: LowpassDesign | None
    engine: str
    resampler: ResamplerDesign
    ripple_db: float
    atten_db: float
    real_input: bool = False
    polyphase_plan: DecimationPlan | None = None
    fft_size: int | None = None
    fft_hop: int | None = None
    transition_hz: float | None = None
    transition_reason: str | None = None

    @functools.cached_property
    def sideband_split(self) -> SidebandSplit | None:
        """ISB channels: the one-sided band-pass pair that separates the sidebands at the channel rate, over
        the channel's audio band (without one: 100 Hz, so the split's 200 Hz transition still puts the other
        sideband's edge in the stopband, up to the sideband's top clear of half the channel rate); else None."""
        if self.channel.mode != "isb":
            return None
        band = self.channel.audio_band
        if band:
            low, high = float(band[0]), float(band[1])
        else:
            low = 100.0
            high = min(self.channel.bandwidth_hz / 2, self.channel_rate_hz / 2 - 2 * low - 1.0)
        return design_sideband_split(self.channel_rate_hz, low, high)

    def with_bank(self, fft_size: int, hop: int) -> "ChannelDesign":
        """The same design run in a shared bank of transform length ``fft_size`` and ``hop``."""
        return dataclasses.replace(self, fft_size=int(fft_size), fft_hop=int(hop))

    @property
    def filter_centre_hz(self) -> float:
        """Centre of the channel filter relative to the capture centre (Hz)."""
        lo, hi = self.channel.passband_hz
        return self.carrier_offset_hz + 0.5 * (lo + hi)

    @property
    def half_width_hz(self) -> float:
        lo, hi = self.channel.passband_hz
        return 0.5 * (hi - lo)

    @property
    def transition(self) -> float:
        """The channel filter's transition width as designed (Hz)."""
        return self.channel.transition if self.transition_hz is None else self.transition_hz

    def bank_channel(self) -> BankChannel:
        """This channel's entry in a fast-convolution bank."""
        return BankChannel(self.carrier_offset_hz, self.channel.passband_hz, self.fft_prototype.taps, self.decimation)

    @functools.cached_property
    def end_to_end(self) -> tuple[float, float]:
        """Passband ripple (dB p-p) and stopband attenuation (dB) of the fast-convolution front end measured
        through the engine's own path: bin selection, frame overlap and decimation, in this design's bank
        (:meth:`FastConvChannelizer.measure_channel`), over the prototype's passband and from its stopband
        edge to either edge of the capture band."""
        p = self.fft_prototype
        if self.decimation == 1:
            # every bin is kept and the history covers the filter: overlap-save is exactly the linear
            # convolution with the taps, whose measurement this already is
            return p.measured_ripple_db, p.measured_atten_db
        bank = FastConvChannelizer(self.rate_hz, [self.bank_channel()], real_input=self.real_input,
                                   fft_size=self.fft_size, workers=1)
        return bank.measure_channel(0, p.passband_hz, p.stopband_hz)

    @property
    def fft_prototype(self) -> LowpassDesign:
        """The fast-convolution engine's prototype filter."""
        if self.prototype is None:
            raise ParameterError(f"engine: a {self.engine} design has no fast-convolution prototype",
                                 parameters=("engine",))
        return self.prototype

    @property
    def plan(self) -> DecimationPlan:
        """The time-domain engine's decimation stages."""
        if self.polyphase_plan is None:
            raise ParameterError(f"engine: a {self.engine} design has no decimation plan", parameters=("engine",))
        return self.polyphase_plan

    @property
    def settle_samples(self) -> int:
        """Channel-rate samples at the start of a run that the front end's filters compute partly from the
        zeros before the first input sample (their warm-up): ceil(L / D) for a filter chain spanning L
        input samples. Levels and measurements leave them out; the audio and the baseband keep them.

        For the fast-convolution engine L is the prototype's span: the bank's effective response (the
        prototype's spectrum cut to the kept bins, which reach past its stopband edge) has all but less
        than -``atten_db`` of its energy there, so the warm-up beyond it is below the stopband level."""
        if self.engine == "fft":
            span = self.fft_prototype.num_taps - 1
        else:
            span, step = 0, 1
            for stage in self.plan.stages:
                span += (stage.lowpass.num_taps - 1) * step
                step *= stage.down
        return -(-span // self.decimation)

    def front_end_delay_s(self) -> float:
        """Group delay of the front end (s)."""
        if self.engine == "fft":
            return self.fft_prototype.group_delay_s
        return float(sum(stage.lowpass.group_delay_s for stage in self.plan.stages))

    def stages(self) -> list[dict[str, Any]]:
        """The chain as a list of stage descriptions (for reports and ``iqsift design``)."""
        lo, hi = self.channel.passband_hz
        out: list[dict[str, Any]] = []
        if self.engine == "fft":
            p = self.fft_prototype
            assert self.fft_size is not None and self.fft_hop is not None, "a fast-convolution design has its bank"
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
                "measured_end_to_end_ripple_db": self.end_to_end[0],
                "measured_end_to_end_atten_db": self.end_to_end[1],
                "macs_per_input_sample": fwd + inv,
                "macs_per_chain_input_sample": fwd + inv,
            })
        else:
            for stage in self.plan.stages:
                entry = stage.to_dict()
                del entry["lowpass"]
                entry["name"] = f"FIR decimator /{stage.down}" + (" (translating)" if stage.index == 0 else "")
                entry["mix_hz"] = self.filter_centre_hz if stage.index == 0 else None
                out.append(entry)
        ch_rate = self.channel_rate_hz
        if self.sideband_split is not None:
            split = self.sideband_split.as_dict()
            split["macs_per_chain_input_sample"] = split["macs_per_input_sample"] / self.decimation
            out.append(split)
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
            "transition_hz": self.transition,
            "channel_transition_hz": self.channel.transition,
            **({"transition_reason": self.transition_reason} if self.transition_reason else {}),
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

    Polyphase engine: the channel rate is the input rate divided by the largest
    power of two that keeps it at least ``max(3 × top, top + edge)``, where
    ``top`` is the outermost passband edge and ``edge`` the outermost stopband
    edge relative to the carrier: the passband sits inside the middle two
    thirds of the channel band, and nothing beyond the stopband edge can fold
    back into the passband. FFT engine: the channel rate is at least
    ``max(2.5 × top, 2 × edge)`` plus a bin and a half either side, so the bins
    the bank keeps reach past the stopband edge (see the comment below), at a
    whole decimation chosen by :func:`fft_decimation`. The prototype's passband
    edge is the passband half-width and its stopband edge lies one transition
    further out; where that reaches outside the capture band, the transition is
    narrowed to fit (down to :data:`MIN_TRANSITION_SHARE` of the channel's) and
    the design says so (``transition_reason``).

    Raises
    ------
    ParameterError
        If the channel's filter reaches beyond the capture band even with the
        narrowest transition, the capture is too slow for the channel, or the
        engine is unknown.
    """
    if engine not in ("fft", "polyphase"):
        raise ParameterError(f"engine: got {engine!r}; it must be 'fft' or 'polyphase'")
    offset = channel.carrier_offset(center_hz)
    lo, hi = channel.passband_hz
    t, reason = _fitted_transition(rate_hz, channel, offset, center_hz, real_input)
    edge = max(abs(lo - t), abs(hi + t))
    top = max(abs(lo), abs(hi))
    where = _channel_where(channel, center_hz)
    atten_fft = atten_db + FFT_ATTEN_MARGIN_DB
    if engine == "fft":
        # The bank keeps only the channel's own bins, so nothing outside them can alias; but dropping the
        # others multiplies the prototype's spectrum by a rectangle. Where the response is still high at
        # that cut, the effective impulse response grows far longer than the overlap-save frame's history
        # and wraps around: a tone just beyond the cut leaks in as lines at the frame rate (a -6 dBFS tone
        # 5.1 kHz off a 6 kHz AM channel came out only 58 dB down with the cut 86 % of the way through the
        # transition, and a -60 dBFS channel beside a -10 dBFS tone there kept 17.7 dB audio SNR). So the
        # kept bins reach past the stopband edge, by one bin (bounded through the FFT size >= 4 x the
        # filter's span and Kaiser's length formula) plus the carrier's rounding to a bin (half a bin):
        # the prototype is cut where it is already below the stated attenuation, and a neighbour just
        # past the stopband edge is filtered, not leaked. And the passband keeps a fifth of the channel
        # band spare on each side for the audio filters.
        bin_hz = 2.285 * 2.0 * math.pi * t / (4.0 * (atten_fft - 7.95))
        min_rate = max(2.5 * top, 2.0 * (edge + 1.5 * bin_hz))
        if min_rate > rate_hz >= 2.5 * top:
            min_rate = rate_hz  # no decimation: every bin is kept, nothing is cut off
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
    try:
        if engine == "fft":
            # Kaiser window: its passband ripple equals its stopband deviation (0.002 dB p-p at 80 dB), far inside
            # the ripple specification. An equiripple design that spends the whole 0.1 dB would by itself limit
            # the recovered message to about 45 dB SNR (tones falling on ripple peaks and troughs), and its
            # exchange search costs start-up time.
            prototype = design_lowpass(rate_hz, half, half + t, ripple_db, atten_fft, method="kaiser")
            history = int(math.ceil((prototype.num_taps - 1) / decimation)) * decimation
            fft_size = choose_fft_size(history, decimation)
            hop = ((fft_size - history) // decimation) * decimation
        else:
            plan = plan_decimation(rate_hz, half, half + t, decimation, ripple_db, atten_db)
    except FilterTooLongError:
        raise ParameterError(
            f"transition: {t:g} Hz is too narrow for channel {where} at {rate_hz:g} samples/s: its filter would "
            f"need more than the {MAX_TAPS} taps iqsift designs; give a wider transition", parameters=("transition",)
        ) from None
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
        transition_hz=t,
        transition_reason=reason,
    )


def _fitted_transition(rate_hz: float, channel: Channel, offset_hz: float, center_hz: float | None,
                       real_input: bool) -> tuple[float, str | None]:
    """The channel's transition (Hz), narrowed (down to :data:`MIN_TRANSITION_SHARE` of it) so the filter's
    stopband edges stay inside the capture band, with the reason when narrowed (a baseband iqsift wrote at the
    channel rate holds the channel band and little more)."""
    lo, hi = channel.passband_hz
    t = channel.transition
    nyquist = rate_hz / 2
    band_lo = 0.0 if real_input else -nyquist
    room = min(nyquist - (offset_hz + hi), (offset_hz + lo) - band_lo)
    if room >= t:
        return t, None
    if room >= MIN_TRANSITION_SHARE * t:
        return room, f"narrowed from {t:g} Hz to fit the capture band"
    low_edge, high_edge = offset_hz + lo - t, offset_hz + hi + t
    span = (f"{_fmt(center_hz + band_lo)}..{_fmt(center_hz + nyquist)}" if center_hz is not None
            else f"offsets {_fmt(band_lo)}..{_fmt(nyquist)}")
    raise ParameterError(
        f"channel {_channel_where(channel, center_hz)}: its filter ({_fmt_rel(low_edge, center_hz)}.."
        f"{_fmt_rel(high_edge, center_hz)}) reaches outside the capture band ({span}), and even a transition of "
        f"{MIN_TRANSITION_SHARE:g} x {t:g} Hz does not fit"
    )


def _fmt(hz: float) -> str:
    return format_hz(hz)


def _fmt_rel(offset: float, center: float | None) -> str:
    return _fmt(offset if center is None else center + offset)


def _channel_where(channel: Channel, center_hz: float | None) -> str:
    freq = channel.absolute_frequency(center_hz)
    at = _fmt(freq) if freq is not None else f"offset {_fmt(channel.carrier_offset(center_hz))}"
    return f"'{channel.name}' at {at}"


