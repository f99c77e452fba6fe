"""Every streaming object of iqsift.dsp obeys one protocol (iqsift.dsp.stages.Stage).

process(block) / flush() / reset(); read-only rate_in, rate_out, delay. Checked for every stage:
* chunked output (blocks of 0, 1, primes and random lengths) equals one-shot output;
* reset() (and the end of a stream, flush()) restores the behaviour of a freshly built stage;
* rates and delay are consistent: output length n·rate_out/rate_in, and a tone in the passband comes out
  delayed by ``delay`` output samples;
* Chain's cascaded flush equals one-shot processing of the whole cascade, stage by stage.

References: the delay check compares with the closed form of a delayed sinusoid (numpy float64);
scipy.signal.firwin gives the test taps.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
import pytest
import scipy.signal as ss
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from iqsift.dsp.batch import BatchFir
from iqsift.dsp.detectors import CoherentDetector, DsbDetector, EnvelopeDetector, SidebandDetector
from iqsift.dsp.post import CarrierNormaliser, DelayTrim, FractionalDelay
from iqsift.dsp.stages import (
    AGC,
    AudioBandpass,
    Chain,
    DCBlock,
    FirDecimator,
    FirFilter,
    Mixer,
    RationalResampler,
    Stage,
    run_once,
)

FS = 8000.0
N = 4000
HYP = settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# chunk sizes: 0, 1, primes and arbitrary sizes
CHUNKS = st.lists(
    st.one_of(st.sampled_from([0, 1, 2, 3, 5, 7, 13, 31, 97, 257, 1009]), st.integers(0, 700)),
    max_size=14,
)


def split(x: np.ndarray, sizes: list[int]) -> list[np.ndarray]:
    parts, i = [], 0
    for s in sizes:
        parts.append(x[i : i + s])
        i += s
    parts.append(x[i:])
    return parts


def lowpass(numtaps: int, cutoff: float) -> np.ndarray:
    return ss.firwin(numtaps, cutoff)


def am_real(n: int, seed: int = 0) -> np.ndarray:
    """A detector output with a carrier: 0.5 (1 + 0.5 cos) plus a little noise (float32)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    return (0.5 * (1 + 0.5 * np.cos(2 * np.pi * 410.0 * t)) + 0.01 * rng.standard_normal(n)).astype(np.float32)


def noise_real(n: int, seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal(n).astype(np.float32) * 0.3


def noise_complex(n: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return ((rng.standard_normal(n) + 1j * rng.standard_normal(n)) * 0.3).astype(np.complex64)


def am_complex(n: int, seed: int = 0) -> np.ndarray:
    """AM with carrier, carrier 30 Hz off 0 Hz, plus noise (complex64)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    z = 0.5 * (1 + 0.6 * np.cos(2 * np.pi * 410.0 * t)) * np.exp(2j * np.pi * 30.0 * t + 0.7j)
    return (z + 0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)


def dsb_complex(n: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    z = 0.5 * np.cos(2 * np.pi * 410.0 * t) * np.exp(2j * np.pi * 20.0 * t + 0.3j)
    return (z + 0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)


def am_hopping_complex(n: int, seed: int = 0) -> np.ndarray:
    """Two AM transmissions far off 0 Hz (+2300 Hz, then -1700 Hz) with a pause between, plus noise (complex64):
    the coherent detector acquires, tracks, lets go and acquires again within one stream."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    msg = 0.5 * (1 + 0.6 * np.cos(2 * np.pi * 410.0 * t))
    first, second = t < 0.4 * n / FS, t >= 0.6 * n / FS
    z = msg * (first * np.exp(2j * np.pi * 2300.0 * t + 0.7j) + second * np.exp(-2j * np.pi * 1700.0 * t))
    return (z + 0.01 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))).astype(np.complex64)


