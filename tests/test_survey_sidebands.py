"""Survey: sidebands belong to their carrier (tones of any audio frequency, speech, neighbours), and a
carrier at 0 Hz of a baseband iqsift wrote is a carrier, not the DC offset.

Captures are made with :mod:`iqsift.synth` from seeded scenario dicts (truth = what was put in).
AM facts used: a tone of depth m puts two lines at f_c ± f_m, each 20 log10(m/2) dBc, and the
spectrum of AM by any real message is mirrored about the carrier (Haykin, *Communication Systems*,
ch. 3); the necessary bandwidth of A3E is 2M (ITU-R SM.1138).
"""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import pytest

from iqsift import make_channel
from iqsift.errors import IqsiftWarning
from iqsift.jobs import demod_file, survey_file
from iqsift.survey import Surveyor, survey_to_plan
from iqsift.synth import synthesize

SPEECH = Path(__file__).resolve().parent.parent / "sample_captures" / "speech"
CENTRE = 10.0e6


def _scene(channels, *, seed, rate=48e3, duration="0.5s", centre=CENTRE):
    return {"sample_rate": rate, "center": centre, "duration": duration, "seed": seed,
            "noise_floor_dbfs_per_hz": -120, "channel": channels}


def _survey(scene):
    x = synthesize(scene).samples
    return Surveyor(scene["sample_rate"], x.size, center_hz=scene["center"]).feed(x).result()


def _speech(wav):
    """A looping speech message from the sample captures' WAVs (the speech tilt tells USB from LSB)."""
    return {"kind": "file", "path": str(SPEECH / wav), "loop": True}


def _am(freq_hz, message, *, depth=0.5, level_dbfs=-40.0, name="am"):
    return {"name": name, "freq": freq_hz, "mode": "am", "level_dbfs": level_dbfs, "depth": depth,
            "message": message}


# Found on main (9878407): tones of 1.5 kHz and more gave 3 emissions (carrier "carrier line only" and
# one per sideband line, each planned as a channel mistuned by the tone frequency); 1 after the fix.
@pytest.mark.parametrize(("tone_hz", "depth"), [(300, 0.5), (1500, 0.3), (2000, 0.1), (2500, 1.0), (2900, 0.8),
                                                (3000, 0.5)])
def test_tone_modulated_am_is_one_emission_whatever_the_tone(tone_hz, depth):
    carrier_hz = 10.005e6 + 3.3  # off the bin grid
    r = _survey(_scene([_am(carrier_hz, {"kind": "tone", "freq": tone_hz}, depth=depth)], seed=tone_hz))
    assert len(r.emissions) == 1, [(e.frequency_hz, e.note) for e in r.emissions]
    e = r.emissions[0]
    assert (e.emission_class, e.mode, e.confidence) == ("A3E", "envelope", "high"), e.note
    assert "both sides" in e.note
    assert abs(e.frequency_hz - carrier_hz) < 1.0
    assert e.bandwidth_hz >= 2 * tone_hz  # SM.1138: A3E needs 2M, both sideband lines inside the channel
    (channel,) = survey_to_plan(r).channels
    assert abs(channel.freq_hz - carrier_hz) < 1.0 and channel.mode == "envelope"


def test_multitone_am_is_one_emission():
    r = _survey(_scene([_am(10.005e6, {"kind": "tones", "freqs": [400, 1700, 2600]}, depth=0.9)], seed=3))
    assert len(r.emissions) == 1 and r.emissions[0].emission_class == "A3E"  # main: 5
    assert abs(r.emissions[0].frequency_hz - 10.005e6) < 1.0


@pytest.mark.parametrize(("wav", "depth"), [("north-ground.wav", 0.9), ("harbour-news.wav", 0.3),
                                            ("yard-link.wav", 0.6)])
def test_speech_modulated_am_is_one_emission(wav, depth):
    message = _speech(wav)
    r = _survey(_scene([_am(10.005e6, message, depth=depth)], seed=5, duration="1s"))
    assert len(r.emissions) == 1
    e = r.emissions[0]
    assert (e.emission_class, e.mode) == ("A3E", "envelope")
    assert abs(e.frequency_hz - 10.005e6) < 1.0


