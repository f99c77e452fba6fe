"""Survey on a raster: snap only A3E carriers, only within the stated tolerance, one emission per channel.

Rasters: ICAO Annex 10 Volume V (aeronautical 25 and 8.33 kHz, air-ground voice A3E); the ITU Geneva
1975 plan (9 kHz, Regions 1 and 3) and Region 2 practice (10 kHz) for A3E sound broadcasting (memory).
Truth for the sample captures: sample_captures/README.md and the *.truth.json files.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import pytest

from iqsift.errors import IqsiftWarning
from iqsift.jobs import survey_file
from iqsift.rasters import RASTERS
from iqsift.survey import survey_to_plan

SAMPLES = Path(__file__).resolve().parent.parent / "sample_captures"


def _survey(name, raster):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        report = survey_file(SAMPLES / f"{name}.sigmf-meta", raster=raster)
    lines = [str(w.message) for w in caught if issubclass(w.category, IqsiftWarning)]
    return report, lines


@pytest.mark.parametrize("capture", ["vhf_airband", "hf_segment"])
@pytest.mark.parametrize("raster", sorted(RASTERS))
def test_no_two_emissions_share_a_plan_channel_and_none_is_mistuned(capture, raster):
    report, lines = _survey(capture, raster)
    found = report.survey.emissions
    grid = RASTERS[raster]
    plan = survey_to_plan(report.survey)
    tuned = [c.freq_hz for c in plan]
    assert len(set(tuned)) == len(tuned) == len(found)  # two emissions never share a plan channel
    for e, freq_hz in zip(found, tuned):
        # a channel is tuned to its own carrier: on the raster within the tolerance, else as measured
        assert abs(freq_hz - e.frequency_hz) <= grid.snap_tolerance_hz
        if e.raster_frequency_hz is None:
            assert freq_hz == e.frequency_hz and e.raster_reason
        else:
            assert e.emission_class == "A3E" and e.mode == "envelope" and e.raster_reason is None
    # one warning line per emission left off the raster, naming it and why
    unsnapped = [e for e in found if e.raster_frequency_hz is None]
    assert len(lines) == len(unsnapped)
    for e, line in zip(unsnapped, lines):
        assert "\n" not in line and f"emission {e.index} " in line and e.raster_reason in line
    # the rule is in the JSON
    d = json.loads(json.dumps(report.to_dict()))
    assert d["raster_rule"]["tolerance_hz"] == grid.snap_tolerance_hz and d["raster_rule"]["classes"] == ["A3E"]


def test_vhf_sample_on_the_25k_raster():
    # Issue [2/6] 6: on main the weak 124.0333 MHz channel was put on 124.025 (lost in extract, which
    # then had two channels there) and 124.0918 MHz on 124.100 (8.3 kHz away).
    report, lines = _survey("vhf_airband", "25k")
    by_name = {round(e.frequency_hz / 1e3): e for e in report.survey.emissions}
    assert by_name[124025].channel_name == "124.025" and by_name[124025].raster_error_hz == pytest.approx(37, abs=2)
    assert by_name[124175].channel_name == "124.175"  # 300 Hz off tune: within the 1 kHz tolerance
    for khz in (124033, 124092):
        e = by_name[khz]
        assert e.channel_name is None and e.raster_frequency_hz is None and "tolerance" in e.raster_reason
    plan = survey_to_plan(report.survey)
    assert sum(1 for c in plan if abs(c.freq_hz - 124.025e6) < 1.0) == 1
    assert any(abs(c.freq_hz - 124.0333e6) < 50.0 for c in plan)


def test_hf_sample_on_a_broadcast_raster_keeps_ssb_and_off_raster_am_as_measured():
    # Issue [2/6] 6: on main, --raster 9k put the USB and AM channels 2-3 kHz off tune.
    for raster in ("9k", "10k"):
        report, lines = _survey("hf_segment", raster)
        for e in report.survey.emissions:
            assert e.raster_frequency_hz is None
            if e.emission_class == "J3E":
                assert "not J3E" in e.raster_reason
        assert len(lines) == 3
