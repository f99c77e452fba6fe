"""Independent sidebands (ISB, B8E): two programmes on one suppressed carrier, recovered as two audio channels.

The signal is built outside the receiver: an ISB emission is a USB signal plus an LSB signal on one carrier
(ITU RR Appendix 1, first symbol B; Haykin, *Communication Systems*, SSB), each made exactly as one complex
exponential per tone (:func:`iqsift.synth.signals.ssb_tones`). SNR is IEEE Std 1241 (four-parameter sine fit,
:func:`iqsift.measure.audio_quality`); the other sideband's tone is measured by a least-squares sine fit at its
frequency (IEEE Std 1241 three-parameter fit) and compared with the wanted tone's amplitude.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile

from iqsift import Receiver, SigMFWriter, make_channel
from iqsift.dsp.sidebands import design_sideband_split, opposite_sideband_rejection_db
from iqsift.emission import parse_emission
from iqsift.jobs import demod_file, design_report, measure_file
from iqsift.measure import audio_quality
from iqsift.schemas import load_schema
from iqsift.synth.signals import awgn, ssb_tones

FS = 96e3
OFFSET_HZ = 12e3
LOWER_TONE_HZ, UPPER_TONE_HZ = 1000.0, 1700.0
DURATION_S = 3.0


def isb_tones(seed: int = 0, noise_dbfs: float = -70.0) -> np.ndarray:
    n = int(DURATION_S * FS)
    lower = ssb_tones([LOWER_TONE_HZ], FS, n, sideband="lsb", level_dbfs=-23.0, carrier_hz=OFFSET_HZ)
    upper = ssb_tones([UPPER_TONE_HZ], FS, n, sideband="usb", level_dbfs=-20.0, carrier_hz=OFFSET_HZ)
    return (lower + upper + awgn(n, power_dbfs=noise_dbfs, seed=seed)).astype(np.complex64)


@pytest.fixture(scope="module")
def capture(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("isb") / "isb"
    with SigMFWriter(path, FS, center_hz=5e6, datatype="cf32_le") as w:
        w.write(isb_tones())
    return Path(f"{path}.sigmf-meta")


def tone_amplitude(x: np.ndarray, rate: float, f_hz: float) -> float:
    """Amplitude of a sine of known frequency by linear least squares (IEEE Std 1241 three-parameter fit)."""
    t = np.arange(x.size) / rate
    basis = np.column_stack([np.cos(2 * np.pi * f_hz * t), np.sin(2 * np.pi * f_hz * t), np.ones_like(t)])
    coef = np.linalg.lstsq(basis, x, rcond=None)[0]
    return float(np.hypot(coef[0], coef[1]))


def test_b8e_and_b7e_default_to_isb():
    # RR Appendix 1: first symbol B = independent sidebands.
    assert parse_emission("6K00B8E").mode == "isb"
    assert parse_emission("6K00B7E").mode == "isb"
    ch = make_channel(offset=0, emission="6K00B8E")
    # SM.1138: B8E Bn = sum of the sidebands' M, so a 6 kHz ISB channel carries 3 kHz per sideband
    assert ch.passband_hz == (-3000.0, 3000.0) and ch.audio_band == (300.0, 3000.0)


def test_split_rejection_measured_from_taps_matches_scipy_freqz_at_points():
    split = design_sideband_split(9600.0, 300.0, 3000.0)
    ripple, rejection = opposite_sideband_rejection_db(split.upper_taps, 9600.0, "usb", 300.0, 3000.0)
    assert rejection == split.rejection_db >= 40.0 and ripple < 0.1
    assert np.allclose(split.lower_taps, np.conj(split.upper_taps))  # mirror images: the same delay
    # one point by hand: the DTFT at -1000 Hz (the lower tone) against +1000 Hz (Oppenheim & Schafer ch. 2)
    n = np.arange(split.upper_taps.size)
    h = lambda f: abs(np.sum(split.upper_taps * np.exp(-2j * np.pi * f * n / 9600.0)))  # noqa: E731
    assert 20 * np.log10(h(1000.0) / h(-1000.0)) >= split.rejection_db - 1e-6


def test_demod_writes_two_channels_each_sideband_clean(capture, tmp_path):
    out = tmp_path / "isb.wav"
    result = demod_file(capture, make_channel(freq=5e6 + OFFSET_HZ, emission="6K00B8E"), out)
    audio, rate = soundfile.read(out, dtype="float64")
    assert audio.ndim == 2 and audio.shape[1] == 2
    assert audio.shape[0] == round(DURATION_S * FS * rate / FS)
    steady = audio[int(0.2 * rate):-int(0.2 * rate)]
    for column, own, other in ((0, LOWER_TONE_HZ, UPPER_TONE_HZ), (1, UPPER_TONE_HZ, LOWER_TONE_HZ)):
        x = steady[:, column]
        snr = audio_quality(x, rate, tone_hz=own).snr_db
        leak_db = 20 * np.log10(tone_amplitude(x, rate, other) / tone_amplitude(x, rate, own))
        print(f"sideband {column}: SNR {snr:.1f} dB, other sideband's tone {leak_db:.1f} dB")
        assert snr >= 40.0, (column, snr)
        assert leak_db <= -40.0, (column, leak_db)
    import jsonschema

    jsonschema.validate(result.to_dict(), load_schema("demod-v1"))


def test_measure_reports_audio_per_sideband(capture):
    result = measure_file(capture, make_channel(freq=5e6 + OFFSET_HZ, emission="6K00B8E")).to_dict()
    import jsonschema

    jsonschema.validate(result, load_schema("measure-v1"))  # the schema names the new keys
    assert result["audio"] is None and "audio_sidebands" in result["audio_reason"]
    sides = result["audio_sidebands"]
    assert abs(sides["lower"]["tone_hz"] - LOWER_TONE_HZ) < 0.5
    assert abs(sides["upper"]["tone_hz"] - UPPER_TONE_HZ) < 0.5
    # the other sideband's tone would count as noise in IEEE 1241 SNR: >= 40 dB means it is >= 40 dB down
    assert sides["lower"]["snr_db"] >= 40.0 and sides["upper"]["snr_db"] >= 40.0


def test_chunked_equals_one_shot():
    x = isb_tones(seed=3)[: int(0.6 * FS)]
    ch = make_channel(offset=OFFSET_HZ, emission="6K00B8E")
    whole = Receiver(FS, ch).run(samples=x).audio
    rx = Receiver(FS, ch)
    cuts = [0, 1, 0, 4999, 7, 31337, 101, x.size]
    pieces = [rx.process(x[a:b]) for a, b in zip(np.cumsum(cuts)[:-1], np.cumsum(cuts)[1:])]
    pieces.append(rx.flush())
    assert whole.shape[1] == 2
    np.testing.assert_allclose(np.concatenate(pieces), whole, atol=2e-5)  # as tests/test_receiver.py (float32 FFTs)


def test_design_lists_the_split_with_its_rejection():
    report = design_report(96e3, make_channel(offset=OFFSET_HZ, emission="6K00B8E")).to_dict()
    split = [s for s in report["design"]["stages"] if s["kind"] == "sideband_split"]
    assert len(split) == 1 and split[0]["measured_rejection_db"] >= 40.0


def test_cli_demod_isb(capture, tmp_path, run_cli):
    out = tmp_path / "cli.flac"
    status, stdout, stderr = run_cli("demod", capture, "--freq", 5e6 + OFFSET_HZ, "-e", "6K00B8E", "-o", out,
                                     "--json", "--quiet")
    assert status == 0, stderr
    assert soundfile.info(str(out)).channels == 2
    assert json.loads(stdout)["schema"] == "demod-v1"


def test_extract_plan_isb_by_mode_and_by_emission(capture, tmp_path, run_cli):
    plan = tmp_path / "plan.toml"
    plan.write_text(
        f'[[channel]]\nname = "by-emission"\noffset = {OFFSET_HZ}\nemission = "6K00B8E"\n'
        f'[[channel]]\nname = "by-mode"\noffset = {OFFSET_HZ}\nbandwidth = "6k"\nmode = "isb"\n'
        f'[[channel]]\nname = "one-side"\noffset = {OFFSET_HZ}\nemission = "6K00B8E"\nmode = "usb"\n'
    )
    status, stdout, stderr = run_cli("extract", capture, "--plan", plan, "--out-dir", tmp_path / "out", "--json",
                                     "--quiet")
    assert status == 0, stderr
    import jsonschema

    jsonschema.validate(json.loads(stdout), load_schema("extract-v1"))
    for name in ("by-emission", "by-mode"):
        audio, rate = soundfile.read(tmp_path / "out" / f"{name}.wav", dtype="float64")
        steady = audio[int(0.2 * rate):-int(0.2 * rate)]
        assert audio.shape[1] == 2
        for column, own in ((0, LOWER_TONE_HZ), (1, UPPER_TONE_HZ)):
            assert audio_quality(steady[:, column], rate, tone_hz=own).snr_db >= 40.0
    assert soundfile.info(str(tmp_path / "out" / "one-side.wav")).channels == 1


def test_squelch_gates_both_sidebands_alike():
    # the squelch (DEVELOPERS.md: a gain curve per audio frame) mutes a frame in both channels or in neither
    n = int(1.2 * FS)
    x = isb_tones(seed=4, noise_dbfs=-90.0)[:n].copy()
    x[int(0.6 * FS):] = awgn(n - int(0.6 * FS), power_dbfs=-90.0, seed=5)  # the link drops after 0.6 s
    ch = make_channel(offset=OFFSET_HZ, emission="6K00B8E", squelch_db=10.0)
    audio = Receiver(FS, ch).run(samples=x).audio
    assert audio.shape == (round(n * 16000 / FS), 2)
    tail = audio[int(0.9 * 16000):]
    assert np.all(tail == 0.0)  # muted in both channels
    head = audio[int(0.1 * 16000):int(0.5 * 16000)]
    assert np.all(np.abs(head).max(axis=0) > 0.05)  # both programmes pass while the link is up
