"""Synthetic test captures: invented AM, DSB and SSB voice channels in noise, with exact truth.

A *scenario* (TOML file or dict) describes a complex IQ capture: sample rate,
centre frequency, duration, a random seed, the stored SigMF datatype, an
optional white noise floor and any number of channels. :func:`write_synth`
renders it into a SigMF recording plus a truth file ``<stem>.truth.json``
that states every parameter as resolved numbers, so a test can check what
iqsift measures against what was put in. Everything is generated block by
block in bounded memory with all random-number, filter and oscillator state
carried between blocks: the samples do not depend on the block size, and the
same scenario and seed give the same bytes (with the same numpy and scipy
versions, which the truth file records).

Scenario schema
---------------
Top level (frequencies, rates and bandwidths accept SI suffixes: ``"2.4M"``,
``"150k"``; times accept ``"250ms"`` or ``"48000sa"``)::

    sample_rate = "2.4M"            # required, samples/s
    center = "127.5M"               # optional, Hz; without it, channel frequencies are offsets
    duration = "2s"                 # required
    seed = 1234                     # integer >= 0 (default 0)
    datatype = "ci16_le"            # complex SigMF datatype (default "cf32_le")
    noise_floor_dbfs_per_hz = -130  # optional complex white Gaussian noise over the whole band
    description = "..."             # optional, goes to core:description

    [[channel]]                     # zero or more
    name = "north-approach"         # default "ch<N>"; unique
    freq = "127.35M"                # absolute (needs `center`) ... or
    offset = "-150k"                # ... relative to the centre; exactly one of the two
    mode = "am"                     # "am" (full carrier), "dsb" (suppressed carrier), "usb", "lsb"
    emission = "6K00A3E"            # optional ITU designator: default bandwidth, checked against mode
    level_dbfs = -30                # am: carrier power; dsb/usb/lsb: average signal power (default -20)
    depth = 0.8                     # am only: modulation depth m (default 0.5; > 1 overmodulates)
    carrier_offset_hz = 120         # actual carrier minus `freq` (a tuning error to measure), Hz
    drift_hz_per_s = 0.5            # linear carrier drift, Hz/s
    phase_deg = 0                   # carrier phase at sample 0
    bandwidth = "6k"                # channel bandwidth; default: the emission's, else max(2 M, 6 kHz)
                                    # for am/dsb and max(M, 3 kHz) for usb/lsb (M = top message frequency;
                                    # ITU-R SM.1138: Bn = 2M for A3E, about M for J3E)
    cnr_db = 40                     # optional band-limited channel noise (see below)
    noise_bandwidth = "6k"          # bandwidth the CNR refers to (default `bandwidth`)
    message = { kind = "tones", freqs = [400, 1100, 2300], amplitudes = [0.5, 0.3, 0.2] }
    fading = { kind = "rayleigh", doppler_hz = 2.0 }   # or kind = "rician", k_db = 6; paths = 32
    bursts = [[0.2, 0.9], [1.3, 1.8]]                  # on/off keying, active spans in seconds
    burst_edge = "5ms"              # raised-cosine edge duration (default 5 ms)

Messages (``message.kind``):

- ``"tone"``: ``freq`` (default 1000 Hz), ``phase_deg``.
- ``"tones"``: ``freqs``, ``amplitudes`` (default equal), ``phases_deg``
  (default 0). Amplitudes are relative: the message is scaled so that the
  sum of ``|amplitudes|`` is 1, i.e. its peak (all phases 0, at t = 0) is
  exactly 1. The default message is a 1000 Hz tone.
- ``"noise"``: Gaussian noise band-limited to ``low``..``high`` (default
  300..3000 Hz) by a Kaiser-window FIR, with RMS ``rms`` (default 0.25, so
  peaks beyond 1 are 4-sigma events; they are not clipped).
- ``"file"``: ``path`` (audio file readable by soundfile, relative to the
  scenario file), ``low``/``high`` (default 300/3000 Hz; ``low = 0`` gives a
  low-pass, AM/DSB only), ``loop`` (default false: the file plays once from
  t = 0, then silence). Channels are mixed to mono, band-limited at the
  file's rate (Kaiser FIR, delay removed; applied circularly when looping, so
  the seam is as smooth as the file's own ends) and scaled so that the peak
  of the band-limited file samples is 1; values between samples may exceed it
  slightly. The truth records the file's SHA-256 and the exact processing.

Modulation (complex baseband ``b(t)`` before the carrier
``exp(j(2 pi f(t) t + phase))``, with msg the real message): ``am``
``A(1 + m msg)`` with carrier amplitude ``A`` (Haykin, *Communication
Systems*, 4th ed., ch. 3); ``dsb`` ``A msg``; ``usb`` ``A (msg + j H{msg})``
(the analytic signal, one-sided positive spectrum); ``lsb`` its complex
conjugate. For DSB and SSB ``A`` is set so the average power is
``level_dbfs``. Tone messages are made exactly in the frequency domain
(one complex exponential per tone); noise and file messages get their
analytic signal from a streaming one-sided complex band-pass FIR (the Kaiser
low-pass prototype shifted by ``exp(j w0 n)``; Oppenheim & Schafer,
*Discrete-Time Signal Processing*, ch. 7; Kaiser 1974 for the window).

Channel noise: with ``cnr_db``, complex Gaussian noise with flat density N0
is added inside the channel band only (``[-B/2, B/2]`` around the carrier for
am/dsb, ``[0, B]`` above it for usb, ``[-B, 0]`` below it for lsb, with B =
``noise_bandwidth``), so channels at different CNRs do not disturb one
another. ``cnr_db = 10 log10(C / (N0 B))`` where C is the carrier power (am)
or the average signal power (dsb/ssb) given by ``level_dbfs``. The band edges
are Kaiser-window transitions B/50 wide; N0 holds in the passband. The noise
follows the carrier (offset, drift) but is neither gated by bursts nor faded.

Fading: flat, a complex gain on the channel's whole signal. Rayleigh uses
Clarke's model as a sum of ``paths`` equal-power plane waves (R. H. Clarke,
"A statistical theory of mobile-radio reception", Bell Syst. Tech. J. 47,
1968): ``g(t) = paths^-1/2 sum_n exp(j(2 pi f_d cos(a_n) t + p_n))`` with
arrival angles ``a_n = (2 pi n + theta)/paths`` and theta, p_n drawn uniformly
from the channel's fading random stream; mean power 1, Doppler spectrum
within +-f_d, autocorrelation approaching J0(2 pi f_d tau) (Jakes,
*Microwave Mobile Communications*, 1974). Rician adds a steady line-of-sight
component: ``sqrt(K/(K+1)) + sqrt(1/(K+1)) g(t)``. The sum is evaluated
exactly at a low rate (at least f_d / 0.38) and interpolated to the sample
rate like the messages below.

Noise and file messages and channel noise are made at a low rate
``sample_rate / R`` (R a whole number up to 4096, the rate at least 2.6 times
the highest frequency) and interpolated by R with a 32-tap Kaiser-windowed
sinc kernel (100 dB design, polyphase), so band-limited filters stay short.

Bursts: the channel's signal is multiplied by a gate that is 1 inside each
``[start, end]`` span and 0 outside, with raised-cosine edges ``burst_edge``
long centred on ``start`` and ``end`` (the gate is 0.5 exactly there, so the
half-amplitude crossings of the envelope fall at the stated times). A span
starting at 0 or ending at ``duration`` has no edge there.

Random streams: every random draw comes from ``numpy.random.SeedSequence(seed,
spawn_key=...)`` (the same as spawning from ``SeedSequence(seed)``): spawn key
``(0,)`` for the noise floor, ``(i + 1, 0)`` channel i's noise message, ``(i +
1, 1)`` its fading, ``(i + 1, 2)`` its channel noise.

Annotations (SigMF): one per channel over the whole recording with
``core:freq_lower_edge``/``core:freq_upper_edge`` = the channel band around
the actual carrier (``[-B/2, B/2]`` am/dsb, ``[0, B]`` usb, ``[-B, 0]`` lsb,
widened by the drift over the capture; absolute Hz when ``center`` is given,
else offsets), and one per burst spanning ``round(start * rate)`` to
``round(end * rate)``.

Truth file: the resolved scenario (absolute and relative frequencies in Hz,
levels, noise densities, seed, datatype, sample counts, burst spans in
seconds and samples, fading draws, message descriptions with their rates and
filter designs, the clipped-component count reported by the SigMF writer, the
iqsift/numpy/scipy versions). :func:`regenerate_message` rebuilds the exact
message samples of a channel from its truth record.

Modules
-------
:mod:`~iqsift.synth.scenario` (schema, parsing, validation),
:mod:`~iqsift.synth.sources` (band filters, interpolation, messages, fading gains),
:mod:`~iqsift.synth.truth` (the resolved scenario), :mod:`~iqsift.synth.synthesizer`
(streaming rendering), :mod:`~iqsift.synth.writer` (SigMF recording and truth file),
:mod:`~iqsift.synth.signals` (one-shot signals for test benches).
"""

