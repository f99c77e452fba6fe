"""Single-channel receiver: the acceptance bars of issue [2/6] against textbook results.

Scoring: the recovered audio is compared with the known message after least-squares gain
alignment; delay alignment is the receiver's own job (it compensates its chain delay), so the
test does not search for a lag — a wrong delay shows up as a low SNR. Message SNR =
10·log10(|s|² / |s − g·y|²), skipping 0.15 s at each end (filter start-up).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.channel import make_channel
from iqsift.errors import ParameterError
from iqsift.receiver import Receiver

FS = 240e3
AUDIO = 16000
TONES = ((410.5, 0.5, 0.0), (1123.0, 0.3, 1.0), (2311.5, 0.2, 2.0))  # non-commensurate: no alignment ambiguity


def message(t, tones=TONES):
    s = sum(a * np.cos(2 * np.pi * f * t + p) for f, a, p in tones)
    return s / sum(a for _, a, _ in tones)  # peak <= 1


def am(t, carrier_hz, amplitude, depth, tones=TONES, phase=0.3):
    return amplitude * (1 + depth * message(t, tones)) * np.exp(1j * (2 * np.pi * carrier_hz * t + phase))


def complex_noise(rng, n, power):
    return np.sqrt(power / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def message_snr_db(audio, reference, rate=AUDIO, edge_s=0.15):
    s = slice(int(edge_s * rate), audio.size - int(edge_s * rate))
    y, r = audio[s].astype(np.float64), reference[s]
    g = np.dot(r, y) / np.dot(y, y)
    return 10 * np.log10(np.sum(r**2) / np.sum((r - g * y) ** 2))


def receive(x, channel, rate=FS, **options):
    rx = Receiver(rate, channel, **options)
    blocks = np.array_split(x.astype(np.complex64), 5)
    audio = np.concatenate(list(rx.stream(blocks)))
    return audio, rx


@pytest.mark.parametrize("mode", ["envelope", "coherent"])
def test_clean_am_recovers_message(mode):
    # Issue [2/6] bar: CNR >= 60 dB, m = 0.8, multitone 300-3000 Hz -> >= 50 dB message SNR.
    rng = np.random.default_rng(1)
    n = int(1.5 * FS)
    t = np.arange(n) / FS
    carrier = 31250.7
    cnr_db = 65.0
    # CNR: carrier power over noise power in the 6 kHz channel; white noise of total power P over FS
    noise_total = 0.1**2 / 10 ** (cnr_db / 10) * FS / 6000
    x = am(t, carrier, 0.1, 0.8) + complex_noise(rng, n, noise_total)
    audio, rx = receive(x, make_channel(offset=carrier, bandwidth="6k", mode=mode))
    assert audio.size == round(n * AUDIO / FS)
    snr = message_snr_db(audio, message(np.arange(audio.size) / AUDIO))
    assert snr >= 50.0, snr
    # the audio is normalised by the carrier: full scale = 200 % modulation, so the message reads at m/2 = 0.4
    g = np.dot(audio, message(np.arange(audio.size) / AUDIO)) / np.dot(audio, audio)
    assert 1 / g == pytest.approx(0.4, rel=0.02)


def test_clean_am_at_2_4_msps_with_polyphase_cross_check():
    # The realistic rate; the textbook polyphase engine (Crochiere & Rabiner) must agree with the FFT engine.
    n = int(0.6 * 2.4e6)
    t = np.arange(n) / 2.4e6
    x = am(t, -412345.6, 0.05, 0.8)
    ch = make_channel(offset=-412345.6, bandwidth="6k")
    fft_audio, _ = receive(x, ch, rate=2.4e6)
    poly_audio, _ = receive(x, ch, rate=2.4e6, engine="polyphase")
    ref = message(np.arange(fft_audio.size) / AUDIO)
    assert message_snr_db(fft_audio, ref) >= 50
    assert message_snr_db(poly_audio, ref) >= 45
    assert message_snr_db(poly_audio, fft_audio) >= 45


@pytest.mark.parametrize("mode", ["envelope", "coherent"])
def test_selectivity_weak_channel_beside_strong_neighbour(mode):
    # Issue [2/6] bar: wanted 6 kHz channel 40 dB below a neighbour 8.33 kHz away (ICAO 8.33 kHz raster)
    # -> wanted audio SNR >= 30 dB.
    rng = np.random.default_rng(2)
    n = int(1.2 * FS)
    t = np.arange(n) / FS
    wanted = am(t, 20000.0, 0.001, 0.8)
    neighbour_msg = ((517.0, 0.6, 0.0), (2900.0, 0.4, 0.5))
    neighbour = am(t, 20000.0 + 25000 / 3, 0.1, 0.9, neighbour_msg)
    x = wanted + neighbour + complex_noise(rng, n, 1e-14)
    audio, _ = receive(x, make_channel(offset=20000.0, bandwidth="6k", mode=mode))
    assert message_snr_db(audio, message(np.arange(audio.size) / AUDIO)) >= 30


@pytest.mark.parametrize("sideband", ["usb", "lsb"])
def test_single_sideband_two_tone(sideband):
    # Issue [2/6] bar: right sideband >= 40 dB SNR, opposite sideband suppressed >= 40 dB.
    n = int(1.2 * FS)
    t = np.arange(n) / FS
    fc = 50000.3
    sign = 1 if sideband == "usb" else -1
    two_tone = ((700.0, 0.5, 0.0), (1900.0, 0.5, 0.0))  # the classic SSB two-tone test (ITU-R SM.326, memory)
    wanted = sum(0.025 * np.exp(2j * np.pi * (fc + sign * f) * t) for f, _, _ in two_tone)
    unwanted = sum(0.025 * np.exp(2j * np.pi * (fc - sign * f) * t) for f in (1000.0, 2500.0))
    ch = make_channel(offset=fc, emission="2K70J3E", mode=sideband)
    audio, _ = receive(wanted + unwanted, ch, agc=False)
    ref = message(np.arange(audio.size) / AUDIO, two_tone)
    assert message_snr_db(audio, ref) >= 40
    alone, _ = receive(unwanted, ch, agc=False)
    wanted_only, _ = receive(wanted, ch, agc=False)
    core = slice(3000, -3000)
    rejection = 10 * np.log10(np.mean(wanted_only[core] ** 2) / np.mean(alone[core] ** 2))
    assert rejection >= 40, rejection


def test_coherent_locks_400_hz_off_tune():
    # Issue [2/6] bar: carrier 400 Hz off the tuned frequency -> >= 40 dB SNR with coherent detection.
    n = int(1.5 * FS)
    t = np.arange(n) / FS
    x = am(t, 30400.0, 0.05, 0.7) + complex_noise(np.random.default_rng(4), n, 1e-11)
    audio, rx = receive(x, make_channel(offset=30000.0, bandwidth="8k", mode="coherent"))
    assert message_snr_db(audio, message(np.arange(audio.size) / AUDIO)) >= 40
    assert rx.report().to_dict()["detector"]["carrier_offset_hz"] == pytest.approx(400.0, abs=1.0)


def test_envelope_noise_performance_matches_haykin():
    # Haykin, Communication Systems (4th ed.), AM noise analysis: above threshold the envelope detector's
    # figure of merit is SNR_out / SNR_channel = mu^2 / (2 + mu^2), with SNR_channel the modulated signal
    # power over the noise power in the message bandwidth W. Here W is the receiver's audio noise bandwidth
    # (300-3000 Hz band-pass: 2700 Hz) and the noise is complex white with density N0 (power per Hz).
    rng = np.random.default_rng(5)
    n = int(2.0 * FS)
    t = np.arange(n) / FS
    mu, amp, tone = 0.5, 0.1, 1000.0
    n0 = 1e-9  # W/Hz in dBFS terms: channel SNR well above threshold
    x = amp * (1 + mu * np.cos(2 * np.pi * tone * t)) * np.exp(2j * np.pi * 25000.0 * t)
    x = x + complex_noise(rng, n, n0 * FS)
    audio, _ = receive(x, make_channel(offset=25000.0, bandwidth="6k", mode="envelope"))
    w = 2700.0
    snr_channel = amp**2 * (1 + mu**2 / 2) / (n0 * w)
    predicted = 10 * np.log10(snr_channel * mu**2 / (2 + mu**2))
    core = audio[int(0.2 * AUDIO): -int(0.2 * AUDIO)].astype(np.float64)
    tt = np.arange(core.size) / AUDIO
    basis = np.column_stack([np.cos(2 * np.pi * tone * tt), np.sin(2 * np.pi * tone * tt), np.ones_like(tt)])
    coef, *_ = np.linalg.lstsq(basis, core, rcond=None)
    signal = basis[:, :2] @ coef[:2]
    measured = 10 * np.log10(np.mean(signal**2) / np.mean((core - basis @ coef) ** 2))
    assert measured == pytest.approx(predicted, abs=1.0)


def test_real_if_input():
    # A real IF signal: cos carrier of amplitude A reads as A after the analytic-signal convention.
    fs = 96000.0
    n = int(1.0 * fs)
    t = np.arange(n) / fs
    x = (0.2 * (1 + 0.6 * message(t)) * np.cos(2 * np.pi * 21400.0 * t)).astype(np.float32)
    rx = Receiver(fs, make_channel(offset=21400.0, bandwidth="6k"), real_input=True)
    audio = np.concatenate(list(rx.stream([x.astype(np.complex64)])))
    assert message_snr_db(audio, message(np.arange(audio.size) / AUDIO)) >= 50
    assert rx.report().to_dict()["channel"]["level_dbfs"] == pytest.approx(
        10 * np.log10(0.2**2 * (1 + 0.6**2 * np.mean(message(t) ** 2))), abs=0.3)


def test_audio_is_time_aligned_with_the_capture():
    # The receiver compensates its own delay: a burst starting at 0.500 s starts at 0.500 s in the audio.
    n = int(1.2 * FS)
    t = np.arange(n) / FS
    gate = (t >= 0.5).astype(float)
    x = 0.1 * (1 + 0.8 * gate * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * 10000.0 * t)
    audio, rx = receive(x, make_channel(offset=10000.0, bandwidth="6k"))
    env = np.abs(audio[int(0.25 * AUDIO):])  # skip the carrier-level filter's start-up
    onset = 0.25 + np.argmax(env > 0.2) / AUDIO  # 80 % modulation reads 0.4 of full scale
    assert onset == pytest.approx(0.5, abs=0.001)
    assert rx.report().to_dict()["delay"]["compensated_s"] > 0


@settings(max_examples=8, deadline=None)
@given(cuts=st.lists(st.integers(0, 48000), max_size=5))
def test_chunked_equals_one_shot(cuts):
    # Streaming contract (DESIGN.md): any split of the input gives the same audio.
    n = 48000
    t = np.arange(n) / FS
    x = am(t, 12000.0, 0.1, 0.5).astype(np.complex64)
    ch = make_channel(offset=12000.0, bandwidth="6k", mode="coherent")
    one = np.concatenate(list(Receiver(FS, ch).stream([x])))
    parts = np.split(x, sorted(cuts))
    many = np.concatenate(list(Receiver(FS, ch).stream(parts)))
    np.testing.assert_allclose(one, many, atol=2e-5)


def test_channel_outside_the_capture_is_refused():
    with pytest.raises(ParameterError, match="outside the capture band"):
        Receiver(FS, make_channel(freq="100.118M", bandwidth="6k"), center_hz=100e6)


def test_squelch_mutes_noise_between_transmissions():
    # Squelch (common practice in radio receivers): between push-to-talk bursts the audio is muted; inside
    # the bursts the message is untouched.
    rng = np.random.default_rng(11)
    n = int(3.0 * FS)
    t = np.arange(n) / FS
    gate = ((t > 0.5) & (t < 1.4)) | ((t > 2.0) & (t < 2.8))
    x = gate * am(t, 15000.0, 0.05, 0.8) + complex_noise(rng, n, 1e-7)
    loud, _ = receive(x, make_channel(offset=15000.0, bandwidth="6k"))
    quiet, _ = receive(x, make_channel(offset=15000.0, bandwidth="6k", squelch_db=10))
    idle = slice(int(1.6 * AUDIO), int(1.9 * AUDIO))
    busy = slice(int(0.7 * AUDIO), int(1.3 * AUDIO))
    assert np.sqrt(np.mean(quiet[idle] ** 2)) < 1e-3 < np.sqrt(np.mean(loud[idle] ** 2))
    np.testing.assert_allclose(quiet[busy], loud[busy], atol=1e-6)


def test_squelch_is_closed_from_the_first_sample_when_the_channel_starts_idle():
    # [2/6] item 8: before, the audio was open noise until the first transmission (the floor was unknown
    # until a loud frame had been seen); the floor now comes from the passband spectrum (common practice).
    rng = np.random.default_rng(12)
    n = int(2.6 * FS)
    t = np.arange(n) / FS
    x = (t > 1.5) * am(t, 15000.0, 0.05, 0.8) + complex_noise(rng, n, 1e-7)
    loud, _ = receive(x, make_channel(offset=15000.0, bandwidth="6k"))
    quiet, rx = receive(x, make_channel(offset=15000.0, bandwidth="6k", squelch_db=10))
    idle = slice(0, int(1.45 * AUDIO))
    busy = slice(int(1.6 * AUDIO), int(2.5 * AUDIO))
    assert quiet.size == loud.size == rx.expected_audio_samples
    assert np.sqrt(np.mean(quiet[idle] ** 2)) < 1e-4 < 1e-2 < np.sqrt(np.mean(loud[idle] ** 2))
    np.testing.assert_allclose(quiet[busy], loud[busy], atol=1e-6)


@pytest.mark.parametrize("squelch_db", [6, 20])
def test_squelch_never_mutes_a_continuous_carrier(squelch_db):
    rng = np.random.default_rng(13)
    n = int(1.5 * FS)
    t = np.arange(n) / FS
    x = am(t, -20000.0, 0.05, 0.5) + complex_noise(rng, n, 1e-7)
    loud, _ = receive(x, make_channel(offset=-20000.0, bandwidth="6k"))
    quiet, _ = receive(x, make_channel(offset=-20000.0, bandwidth="6k", squelch_db=squelch_db))
    np.testing.assert_allclose(quiet, loud, atol=1e-6)


def test_squelched_audio_does_not_depend_on_the_block_sizes():
    rng = np.random.default_rng(14)
    n = int(1.6 * FS)
    t = np.arange(n) / FS
    x = (((t > 0.7) & (t < 1.2)) * am(t, 15000.0, 0.05, 0.8) + complex_noise(rng, n, 1e-7)).astype(np.complex64)
    cuts = np.sort(rng.integers(0, n, 40))

    def one_shot_and_in_pieces(squelch_db):
        channel = make_channel(offset=15000.0, bandwidth="6k", squelch_db=squelch_db)
        whole = Receiver(FS, channel).run(samples=x).audio
        pieces = np.concatenate(list(Receiver(FS, channel).stream(np.split(x, cuts))))
        return whole, pieces

    # the unsquelched audio itself differs by float32 rounding (magnified by the carrier normaliser at the
    # burst's onset); the squelch must add nothing to that: its gates and their timing are the same
    loud_whole, loud_pieces = one_shot_and_in_pieces(None)
    quiet_whole, quiet_pieces = one_shot_and_in_pieces(10)
    assert quiet_pieces.size == quiet_whole.size
    np.testing.assert_allclose(quiet_pieces, quiet_whole, atol=np.abs(loud_whole - loud_pieces).max() + 1e-6)


@pytest.mark.parametrize("rate", [32e3, 48e3, 256e3, 1.024e6, 2.048e6, 2.4e6, 3.2e6, 8.192e6])
@pytest.mark.parametrize("emission", ["6K00A3E", "2K70J3E", "8K00A3E"])
def test_common_capture_rates_get_a_chain(rate, emission):
    # Every common SDR rate, including those where the channel rate equals the audio rate (no resampling).
    from iqsift.receiver import design_channel

    for engine in ("fft", "polyphase"):
        design = design_channel(rate, make_channel(offset=0, emission=emission), engine=engine)
        assert design.resampler.rate_out_hz == pytest.approx(16000.0)
    assert design_channel(rate, make_channel(offset=0, emission=emission)).prototype.measured_atten_db >= 80.0


def test_channel_rate_equal_to_audio_rate_recovers_audio():
    fs = 256e3  # the polyphase engine's power-of-two decimation lands on 16 kS/s = the audio rate
    n = int(0.8 * fs)
    t = np.arange(n) / fs
    audio, rx = receive(am(t, 40e3, 0.1, 0.8), make_channel(offset=40e3, bandwidth="6k"), rate=fs,
                        engine="polyphase")
    assert rx.design.channel_rate_hz == AUDIO
    assert message_snr_db(audio, message(np.arange(audio.size) / AUDIO)) >= 50


def test_too_short_input_warns():
    with pytest.warns(UserWarning, match="fewer than the receiver needs to settle"):
        receive(np.ones(20, np.complex64), make_channel(offset=0, bandwidth="6k"))
