"""``measure --reference``: STOI, extended STOI and segmental SNR of recovered speech against the sent message.

Outside references: STOI and ESTOI are the ``pystoi`` package's (Taal et al., IEEE TASLP 2011; Jensen & Taal,
IEEE/ACM TASLP 2016), called here directly on signals this test aligns itself from the delay it put in;
resampling is :func:`scipy.signal.resample_poly`; segmental SNR is the textbook definition (Quackenbush,
Barnwell & Clements 1988: 20 ms frames, clamped to [-10, 35] dB), written out here in plain numpy.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile
from scipy import signal

from iqsift import ParameterError, Receiver, SigMFWriter, make_channel, open_capture
from iqsift.jobs import measure_channel, measure_file
from iqsift.measure import segmental_snr_db
from iqsift.schemas import load_schema
from iqsift.synth.signals import awgn, ssb_signal

ROOT = Path(__file__).resolve().parents[1]
SPEECH = ROOT / "sample_captures" / "speech" / "upper-net.wav"  # invented phrase, 8 kHz, 8 s
FS = 48e3
OFFSET_HZ = 6e3
LEAD_S = 0.25  # the message starts this late in the capture: the delay the alignment must find
LEVEL_DBFS = -30.0
CHANNEL = {"offset": OFFSET_HZ, "emission": "2K70J3E"}


def speech_capture(path: Path, cnr_db: float, seed: int = 0) -> Path:
    """USB speech from SPEECH, LEAD_S late, in white noise of the given carrier(signal)-to-noise ratio in 2.7 kHz."""
    base = path / f"usb_{cnr_db:g}"
    if Path(f"{base}.sigmf-meta").exists():
        return Path(f"{base}.sigmf-meta")
    message, rate = soundfile.read(SPEECH, dtype="float64")
    up = signal.resample_poly(message, int(FS // rate), 1)
    up = np.concatenate([np.zeros(int(LEAD_S * FS)), up])
    x = ssb_signal(up, FS, sideband="usb", level_dbfs=LEVEL_DBFS, carrier_hz=OFFSET_HZ, low_hz=300, high_hz=3000)
    density = LEVEL_DBFS - cnr_db - 10 * math.log10(2700.0)
    x = x + awgn(x.size, rate_hz=FS, density_dbfs_per_hz=density, seed=seed)
    with SigMFWriter(base, FS, datatype="cf32_le") as w:
        w.write(x.astype(np.complex64))
    return Path(f"{base}.sigmf-meta")


@pytest.fixture(scope="module")
def folder(tmp_path_factory) -> Path:
    return tmp_path_factory.mktemp("reference")


def test_stoi_equals_pystoi_on_the_same_aligned_signals(folder):
    from pystoi import stoi

    capture = speech_capture(folder, 20.0)
    result = measure_file(capture, make_channel(**CHANNEL), reference=SPEECH)
    audio = result.to_dict()["audio"]
    jsonschema = pytest.importorskip("jsonschema")
    jsonschema.validate(result.to_dict(), load_schema("measure-v1"))
    # the alignment found the delay put in, to the audio sample
    assert audio["reference"]["delay_s"] == pytest.approx(LEAD_S, abs=1 / 16000)
    assert audio["reference"]["correlation"] > 0.5 and not audio["reference"]["inverted"]
    # the same signals aligned here from the known delay: the reference resampled 8 -> 16 kHz
    # (scipy.signal.resample_poly), the receiver's audio from LEAD_S on
    ref, rate = soundfile.read(SPEECH, dtype="float64")
    x = signal.resample_poly(ref, 2, 1)
    recovered = Receiver.for_capture(open_capture(capture), make_channel(**CHANNEL), agc=False).run(
        open_capture(capture)).audio.astype(np.float64)
    lead = int(round(LEAD_S * 16000))
    y = recovered[lead:lead + x.size]
    assert y.size == x.size
    assert audio["stoi"] == pytest.approx(stoi(x, y, 16000), abs=1e-9)
    assert audio["estoi"] == pytest.approx(stoi(x, y, 16000, extended=True), abs=1e-9)
    # segmental SNR written out from the textbook definition (least-squares gain first)
    g = np.dot(x, y) / np.dot(y, y)
    frames = x.size // 320
    xs, es = x[: frames * 320].reshape(frames, 320), (x - g * y)[: frames * 320].reshape(frames, 320)
    energy = np.sum(xs**2, 1)
    speech = energy > energy.max() * 1e-4  # pauses (40 dB below the loudest frame, Taal et al. 2011) left out
    per = np.clip(10 * np.log10(energy[speech] / np.sum(es**2, 1)[speech]), -10, 35)
    assert audio["segmental_snr_db"] == pytest.approx(float(np.mean(per)), abs=1e-9)


def test_stoi_falls_monotonically_down_a_noise_ladder(folder):
    ladder = (30.0, 15.0, 5.0, 0.0, -5.0)
    scores = []
    for cnr in ladder:
        m = measure_channel(speech_capture(folder, cnr, seed=int(cnr) + 10), make_channel(**CHANNEL),
                            reference=SPEECH)
        score = m.reference["audio"]
        scores.append((score.stoi, score.estoi, score.segmental_snr_db))
    print("CNR dB -> (STOI, ESTOI, segSNR dB):", dict(zip(ladder, [tuple(round(v, 3) for v in s) for s in scores])))
    for column in range(3):
        values = [s[column] for s in scores]
        assert all(a > b for a, b in zip(values, values[1:])), (column, values)


def test_short_reference_is_refused_before_work(folder, tmp_path, run_cli):
    capture = speech_capture(folder, 30.0)
    short = tmp_path / "short.wav"
    soundfile.write(short, np.sin(np.arange(16000 * 2) * 0.3) * 0.3, 16000)  # 2 s
    status, stdout, stderr = run_cli("measure", capture, "--offset", OFFSET_HZ, "-e", "2K70J3E",
                                     "--reference", short, "--json", "--quiet")
    assert status == 2 and stdout == ""
    assert stderr.count("\n") == 1 and "2.00 s long" in stderr and str(short) in stderr


def test_uncorrelated_reference_is_refused(folder, tmp_path, run_cli):
    capture = speech_capture(folder, 30.0)
    noise = tmp_path / "noise.wav"
    soundfile.write(noise, np.random.default_rng(5).standard_normal(16000 * 4) * 0.1, 16000)
    status, stdout, stderr = run_cli("measure", capture, "--offset", OFFSET_HZ, "-e", "2K70J3E",
                                     "--reference", noise, "--quiet")
    assert status == 2 and stdout == ""
    assert stderr.count("\n") == 1 and "does not correlate" in stderr and str(noise) in stderr


def test_cli_prints_the_scores(folder, run_cli):
    capture = speech_capture(folder, 30.0)
    status, stdout, stderr = run_cli("measure", capture, "--offset", OFFSET_HZ, "-e", "2K70J3E",
                                     "--reference", SPEECH, "--json", "--quiet")
    assert status == 0, stderr
    report = json.loads(stdout)
    assert 0.0 < report["audio"]["stoi"] <= 1.0 and report["audio"]["reference"]["path"] == str(SPEECH)


def test_segmental_snr_clamps():
    # Quackenbush et al. 1988: each frame's SNR is limited to [-10, 35] dB
    x = np.sin(np.arange(16000) * 0.1)
    assert segmental_snr_db(x, x, 16000) == pytest.approx(35.0)
    # buried in noise 23 dB stronger: the least-squares gain leaves an error about as strong as the reference
    noisy = x + np.random.default_rng(0).standard_normal(x.size) * 10
    assert -10.0 <= segmental_snr_db(x, noisy, 16000) < 0.5
    with pytest.raises(ParameterError):
        segmental_snr_db(x[:10], x[:10], 16000)


def test_isb_scores_each_sideband_against_its_channel_of_a_stereo_reference(tmp_path):
    # two speech programmes, one per sideband; reference: left = lower, right = upper (the audio's order)
    lower, rate = soundfile.read(ROOT / "sample_captures" / "speech" / "lower-net.wav", dtype="float64")
    upper, _ = soundfile.read(SPEECH, dtype="float64")
    up = int(FS // rate)
    x = (ssb_signal(signal.resample_poly(lower, up, 1), FS, sideband="lsb", level_dbfs=-33, carrier_hz=OFFSET_HZ)
         + ssb_signal(signal.resample_poly(upper, up, 1), FS, sideband="usb", level_dbfs=-30, carrier_hz=OFFSET_HZ))
    x = x + awgn(x.size, power_dbfs=-80, seed=1)
    with SigMFWriter(tmp_path / "isb", FS, datatype="cf32_le") as w:
        w.write(x.astype(np.complex64))
    stereo = tmp_path / "ref.wav"
    soundfile.write(stereo, np.column_stack([lower, upper]), int(rate), subtype="FLOAT")
    result = measure_file(tmp_path / "isb.sigmf-meta", make_channel(offset=OFFSET_HZ, emission="6K00B8E"),
                          reference=stereo)
    sides = result.to_dict()["audio_sidebands"]
    for name in ("lower", "upper"):
        assert sides[name]["reference"]["correlation"] > 0.5 and abs(sides[name]["reference"]["delay_s"]) < 1e-3
        assert sides[name]["stoi"] > 0.8
    # the wrong way round (upper programme as the lower reference) does not correlate: the sidebands are apart
    swapped = tmp_path / "swapped.wav"
    soundfile.write(swapped, np.column_stack([upper, lower]), int(rate), subtype="FLOAT")
    with pytest.raises(ParameterError, match="does not correlate"):
        measure_file(tmp_path / "isb.sigmf-meta", make_channel(offset=OFFSET_HZ, emission="6K00B8E"),
                     reference=swapped)
    with pytest.raises(ParameterError, match="has 1 channel"):
        measure_file(tmp_path / "isb.sigmf-meta", make_channel(offset=OFFSET_HZ, emission="6K00B8E"),
                     reference=SPEECH)