# name -> (factory of a fresh stage, input signal generator)
STAGES: dict[str, tuple[Callable[[], Stage], Callable[[int, int], np.ndarray]]] = {
    "mixer": (lambda: Mixer(FS, 1234.5), noise_complex),
    "fir_direct": (lambda: FirFilter(lowpass(31, 0.3), FS, method="direct"), noise_real),
    "fir_fft": (lambda: FirFilter(lowpass(101, 0.3), FS, method="fft", fft_size=256), noise_complex),
    "fir_decimator": (lambda: FirDecimator(lowpass(41, 0.2), 3, FS), noise_real),
    "translating_decimator": (lambda: FirDecimator(lowpass(41, 0.2), 4, FS, translate_hz=700.0), noise_complex),
    "resampler": (lambda: RationalResampler(lowpass(61, 0.2) * 3, 3, 5, FS), noise_real),
    "dc_block": (lambda: DCBlock(FS, 30.0), noise_real),
    "agc": (lambda: AGC(FS, frame_s=0.002), noise_complex),
    "audio_bandpass": (lambda: AudioBandpass(FS, 300.0, 3000.0), noise_real),
    "envelope": (lambda: EnvelopeDetector(FS), am_complex),
    "usb": (lambda: SidebandDetector(FS, "usb"), noise_complex),
    "lsb_unfiltered": (lambda: SidebandDetector(FS, "lsb", sideband_filter=False), noise_complex),
    "coherent": (lambda: CoherentDetector(FS, frame_s=0.01, window_s=0.05), am_complex),
    "coherent_acquiring": (lambda: CoherentDetector(FS, frame_s=0.01, window_s=0.05, reacquire_s=0.05,
                                                    channel_name="hopping"), am_hopping_complex),
    "dsb": (lambda: DsbDetector(FS, frame_s=0.01, window_s=0.05), dsb_complex),
    "carrier_normaliser": (lambda: CarrierNormaliser(FS, pass_hz=15.0, stop_hz=200.0), am_real),
    "carrier_normaliser_unchecked": (
        lambda: CarrierNormaliser(FS, pass_hz=15.0, stop_hz=200.0, check_carrier=False), am_real),
    "dc_remover": (lambda: CarrierNormaliser(FS, normalise=False), am_real),
    "fractional_delay": (lambda: FractionalDelay(FS, 20.37, half_length=16), noise_real),
    "delay_trim": (lambda: DelayTrim(37, rate_hz=FS), noise_real),
    "batch_fir": (lambda: BatchFir(lowpass(51, 0.3), 1, 256, rate_hz=FS), noise_real),
    "chain": (lambda: Chain([FirDecimator(lowpass(41, 0.2), 2, FS, translate_hz=-300.0),
                             CoherentDetector(FS / 2, frame_s=0.01, window_s=0.05),
                             AGC(FS / 2, frame_s=0.003),
                             FractionalDelay(FS / 2, 17.5, half_length=16)]), am_complex),
}


# The carrier normaliser's level is LPF(d·v)/LPF(v) from a float32 overlap-save filter: at the start of a
# stream LPF(v) is as small as 1e-3, so the float32 rounding of LPF(d·v) (~1e-7 of full scale, depending on
# where the FFT segments fall) grows to ~1e-4 there.
TOLERANCE = {"carrier_normaliser": 1e-3, "carrier_normaliser_unchecked": 1e-3, "dc_remover": 1e-3,
             "receiver": 1e-3}


def close(a: np.ndarray, b: np.ndarray, tol: float = 2e-5) -> None:
    """Equal up to the rounding of float32 output and of differently split FFTs."""
    assert a.shape == b.shape
    assert a.dtype == b.dtype
    scale = max(1.0, float(np.max(np.abs(b)))) if b.size else 1.0
    np.testing.assert_allclose(a, b, rtol=tol, atol=tol * scale)


def test_every_dsp_stage_is_a_stage():
    for name, (factory, _) in STAGES.items():
        assert isinstance(factory(), Stage), name


@pytest.mark.parametrize("name", sorted(STAGES))
@HYP
@given(sizes=CHUNKS, seed=st.integers(0, 2**16))
def test_chunked_equals_one_shot(name, sizes, seed):
    factory, signal = STAGES[name]
    x = signal(N, seed)
    whole = run_once(factory(), x)
    stage = factory()
    parts = [stage.process(b) for b in split(x, sizes)]
    chunked = np.concatenate(parts + [stage.flush()])
    close(chunked, whole, TOLERANCE.get(name, 2e-5))


@pytest.mark.parametrize("name", sorted(STAGES))
@pytest.mark.parametrize("n", [0, 1, 2, 13])
def test_short_and_empty_streams(name, n):
    factory, signal = STAGES[name]
    x = signal(n, 1)
    stage = factory()
    close(np.concatenate([stage.process(x), stage.flush()]), run_once(factory(), x), TOLERANCE.get(name, 2e-5))


