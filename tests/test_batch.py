"""Many channels as rows of one block equal the single-channel stages, row by row, under any chunking.

References: scipy.signal.lfilter (the FIR) and scipy.signal.upfirdn (the resampler core) one-shot,
and the one-channel carrier normaliser.
"""

from __future__ import annotations

import numpy as np
import scipy.signal as ss
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.dsp.batch import BatchFir
from iqsift.dsp.post import CarrierNormaliser
from iqsift.dsp.stages import UpFirDn

RATE = 9600.0


def blocks(x, cuts):
    edges = [0, *sorted(c for c in cuts if c <= x.shape[-1]), x.shape[-1]]
    return [x[..., a:b] for a, b in zip(edges[:-1], edges[1:])]


@settings(max_examples=15)
@given(cuts=st.lists(st.integers(0, 6000), max_size=4))
def test_rows_equal_single_channels(cuts):
    rng = np.random.default_rng(len(cuts))
    rows = 3
    t = np.arange(6000) / RATE
    x = (1 + 0.5 * np.cos(2 * np.pi * np.array([[400.0], [900.0], [1700.0]]) * t)
         * rng.uniform(0.5, 1.5, (rows, 1))).astype(np.float32)

    taps = np.hanning(129) / np.hanning(129).sum()
    chunked = BatchFir(taps, rows, 8192)
    got = np.concatenate([chunked.process(b) for b in blocks(x, cuts)], axis=1)
    np.testing.assert_allclose(got, ss.lfilter(taps, 1, x, axis=1), atol=2e-6)  # scipy.signal reference
    single = BatchFir(taps, 1, 8192)
    np.testing.assert_allclose(np.concatenate([single.process(b) for b in blocks(x[1], cuts)]), got[1], atol=1e-6)

    res_taps = 5 * np.hanning(41) / np.hanning(41).sum()
    core = UpFirDn(res_taps, 5, 3)
    got = np.concatenate([core.process(b) for b in blocks(x, cuts)], axis=1)
    want = ss.upfirdn(res_taps, x, 5, 3, axis=1)[:, : got.shape[1]]  # scipy.signal reference
    np.testing.assert_allclose(got, want, atol=1e-5)

    one = [CarrierNormaliser(RATE, pass_hz=15.0, stop_hz=200.0) for _ in range(rows)]
    many = one[0].for_rows(rows)
    got = np.concatenate([many.process(b) for b in blocks(x, cuts)], axis=1)
    want = np.stack([np.concatenate([f.process(r) for r in blocks(x[i], cuts)]) for i, f in enumerate(one)])
    np.testing.assert_allclose(got, want, atol=2e-5)
