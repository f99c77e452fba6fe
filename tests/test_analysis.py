"""`iqsift measure` end to end: the [4/6] acceptance bars through the whole receiver chain.

References: Haykin (AM depth definitions, sideband levels), ITU-R SM.328 (occupied bandwidth),
IEEE Std 1241 (SINAD), as in ../shared/REFERENCES.md.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from iqsift import Receiver, SigMFWriter, make_channel

FS = 240e3


def noise(rng, n, power):
    return np.sqrt(power / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_carrier_error_within_1_hz_tuned_up_to_2_khz_off(seed):
    # [4/6]: carrier frequency error within +-1 Hz on a 1 s capture at 30 dB CNR (in the 6 kHz channel),
    # carrier off the FFT-bin grid anywhere in the capture band, tuning up to +-2 kHz off.
    rng = np.random.default_rng(seed)
    n = int(FS)
    t = np.arange(n) / FS
    nominal = rng.uniform(-100e3, 100e3)
    true = nominal + rng.uniform(-2000, 2000)
    x = 0.05 * (1 + 0.5 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * true * t)
    x = x + noise(rng, n, 0.05**2 / 1000 * FS / 6000)
    rx = Receiver(FS, make_channel(offset=nominal, bandwidth="6k"), center_hz=1e9).analyze()
    report = rx.run(samples=x.astype(np.complex64)).report.to_dict()
    assert report["carrier"]["frequency_hz"] == pytest.approx(1e9 + true, abs=1.0)
    assert report["carrier"]["error_hz"] == pytest.approx(true - nominal, abs=1.0)


@pytest.mark.parametrize("depth", [0.1, 0.5, 0.95])
def test_depth_and_tone_through_the_chain(depth):
    # Haykin: m = (Emax - Emin)/(Emax + Emin); 40 dB CNR; within +-1 percentage point.
    rng = np.random.default_rng(7)
    n = int(1.5 * FS)
    t = np.arange(n) / FS
    x = 0.1 * (1 + depth * np.cos(2 * np.pi * 1234.5 * t)) * np.exp(2j * np.pi * 30e3 * t)
    x = x + noise(rng, n, 0.1**2 / 1e4 * FS / 6000)
    report = Receiver(FS, make_channel(offset=30e3, bandwidth="6k")).analyze().run(
        samples=x.astype(np.complex64)).report.to_dict()
    assert report["modulation"]["depth_percent"] == pytest.approx(100 * depth, abs=1.0)
    assert report["modulation"]["tone_hz"] == pytest.approx(1234.5, abs=0.5)


def test_bursts_recovered_within_20_ms():
    # [4/6]: activity of on/off bursts with known times within 20 ms.
    rng = np.random.default_rng(9)
    n = int(4 * FS)
    t = np.arange(n) / FS
    spans = [(0.35, 1.1), (1.6, 2.05), (2.8, 3.6)]
    gate = np.zeros(n)
    for a, b in spans:
        gate[(t >= a) & (t < b)] = 1
    x = gate * 0.05 * (1 + 0.7 * np.cos(2 * np.pi * 800 * t)) * np.exp(2j * np.pi * -20e3 * t)
    x = x + noise(rng, n, 1e-8)
    report = Receiver(FS, make_channel(offset=-20e3, bandwidth="6k")).analyze().run(
        samples=x.astype(np.complex64)).report.to_dict()
    found = [(s["start_s"], s["end_s"]) for s in report["activity"]]
    assert len(found) == len(spans)
    for (a, b), (fa, fb) in zip(spans, found):
        assert fa == pytest.approx(a, abs=0.02) and fb == pytest.approx(b, abs=0.02)


def test_sinad_of_a_test_tone_through_the_chain():
    # IEEE Std 1241 SNR of the recovered 1 kHz tone against Haykin's envelope-detector figure of merit
    # (Communication Systems, 4th ed.): SNR_out = A^2 mu^2 / (2 N0 W) above threshold, with N0 the complex
    # noise density and W the receiver's audio noise bandwidth (300-3000 Hz band-pass: 2700 Hz).
    n = int(2 * FS)
    t = np.arange(n) / FS
    amp, mu, n0 = 0.1, 0.3, 1.67e-10
    x = amp * (1 + mu * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * 5e3 * t)
    x = x + noise(np.random.default_rng(1), n, n0 * FS)
    audio = Receiver(FS, make_channel(offset=5e3, bandwidth="6k")).analyze(tone_hz=1000).run(
        samples=x.astype(np.complex64)).report.to_dict()["audio"]
    predicted = 10 * np.log10(amp**2 * mu**2 / (2 * n0 * 2700))
    assert audio["snr_db"] == pytest.approx(predicted, abs=1.0)
    # distortion is far below the noise here, so SINAD ~ SNR; receiver practice (S+N+D)/(N+D) >= S/(N+D)
    assert audio["sinad_db"] == pytest.approx(audio["snr_db"], abs=0.2)
    assert audio["receiver_sinad_db"] >= audio["sinad_db"]


def test_measure_cli_json(tmp_path, run_cli):
    n = int(1.0 * FS)
    t = np.arange(n) / FS
    x = 0.1 * (1 + 0.6 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * (-40e3 + 37.5) * t)
    with SigMFWriter(tmp_path / "m", FS, center_hz=121.5e6, datatype="cf32_le") as w:
        w.write(x + noise(np.random.default_rng(0), n, 1e-9))
    status, out, err = run_cli("measure", tmp_path / "m.sigmf-meta", "--freq", "121.46M", "--tone", "1k", "--json",
                               "--quiet")
    assert status == 0, err
    r = json.loads(out)
    assert r["carrier"]["frequency_hz"] == pytest.approx(121.46e6 + 37.5, abs=1.0)
    assert r["carrier"]["error_hz"] == pytest.approx(37.5, abs=1.0)
    assert r["modulation"]["depth_percent"] == pytest.approx(60, abs=1)
    # ITU-R SM.328 99 % bandwidth of single-tone AM: sidebands hold m^2/2/(1+m^2/2) = 15 % of the power,
    # so the 99 % band reaches both sidebands: 2 x 1000 Hz (plus the analysis window's spread)
    assert r["bandwidth"]["occupied_hz"] == pytest.approx(2000, rel=0.03)
    assert r["audio"]["tone_hz"] == pytest.approx(1000, abs=0.1)
    assert len(r["activity"]) == 1


def test_measure_channel_library_function(tmp_path):
    # The library form of `iqsift measure` returns a typed result with the report vocabulary.
    from iqsift import measure_channel, open_capture

    n = int(1.0 * FS)
    t = np.arange(n) / FS
    x = 0.1 * (1 + 0.45 * np.cos(2 * np.pi * 800 * t)) * np.exp(2j * np.pi * (20e3 + 12.5) * t)
    with SigMFWriter(tmp_path / "lib", FS, center_hz=100e6, datatype="cf32_le") as w:
        w.write(x + noise(np.random.default_rng(3), n, 1e-9))
    result = measure_channel(open_capture(tmp_path / "lib.sigmf-meta"), make_channel(freq="100.02M", bandwidth="6k"),
                             tone_hz=800, start=0.1, duration=0.8)
    assert result.carrier["error_hz"] == pytest.approx(12.5, abs=1.0)
    assert result.modulation["depth_percent"] == pytest.approx(45, abs=1)  # Haykin
    assert result.audio["tone_hz"] == pytest.approx(800, abs=0.1)
    assert result.to_dict()["channel"]["name"] == result.channel["name"]
