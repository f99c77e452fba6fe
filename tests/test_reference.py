"""The receiver's reference error: --ppm corrects a capture, survey estimates it.

Outside reference: what a fast reference does to a recording follows from the mixing and sampling
equations (derived in iqsift.reference): the LO and the sample clock both run k = 1 + P·1e-6 times
fast, so the samples a receiver P ppm fast records of a scene are exactly those an ideal receiver
records at rate k·fs and centre k·fc, labelled fs and fc. The test capture is made that way: the scene
is synthesised at the true rate and centre with carriers exactly on their 8.33 kHz channels (ICAO
Annex 10 Volume V grid, 118 MHz + n·25/3 kHz), then the metadata is given the nominal values.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import jsonschema
import pytest

from iqsift import make_channel
from iqsift.captures import open_capture
from iqsift.jobs import measure_file, survey_file
from iqsift.jobs.synth import synth_file
from iqsift.plan import load_plan, parse_plan
from iqsift.reference import apparent_frequency, compose_ppm, reference_factor
from iqsift.errors import ParameterError
from iqsift.schemas import load_schema

SAMPLES = Path(__file__).resolve().parent.parent / "sample_captures"
PPM = 8.0
RATE_HZ = 240_000.0
CENTRE_HZ = 127.0e6
STEP_HZ = 25e3 / 3  # ICAO 8.33 kHz channel spacing
CHANNELS_HZ = [118e6 + n * STEP_HZ for n in (1075, 1078, 1083, 1088)]  # 126.958, 126.983, 127.025, 127.067 MHz


@pytest.fixture(scope="module")
def fast_capture(tmp_path_factory) -> Path:
    """Four AM carriers exactly on 8.33 kHz channels, recorded by a receiver PPM fast."""
    folder = tmp_path_factory.mktemp("ppm")
    k = reference_factor(PPM)
    scenario = {
        "sample_rate": RATE_HZ * k, "center": CENTRE_HZ * k, "duration": 2.0, "seed": 8,
        "datatype": "cf32_le", "noise_floor_dbfs_per_hz": -120,
        "channel": [{"name": f"c{i}", "freq": f, "mode": "am", "emission": "6K00A3E", "level_dbfs": -30 - 3 * i,
                     "depth": 0.5, "message": {"kind": "tone", "freq": 700 + 300 * i}}
                    for i, f in enumerate(CHANNELS_HZ)],
    }
    from iqsift.synth.scenario import parse_scenario

    meta = folder / "fast.sigmf-meta"
    synth_file(parse_scenario(scenario), meta)
    doc = json.loads(meta.read_text())
    doc["global"]["core:sample_rate"] = RATE_HZ  # what the receiver believes
    for seg in doc["captures"]:
        seg["core:frequency"] = CENTRE_HZ
    meta.write_text(json.dumps(doc, indent=2))
    return meta


def _valid(document: dict) -> dict:
    document = json.loads(json.dumps(document))
    jsonschema.Draft202012Validator(load_schema(document["schema"])).validate(document)
    return document


def test_factor_and_worked_number():
    # the docstring's worked number (iqsift.reference): 8 ppm, 2.4 MS/s, 127.5 MHz, a transmitter at 127.35 MHz
    assert reference_factor(8) * 2.4e6 == pytest.approx(2_400_019.2, abs=1e-6)
    assert apparent_frequency(127.35e6, 8) == pytest.approx(127_348_981.2, abs=0.05)
    assert compose_ppm(8, -8) == pytest.approx(-64e-6, abs=1e-9)  # factors multiply: (1+8e-6)(1-8e-6) - 1


def test_correction_scales_rate_centre_and_undoes(fast_capture):
    with open_capture(fast_capture) as cap:
        assert cap.sample_rate_hz == RATE_HZ and cap.center_hz == CENTRE_HZ
        cap.correct_reference(PPM)
        assert cap.sample_rate_hz == pytest.approx(RATE_HZ * (1 + PPM * 1e-6), rel=1e-15)
        assert cap.center_hz == pytest.approx(CENTRE_HZ * (1 + PPM * 1e-6), rel=1e-15)
        assert cap.nominal_sample_rate_hz == RATE_HZ
        cap.correct_reference(0)
        assert cap.sample_rate_hz == RATE_HZ and cap.center_hz == CENTRE_HZ
        with pytest.raises(ParameterError, match="ppm"):
            cap.correct_reference(float("nan"))


def test_raster_estimate_of_a_fast_receiver(fast_capture, tmp_path):
    plan_path = tmp_path / "plan.toml"
    report = survey_file(fast_capture, raster="8.33k", plan_out=plan_path)
    ref = report.frequency_reference
    assert ref is not None and ref.applied and len(ref.carriers_used) == 4
    assert ref.error_ppm == pytest.approx(PPM, abs=0.3)  # the test: 8 ± 0.3 ppm
    d = _valid(report.to_dict())
    assert d["frequency_reference"]["method"] == "raster 8.33k"
    assert d["capture"]["frequency_reference"]["correction_ppm"] == pytest.approx(ref.error_ppm)
    # corrected: every carrier snaps to its own channel with a small error
    snapped = sorted(e.raster_frequency_hz for e in report.survey.emissions)
    assert snapped == pytest.approx(CHANNELS_HZ, abs=1e-3)
    assert max(abs(e.raster_error_hz) for e in report.survey.emissions) < 5.0
    assert load_plan(plan_path).ppm == pytest.approx(ref.error_ppm)


def test_reference_carrier_estimate(fast_capture):
    report = survey_file(fast_capture, reference_carrier=CHANNELS_HZ[2])
    ref = report.frequency_reference
    assert ref is not None and ref.method == "reference carrier" and ref.applied
    assert ref.error_ppm == pytest.approx(PPM, abs=0.05)
    assert ref.carriers_used[0]["target_hz"] == CHANNELS_HZ[2]


def test_given_ppm_is_kept_and_the_estimate_reported(fast_capture):
    report = survey_file(fast_capture, raster="8.33k", ppm=PPM)
    ref = report.frequency_reference
    assert ref is not None and not ref.applied and ref.base_ppm == PPM
    assert ref.error_ppm == pytest.approx(PPM, abs=0.3)
    assert report.capture.reference_ppm == PPM


def test_no_estimate_from_one_carrier(fast_capture):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        report = survey_file(fast_capture, reference_carrier=100e6)  # nothing there
    ref = report.frequency_reference
    assert ref is not None and ref.error_ppm is None and "no measured carrier" in ref.reason
    assert _valid(report.to_dict())["frequency_reference"]["error_ppm"] is None
    assert report.capture.reference_ppm == 0.0


@pytest.mark.parametrize("ppm, tolerance_hz", [(PPM, 1.0), (None, None)])
def test_measure_carrier_error_with_and_without_ppm(fast_capture, ppm, tolerance_hz):
    channel = make_channel(freq=CHANNELS_HZ[2], emission="6K00A3E")
    result = _valid(measure_file(fast_capture, channel, ppm=ppm).to_dict())
    error_hz = result["carrier"]["error_hz"]
    if ppm is not None:
        assert abs(error_hz) <= tolerance_hz  # the test: within ±1 Hz with --ppm 8
        assert result["capture"]["frequency_reference"]["correction_ppm"] == PPM
    else:
        # without it the transmitter appears at f/(1+P·1e-6): about 1 kHz low
        assert error_hz == pytest.approx(apparent_frequency(CHANNELS_HZ[2], PPM) - CHANNELS_HZ[2], abs=1.0)


def test_vhf_sample_reads_about_zero():
    # the acceptance: its carriers are a little off their channels (truth: +37, -21, +120, 0, -300 Hz)
    report = survey_file(SAMPLES / "vhf_airband.sigmf-meta", raster="8.33k")
    ref = report.frequency_reference
    assert ref is not None and ref.error_ppm is not None and abs(ref.error_ppm) <= 0.5
    # the carrier 300 Hz off (2.4 ppm at 124.175 MHz) is an outlier, not used
    assert all(abs(c["frequency_hz"] - 124.175e6) > 1e3 for c in ref.carriers_used)


def test_plan_ppm_is_read_and_checked():
    text = '[defaults]\nppm = -3.5\n[[channel]]\nname = "a"\nfreq = "127M"\nbandwidth = "6k"\n'
    assert parse_plan(text).ppm == -3.5
    with pytest.raises(ParameterError, match=r"\[defaults\]: key 'ppm'"):
        parse_plan(text.replace("-3.5", '"fast"'))
    with pytest.raises(ParameterError, match="unknown|not"):
        parse_plan('[[channel]]\nname = "a"\nfreq = "127M"\nbandwidth = "6k"\nppm = 3\n')


def test_cli_ppm_and_reference_carrier(fast_capture, capsys):
    from iqsift.cli import main

    assert main(["survey", str(fast_capture), "--raster", "8.33k", "-q"]) in (0, None)
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith("reference"))
    assert "ppm" in line and "applied" in line and "4 of 4 carriers" in line
    # a bad value: one line naming the flag, exit status 2
    assert main(["measure", str(fast_capture), "--freq", "127.025M", "--ppm", "5000"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--ppm" in err[0] and "1000" in err[0]
    assert main(["info", str(fast_capture), "--ppm", "-8", "--json"]) in (0, None)
    info = json.loads(capsys.readouterr().out)
    assert info["sample_rate_hz"] == pytest.approx(RATE_HZ * (1 - 8e-6), rel=1e-15)


def test_extract_applies_the_plans_ppm_and_audio_keeps_its_rate(fast_capture, tmp_path):
    import soundfile

    from iqsift.jobs import demod_file, extract_file

    plan_path = tmp_path / "plan.toml"
    survey_file(fast_capture, raster="8.33k", plan_out=plan_path)
    result = _valid(extract_file(fast_capture, plan_path, tmp_path / "x").to_dict())
    assert result["capture"]["frequency_reference"]["correction_ppm"] == pytest.approx(PPM, abs=0.3)
    errors = [c["carrier"]["error_hz"] for c in result["channels"]]
    assert len(errors) == 4 and max(abs(e) for e in errors) <= 1.0  # on their channels, as made
    # the audio file keeps a whole rate (on the receiver's clock); the report gives the true one
    out = demod_file(fast_capture, make_channel(freq=CHANNELS_HZ[0], emission="6K00A3E"), tmp_path / "a.wav",
                     ppm=PPM)
    assert soundfile.info(str(tmp_path / "a.wav")).samplerate == 16000
    assert out.receiver.audio_rate_hz == pytest.approx(16000 * (1 + PPM * 1e-6), rel=1e-9)
