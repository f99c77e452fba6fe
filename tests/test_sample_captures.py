"""The committed sample captures: reproducible from their scenarios, and scored against their truth."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np
import pytest

from iqsift import Receiver, make_channel, open_capture
from iqsift.synth import load_scenario, regenerate_message, write_synth

HERE = Path(__file__).resolve().parent.parent / "sample_captures"


@pytest.mark.slow
@pytest.mark.parametrize("name", ["vhf_airband", "hf_segment"])
def test_committed_capture_regenerates_byte_for_byte(tmp_path, name):
    # [6/6]: synth output regenerated from its scenario is byte-identical (same numpy/scipy versions).
    truth = json.loads((HERE / f"{name}.truth.json").read_text())
    import numpy
    import scipy

    if (truth["numpy_version"], truth["scipy_version"]) != (numpy.__version__, scipy.__version__):
        pytest.skip("byte-for-byte reproduction is promised for the numpy/scipy versions the truth records")
    scenario = load_scenario(HERE / f"{name}.toml")
    # keep the speech paths resolvable: the scenario refers to speech/ beside it
    meta, data, truth_path = write_synth(scenario, tmp_path / f"{name}.sigmf-meta")
    assert hashlib.sha256(data.read_bytes()).hexdigest() == hashlib.sha256(
        (HERE / f"{name}.sigmf-data").read_bytes()).hexdigest()
    assert json.loads(meta.read_text()) == json.loads((HERE / f"{name}.sigmf-meta").read_text())

    def comparable(path):  # file paths in the truth are relative to where it was written
        doc = json.loads(path.read_text())
        for ch in doc["channels"]:
            ch["message"].pop("resolved_path", None)
        return doc

    assert comparable(truth_path) == comparable(HERE / f"{name}.truth.json")


def message_snr_db(audio, ref):
    g = np.dot(ref, audio) / np.dot(audio, audio)
    return 10 * np.log10(np.sum(ref**2) / np.sum((ref - g * audio) ** 2))


@pytest.mark.parametrize("capture,channel,mode,bar", [
    ("vhf_airband", "north-ground", "envelope", 35.0),  # measured 39.2 dB; speech reaches the 300 Hz band edge,
    ("vhf_airband", "north-ground", "coherent", 35.0),  # where the synth and receiver band-passes differ
    ("hf_segment", "lower-net", "lsb", 35.0),
])
def test_demod_scored_against_truth(capture, channel, mode, bar):
    # [6/6]: the truth lets a test score demod output. The speech is band-limited 300-3000 Hz (2700 Hz for SSB)
    # in the truth, like the receiver's audio band; scored inside the keyed bursts, away from key-on/off.
    truth = json.loads((HERE / f"{capture}.truth.json").read_text())
    tch = next(c for c in truth["channels"] if c["name"] == channel)
    cap = open_capture(HERE / f"{capture}.sigmf-meta")
    ch = make_channel(freq=tch["frequency_hz"], emission=tch["emission"], mode=mode)
    audio = Receiver.for_capture(cap, ch, agc=False).run(cap).audio.astype(np.float64)
    rate = 16000
    # the message is rebuilt at the capture rate, then brought to the audio rate with scipy.signal.resample_poly
    msg = regenerate_message(tch, cap.sample_rate_hz, cap.samples, base_dir=HERE).real
    from scipy.signal import resample_poly

    ref = resample_poly(msg, rate, int(cap.sample_rate_hz))[: audio.size]
    first_burst = tch["bursts"][0] if "bursts" in tch else None
    spans = [b for b in (tch.get("bursts") or [])] or [[0.0, truth["duration_s"]]]
    for span in spans[:2]:
        a, b = (span["start_s"], span["end_s"]) if isinstance(span, dict) else span
        s = slice(int((a + 0.3) * rate), int((b - 0.3) * rate))
        assert message_snr_db(audio[s], ref[s]) >= bar, (span, message_snr_db(audio[s], ref[s]))
    del first_burst