def test_ssb_and_dsb_neighbours_of_a_tone_am_carrier_stay_their_own_emissions():
    # AM with a 2 kHz tone (lines at +-2 kHz, apart from the carrier), a USB signal from 3.8 kHz above
    # the carrier, an LSB signal from 4 kHz below it (6 dB weaker, so not a mirror image of the USB one)
    # and a suppressed-carrier DSB 20 kHz away: on main, 7 emissions (each sideband line on its own
    # with a mistuned channel); now 4, each neighbour its own emission.
    scene = _scene([
        _am(10.015e6, {"kind": "tone", "freq": 2000}, depth=0.8),
        {"name": "usb", "freq": 10.0185e6, "mode": "usb", "level_dbfs": -50, "message": _speech("upper-net.wav")},
        {"name": "lsb", "freq": 10.011e6, "mode": "lsb", "level_dbfs": -56, "message": _speech("lower-net.wav")},
        {"name": "dsb", "freq": 9.995e6, "mode": "dsb", "level_dbfs": -50, "message": {"kind": "noise"}},
    ], seed=11, duration="2s")
    r = _survey(scene)
    got = [(e.emission_class, e.mode) for e in r.emissions]
    assert got == [("A3E", "dsb"), ("J3E", "lsb"), ("A3E", "envelope"), ("J3E", "usb")], got
    am = r.emissions[2]
    assert abs(am.frequency_hz - 10.015e6) < 1.0 and am.confidence == "high"
    # the AM's band stops short of its neighbours
    assert r.emissions[1].band_hi_hz < am.band_lo_hz and am.band_hi_hz < r.emissions[3].band_lo_hz
    plan = survey_to_plan(r)
    assert len({c.freq_hz for c in plan}) == 4


# ----------------------------------------------------------------------------- a carrier at 0 Hz


@pytest.mark.parametrize(("message", "offset_hz"), [({"kind": "tone", "freq": 400}, 0.0),
                                                    ({"kind": "tone", "freq": 2000}, 60.0),
                                                    ({"kind": "noise"}, 0.0)])
def test_am_carrier_at_zero_hz_of_a_narrow_baseband_is_a3e(message, offset_hz):
    # 9.6 kS/s centred on the channel, as `iqsift demod --baseband` writes it: the carrier lies in the
    # bins left to the DC offset. Main: "J3E usb" (or two H3E for a 400 Hz tone).
    channel = {"name": "am", "offset": offset_hz, "mode": "am", "level_dbfs": -40.0, "depth": 0.5, "message": message}
    scene = _scene([channel], seed=7, rate=9600.0, duration="1s", centre=124.1e6)
    r = _survey(scene)
    assert len(r.emissions) == 1
    e = r.emissions[0]
    assert (e.emission_class, e.mode, e.confidence) == ("A3E", "envelope", "high"), e.note
    assert abs(e.offset_hz - offset_hz) < 1.0
    assert e.carrier_level_dbfs == pytest.approx(-40.0, abs=0.5)
    assert r.dc_offset["carrier_emission"] == 1


def test_a_dc_offset_amid_a_one_sided_or_carrierless_signal_is_not_taken_for_a_carrier():
    for mode, offset_hz, expected in (("usb", -1200.0, ("J3E", "usb")), ("dsb", 0.0, ("A3E", "dsb"))):
        scene = _scene([{"name": "x", "offset": offset_hz, "mode": mode, "level_dbfs": -40,
                         "message": {"kind": "noise"}}], seed=8, rate=9600.0, duration="1s", centre=124.1e6)
        x = synthesize(scene).samples + 0.003  # a receiver DC offset, -50.5 dBFS
        r = Surveyor(9600.0, x.size, center_hz=124.1e6).feed(x).result()
        assert [(e.emission_class, e.mode) for e in r.emissions] == [expected]
        assert r.dc_offset["visible"] and r.dc_offset["carrier_emission"] is None


def test_survey_of_a_baseband_iqsift_wrote_calls_the_am_channel_a3e(tmp_path):
    # Issue [2/6] 9b: `iqsift demod vhf_airband --freq 124.0916667M -e 6K00A3E --baseband bb` then
    # `iqsift survey bb` (9.6 kS/s) said "J3E usb" on main.
    sample = Path(__file__).resolve().parent.parent / "sample_captures" / "vhf_airband.sigmf-meta"
    base = tmp_path / "bb.sigmf-meta"
    demod_file(sample, make_channel(freq=124.0916667e6, emission="6K00A3E"), tmp_path / "a.wav", baseband=base,
               start=2.5, duration=3.5)
    with warnings.catch_warnings():
        warnings.simplefilter("error", IqsiftWarning)
        found = survey_file(base).survey
    assert found.sample_rate_hz < 20e3
    assert len(found.emissions) == 1
    e = found.emissions[0]
    assert (e.emission_class, e.mode, e.designator) == ("A3E", "envelope", "6K00A3E"), e.note
    # apron-ops: 124.0916667 MHz + 120 Hz, drifting 0.5 Hz/s (sample_captures/README.md)
    assert abs(e.frequency_hz - (124.0916667e6 + 120.0 + 0.5 * 4.25)) < 5.0
    assert math.isfinite(e.level_dbfs)