from __future__ import annotations

from .scenario import (
    FADING_KINDS,
    MESSAGE_KINDS,
    MODES,
    ChannelSpec,
    FadingSpec,
    MessageSpec,
    Scenario,
    load_scenario,
    parse_scenario,
)
from .signals import (
    am_signal,
    analytic_message,
    awgn,
    dsb_signal,
    fading_gain,
    multitone_message,
    ssb_signal,
    ssb_tones,
    tone_message,
)
from .sources import regenerate_message
from .synthesizer import DEFAULT_BLOCK, MAX_IN_MEMORY, SynthResult, Synthesizer, synthesize
from .truth import build_truth
from .writer import truth_path_for, write_synth

__all__ = [
    "MODES",
    "MESSAGE_KINDS",
    "FADING_KINDS",
    "DEFAULT_BLOCK",
    "MAX_IN_MEMORY",
    "Scenario",
    "ChannelSpec",
    "MessageSpec",
    "FadingSpec",
    "SynthResult",
    "Synthesizer",
    "load_scenario",
    "parse_scenario",
    "build_truth",
    "synthesize",
    "write_synth",
    "truth_path_for",
    "regenerate_message",
    "tone_message",
    "multitone_message",
    "am_signal",
    "dsb_signal",
    "ssb_signal",
    "ssb_tones",
    "analytic_message",
    "awgn",
    "fading_gain",
]
