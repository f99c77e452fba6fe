"""The faster paths give the same numbers as the plain ones.

* Read-ahead thread (captures/prefetch.py): the blocks, their order, the checksum verdict and the
  errors equal those of the plain reader (common practice: producer/consumer with a bounded queue).
* Peak power of a block (captures/stats.py): equals ``max(i·i + q·q)`` in float64, the textbook formula.
* Welch segments transformed on several threads (spectra.py): equal to ``scipy.signal.welch``.
* The survey's chi-square quantiles from ``scipy.special``: equal to ``scipy.stats.chi2``.
"""

from __future__ import annotations

import hashlib
import threading

import numpy as np
import pytest
import scipy.signal
import scipy.special
import scipy.stats

from iqsift.captures import ChecksumError, open_capture
from iqsift.captures.prefetch import prefetched
from iqsift.captures.stats import StatsAccumulator
from iqsift.spectra import WelchAccumulator
from iqsift.survey.formulas import floor_median_bias

from .conftest import write_sigmf_pair

RATE_HZ = 48000.0


def _capture(tmp_path, samples: int, *, sha: str | None = None, datatype: str = "ci16_le"):
    rng = np.random.default_rng(3)
    raw = rng.integers(-30000, 30000, 2 * samples, dtype=np.int16).tobytes()
    digest = sha if sha is not None else hashlib.sha512(raw).hexdigest()  # FIPS 180-4 via hashlib
    meta = write_sigmf_pair(tmp_path / "cap", raw, {"core:datatype": datatype, "core:sample_rate": RATE_HZ,
                                                    "core:sha512": digest})
    return meta, raw


def _plain_blocks(capture, block_size):
    return list(capture._checked_blocks(block_size, 0, capture.samples, "keep", False))


@pytest.mark.parametrize("block_size", [1, 7, 1000, 4099, 10007])
def test_threaded_reader_equals_plain_reader(tmp_path, block_size):
    meta, raw = _capture(tmp_path, 20011)
    with open_capture(meta) as cap:
        threaded = list(cap.blocks(block_size=block_size, nonfinite="keep"))
        plain = _plain_blocks(cap, block_size)
    assert len(threaded) == len(plain)
    for a, b in zip(threaded, plain):
        np.testing.assert_array_equal(a, b)
    expected = np.frombuffer(raw, np.int16).astype(np.float32) / 32768  # the SigMF ci16 scaling
    np.testing.assert_array_equal(np.concatenate(threaded).view(np.float32), expected)


def test_threaded_reader_raises_a_checksum_mismatch_after_the_blocks(tmp_path):
    meta, _ = _capture(tmp_path, 9000, sha=hashlib.sha512(b"other").hexdigest())
    got = []
    with open_capture(meta) as cap, pytest.raises(ChecksumError):
        for block in cap.blocks(block_size=1000):
            got.append(block)
    assert sum(b.size for b in got) == 9000


def test_prefetch_hands_over_errors_in_order_and_stops_early():
    def source():
        yield 1
        yield 2
        raise ValueError("boom")

    seen = []
    with pytest.raises(ValueError, match="boom"):
        for item in prefetched(source()):
            seen.append(item)
    assert seen == [1, 2]

    closed = threading.Event()

    def endless():
        try:
            n = 0
            while True:
                yield n
                n += 1
        finally:
            closed.set()

    it = prefetched(endless(), depth=2)
    assert [next(it) for _ in range(5)] == [0, 1, 2, 3, 4]
    it.close()  # the consumer stops: the reader thread ends and closes its source
    assert closed.wait(5.0)
    assert not any(t.name == "iqsift-reader" and t.is_alive() for t in threading.enumerate())


@pytest.mark.parametrize("scale", [1.0, 1e-3, 1e-17, 1e-25, 3e19])
def test_peak_power_equals_the_float64_formula(scale):
    rng = np.random.default_rng(11)
    x = (scale * (rng.standard_normal(50001) + 1j * rng.standard_normal(50001))).astype(np.complex64)
    x[123] = x[124] * np.complex64(1 + 1e-7)  # two nearly equal maxima candidates
    acc = StatsAccumulator(True)
    acc.update(x)
    i, q = x.real.astype(np.float64), x.imag.astype(np.float64)
    assert acc.peak == float((i * i + q * q).max())  # mean-power formula of DESIGN.md, per sample