@pytest.mark.parametrize("name", sorted(STAGES))
def test_reset_and_flush_restore_initial_behaviour(name):
    factory, signal = STAGES[name]
    x = signal(N, 2)
    fresh = run_once(factory(), x)
    stage = factory()
    stage.process(signal(1234, 3))  # part of some other stream
    stage.reset()
    np.testing.assert_array_equal(run_once(stage, x), fresh)
    stage.process(signal(777, 4))
    stage.flush()  # ends that stream: the next one starts afresh
    np.testing.assert_array_equal(run_once(stage, x), fresh)


@pytest.mark.parametrize("name", sorted(STAGES))
def test_rates_and_delay_are_read_only_and_consistent(name):
    factory, signal = STAGES[name]
    stage = factory()
    for attr in ("rate_in", "rate_out", "delay"):
        value = getattr(stage, attr)
        assert isinstance(value, float) and np.isfinite(value), attr
        with pytest.raises(AttributeError):
            setattr(stage, attr, 1.0)
    assert stage.rate_in > 0 and stage.rate_out > 0
    n = 3001
    y = run_once(stage, signal(n, 5))
    if isinstance(stage, DelayTrim):
        assert stage.delay == -stage.count and y.size == n - stage.count
    else:
        assert stage.delay >= 0
        assert abs(y.size - n * stage.rate_out / stage.rate_in) < 1.0


def _fits(y: np.ndarray, ref: np.ndarray) -> float:
    """Relative RMS error of y against the best scaled copy of ref."""
    g = np.dot(ref, y) / np.dot(ref, ref)
    return float(np.sqrt(np.mean((y - g * ref) ** 2) / np.mean((g * ref) ** 2)))


# name -> (stage, input generator of time t (s), expected output shape at time t (s))
TONE = 500.0
w = 2 * np.pi * TONE
DELAY_CASES = {
    "fir": (lambda: FirFilter(lowpass(63, 0.3), FS), lambda t: np.cos(w * t), lambda t: np.cos(w * t)),
    "decimator": (lambda: FirDecimator(lowpass(41, 0.2), 3, FS), lambda t: np.cos(w * t), lambda t: np.cos(w * t)),
    "translating_decimator": (lambda: FirDecimator(lowpass(41, 0.2), 4, FS, translate_hz=700.0),
                              lambda t: np.exp(2j * np.pi * (700.0 + TONE) * t), lambda t: np.exp(1j * w * t)),
    "resampler": (lambda: RationalResampler(lowpass(61, 0.2) * 3, 3, 5, FS), lambda t: np.cos(w * t),
                  lambda t: np.cos(w * t)),
    "audio_bandpass": (lambda: AudioBandpass(FS, 300.0, 3000.0), lambda t: np.cos(w * t), lambda t: np.cos(w * t)),
    "batch_fir": (lambda: BatchFir(lowpass(51, 0.3), 1, 256, rate_hz=FS), lambda t: np.cos(w * t),
                  lambda t: np.cos(w * t)),
    "fractional_delay": (lambda: FractionalDelay(FS, 20.37, half_length=16), lambda t: np.cos(w * t),
                         lambda t: np.cos(w * t)),
    "delay_trim": (lambda: DelayTrim(37, rate_hz=FS), lambda t: np.cos(w * t), lambda t: np.cos(w * t)),
    "usb": (lambda: SidebandDetector(FS, "usb"), lambda t: np.exp(1j * w * 2 * t), lambda t: np.cos(w * 2 * t)),
    "coherent": (lambda: CoherentDetector(FS), lambda t: (1 + 0.5 * np.cos(w * t)) * np.exp(2j * np.pi * 25 * t),
                 lambda t: 1 + 0.5 * np.cos(w * t)),
    "dsb": (lambda: DsbDetector(FS), lambda t: np.cos(w * t) * np.exp(2j * np.pi * 25 * t), lambda t: np.cos(w * t)),
    "dc_remover": (lambda: CarrierNormaliser(FS, normalise=False), lambda t: 0.3 + 0.2 * np.cos(w * t),
                   lambda t: np.cos(w * t)),
    "carrier_normaliser": (lambda: CarrierNormaliser(FS, pass_hz=15.0, stop_hz=200.0),
                           lambda t: 0.5 * (1 + 0.5 * np.cos(w * t)), lambda t: np.cos(w * t)),
}


