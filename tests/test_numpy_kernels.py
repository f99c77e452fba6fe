"""The numpy design and filtering kernels that replace scipy.signal on the demodulation path.

Each is held to the scipy.signal routine it stands for (the outside reference, named beside each
check); the stages built on them keep chunked == one-shot; and a default AM ``demod`` leaves
``scipy.signal`` unloaded (checked in a fresh interpreter, as tests/test_startup.py does).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.signal as ss

from iqsift.dsp.filters.kaiser import frequency_response, kaiser_fir, kaiser_order
from iqsift.dsp.stages import DCBlock, FirFilter, RationalResampler
from iqsift.dsp.stages.linear import fft_convolve_valid, first_order_recursion, fir_valid, polyphase_upfirdn

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"
rng = np.random.default_rng(20261205)


@pytest.mark.parametrize("atten_db", [8.0, 21.0, 30.0, 50.0, 60.0, 93.7])
@pytest.mark.parametrize("width", [0.001, 0.0375, 0.2])
def test_kaiser_order_is_kaiserord(atten_db, width):
    # reference: scipy.signal.kaiserord (Kaiser 1974 formulas)
    n_ref, beta_ref = ss.kaiserord(atten_db, width)
    n, beta = kaiser_order(atten_db, width)
    assert n == n_ref
    assert beta == pytest.approx(beta_ref, rel=1e-15, abs=0)


@pytest.mark.parametrize("numtaps", [1, 2, 31, 64, 301])
def test_kaiser_fir_is_firwin(numtaps):
    fs, beta = 16000.0, 5.65
    # reference: scipy.signal.firwin with a Kaiser window (low-pass, and band-pass when long enough)
    ref = ss.firwin(numtaps, 3100.0, window=("kaiser", beta), fs=fs)
    np.testing.assert_allclose(kaiser_fir(numtaps, 3100.0, beta, fs), ref, rtol=1e-12, atol=1e-15)
    if numtaps % 2:
        ref = ss.firwin(numtaps, [200.0, 3100.0], pass_zero=False, window=("kaiser", beta), fs=fs)
        np.testing.assert_allclose(kaiser_fir(numtaps, [200.0, 3100.0], beta, fs, pass_zero=False), ref,
                                   rtol=1e-12, atol=1e-15)


def test_frequency_response_is_freqz():
    fs = 10666.0
    real = rng.standard_normal(129)
    cplx = real * np.exp(1j * 0.3 * np.arange(129))
    for taps in (real, cplx):
        # reference: scipy.signal.freqz on its uniform grid and at given (negative too) frequencies
        w_ref, h_ref = ss.freqz(taps, 1, worN=8192, fs=fs)
        w, h = frequency_response(taps, 8192, fs)
        np.testing.assert_allclose(w, w_ref, rtol=1e-13)
        np.testing.assert_allclose(h, h_ref, rtol=1e-9, atol=1e-11)
        f = np.linspace(-3000.0, 3000.0, 257)
        _, h_ref = ss.freqz(taps, worN=f, fs=fs)
        np.testing.assert_allclose(frequency_response(taps, f, fs)[1], h_ref, rtol=1e-9, atol=1e-11)


@pytest.mark.parametrize("pole", [0.0, 0.5, -0.7, 0.98822, 0.99995])
@pytest.mark.parametrize("n", [1, 2, 577, 40001])
def test_first_order_recursion_is_lfilter(pole, n):
    u = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    y0 = 0.25 - 0.5j
    # reference: scipy.signal.lfilter([1], [1, -a], u, zi=[a·y0])
    ref, _ = ss.lfilter([1.0], [1.0, -pole], u, zi=[pole * y0])
    y = first_order_recursion(u, pole, y0)
    assert np.max(np.abs(y - ref)) <= 1e-13 * max(1.0, np.max(np.abs(ref)))


@pytest.mark.parametrize("up,down", [(1, 1), (1, 4), (1, 225), (3, 2), (2, 3), (160, 147), (4, 1)])
@pytest.mark.parametrize("num_taps", [1, 7, 64, 451])
def test_polyphase_upfirdn_is_upfirdn(up, down, num_taps):
    h = rng.standard_normal(num_taps)
    x = rng.standard_normal((2, 997)) + 1j * rng.standard_normal((2, 997))
    # reference: scipy.signal.upfirdn (rows as channels)
    ref = ss.upfirdn(h, x, up, down, axis=-1)
    total = ref.shape[-1]
    for first, count in ((0, total), (min(5, total - 1), min(11, total - min(5, total - 1))), (total - 1, 1)):
        np.testing.assert_allclose(polyphase_upfirdn(h, x, up, down, first, count), ref[:, first : first + count],
                                   rtol=1e-12, atol=1e-12)


def test_fir_kernels_are_lfilter():
    h = rng.standard_normal(301) * np.exp(0.2j * np.arange(301))
    x = rng.standard_normal(5000)
    # reference: scipy.signal.lfilter(h, 1, x) and scipy.signal.fftconvolve(mode="valid")
    ref = ss.lfilter(h, [1.0], x)
    buf = np.concatenate([np.zeros(300), x])
    np.testing.assert_allclose(fir_valid(buf, h), ref, rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(fir_valid(buf[292:], h[:9]), ss.lfilter(h[:9], [1.0], x), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(fft_convolve_valid(buf, h), ss.fftconvolve(buf, h, mode="valid"),
                               rtol=1e-10, atol=1e-10)


def _chunked(stage, x, sizes):
    parts, i = [], 0
    for s in sizes:
        parts.append(stage.process(x[i : i + s]))
        i += s
    parts.append(stage.process(x[i:]))
    parts.append(stage.flush())
    return np.concatenate(parts)


TAPS = rng.standard_normal(33)


@pytest.mark.parametrize("make", [
    lambda: DCBlock(16000.0, 30.0),
    lambda: FirFilter(TAPS, 16000.0, method="direct"),
    lambda: RationalResampler(ss.firwin(61, 0.3), 3, 2, 10666.0),
])
def test_stages_on_the_kernels_chunked_equal_one_shot(make):
    x = rng.standard_normal(10007)
    one = _chunked(make(), x, [])
    sizes = [0, 1, 2, 13, 0, 997, 1, 4093]
    np.testing.assert_array_equal(_chunked(make(), x, sizes), one)


def test_dc_block_is_lfilter():
    x = rng.standard_normal(20000) + 0.3
    stage = DCBlock(16000.0, 30.0)
    a = stage.pole
    # reference: scipy.signal.lfilter([1, -1], [1, -a], x), the textbook DC blocker (Lyons §13.23)
    ref = ss.lfilter([1.0, -1.0], [1.0, -a], x)
    np.testing.assert_allclose(stage.process(x), ref.astype(np.float32), rtol=1e-6, atol=1e-6)


def test_default_am_demod_leaves_scipy_signal_unloaded(tmp_path):
    out = tmp_path / "a.wav"
    code = ("from iqsift.cli import main\n"
            "try:\n"
            f"    main(['demod', {str(SAMPLES / 'vhf_airband.sigmf-meta')!r}, '--freq', '124.025M', '-e', '6K00A3E',"
            f" '-o', {str(out)!r}, '-q'])\n"
            "except SystemExit as e:\n"
            "    assert not e.code, e.code\n"
            "import json, sys\n"
            "print(json.dumps(['scipy.signal' in sys.modules, 'scipy.stats' in sys.modules]))")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.exists()
    assert json.loads(result.stdout.splitlines()[-1]) == [False, False]