def test_clipping_is_counted_when_near_full_scale():
    x = np.array([0.5, 1.0 + 0.0j, 0.2 - 1.0j, 0.99 + 0.1j], dtype=np.complex64)
    acc = StatsAccumulator(True)
    acc.update(x)
    assert acc.clipped == 2  # a component at +1 or -1 full scale (common practice)


def test_threaded_welch_equals_scipy_welch():
    rng = np.random.default_rng(5)
    x = (rng.standard_normal(70000) + 1j * rng.standard_normal(70000)).astype(np.complex64)
    acc = WelchAccumulator(RATE_HZ, nperseg=1024)
    for part in np.array_split(x, 7):
        acc.feed(part)
    f, p = scipy.signal.welch(x.astype(np.complex128), RATE_HZ, nperseg=1024, detrend=False,
                              return_onesided=False)
    spec = acc.result()
    np.testing.assert_allclose(spec.freqs_hz, np.fft.fftshift(f))
    np.testing.assert_allclose(spec.values_db, 10 * np.log10(np.fft.fftshift(p)), atol=1e-9)


@pytest.mark.parametrize("nu", [2.0, 37.7, 5548.3])
def test_chi2_quantiles_from_scipy_special_equal_scipy_stats(nu):
    assert floor_median_bias(nu) == float(scipy.stats.chi2.median(nu) / nu)
    assert float(2 * scipy.special.gammaincinv(nu / 2, 0.25)) == float(scipy.stats.chi2.ppf(0.25, nu))
    assert float(scipy.special.chdtrc(nu, 1.3 * nu)) == float(scipy.stats.chi2.sf(1.3 * nu, nu))


@pytest.mark.parametrize("onesided", [False, True])
def test_split_threaded_transforms_equal_one_call(monkeypatch, onesided):
    """Rows transformed a few at a time on several threads == one single-threaded call per batch, bit for bit."""
    import iqsift.spectra.segments as segments

    rng = np.random.default_rng(9)
    x = rng.standard_normal(300000) + (0 if onesided else 1j * rng.standard_normal(300000))

    def run():
        acc = WelchAccumulator(RATE_HZ, nperseg=4096, onesided=onesided)
        for part in np.array_split(x, 3):
            acc.feed(part)
        return acc.result().values_db

    split = run()
    monkeypatch.setattr(segments, "_FFT_SAMPLES", 1 << 30)
    monkeypatch.setattr(segments, "_fft_workers", lambda: 1)
    np.testing.assert_array_equal(split, run())


@pytest.mark.parametrize("detrend", [None, "constant"])
def test_single_precision_input_agrees_with_the_double_precision_engine(detrend):
    """complex64 blocks (windowed and transformed in float32) == the same blocks widened to complex128.

    Source of the tolerance: float32 FFT rounding, relative error about eps·sqrt(log2 N) with
    eps = 2^-24 (Higham, Accuracy and Stability of Numerical Algorithms, sec. 24.1): 1e-5 dB is
    100 times the size of the difference this gives on noise, and 1000 times below the 0.01 dB
    the project reports levels to.
    """
    rng = np.random.default_rng(4)
    x = (rng.standard_normal(100003) + 1j * rng.standard_normal(100003)).astype(np.complex64)

    def run(blocks):
        acc = WelchAccumulator(RATE_HZ, nperseg=2048, detrend=detrend)
        for part in blocks:
            acc.feed(part)
        return acc.result().values_db

    parts = np.array_split(x, 5)
    single, double = run(parts), run([p.astype(np.complex128) for p in parts])
    assert not np.array_equal(single, double)  # the float32 engine really ran
    assert np.max(np.abs(single - double)) < 1e-5
