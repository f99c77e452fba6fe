"""Outputs that do not depend on where a stream is cut: bit-identical for any block sizes.

References: scipy.signal.lfilter (the FIR filters, to float rounding); the textbook AM envelope
``A(1 + m cos)``, whose carrier-normalised form is ``m cos`` (the normaliser's steady state).
"""

from __future__ import annotations

import numpy as np
import scipy.signal as ss
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.dsp.batch import BatchFir
from iqsift.dsp.gridfir import GridFir, SplitFir
from iqsift.dsp.post import CarrierNormaliser, sliding_max

RATE = 12000.0
cuts_strategy = st.lists(st.integers(1, 700), min_size=1, max_size=40)


def chunked(process, x, sizes):
    """Feed ``x`` (last axis) in blocks of the given sizes (cycled), with an empty block after each."""
    out, pos, k = [], 0, 0
    while pos < x.shape[-1]:
        step = sizes[k % len(sizes)]
        out.append(process(x[..., pos:pos + step]))
        out.append(process(x[..., :0]))
        pos, k = pos + step, k + 1
    return np.concatenate(out, axis=-1)


def noise(rows, n, seed=0):
    return np.random.default_rng(seed).standard_normal((rows, n)).astype(np.float32)


@settings(max_examples=20, deadline=None)
@given(sizes=cuts_strategy, head=st.sampled_from([1, 7, 32, 64]))
def test_split_fir_is_bit_identical_for_any_cut(sizes, head):
    taps = ss.firwin(201, 0.1)
    x = noise(2, 3000)
    whole = SplitFir(taps, 2, head).process(x)
    assert np.array_equal(chunked(SplitFir(taps, 2, head).process, x, sizes), whole)
    np.testing.assert_allclose(whole, ss.lfilter(taps, 1, x.astype(np.float64), axis=1), atol=2e-6)  # scipy reference


@settings(max_examples=20, deadline=None)
@given(sizes=cuts_strategy, hop=st.sampled_from([1, 16, 64, 250]))
def test_grid_fir_is_bit_identical_for_any_cut(sizes, hop):
    taps = ss.firwin(269, 0.02)
    x = noise(3, 3000, 1).astype(np.float64)
    whole = GridFir(taps, 3, hop, np.float64).process(x)
    assert whole.shape[1] == 3000 // hop * hop  # whole frames only
    got = chunked(GridFir(taps, 3, hop, np.float64).process, x, sizes)
    assert np.array_equal(got, whole)
    np.testing.assert_allclose(whole, ss.lfilter(taps, 1, x, axis=1)[:, : whole.shape[1]], atol=1e-12)  # scipy


@settings(max_examples=15, deadline=None)
@given(sizes=cuts_strategy)
def test_batch_fir_and_normaliser_are_bit_identical_for_any_cut(sizes):
    t = np.arange(6000) / RATE
    d = (0.02 * (1 + 0.7 * np.cos(2 * np.pi * 700 * t)) + 0.002 * noise(1, t.size, 2)[0]).astype(np.float32)
    d[:2000] = 0.001 * noise(1, 2000, 3)[0]  # silence, then the carrier comes on
    fir = lambda: BatchFir(ss.firwin(336, [300, 3400], fs=RATE, pass_zero=False), 1, 8192)  # noqa: E731
    assert np.array_equal(chunked(fir().process, d, sizes), fir().process(d))
    for check in (False, True):
        make = lambda: CarrierNormaliser(RATE, pass_hz=15.0, stop_hz=200.0, check_carrier=check,  # noqa: E731
                                         settle_samples=37)
        one, many = make(), make()
        whole = np.concatenate([one.process(d[:5000]), (one.signal_ends(5000), one.process(d[5000:]))[1]])
        part = chunked(many.process, d[:5000], sizes)
        many.signal_ends(5000)
        assert np.array_equal(np.concatenate([part, chunked(many.process, d[5000:], sizes)]), whole)


def test_carrier_onset_after_silence_stays_below_full_scale():
    """A carrier keyed on after silence (5 ms edge), 80 % modulated: the normalised audio (scaled 0.5, as the
    receiver writes it) peaks below full scale at the onset, and in steady state is m·cos (textbook AM)."""
    rng = np.random.default_rng(4)
    t = np.arange(int(1.5 * RATE)) / RATE
    edge = np.clip((t - 0.5) / 0.005, 0, 1)
    d = (0.05 * edge * (1 + 0.8 * np.cos(2 * np.pi * 600 * t)) + 1e-4 * np.abs(rng.standard_normal(t.size)))
    norm = CarrierNormaliser(RATE, pass_hz=15.0, stop_hz=200.0, check_carrier=False)
    y = 0.5 * norm.process(d.astype(np.float32))[int(norm.delay):]
    # from the look-ahead (11 ms) before the onset; earlier, the noise is still divided by its own mean
    onset = slice(int(0.489 * RATE), int(0.6 * RATE))
    assert np.abs(y[onset]).max() < 0.6  # measured 0.45 (before the look-ahead: 15.9)
    steady = slice(int(0.8 * RATE), y.size)
    want = 0.5 * 0.8 * np.cos(2 * np.pi * 600 * t[: y.size])
    # the added noise alone: 0.5 x 1e-4 x std|N| (0.6) / 0.05 = 6e-4 rms; measured 7.2e-4 (before: the same)
    assert np.sqrt(np.mean((y[steady] - want[steady]) ** 2)) < 1e-3


def test_sliding_max_matches_the_definition():
    x = np.random.default_rng(5).standard_normal((2, 300))
    for width in (1, 2, 3, 8, 135):
        want = np.array([[row[k:k + width].max() for k in range(300 - width + 1)] for row in x])
        assert np.array_equal(sliding_max(x, width), want)
