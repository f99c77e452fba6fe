"""The measurement report's contract: bad options refused when built, typed sections, empty sections with a reason.

A refused option must raise :class:`iqsift.ParameterError` (a ValueError) naming the Python parameter, echoing the
value and stating the rule, before a sample is read; a null section means only "measured, nothing there" (or not
measured for this mode/options), and the report then says why in ``<section>_reason`` (DEVELOPERS.md).
"""

from __future__ import annotations

import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest

from iqsift import ParameterError, Receiver, SigMFWriter, make_channel, measure_channel, open_capture
from iqsift.jsonable import to_jsonable

FS = 240e3
SECTIONS = ("carrier", "modulation", "bandwidth", "audio", "activity")


def noise(rng, n, power):
    return np.sqrt(power / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def am_tone(n, offset_hz, tone_hz=1000.0, depth=0.5, seed=0):
    t = np.arange(n) / FS
    x = 0.1 * (1 + depth * np.cos(2 * np.pi * tone_hz * t)) * np.exp(2j * np.pi * offset_hz * t)
    return (x + noise(np.random.default_rng(seed), n, 1e-9)).astype(np.complex64)


@pytest.fixture(scope="module")
def capture_path(tmp_path_factory):
    path = tmp_path_factory.mktemp("measure") / "am"
    with SigMFWriter(path, FS, center_hz=100e6, datatype="cf32_le") as w:
        w.write(am_tone(int(1.0 * FS), 20e3))
    return Path(f"{path}.sigmf-meta")


class NoReads:
    """A capture that fails the test if its samples are read: refusals must come before any processing."""

    def __init__(self, capture):
        self._capture = capture

    def __getattr__(self, name):
        return getattr(self._capture, name)

    def blocks(self, *args, **kwargs):
        raise AssertionError("samples were read before the bad parameter was refused")


CHANNEL = {"freq": "100.02M", "bandwidth": "6k"}  # AM, 6 kHz: audio up to 3 kHz at 16 kHz audio rate


@pytest.mark.parametrize(
    ("options", "pattern"),
    [
        ({"weighting": "bogus"}, r"^weighting: 'bogus' is not known; it must be 'none', 'psophometric' or 'a'"),
        ({"tone_hz": 50000}, r"^tone_hz: got 50000 Hz; it must lie in the audio band the channel delivers, "
                             r"0 < tone_hz <= 3000 Hz"),
        ({"tone_hz": -5}, r"^tone_hz: got -5; it must be a finite number > 0"),
        ({"tone_hz": math.nan}, r"^tone_hz: got nan; it must be a finite number"),
        ({"x_db": 0}, r"^x_db: got 0; it must be a finite number > 0"),
        ({"x_db": -3.0}, r"^x_db: got -3.0; it must be a finite number > 0"),
        ({"threshold_db": math.inf}, r"^threshold_db: got inf; it must be a finite number"),
    ],
)
def test_measure_channel_refuses_bad_parameters_before_reading(capture_path, options, pattern):
    # Today these gave report["audio"] (or "bandwidth") = None, or (threshold_db) an error, after the whole run;
    # now they are refused at once.
    with open_capture(capture_path) as capture:
        with pytest.raises(ParameterError, match=pattern) as info:
            measure_channel(NoReads(capture), make_channel(**CHANNEL), **options)
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize(
    ("options", "parameter"),
    [({"weighting": "bogus"}, "weighting"), ({"tone_hz": 50000}, "tone_hz"), ({"tone_hz": -5}, "tone_hz"),
     ({"x_db": 0}, "x_db")],
)
def test_receiver_analyze_refuses_bad_parameters(options, parameter):
    # The receiver's analyze() builds the analyzer: the same refusal, before run() is called.
    rx = Receiver(FS, make_channel(offset=20e3, bandwidth="6k"))
    with pytest.raises(ParameterError, match=f"^{parameter}: "):
        rx.analyze(**options)


def test_tone_limit_follows_the_channels_audio_band():
    # USB 2.7 kHz from 300 Hz (J3E voice): the audio reaches 3000 Hz, so 2900 Hz is accepted and 3100 Hz refused.
    channel = make_channel(offset=0, emission="2K70J3E")
    Receiver(FS, channel).analyze(tone_hz=2900)
    with pytest.raises(ParameterError, match=r"tone_hz: got 3100 Hz.*<= 3000 Hz"):
        Receiver(FS, channel).analyze(tone_hz=3100)


def assert_reasons_follow_the_convention(report):
    for name in SECTIONS:
        empty = report[name] is None or report[name] == []
        assert (f"{name}_reason" in report) == empty, name
        if empty:
            assert isinstance(report[f"{name}_reason"], str) and report[f"{name}_reason"]
    json.dumps(report, allow_nan=False)


def test_am_without_tone_says_why_audio_is_empty():
    report = Receiver(FS, make_channel(offset=20e3, bandwidth="6k")).analyze().run(
        samples=am_tone(int(1.0 * FS), 20e3)).report.to_dict()
    assert report["audio"] is None
    assert report["audio_reason"] == "not measured: no test tone given (tone_hz)"
    assert report["carrier"] is not None and report["modulation"] is not None
    assert_reasons_follow_the_convention(report)


def test_suppressed_carrier_mode_says_why_carrier_and_depth_are_empty():
    t = np.arange(int(1.0 * FS)) / FS
    x = (0.1 * np.exp(2j * np.pi * 1300 * t)).astype(np.complex64)  # a USB voice-band tone
    report = Receiver(FS, make_channel(offset=0, emission="2K70J3E")).analyze().run(samples=x).report.to_dict()
    assert report["carrier"] is None and report["modulation"] is None
    assert "usb" in report["carrier_reason"] and "suppressed-carrier" in report["carrier_reason"]
    assert "usb" in report["modulation_reason"]
    assert_reasons_follow_the_convention(report)


def test_run_too_short_for_an_audio_window_says_so():
    # 0.3 s run, 0.5 s analysis windows: nothing to measure the tone on
    report = Receiver(FS, make_channel(offset=20e3, bandwidth="6k")).analyze(tone_hz=1000).run(
        samples=am_tone(int(0.3 * FS), 20e3)).report.to_dict()
    assert report["audio"] is None
    assert "no steady analysis window of 0.5 s" in report["audio_reason"]
    assert_reasons_follow_the_convention(report)


def test_no_activity_says_why():
    x = noise(np.random.default_rng(4), int(1.0 * FS), 1e-6).astype(np.complex64)
    report = Receiver(FS, make_channel(offset=20e3, bandwidth="6k")).analyze().run(samples=x).report.to_dict()
    assert report["activity"] == []
    assert "noise floor" in report["activity_reason"]
    assert_reasons_follow_the_convention(report)


def test_measure_channel_gives_typed_frozen_sections(capture_path):
    from iqsift.measure import (
        ActivitySegment,
        AudioQualityResult,
        BandwidthResult,
        CarrierResult,
        ModulationResult,
    )

    with open_capture(capture_path) as capture:
        result = measure_channel(capture, make_channel(**CHANNEL), tone_hz=1000, start=0.1, duration=0.8)
    assert isinstance(result.carrier, CarrierResult)
    assert isinstance(result.modulation, ModulationResult)
    assert isinstance(result.bandwidth, BandwidthResult)
    assert isinstance(result.audio, AudioQualityResult)
    assert all(isinstance(seg, ActivitySegment) for seg in result.activity) and result.activity
    assert result.carrier.frequency_hz == pytest.approx(100.02e6, abs=1.0)
    assert result.modulation.depth_percent == pytest.approx(50, abs=1)
    assert result.audio.tone_hz == pytest.approx(1000, abs=0.1)
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.carrier.frequency_hz = 0.0  # type: ignore[misc]
    # the typed sections are the report's sections
    for name in ("carrier", "modulation", "bandwidth", "audio"):
        assert getattr(result, name).to_dict() == result.report[name]
    assert [seg.to_dict() for seg in result.activity] == result.report["activity"]


def test_analyzer_result_to_dict_is_what_the_report_holds():
    rx = Receiver(FS, make_channel(offset=20e3, bandwidth="6k")).analyze(tone_hz=1000)
    report = rx.run(samples=am_tone(int(1.0 * FS), 20e3)).report.to_dict()
    analysis = rx.analyzer.result()
    assert {k: report[k] for k in analysis.to_dict()} == analysis.to_dict()
    assert analysis.reasons == {}


def test_to_jsonable():
    class Result:
        def to_dict(self):
            return {"level_dbfs": np.float32(-3.5), "detected": np.bool_(True)}

    data = {"a": np.float64(1.5), "b": np.int64(3), "c": [np.nan, np.inf, -np.inf], "d": np.arange(3),
            "e": Path("/tmp/x.wav"), "f": (True, None, "s"), 7: Result()}
    out = to_jsonable(data)
    assert out == {"a": 1.5, "b": 3, "c": [None, None, None], "d": [0, 1, 2], "e": "/tmp/x.wav",
                   "f": [True, None, "s"], "7": {"level_dbfs": -3.5, "detected": True}}
    assert type(out["b"]) is int and type(out["7"]["detected"]) is bool
    json.dumps(out, allow_nan=False)
