"""Fast-convolution filter bank (Borgerding 2006) against the direct-form reference.

Reference: mix, filter and decimate written out directly — scipy.signal.lfilter with the
channel's complex filter h[n]·exp(j2π f_p n/fs) (a one-sided band-pass is the low-pass
shifted by its centre; Oppenheim & Schafer ch. 7, REFERENCES.md), then every D-th sample,
then mixing by the bin frequency. The FFT engine discards content outside the channel's
bins, so the two agree to the filter's stopband level (here > 95 dB down).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal as ss
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.dsp.channelizer import BankChannel, FastConvChannelizer, power_of_two_decimation
from iqsift.errors import ParameterError

FS = 240e3


def kaiser_lowpass(pass_hz, stop_hz, atten_db, fs=FS):
    numtaps, beta = ss.kaiserord(atten_db, (stop_hz - pass_hz) / (fs / 2))
    numtaps |= 1
    return ss.firwin(numtaps, (pass_hz + stop_hz) / 2, window=("kaiser", beta), fs=fs)


H = kaiser_lowpass(3000, 5000, 100)
CHANNELS = [
    BankChannel(12345.6, (-3000.0, 3000.0), H, 16),
    BankChannel(-70001.3, (300.0, 3000.0), kaiser_lowpass(1350, 3350, 100), 8),
    BankChannel(100e3, (-3000.0, -300.0), kaiser_lowpass(1350, 3350, 100), 16),
]


def reference(x, ch, n_fft):
    fp = ch.carrier_hz + ch.center_offset_hz
    # mix first, then the low-pass shifted by the passband offset about its centre tap (a pure delay)
    c = (ch.taps.size - 1) / 2
    hc = ch.taps * np.exp(2j * np.pi * fp / FS * np.arange(ch.taps.size))
    hc = hc * np.exp(-2j * np.pi * ch.center_offset_hz / FS * c)
    y = ss.lfilter(hc, 1, x.astype(np.complex128))[:: ch.decimation]
    k0 = round(ch.carrier_hz / FS * n_fft)
    g = np.arange(y.size) * ch.decimation
    return y * np.exp(-2j * np.pi * k0 * g / n_fft)


def run_chunked(bank, x, cuts):
    outs = [[] for _ in bank.channels]
    for part in np.split(x, sorted(cuts)):
        for i, o in enumerate(bank.process(part)):
            outs[i].append(o)
    for i, o in enumerate(bank.flush()):
        outs[i].append(o)
    return [np.concatenate(o) for o in outs]


def test_matches_direct_mix_filter_decimate():
    rng = np.random.default_rng(3)
    x = (0.1 * (rng.standard_normal(40000) + 1j * rng.standard_normal(40000))).astype(np.complex64)
    bank = FastConvChannelizer(FS, CHANNELS)
    got = run_chunked(bank, x, [1, 777, 20000])
    for ch, y in zip(CHANNELS, got):
        ref = reference(x, ch, bank.fft_size)
        assert y.shape == ref.shape == (-(-x.size // ch.decimation),)
        err = np.max(np.abs(y - ref)) / np.max(np.abs(ref))
        assert err < 1e-4, err


@settings(max_examples=25, deadline=None)
@given(cuts=st.lists(st.integers(0, 9000), max_size=6), n=st.integers(0, 9000))
def test_chunked_equals_one_shot(cuts, n):
    # Streaming contract (DESIGN.md): any split of the input gives the same output, incl. empty and 1-sample blocks.
    rng = np.random.default_rng(n)
    x = (rng.standard_normal(n) + 1j * rng.standard_normal(n)).astype(np.complex64)
    bank = FastConvChannelizer(FS, CHANNELS)
    one = run_chunked(bank, x, [])
    many = run_chunked(bank, x, [c for c in cuts if c <= n])
    for a, b in zip(one, many):
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-5)


def test_tone_lands_at_its_offset_with_unit_gain_and_real_input_scaling():
    # A complex tone 1 kHz above a channel's carrier comes out as exp(j2π·1000·t) with its amplitude
    # (unity passband gain); a real cosine of amplitude A reads as amplitude A (analytic convention).
    n = 48000
    t = np.arange(n) / FS
    carrier = 40000.0 + 0.37  # off the bin grid: the residual is left for the fine mixer
    ch = BankChannel(carrier, (-3000.0, 3000.0), H, 16)
    for real in (False, True):
        x = 0.5 * (np.cos(2 * np.pi * (carrier + 1000) * t) if real else np.exp(2j * np.pi * (carrier + 1000) * t))
        bank = FastConvChannelizer(FS, [ch], real_input=real)
        y = run_chunked(bank, x.astype(np.complex64), [])[0]
        rate = FS / 16
        steady = y[2000:]
        residual = bank.residual_hz(0)
        tt = (np.arange(2000, y.size)) / rate
        expected_freq = 1000 + residual
        fit = np.vdot(np.exp(2j * np.pi * expected_freq * tt), steady) / steady.size
        assert abs(fit) == pytest.approx(0.5, rel=2e-3)
        assert np.max(np.abs(steady - fit * np.exp(2j * np.pi * expected_freq * tt))) < 2e-3


def test_power_of_two_decimation():
    assert power_of_two_decimation(2.4e6, 16000) == 128
    assert power_of_two_decimation(48000, 16000) == 2
    assert power_of_two_decimation(16000, 16000) == 1


def test_rejects_decimation_with_large_prime_factor():
    # the FFT size must be a multiple of every decimation and fast to transform (factors 2, 3, 5)
    with pytest.raises(ParameterError, match="prime factor"):
        FastConvChannelizer(FS, [BankChannel(0.0, (-3000, 3000), H, 14)])


def test_mixed_decimations_share_one_bank():
    # channels decimating by 16 and 15: the hop is a multiple of both, each output stays on its own grid
    rng = np.random.default_rng(5)
    x = (0.1 * (rng.standard_normal(30000) + 1j * rng.standard_normal(30000))).astype(np.complex64)
    channels = [BankChannel(12345.6, (-3000.0, 3000.0), H, 16), BankChannel(-50e3, (-3000.0, 3000.0), H, 15)]
    bank = FastConvChannelizer(FS, channels)
    assert bank.fft_size % 240 == 0 and bank.hop % 240 == 0
    got = run_chunked(bank, x, [4321, 17000])
    for ch, y in zip(channels, got):
        ref = reference(x, ch, bank.fft_size)
        assert np.max(np.abs(y - ref)) / np.max(np.abs(ref)) < 1e-4
