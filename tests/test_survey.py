"""Survey: emissions found, measured and classed in generated captures; plans that read back.

Captures are built here with numpy (AM carriers at random offsets off the bin grid,
band-limited noise for voice, analytic band noise for single sideband) and written
with SigMFWriter. Truth is what the generator put in; the references used for the
checks are named beside them.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import scipy.signal

import iqsift.cli.survey_cmd  # noqa: F401  (registers the command)
from iqsift.captures import SigMFWriter, open_capture
from iqsift.errors import ParameterError
from iqsift.plan import load_plan, parse_plan
from iqsift.rasters import aero_channel
from iqsift.survey import (
    Surveyor,
    choose_resolution,
    floor_median_bias,
    grandke_offset,
    hann_response,
    survey_capture,
    survey_plan_text,
    survey_to_plan,
    welch_dof,
)

# ----------------------------------------------------------------------------- generators

N0 = 1e-10  # noise density, FS^2/Hz (-100 dBFS/Hz)


def _noise(rng, n, rate, n0=N0):
    """Complex white Gaussian noise of two-sided density n0 (total power n0*rate)."""
    return np.sqrt(n0 * rate / 2.0) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def _band_noise(rng, n, rate, lo, hi, tilt_db_per_octave=0.0):
    """Analytic (complex) Gaussian noise with power only between lo and hi Hz (signed), unit power.

    With a tilt the density falls by that many dB per octave away from the band edge nearest 0 Hz,
    as the long-term average speech spectrum falls above its peak (Byrne et al., JASA 96(4), 1994).
    """
    spec = rng.standard_normal(n) + 1j * rng.standard_normal(n)
    fr = np.fft.fftfreq(n, 1.0 / rate)
    inside = (fr >= lo) & (fr <= hi)
    gain = np.zeros(n)
    ref = max(min(abs(lo), abs(hi)), 1.0)
    gain[inside] = 10.0 ** (-tilt_db_per_octave * np.log2(np.maximum(np.abs(fr[inside]) / ref, 1.0)) / 20.0)
    x = np.fft.ifft(spec * gain)
    return x / np.sqrt(np.mean(np.abs(x) ** 2))


def _voice(rng, n, rate, lo=300.0, hi=3000.0):
    """Real band-limited noise (lo..hi Hz), unit RMS: a stand-in for speech."""
    v = _band_noise(rng, n, rate, lo, hi).real
    return v / np.sqrt(np.mean(v * v))


def _enbw(rate, n):
    nps, _ = choose_resolution(rate, n)
    return 1.5 * rate / nps  # Hann ENBW = 1.5 bins (harris 1978, Table 1)


def _am(rng, n, rate, offset_hz, cn_db, m_rms=0.3, top_hz=3000.0):
    """AM (A3E): carrier cn_db above the noise in one detection bin's ENBW, voice-like modulation."""
    amp = math.sqrt(10.0 ** (cn_db / 10.0) * N0 * _enbw(rate, n))
    t = np.arange(n) / rate
    return amp * (1.0 + m_rms * _voice(rng, n, rate, 300.0, top_hz)) * np.exp(2j * np.pi * offset_hz * t)


def _ssb(rng, n, rate, carrier_hz, density_db, side):
    """J3E: speech-tilted sideband 300-3000 Hz above (usb) or below (lsb) a suppressed carrier."""
    power = 10.0 ** (density_db / 10.0) * N0 * 2700.0
    lo, hi = (300.0, 3000.0) if side == "usb" else (-3000.0, -300.0)
    t = np.arange(n) / rate
    return math.sqrt(power) * _band_noise(rng, n, rate, lo, hi, 6.0) * np.exp(2j * np.pi * carrier_hz * t)


def _write(tmp_path, name, x, rate, centre):
    base = tmp_path / name
    with SigMFWriter(base, rate, center_hz=centre, datatype="cf32_le") as w:
        for i in range(0, x.size, 100_000):
            w.write(x[i : i + 100_000].astype(np.complex64))
    return base.with_suffix(".sigmf-meta")


def _nearest(emissions, freq_hz):
    return min(emissions, key=lambda e: abs(e.frequency_hz - freq_hz))