@pytest.mark.parametrize("name", sorted(DELAY_CASES))
def test_delay_is_the_delay_of_a_passband_tone(name):
    """out[m] is the input at time m/rate_out − delay/rate_out (away from the start-up)."""
    factory, make_input, expected = DELAY_CASES[name]
    stage = factory()
    n = 16000
    x = make_input(np.arange(n) / FS)
    y = run_once(stage, x.astype(np.complex64 if np.iscomplexobj(x) else np.float32))
    t_out = (np.arange(y.size) - stage.delay) / stage.rate_out
    keep = slice(y.size // 2, y.size - 16)  # settled, and clear of the end
    ref = expected(t_out[keep])
    if np.iscomplexobj(ref):
        err = _fits(np.concatenate([y[keep].real, y[keep].imag]), np.concatenate([ref.real, ref.imag]))
    else:
        err = _fits(np.real(y[keep]).astype(np.float64), ref)
    assert err < 0.02
    # a delay wrong by one output sample would fail
    t_wrong = (np.arange(y.size) - stage.delay - 1) / stage.rate_out
    wrong = expected(t_wrong[keep])
    if not np.iscomplexobj(ref):
        assert _fits(np.real(y[keep]).astype(np.float64), wrong) > err


# ----------------------------------------------------------------------------------------------- Chain


def receiver_chain() -> Chain:
    """A whole AM receiver as one Chain: translate + decimate, detect, normalise, band-pass, resample, trim."""
    fs_in = 4 * FS
    front = FirDecimator(lowpass(81, 0.2), 4, fs_in, translate_hz=2500.0)
    band = AudioBandpass(FS, 300.0, 3000.0)
    resampler = RationalResampler(lowpass(61, 0.2) * 3, 3, 5, FS)
    return Chain([front, EnvelopeDetector(FS), CarrierNormaliser(FS, pass_hz=15.0, stop_hz=200.0), band,
                  AGC(FS, frame_s=0.003), resampler, DelayTrim(11, rate_hz=FS * 3 / 5)])


def holding_chain() -> Chain:
    """Stages that hold samples at the end (look-ahead, partial frames), so flush must cascade."""
    return Chain([Mixer(FS, -30.0), CoherentDetector(FS, frame_s=0.01, window_s=0.05), AGC(FS, frame_s=0.007),
                  FirDecimator(lowpass(21, 0.3), 2, FS), AGC(FS / 2, frame_s=0.011)])


def am_at_2500_hz(n: int, seed: int = 0) -> np.ndarray:
    """AM with carrier 2530 Hz off the centre of a capture at 4·FS (4·n samples, complex64)."""
    rng = np.random.default_rng(seed)
    t = np.arange(4 * n) / (4 * FS)
    z = 0.5 * (1 + 0.6 * np.cos(2 * np.pi * 410.0 * t)) * np.exp(2j * np.pi * 2530.0 * t + 0.7j)
    return (z + 0.01 * (rng.standard_normal(t.size) + 1j * rng.standard_normal(t.size))).astype(np.complex64)


CHAINS = {"receiver": (receiver_chain, am_at_2500_hz), "holding": (holding_chain, am_complex)}


def stagewise(chain: Chain, x: np.ndarray) -> np.ndarray:
    """One-shot processing of the cascade: each stage runs once over the whole output of the one before."""
    for stage in chain.stages:
        x = run_once(stage, x)
    return x


@pytest.mark.parametrize("name", sorted(CHAINS))
@HYP
@given(sizes=CHUNKS, seed=st.integers(0, 2**16))
def test_chain_cascaded_flush_equals_one_shot_cascade(name, sizes, seed):
    make, signal = CHAINS[name]
    x = signal(N, seed).astype(np.complex64)
    expected = stagewise(make(), x)
    chain = make()
    parts = [chain.process(b) for b in split(x, sizes)]
    held = chain.flush()
    close(np.concatenate(parts + [held]), expected, TOLERANCE.get(name, 2e-5))
    # the flush really did carry held samples through the later stages
    assert held.size > 0


def test_chain_flush_pushes_held_samples_through_later_stages():
    chain = holding_chain()
    x = am_complex(N, 9)
    first = chain.process(x)
    held = chain.flush()
    expected = stagewise(holding_chain(), x)
    assert first.size < expected.size  # the detector and the AGC frames held samples back
    close(np.concatenate([first, held]), expected)


@pytest.mark.parametrize("name", sorted(CHAINS))
def test_chain_rates_and_delay(name):
    chain, _ = CHAINS[name]
    c = chain()
    assert c.rate_in == c.stages[0].rate_in and c.rate_out == c.stages[-1].rate_out
    expected = sum(s.delay * c.rate_out / s.rate_out for s in c.stages)
    assert c.delay == pytest.approx(expected)
