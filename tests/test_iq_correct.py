"""IQ imbalance and DC: the correction (--iq-correct) and the survey's mirror images."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from iqsift.captures import open_capture
from iqsift.captures.iqcorrect import RunningCorrection, estimate_correction
from iqsift.errors import ParameterError
from iqsift.jobs import demod_file, info_file, survey_file
from iqsift.plan import load_plan
from iqsift.schemas import load_schema

from .iq_scenes import CARRIERS_HZ, CENTER_HZ, RATE_HZ, apply_imbalance, four_carriers

jsonschema = pytest.importorskip("jsonschema")

GAIN_DB, PHASE_DEG = -0.5, 3.0


def textbook_irr_db(gain_db: float, phase_deg: float) -> float:
    """Image rejection ratio of a quadrature receiver with amplitude ratio g and phase error φ:
    IRR = (1 + 2g·cos φ + g²) / (1 − 2g·cos φ + g²) (the textbook image-rejection formula, e.g.
    B. Razavi, RF Microelectronics, 2nd ed., 2012, section 4.2.4 (memory))."""
    g = 10 ** (gain_db / 20)
    c = math.cos(math.radians(phase_deg))
    return 10 * math.log10((1 + 2 * g * c + g * g) / (1 - 2 * g * c + g * g))


def mirror_rejection_db(x: np.ndarray, offsets_hz) -> list[float]:
    """Measured image rejection: carrier line power at +f over the line at −f (Hann-windowed FFT of the
    whole capture, the strongest bin within ±3 bins of each)."""
    n = x.shape[0]
    spec = np.abs(np.fft.fft(x * np.hanning(n))) ** 2
    freqs = np.fft.fftfreq(n, 1 / RATE_HZ)
    bin_hz = RATE_HZ / n

    def line(f: float) -> float:
        near = np.abs(freqs - f) <= 3 * bin_hz
        return float(spec[near].max())

    return [10 * math.log10(line(f) / line(-f)) for f in offsets_hz]


@pytest.fixture(scope="module")
def scene(tmp_path_factory):
    x = four_carriers()
    path = tmp_path_factory.mktemp("iq") / "four.cf32"
    x.tofile(path)
    return path, x


def read_kwargs():
    return {"format": "cf32_le", "rate": RATE_HZ, "center": CENTER_HZ}


def test_estimate_recovers_the_known_imbalance_and_dc(rng):
    n = 1_000_000
    x = (rng.standard_normal(n) + 1j * rng.standard_normal(n)) * 0.05
    y = apply_imbalance(x, GAIN_DB, PHASE_DEG, 0.003 - 0.002j)
    corr = estimate_correction([y[:123_457], y[123_457:]])
    assert corr.method == "first-pass"
    # the estimates of noise moments scatter by about 1/sqrt(n): 0.06 deg, 0.01 dB; allow 4 sigma
    assert corr.gain_imbalance_db == pytest.approx(GAIN_DB, abs=0.04)
    assert corr.phase_imbalance_deg == pytest.approx(PHASE_DEG, abs=0.25)
    assert corr.dc_i == pytest.approx(0.003, abs=2e-4) and corr.dc_q == pytest.approx(-0.002, abs=2e-4)
    assert corr.image_rejection_db == pytest.approx(textbook_irr_db(GAIN_DB, PHASE_DEG), abs=0.3)
    z = corr.apply(y)
    i, q = z.real.astype(float), z.imag.astype(float)
    # after correction: no DC, equal powers, no correlation (Churchill, Ogar & Thompson 1981)
    assert abs(i.mean()) < 1e-6 and abs(q.mean()) < 1e-6
    assert 10 * math.log10(np.var(i) / np.var(q)) == pytest.approx(0.0, abs=1e-3)
    assert np.mean(i * q) / math.sqrt(np.var(i) * np.var(q)) == pytest.approx(0.0, abs=1e-4)


def test_image_rejection_before_and_after_correction(scene):
    path, x = scene
    offsets = [f - CENTER_HZ for f in CARRIERS_HZ]
    before = mirror_rejection_db(x, offsets)
    # each carrier's image sits the textbook IRR below it
    for irr in before:
        assert irr == pytest.approx(textbook_irr_db(GAIN_DB, PHASE_DEG), abs=0.5)
    with open_capture(path, **read_kwargs()) as cap:
        cap.correction = estimate_correction(cap.blocks())
        corrected = cap.read()
    after = mirror_rejection_db(corrected, offsets)
    assert min(after) >= 60.0, after


def test_survey_leaves_mirror_images_out(scene, tmp_path):
    path, _ = scene
    plan = tmp_path / "plan.toml"
    report = survey_file(path, plan_out=plan, **read_kwargs())
    emissions, images = report.survey.emissions, report.survey.images
    assert sorted(round(e.frequency_hz) for e in emissions) == sorted(round(f) for f in CARRIERS_HZ)
    assert all(e.image_of is None for e in emissions)
    assert len(images) == 4
    by_index = {e.index: e for e in emissions}
    for image in images:
        parent = by_index[image.image_of]
        assert image.offset_hz == pytest.approx(-parent.offset_hz, abs=10)
        assert "mirror image" in image.note
    assert report.survey.image_rejection_db == pytest.approx(textbook_irr_db(GAIN_DB, PHASE_DEG), abs=0.5)
    channels = load_plan(plan).channels
    assert len(channels) == 4
    planned = sorted(round(c.freq_hz) for c in channels)
    assert planned == sorted(round(f) for f in CARRIERS_HZ)
    doc = report.to_dict()
    jsonschema.validate(doc, load_schema("survey-v1"))
    assert all("image_of" in e for e in doc["images"]) and not any("image_of" in e for e in doc["emissions"])


def test_survey_with_correction_finds_no_images(scene):
    path, _ = scene
    report = survey_file(path, iq_correct=True, **read_kwargs())
    assert len(report.survey.emissions) == 4 and report.survey.images == []
    corr = report.to_dict()["capture"]["iq_correction"]
    assert corr["method"] == "first-pass"
    assert corr["gain_imbalance_db"] == pytest.approx(GAIN_DB, abs=0.02)
    assert corr["phase_imbalance_deg"] == pytest.approx(PHASE_DEG, abs=0.1)
    jsonschema.validate(report.to_dict(), load_schema("survey-v1"))


def test_a_genuine_signal_at_the_mirror_is_kept(tmp_path):
    """A carrier at the mirror position 10 dB below the other is far above the 28 dB image: it is real.

    It sits 40 Hz from the exact mirror (inside the 3-bin match): two independent transmitters do not
    share a frequency reference. (Exactly mirrored carriers would correlate and bias the moment estimate
    of the imbalance: see DEVELOPERS.md.)"""
    rng = np.random.default_rng(3)
    n = 400_000
    t = np.arange(n) / RATE_HZ
    x = 0.1 * (1 + 0.5 * np.cos(2 * np.pi * 500 * t)) * np.exp(2j * np.pi * 200_000 * t)
    x = x + 0.0316 * (1 + 0.5 * np.cos(2 * np.pi * 700 * t)) * np.exp(2j * np.pi * -199_960 * t)
    x = x + 1e-4 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    path = tmp_path / "pair.cf32"
    apply_imbalance(x, GAIN_DB, PHASE_DEG).tofile(path)
    report = survey_file(path, **read_kwargs())
    assert len(report.survey.emissions) == 2 and report.survey.images == []


def test_correction_is_recorded_and_refused_for_real_captures(scene, tmp_path):
    path, _ = scene
    result = demod_file(path, _channel(), tmp_path / "a.wav", iq_correct=True, **read_kwargs()).to_dict()
    assert result["capture"]["iq_correction"]["samples"] == 500_000
    jsonschema.validate(result, load_schema("demod-v1"))
    plain = demod_file(path, _channel(), tmp_path / "b.wav", **read_kwargs()).to_dict()
    assert plain["capture"]["iq_correction"] is None
    info = info_file(path, iq_correct=True, **read_kwargs()).to_dict()
    jsonschema.validate(info, load_schema("info-v1"))
    assert abs(info["stats"]["gain_imbalance_db"]) < 1e-3 and abs(info["stats"]["phase_imbalance_deg"]) < 1e-2
    real = tmp_path / "real.rf32"
    np.zeros(1000, np.float32).tofile(real)
    with pytest.raises(ParameterError, match="iq_correct"):
        info_file(real, format="rf32_le", rate=RATE_HZ, iq_correct=True)


def test_running_correction_converges(rng):
    x = (rng.standard_normal(200_000) + 1j * rng.standard_normal(200_000)) * 0.05
    y = apply_imbalance(x, GAIN_DB, PHASE_DEG, 0.002 + 0.001j)
    running = RunningCorrection()
    for block in np.array_split(y, 50):
        running.apply(block)
    assert running.current is not None and running.current.method == "running"
    assert running.current.gain_imbalance_db == pytest.approx(GAIN_DB, abs=0.03)
    assert running.current.phase_imbalance_deg == pytest.approx(PHASE_DEG, abs=0.15)


def test_cli_iq_correct(scene, run_cli):
    path, _ = scene
    code, out, _err = run_cli("survey", str(path), "--format", "cf32_le", "--rate", "1M", "--center", "127M",
                              "--iq-correct", "--json", "-q")
    assert code == 0
    doc = json.loads(out)
    assert len(doc["emissions"]) == 4 and doc["images"] == []
    code, out, _err = run_cli("survey", str(path), "--format", "cf32_le", "--rate", "1M", "--center", "127M", "-q")
    assert code == 0 and out.count("mirror image of #") == 4


def _channel():
    from iqsift import make_channel

    return make_channel(freq=CARRIERS_HZ[0], emission="6K00A3E")


def test_the_carrier_at_dc_keeps_its_number_when_an_image_is_taken_out():
    # a carrier on the centre, a stronger one at +200 kHz and its image at -200 kHz (below the centre): with the
    # image gone the emissions are renumbered, and dc_offset.carrier_emission must follow (it named #2, now #1)
    from iqsift.survey import Surveyor

    rng = np.random.default_rng(11)
    n = 500_000
    t = np.arange(n) / RATE_HZ
    am = 0.02 * (1 + 0.5 * np.sin(2 * np.pi * 1000 * t))  # AM on the centre: a carrier with sidebands, not a DC offset
    x = 0.1 * np.exp(2j * np.pi * 200e3 * t) + am + 1e-4 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    result = Surveyor(RATE_HZ, n, center_hz=CENTER_HZ).feed(apply_imbalance(x, -0.5, 3.0)).result()
    offsets = [round(e.offset_hz) for e in result.emissions]
    assert offsets == [0, 200_000] and [round(i.offset_hz) for i in result.images] == [-200_000]
    assert result.dc_offset is not None
    assert result.dc_offset["carrier_emission"] == 1 and result.emissions[0].index == 1
