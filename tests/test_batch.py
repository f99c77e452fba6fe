"""Batched (2-D) audio stages equal their single-channel counterparts row by row, under any chunking.

References: the single-channel stages, themselves checked against scipy.signal (lfilter, upfirdn) in
test_stages.py; here each row of the batch must reproduce them.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.dsp.batch import BatchCarrierNormaliser, BatchFir, BatchUpFirDn
from iqsift.dsp.post import CarrierNormaliser
from iqsift.dsp.stages import FirFilter, RationalResampler

RATE = 9600.0


def blocks(x, cuts):
    edges = [0, *sorted(c for c in cuts if c <= x.shape[-1]), x.shape[-1]]
    return [x[..., a:b] for a, b in zip(edges[:-1], edges[1:])]


@settings(max_examples=15)
@given(cuts=st.lists(st.integers(0, 6000), max_size=4))
def test_batch_stages_equal_single_stages(cuts):
    rng = np.random.default_rng(len(cuts))
    rows = 3
    t = np.arange(6000) / RATE
    x = (1 + 0.5 * np.cos(2 * np.pi * np.array([[400.0], [900.0], [1700.0]]) * t)
         * rng.uniform(0.5, 1.5, (rows, 1))).astype(np.float32)

    taps = np.hanning(129) / np.hanning(129).sum()
    single = [FirFilter(taps, RATE, method="fft", fft_size=8192, single=True) for _ in range(rows)]
    batch = BatchFir(taps, rows, 8192)
    got = np.concatenate([batch.process(b) for b in blocks(x, cuts)], axis=1)
    want = np.stack([np.concatenate([f.process(r) for r in blocks(x[i], cuts)]) for i, f in enumerate(single)])
    np.testing.assert_allclose(got, want, atol=1e-6)

    res_taps = 5 * np.hanning(41) / np.hanning(41).sum()
    single_r = [RationalResampler(res_taps, 5, 3, RATE) for _ in range(rows)]
    batch_r = BatchUpFirDn(res_taps, 5, 3, rows)
    got = np.concatenate([batch_r.process(b) for b in blocks(x, cuts)], axis=1)
    want = np.stack([np.concatenate([f.process(r) for r in blocks(x[i], cuts)]) for i, f in enumerate(single_r)])
    np.testing.assert_allclose(got, want, atol=1e-5)

    single_n = [CarrierNormaliser(RATE, pass_hz=15.0, stop_hz=200.0, check_carrier=False) for _ in range(rows)]
    batch_n = BatchCarrierNormaliser(single_n[0], rows)
    got = np.concatenate([batch_n.process(b) for b in blocks(x, cuts)], axis=1)
    want = np.stack([np.concatenate([f.process(r) for r in blocks(x[i], cuts)]) for i, f in enumerate(single_n)])
    np.testing.assert_allclose(got, want, atol=2e-5)