# ----------------------------------------------------------------------------- published formulas


def test_resolution_rules():
    assert choose_resolution(1e6, 1_000_000) == (16384, 131072)  # 61 Hz and 7.6 Hz bins
    assert choose_resolution(240e3, 120_000) == (4096, 32768)
    nps, fine = choose_resolution(240e3, 12_000)  # too short for 16 averages of 4096
    assert nps == 1024 and (12_000 - nps) // (nps // 2) + 1 >= 16 and fine >= nps
    assert choose_resolution(240e3, 240_000, resolution_hz=100.0)[0] == 2400
    with pytest.raises(ParameterError, match="resolution_hz"):
        choose_resolution(240e3, 1000, resolution_hz=10.0)
    with pytest.raises(ParameterError, match="too few"):
        choose_resolution(240e3, 100)


def test_welch_dof_against_published_overlap_correlation_and_simulation():
    nps = 256
    w = scipy.signal.get_window("hann", nps)
    # No overlap: K independent periodograms, each chi-square with 2 degrees of freedom.
    assert welch_dof(w, nps, 10) == pytest.approx(20.0)
    # Hann at 50 % overlap: overlap correlation rho = 1/6 (harris 1978, Table 1: 16.7 %), so
    # nu -> 2K/(1 + 2/36) = 36K/19 for large K (Percival & Walden 1993, WOSA dof; memory).
    assert welch_dof(w, nps // 2, 10_000) / 10_000 == pytest.approx(36.0 / 19.0, rel=1e-3)
    # Simulation with scipy.signal.welch (the reference implementation): var/mean^2 = 2/nu.
    rng = np.random.default_rng(7)
    k = 20
    rows = []
    for _ in range(150):
        x = rng.standard_normal(nps // 2 * (k + 1)) + 1j * rng.standard_normal(nps // 2 * (k + 1))
        rows.append(scipy.signal.welch(x, nperseg=nps, return_onesided=False, detrend=False)[1])
    p = np.array(rows)
    nu_measured = 2.0 / float(np.mean(p.var(axis=0) / p.mean(axis=0) ** 2))
    assert nu_measured == pytest.approx(welch_dof(w, nps // 2, k), rel=0.08)


def test_median_bias_correction():
    # One periodogram bin of complex noise is exponential: median/mean = ln 2 (-1.59 dB).
    assert floor_median_bias(2.0) == pytest.approx(math.log(2.0), rel=1e-9)
    # Wilson-Hilferty approximation of the chi-square median: nu*(1 - 2/(9 nu))^3.
    for nu in (20.0, 100.0, 400.0):
        assert floor_median_bias(nu) == pytest.approx((1.0 - 2.0 / (9.0 * nu)) ** 3, abs=2e-4)


def test_grandke_interpolation_is_exact_for_a_hann_windowed_tone():
    n = 4096
    w = scipy.signal.get_window("hann", n)  # periodic, as the Welch accumulator uses
    k0 = 700
    for delta in np.linspace(-0.5, 0.5, 11):
        x = np.exp(2j * np.pi * (k0 + delta) * np.arange(n) / n)
        a = np.abs(np.fft.fft(x * w))
        k = int(np.argmax(a))
        est = k - k0 + grandke_offset(a[k - 1], a[k], a[k + 1])
        assert est == pytest.approx(delta, abs=2e-4)  # Grandke 1983: exact without noise
        # Hann amplitude response at the tone's offset (harris 1978)
        assert a[k] / (n / 2) == pytest.approx(hann_response(est - (k - k0)), abs=1e-4)
    # Scalloping loss of the Hann window: 1.42 dB (harris 1978, Table 1).
    assert -20 * math.log10(hann_response(0.5)) == pytest.approx(1.42, abs=0.01)


# ----------------------------------------------------------------------------- the acceptance scene


def _airband_scene(seed):
    """1 MS/s, 1 s around 127.5 MHz: five AM, one USB, one LSB, a DC offset, noise at -100 dBFS/Hz."""
    rng = np.random.default_rng(seed)
    rate, n, centre = 1e6, 1_000_000, 127.5e6
    slots = rng.permutation(np.arange(-8, 9)[np.arange(-8, 9) != 0])[:7] * 50e3  # 50 kHz apart, not at 0
    offsets = slots + rng.uniform(-20e3, 20e3, slots.size)  # random, off the bin grid
    x = _noise(rng, n, rate)
    truth = []
    weak_db = float(rng.uniform(10.5, 12.0))
    specs = [("A3E", 40.0, 3000.0), ("A3E", 35.0, 4500.0), ("A3E", 25.0, 3000.0), ("A3E", weak_db, 3000.0),
             ("A3E", 30.0, 3000.0), ("usb", 20.0, None), ("lsb", 15.0, None)]
    for (kind, level, top), off in zip(specs, offsets):
        if kind == "A3E":
            s = _am(rng, n, rate, off, level, 0.3, top)
        else:
            s = _ssb(rng, n, rate, off, level, kind)
        truth.append({"kind": kind, "offset": off, "level_db": level, "power": float(np.mean(np.abs(s) ** 2)),
                      "top": top})
        x += s
    dc = 0.0025 - 0.0018j  # -49.7 dBFS receiver DC offset
    x += dc
    return x, truth, rate, centre, dc


@pytest.mark.parametrize("seed", [11, 12])
def test_survey_finds_every_emission_with_accurate_frequencies(tmp_path, seed):
    x, truth, rate, centre, dc = _airband_scene(seed)
    meta = _write(tmp_path, f"scene{seed}", x, rate, centre)
    with open_capture(meta) as cap:
        result = survey_capture(cap)
    found = result.emissions
    # Every emission >= 10 dB above the floor is found, nothing else (the DC offset is not an emission).
    assert len(found) == len(truth), [(e.offset_hz, e.emission_class) for e in found]
    errors = []
    for t in truth:
        e = _nearest(found, centre + t["offset"])
        err = e.frequency_hz - (centre + t["offset"])
        if t["kind"] == "A3E":
            assert e.emission_class == "A3E" and e.mode == "envelope"
            assert abs(err) <= 10.0, (t, err)  # acceptance: within 10 Hz
            errors.append(abs(err))
            assert e.peak_above_floor_db == pytest.approx(t["level_db"], abs=1.0)
        else:
            # J3E: the suppressed carrier is 300 Hz outside the 99 % band (the survey's convention,
            # SM.1138's lowest modulating frequency); good to about a bin.
            assert e.emission_class == "J3E" and e.sideband == t["kind"] and e.mode == t["kind"]
            assert abs(err) <= 60.0, (t, err)
            assert e.designator == "2K70J3E"  # SM.1138: 3000 - 300 Hz
        if t["level_db"] >= 30.0 or t["kind"] != "A3E":
            # total power: generated power, noise subtracted (within 0.3 dB)
            assert e.level_dbfs == pytest.approx(10 * math.log10(t["power"]), abs=0.3)
    assert max(errors) < 1.0  # measured: a few hundredths of a hertz at these levels
    # 99 % bandwidth (ITU-R SM.328: 0.5 % of the power above and below). AM with flat voice from
    # 300 Hz to M and m_rms = 0.3: each sideband holds m^2/2 of the carrier power, total 1 + m^2, so
    # the upper edge lies where 0.005 (1 + m^2) / (m^2 / 2) of a sideband is left above it.
    def predicted(top):
        share = 0.005 * (1 + 0.09) / (0.09 / 2)
        return 2.0 * (top - share * (top - 300.0))

    strong = _nearest(found, centre + truth[0]["offset"])
    assert strong.occupied_hz == pytest.approx(predicted(3000.0), rel=0.02)  # 5346 Hz
    assert strong.designator == "6K00A3E" and strong.confidence == "high"
    wide = _nearest(found, centre + truth[1]["offset"])
    assert wide.occupied_hz == pytest.approx(predicted(4500.0), rel=0.02)  # 7982 Hz
    assert wide.designator == "9K00A3E"  # ITU-R SM.1138: A3E necessary bandwidth 2M, M = 4500 Hz -> 9000 Hz
    # Noise floor: the generated -100 dBFS/Hz.
    assert result.noise_floor_dbfs_per_hz == pytest.approx(-100.0, abs=0.15)
    # DC offset: reported separately, its level from the sample mean.
    assert result.dc_offset["visible"] is True
    assert result.dc_offset["level_dbfs"] == pytest.approx(20 * math.log10(abs(dc)), abs=0.2)
    assert result.dc_offset["i"] == pytest.approx(dc.real, abs=2e-5)
    assert all(abs(e.offset_hz) > 1000 for e in found)
    # JSON view uses the report vocabulary
    d = json.loads(json.dumps(result.to_dict()))
    assert {"frequency_hz", "level_dbfs", "class", "designator", "channel_name"} <= set(d["emissions"][0])
    assert d["emissions"][0]["bandwidth"]["occupied_hz"] > 0


@pytest.mark.parametrize("seed", range(5))
def test_no_false_detections_on_pure_noise(seed):
    rng = np.random.default_rng(100 + seed)
    rate, n = 240e3, 120_000
    for threshold in (10.0, 6.0):
        r = Surveyor(rate, n, center_hz=100e6, threshold_db=threshold).feed(_noise(rng, n, rate)).result()
        assert r.emissions == []
        assert r.noise_floor_dbfs_per_hz == pytest.approx(-100.0, abs=0.15)
        assert r.expected_false_detections < 1e-9
    # Real samples: one-sided density is twice the two-sided one (+3.01 dB; scipy.signal.welch), and levels of a
    # real capture are those of its analytic signal, twice its mean square (+3.01 dB more; README "Levels").
    xr = np.sqrt(N0 * rate) * rng.standard_normal(n)
    r = Surveyor(rate, n, is_complex=False).feed(xr).result()
    assert r.emissions == [] and r.dc_offset is None
    onesided = scipy.signal.welch(xr, rate, window="hann", nperseg=r.spectrum.nperseg, noverlap=r.spectrum.nperseg // 2)[1]
    assert r.noise_floor_dbfs_per_hz == pytest.approx(10 * math.log10(2.0 * np.median(onesided)), abs=0.15)
    assert r.noise_floor_dbfs_per_hz == pytest.approx(-100.0 + 2 * 10 * math.log10(2.0), abs=0.15)


def test_sloped_floor_is_followed_without_false_detections():
    rng = np.random.default_rng(5)
    rate, n = 240e3, 240_000
    fr = np.fft.fftfreq(n, 1.0 / rate)
    slope_db = 12.0 * fr / rate  # 12 dB across the band
    x = np.fft.ifft(np.fft.fft(_noise(rng, n, rate)) * 10.0 ** (slope_db / 20.0))
    # a carrier 11 dB above the *local* floor on the high side, where the floor is 4 dB above the median
    x += _am(rng, n, rate, 80e3, 11.0 + 12.0 * 80e3 / rate, 0.0)
    r = Surveyor(rate, n).feed(x).result()
    assert len(r.emissions) == 1 and abs(r.emissions[0].offset_hz - 80e3) < 10.0
    f = r.spectrum.relative_freqs_hz
    for probe in (-90e3, -40e3, 40e3):
        k = int(np.argmin(np.abs(f - probe)))
        assert r.floor_db[k] == pytest.approx(-100.0 + 12.0 * probe / rate, abs=0.5)


def test_threshold_holds_wherever_a_carrier_falls_between_bins():
    rate, n = 240e3, 120_000
    nps, _ = choose_resolution(rate, n)
    df = rate / nps
    for delta in (0.0, 0.25, 0.5):
        offset = (300 + delta) * df
        for level, expected in ((10.5, 1), (8.0, 0)):
            rng = np.random.default_rng(int(100 * delta) + int(level))
            x = _noise(rng, n, rate) + _am(rng, n, rate, offset, level, 0.0)
            r = Surveyor(rate, n).feed(x).result()
            # at delta = 0.5 the bin reads 1.42 dB low (9.1 dB): found only through the scalloping correction
            assert len(r.emissions) == expected, (delta, level, [e.peak_above_floor_db for e in r.emissions])
            if expected:
                assert abs(r.emissions[0].offset_hz - offset) < 2.0


def test_frequency_refinement_well_below_a_bin():
    rate, n = 240e3, 240_000
    rng = np.random.default_rng(3)
    t = np.arange(n) / rate
    offsets = np.array([-70e3, -30e3, 20e3, 60e3]) + rng.uniform(0, 200, 4)
    x = _noise(rng, n, rate)
    for off in offsets:
        x += math.sqrt(10 ** 3 * N0 * _enbw(rate, n)) * np.exp(2j * np.pi * off * t)  # 30 dB carriers
    r = Surveyor(rate, n).feed(x).result()
    errors = [abs(_nearest(r.emissions, off).offset_hz - off) for off in offsets]
    assert len(r.emissions) == 4 and max(errors) < 0.5, errors  # bins are 58.6 Hz wide
    assert all(e.frequency_method == "grandke-fine" for e in r.emissions)
    # carrier level: scalloping-corrected peak, within 0.3 dB of the generated carrier
    for e in r.emissions:
        assert e.carrier_level_dbfs == pytest.approx(10 * math.log10(10 ** 3 * N0 * _enbw(rate, n)), abs=0.3)


def test_chunked_feeding_gives_the_same_result():
    x, truth, rate, centre, _ = _airband_scene(13)
    x = x[:400_000]
    one = Surveyor(rate, x.size, center_hz=centre).feed(x).result()
    sv = Surveyor(rate, x.size, center_hz=centre)
    rng = np.random.default_rng(0)
    cuts = np.sort(rng.choice(np.arange(1, x.size), 40, replace=False))
    for part in np.split(x, cuts):
        sv.feed(part)
    two = sv.result()
    assert [e.designator for e in one.emissions] == [e.designator for e in two.emissions]
    for a, b in zip(one.emissions, two.emissions):
        assert a.frequency_hz == pytest.approx(b.frequency_hz, abs=1e-6)


# ----------------------------------------------------------------------------- classes, rasters, plans


def test_aero_raster_names_and_plan_round_trip(tmp_path):
    rng = np.random.default_rng(21)
    rate, n, centre = 240e3, 240_000, 127.4e6
    # ICAO Annex 10 8.33 kHz names (memory): 127.355 -> 127.350 MHz, 127.360 -> 127.3583, 127.365 -> 127.3667
    channels = {"127.355": 37.2, "127.360": -12.3, "127.365": 3.1, "127.430": 0.0}
    x = _noise(rng, n, rate)
    for name, error in channels.items():
        x += _am(rng, n, rate, aero_channel(name).frequency_hz + error - centre, 35.0)
    meta = _write(tmp_path, "aero", x, rate, centre)
    with open_capture(meta) as cap:
        r = survey_capture(cap, raster="8.33k")
    assert [e.channel_name for e in r.emissions] == list(channels)
    for e, error in zip(r.emissions, channels.values()):
        assert e.raster_error_hz == pytest.approx(error, abs=1.0)
        assert e.emission_class == "A3E" and e.designator == "6K00A3E"
    plan = survey_to_plan(r)
    assert [c.name for c in plan] == [f"ch{i:02d}-{k}" for i, k in enumerate(channels, start=1)]
    text = survey_plan_text(r, capture_name="aero.sigmf-meta")
    back = parse_plan(text, "survey.toml")
    assert back.channels == plan.channels
    assert [c.freq_hz for c in back] == [aero_channel(k).frequency_hz for k in channels]
    assert all(c.mode == "envelope" and c.bandwidth_hz == 6000.0 for c in back)
    # the tuning offsets extract would use
    assert [round(c.tuning_offset_hz(centre), 3) for c in back] == [
        round(aero_channel(k).frequency_hz - centre, 3) for k in channels]
    extract = pytest.importorskip("iqsift.extractor")
    chans = extract.channels_from_plan(back, centre)
    assert [c.name for c in chans] == [c.name for c in back]


def test_broadcast_neighbours_with_touching_sidebands_are_split():
    rng = np.random.default_rng(4)
    rate, n, centre = 240e3, 240_000, 1.0e6
    stations = [954e3 + 3.3, 963e3 - 2.2, 972e3 + 0.4]  # 9 kHz raster (ITU Regions 1 and 3)
    x = _noise(rng, n, rate)
    for f0, level in zip(stations, (40.0, 35.0, 38.0)):
        x += _am(rng, n, rate, f0 - centre, level, 0.4, 4500.0)  # sidebands to +-4.5 kHz: they touch
    r = Surveyor(rate, n, center_hz=centre, raster="9k").feed(x).result()
    assert len(r.emissions) == 3
    for e, f0 in zip(r.emissions, stations):
        assert abs(e.frequency_hz - f0) < 1.0
        assert e.raster_frequency_hz == pytest.approx(round(f0 / 9e3) * 9e3)
        assert e.emission_class == "A3E" and e.confidence == "high" and e.channel_name is None


def test_tone_modulated_am_is_one_emission():
    rng = np.random.default_rng(8)
    rate, n = 240e3, 120_000
    t = np.arange(n) / rate
    amp = math.sqrt(10 ** 4 * N0 * _enbw(rate, n))
    f0 = 31_234.5
    # m = 0.8: sideband lines at f0 +- 1 kHz, 20 log10(0.4) = -7.96 dBc (Haykin, AM)
    x = _noise(rng, n, rate) + amp * (1 + 0.8 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * f0 * t)
    r = Surveyor(rate, n).feed(x).result()
    assert len(r.emissions) == 1
    e = r.emissions[0]
    assert abs(e.offset_hz - f0) < 0.5 and e.emission_class == "A3E" and e.confidence == "high"
    # 99 % bandwidth of a 1 kHz tone AM: the lines at +-1 kHz hold 24 % of the power -> 2 kHz
    assert e.occupied_hz == pytest.approx(2000.0, abs=60.0)


def test_single_sideband_with_carrier_and_suppressed_carrier_dsb():
    rng = np.random.default_rng(9)
    rate, n = 240e3, 240_000
    t = np.arange(n) / rate
    amp = math.sqrt(10 ** 3.5 * N0 * _enbw(rate, n))
    x = _noise(rng, n, rate)
    x += amp * (1 + 0.5 * _band_noise(rng, n, rate, 300, 3000, 6)) * np.exp(2j * np.pi * 30e3 * t)  # H3E, usb
    x += amp * (1 - 0.5 * _band_noise(rng, n, rate, -3000, -300, 6)) * np.exp(2j * np.pi * 70e3 * t)  # H3E, lsb
    x += 3 * amp * _voice(rng, n, rate) * np.exp(2j * np.pi * -40e3 * t)  # DSB-SC: no carrier, gap at +-300 Hz
    r = Surveyor(rate, n).feed(x).result()
    assert len(r.emissions) == 3
    dsb, usb, lsb = r.emissions
    assert (usb.emission_class, usb.sideband, usb.mode) == ("H3E", "usb", "usb")
    assert (lsb.emission_class, lsb.sideband, lsb.mode) == ("H3E", "lsb", "lsb")
    assert abs(usb.offset_hz - 30e3) < 1.0 and abs(lsb.offset_hz - 70e3) < 1.0
    assert dsb.emission_class == "A3E" and dsb.mode == "dsb" and abs(dsb.offset_hz + 40e3) < 10.0
    plan = parse_plan(survey_plan_text(r))  # offsets: this scene has no centre frequency
    assert [c.offset_hz is not None and c.freq_hz is None for c in plan] == [True] * 3
    assert [c.mode for c in plan] == ["dsb", "usb", "lsb"]


def test_real_valued_capture():
    rng = np.random.default_rng(10)
    rate, n = 240e3, 240_000
    t = np.arange(n) / rate
    f0 = 50e3 + 3.3
    amp = math.sqrt(2 * 10 ** 3 * N0 * _enbw(rate, n))
    x = np.sqrt(N0 * rate) * rng.standard_normal(n) + amp * (1 + 0.3 * _voice(rng, n, rate)) * np.cos(
        2 * np.pi * f0 * t)
    r = Surveyor(rate, n, is_complex=False, center_hz=0.0).feed(x.astype(np.complex64)).result()
    assert len(r.emissions) == 1 and r.dc_offset is None
    e = r.emissions[0]
    assert abs(e.frequency_hz - f0) < 1.0 and e.emission_class == "A3E"
    # real tone A cos reads 20 log10 A dBFS, as a full-scale sine reads 0 dBFS (AES17; README "Levels")
    assert e.carrier_level_dbfs == pytest.approx(20 * math.log10(amp), abs=0.3)


def test_library_parameter_errors():
    with pytest.raises(ParameterError, match="threshold_db"):
        Surveyor(240e3, 240_000, threshold_db=1.0)
    with pytest.raises(ParameterError, match="raster"):
        Surveyor(240e3, 240_000, raster="7k", center_hz=1e6)
    with pytest.raises(ParameterError, match="centre frequency"):
        Surveyor(240e3, 240_000, raster="25k")
    with pytest.raises(ParameterError, match="no emissions"):
        rng = np.random.default_rng(1)
        survey_to_plan(Surveyor(240e3, 60_000).feed(_noise(rng, 60_000, 240e3)).result())


# ----------------------------------------------------------------------------- command line


def _one_line_error(result, *fragments):
    status, out, err = result
    assert status == 2, (status, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("iqsift: error: ") and "Traceback" not in err, err
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])


@pytest.fixture
def small_capture(tmp_path):
    rng = np.random.default_rng(30)
    rate, n, centre = 240e3, 120_000, 127.4e6
    x = _noise(rng, n, rate) + _am(rng, n, rate, 127.35e6 + 40.0 - centre, 35.0)
    x += _ssb(rng, n, rate, 127.45e6 - centre, 20.0, "usb")
    return _write(tmp_path, "small", x, rate, centre)


def test_cli_json_table_and_plan(run_cli, small_capture, tmp_path):
    plan_path = tmp_path / "plan.toml"
    status, out, err = run_cli("survey", small_capture, "--json", "--raster", "25k", "--plan-out", plan_path)
    assert status == 0, err
    report = json.loads(out)
    assert report["noise_floor_dbfs_per_hz"] == pytest.approx(-100.0, abs=0.2)
    am, ssb = report["emissions"]
    assert abs(am["frequency_hz"] - (127.35e6 + 40.0)) < 10.0 and am["class"] == "A3E"
    assert am["channel_name"] == "127.350" and am["raster"]["error_hz"] == pytest.approx(40.0, abs=1.0)
    assert ssb["class"] == "J3E" and ssb["sideband"] == "usb" and ssb["designator"] == "2K70J3E"
    assert am["bandwidth"]["occupied_hz"] > 1000.0
    plan = load_plan(plan_path)
    assert plan.names == ("ch01-127.350", "ch02-127.450")
    assert [c.mode for c in plan] == ["envelope", "usb"]
    # no overwrite without --force; --force overwrites
    _one_line_error(run_cli("survey", small_capture, "--plan-out", plan_path), "plan.toml", "exists")
    status, out, err = run_cli("survey", small_capture, "--plan-out", plan_path, "--force")
    assert status == 0, err
    assert "emissions  2" in out and "A3E" in out and "J3E usb" in out and "2K70J3E" in out


def test_cli_bad_input(run_cli, small_capture, tmp_path):
    _one_line_error(run_cli("survey", small_capture, "--raster", "7k"), "raster", "7k")
    _one_line_error(run_cli("survey", small_capture, "--threshold", "loud"), "--threshold", "loud")
    _one_line_error(run_cli("survey", small_capture, "--threshold", "1"), "--threshold")
    _one_line_error(run_cli("survey", small_capture, "--resolution", "0"), "--resolution")
    _one_line_error(run_cli("survey", tmp_path / "missing.sigmf-meta"), "missing.sigmf-meta")
    # a raw file without a centre frequency cannot be put on a raster
    raw = tmp_path / "nocentre.cf32"
    np.zeros(50_000, np.complex64).tofile(raw)
    _one_line_error(run_cli("survey", raw, "--format", "cf32_le", "--rate", "240k", "--raster", "8.33k"),
                    "--raster", "--center")
    # nothing found: the table is printed, the plan is refused and not written
    plan_path = tmp_path / "none.toml"
    rng = np.random.default_rng(2)
    quiet = _write(tmp_path, "quiet", _noise(rng, 60_000, 240e3), 240e3, 127.4e6)
    status, out, err = run_cli("survey", quiet, "--plan-out", plan_path)
    assert status == 2 and "none at 10 dB" in out and "no plan to write" in err and not plan_path.exists()
