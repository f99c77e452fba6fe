"""Speech is measured as program material, not as a tone ([2/6] item 3).

Reference: the sample capture's truth (the synthesizer's own record of the transmitted message,
regenerated sample for sample by iqsift.synth.regenerate_message): the 99.9th and 0.1th percentiles of
depth x message over the interior of each transmission.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from iqsift import Extractor, open_capture
from iqsift.plan import plan_from_dict
from iqsift.synth import regenerate_message

SAMPLES = Path(__file__).resolve().parents[1] / "sample_captures"


@pytest.fixture(scope="module")
def measured_and_truth():
    truth = json.loads((SAMPLES / "vhf_airband.truth.json").read_text())
    channels = [c for c in truth["channels"] if c["mode"] == "am"]
    plan = plan_from_dict({"channel": [{"name": c["name"], "freq": c["frequency_hz"], "emission": c["emission"]}
                                       for c in channels]}, "<truth>")
    with open_capture(SAMPLES / "vhf_airband.sigmf-meta") as capture:
        extractor = Extractor.from_plan(capture, plan)
        for _ in extractor.stream(capture.blocks()):
            pass
    return dict(zip([c["name"] for c in channels], extractor.results())), channels, truth["sample_rate_hz"]


def test_speech_channels_report_peak_modulation_and_no_tone(measured_and_truth):
    results, channels, rate = measured_and_truth
    speech = [c for c in channels if c["message"]["kind"] == "file"]
    assert speech
    for c in speech:
        n = int(rate * 8)
        message = c["depth"] * regenerate_message(c, rate, n, SAMPLES)
        t = np.arange(n) / rate
        active = np.zeros(n, bool)
        for burst in c["bursts"]:
            active |= (t >= burst["start_s"] + 0.05) & (t <= burst["end_s"] - 0.05)
        want_pos = 100 * np.percentile(message[active], 99.9)
        want_neg = -100 * np.percentile(message[active], 0.1)
        m = results[c["name"]].analysis.modulation
        assert m is not None and m.tone_hz is None, c["name"]  # before: a "tone" of 343 Hz and 3-9 % depth
        assert "program material" in m.to_dict()["method"]
        assert m.depth_positive_percent == pytest.approx(want_pos, abs=5.0), c["name"]
        assert m.depth_negative_percent == pytest.approx(want_neg, abs=5.0), c["name"]


def test_a_test_tone_is_still_measured_as_a_tone(measured_and_truth):
    results, channels, _ = measured_and_truth
    tones = [c for c in channels if c["message"]["kind"] == "tone"]
    assert tones
    for c in tones:
        m = results[c["name"]].analysis.modulation
        assert m.tone_hz == pytest.approx(c["message"]["frequencies_hz"][0], abs=0.5)
        assert m.depth_percent == pytest.approx(100 * c["depth"], abs=1.0)  # Haykin: (Emax - Emin)/(Emax + Emin)
