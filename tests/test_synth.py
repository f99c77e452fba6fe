"""Synthetic captures (iqsift.synth, ``iqsift synth``) checked against outside references.

References named beside each check:
- Haykin, *Communication Systems*, 4th ed., ch. 3 (AM): each sideband of a single-tone AM wave sits at
  20 log10(m/2) dBc; with a multitone message of normalised amplitudes a_i, the tone i sidebands are at
  20 log10(m a_i / 2) dBc (superposition of the same formula).
- Analytic signal / SSB: msg + j H{msg} has no negative-frequency content (Oppenheim & Schafer,
  *Discrete-Time Signal Processing*, ch. 12); scipy.signal.hilbert is the reference implementation.
- White noise: a complex white sequence of per-sample power P at rate fs has density P/fs (common practice;
  checked with scipy.signal.welch, which implements Welch 1967).
- Clarke's model (R. H. Clarke, Bell Syst. Tech. J. 47, 1968; Jakes, *Microwave Mobile Communications*, 1974):
  envelope Rayleigh with mean power 1 (scipy.stats.rayleigh, scale 1/sqrt(2)), autocorrelation J0(2 pi fd tau)
  (scipy.special.j0); Rician envelope with K: scipy.stats.rice, b = nu/sigma.
- SigMF specification (sigmf-spec, as implemented by the `sigmf` package): datatype scaling and validation.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path

import numpy as np
import pytest
import soundfile
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal, special, stats

import iqsift.cli.synth_cmd  # noqa: F401  (registers `iqsift synth` before conftest's main() runs it)
from iqsift import synth
from iqsift.errors import ParameterError

try:
    import sigmf
except ImportError:  # pragma: no cover - test extra not installed
    sigmf = None


def _toml(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _carrier_phase(truth_ch: dict, rate: float, n: int) -> np.ndarray:
    """Carrier phase from the truth record (independent of the generator's code path)."""
    t = np.arange(n) / rate
    c = truth_ch["carrier"]
    return 2 * np.pi * (c["offset_hz"] * t + 0.5 * c["drift_hz_per_s"] * t * t) + np.radians(c["phase_deg"])


def _welch(x: np.ndarray, rate: float, nperseg: int = 4096):
    f, p = signal.welch(x, rate, window="blackmanharris", nperseg=nperseg, return_onesided=False,
                        scaling="density")
    return f, p


def _band_power(f: np.ndarray, p: np.ndarray, lo: float, hi: float) -> float:
    m = (f >= lo) & (f <= hi)
    return float(p[m].sum() * (f[1] - f[0]))


def _voice_wav(path: Path, rate: int = 11025, seconds: float = 0.3) -> Path:
    t = np.arange(int(rate * seconds)) / rate
    x = 0.4 * np.sin(2 * np.pi * 700 * t) + 0.2 * np.sin(2 * np.pi * 1900 * t)
    soundfile.write(str(path), x, rate, subtype="PCM_16")
    return path


FULL = """
sample_rate = "48k"
center = "127.5M"
duration = "1.6s"
seed = 1234
datatype = "{datatype}"
noise_floor_dbfs_per_hz = -110

[[channel]]
name = "north-approach"
freq = "127.495M"
mode = "am"
level_dbfs = -20
depth = 0.8
carrier_offset_hz = 120
drift_hz_per_s = 0.5
phase_deg = 30
cnr_db = 35
message = {{ kind = "tones", freqs = [400, 1100, 2300], amplitudes = [0.5, 0.3, 0.2] }}
fading = {{ kind = "rayleigh", doppler_hz = 20 }}
bursts = [[0.2, 0.9], [1.0, 1.4]]

[[channel]]
name = "upper-voice"
offset = "9k"
mode = "usb"
level_dbfs = -28
message = {{ kind = "noise" }}
cnr_db = 25

[[channel]]
name = "lower-voice"
offset = "-12k"
mode = "lsb"
level_dbfs = -26
message = {{ kind = "file", path = "voice.wav", loop = true }}
fading = {{ kind = "rician", doppler_hz = 5, k_db = 6 }}

[[channel]]
name = "suppressed"
offset = "17k"
mode = "dsb"
level_dbfs = -30
message = {{ kind = "noise", low = 0, high = 2500 }}
"""


@pytest.fixture
def full_scenario(tmp_path):
    def make(datatype: str = "cf32_le", seed: int = 1234) -> Path:
        _voice_wav(tmp_path / "voice.wav")
        return _toml(tmp_path / f"full-{datatype}-{seed}.toml",
                     FULL.format(datatype=datatype).replace("seed = 1234", f"seed = {seed}"))

    return make


# ----------------------------------------------------------------------------------------------
# Reproducibility and streaming
# ----------------------------------------------------------------------------------------------
def test_regenerated_output_is_byte_identical(tmp_path, full_scenario):
    scen = full_scenario("ci16_le")
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    first = synth.write_synth(scen, tmp_path / "a" / "cap.sigmf-meta")
    second = synth.write_synth(scen, tmp_path / "b" / "cap.sigmf-meta", block_size=777)
    assert [p.name for p in first] == ["cap.sigmf-meta", "cap.sigmf-data", "cap.truth.json"]
    for a, b in zip(first, second):
        assert _sha(a) == _sha(b), a.name
    truth = json.loads(first[2].read_text())
    assert truth["seed"] == 1234 and truth["samples"] == 76800 and truth["datatype"] == "ci16_le"
    assert truth["output"]["data_sha512"] == hashlib.sha512(first[1].read_bytes()).hexdigest()
    # Another seed gives other samples (the seed really drives the random streams).
    (tmp_path / "c").mkdir()
    other = synth.write_synth(full_scenario("ci16_le", seed=99), tmp_path / "c" / "cap.sigmf-meta")
    assert _sha(other[1]) != _sha(first[1])


def test_output_independent_of_block_size(full_scenario):
    scen = synth.load_scenario(full_scenario())
    reference = synth.synthesize(scen, block_size=1 << 17).samples
    for size in (65536, 4099, 997):
        assert np.array_equal(synth.synthesize(scen, block_size=size).samples, reference), size
    gen = synth.Synthesizer(scen)
    sizes = np.random.default_rng(5).integers(0, 9000, 200)
    parts = [gen.read(int(s)) for s in [0, 1, 1, 2, 3] + list(sizes)]
    while gen.remaining:
        parts.append(gen.read(5003))
    assert np.array_equal(np.concatenate(parts), reference)
    streamed = synth.synthesize(scen, block_size=8192, in_memory=False)
    assert streamed.samples is None
    assert np.array_equal(np.concatenate(list(streamed.blocks)), reference)


_SMALL = None


def _small_reference():
    global _SMALL
    if _SMALL is None:
        scen = synth.parse_scenario({
            "sample_rate": 24000, "duration": "0.4s", "seed": 3, "noise_floor_dbfs_per_hz": -100,
            "channel": [
                {"name": "a", "offset": 2000, "mode": "usb", "message": {"kind": "noise"}, "cnr_db": 20,
                 "fading": {"kind": "rayleigh", "doppler_hz": 30}, "bursts": [[0.05, 0.3]]},
                {"name": "b", "offset": -6000, "mode": "am", "message": {"kind": "noise", "high": 2000}},
            ]})
        _SMALL = (scen, synth.synthesize(scen).samples)
    return _SMALL


@settings(max_examples=15, deadline=None)
@given(st.lists(st.integers(min_value=0, max_value=3000), min_size=1, max_size=40))
def test_random_splits_give_identical_samples(sizes):
    # Streaming contract (DESIGN.md): chunked output equals one-shot output for any split.
    scen, reference = _small_reference()
    gen = synth.Synthesizer(scen)
    parts = [gen.read(s) for s in sizes]
    parts.append(gen.read(gen.remaining))
    assert np.array_equal(np.concatenate(parts), reference)


# ----------------------------------------------------------------------------------------------
# Levels and spectra
# ----------------------------------------------------------------------------------------------
def test_am_carrier_and_sideband_levels_match_haykin(tmp_path):
    # Haykin ch. 3: sideband = 20 log10(m a_i / 2) dBc. Written as ci16 and read back through the SigMF reader.
    scen = _toml(tmp_path / "am.toml", """
sample_rate = 48000
duration = "1s"
datatype = "ci16_le"
[[channel]]
name = "light"
offset = 5000
mode = "am"
level_dbfs = -20
depth = 0.3
message = { kind = "tone", freq = 1000 }
[[channel]]
name = "full"
offset = -10000
mode = "am"
level_dbfs = -14
depth = 1.0
message = { kind = "tone", freq = 1500 }
[[channel]]
name = "three-tone"
offset = 15000
mode = "am"
level_dbfs = -20
depth = 0.8
message = { kind = "tones", freqs = [400, 1100, 2300], amplitudes = [0.5, 0.3, 0.2] }
""")
    meta, _, truth_path = synth.write_synth(scen, tmp_path / "am.sigmf-meta")
    from iqsift.captures import open_capture

    with open_capture(meta) as cap:
        x = cap.read().astype(np.complex128)
    n = x.shape[0]
    power = np.abs(np.fft.fft(x) / n) ** 2  # 1 Hz bins, every tone on a bin: no window needed

    def dbfs(f):
        return 10 * math.log10(power[int(round(f)) % n])

    checks = []
    for fc, level, m, tones in ((5000, -20, 0.3, [(1000, 1.0)]), (-10000, -14, 1.0, [(1500, 1.0)]),
                                (15000, -20, 0.8, [(400, 0.5), (1100, 0.3), (2300, 0.2)])):
        assert abs(dbfs(fc) - level) < 0.05
        for f, a in tones:
            expected = 20 * math.log10(m * a / 2)
            for side in (fc + f, fc - f):
                measured = dbfs(side) - dbfs(fc)
                checks.append(measured - expected)
                assert abs(measured - expected) < 0.1, (fc, f, measured, expected)
    assert max(abs(c) for c in checks) < 0.1
    truth = json.loads(truth_path.read_text())
    assert truth["channels"][1]["depth"] == 1.0 and truth["clipped_components"] == 0
    # Haykin: total AM power Pc (1 + m^2/2); the truth's expected power says the same.
    assert truth["channels"][0]["expected_power_dbfs"] == pytest.approx(-20 + 10 * math.log10(1 + 0.3 ** 2 / 2))


def test_ssb_opposite_sideband_suppressed(tmp_path):
    # Analytic signal has no negative frequencies (Oppenheim & Schafer ch. 12): the opposite sideband
    # of USB/LSB must be at least 60 dB down for FIR-made (noise, file) and exact (tone) messages.
    _voice_wav(tmp_path / "voice.wav")
    scen = _toml(tmp_path / "ssb.toml", """
sample_rate = 48000
duration = "1s"
[[channel]]
name = "u-noise"
offset = 8000
mode = "usb"
level_dbfs = -30
message = { kind = "noise" }
[[channel]]
name = "l-noise"
offset = -8000
mode = "lsb"
level_dbfs = -30
message = { kind = "noise" }
[[channel]]
name = "l-file"
offset = 18000
mode = "lsb"
level_dbfs = -30
message = { kind = "file", path = "voice.wav", loop = true }
[[channel]]
name = "u-tones"
offset = -18000
mode = "usb"
level_dbfs = -30
message = { kind = "tones", freqs = [500, 1500, 2500] }
""")
    result = synth.synthesize(synth.load_scenario(scen))
    f, p = _welch(result.samples.astype(np.complex128), 48000)
    suppression = {}
    for name, fc, upper in (("u-noise", 8000, True), ("l-noise", -8000, False), ("l-file", 18000, False),
                            ("u-tones", -18000, True)):
        wanted = _band_power(f, p, fc + 300, fc + 3000) if upper else _band_power(f, p, fc - 3000, fc - 300)
        opposite = _band_power(f, p, fc - 3000, fc - 300) if upper else _band_power(f, p, fc + 300, fc + 3000)
        suppression[name] = 10 * math.log10(wanted / opposite)
        # Average power = level_dbfs (nearly all of it inside 300..3000 Hz).
        assert abs(10 * math.log10(wanted) - (-30)) < 0.25, name
    assert min(suppression.values()) >= 60, suppression


def test_noise_floor_density_matches(tmp_path):
    # White noise: density = mean |x|^2 / fs (common practice); Welch estimate (scipy.signal.welch) agrees.
    scen = synth.parse_scenario({"sample_rate": "200k", "duration": "0.5s", "seed": 8,
                                 "noise_floor_dbfs_per_hz": -100})
    x = synth.synthesize(scen).samples.astype(np.complex128)
    measured = 10 * math.log10(np.mean(np.abs(x) ** 2) / 200e3)
    assert abs(measured - (-100)) < 0.2
    f, p = signal.welch(x, 200e3, nperseg=1024, return_onesided=False)
    for lo in range(-100_000, 100_000, 20_000):
        band = (f >= lo) & (f < lo + 20_000)
        assert abs(10 * math.log10(np.mean(p[band])) - (-100)) < 0.3, lo
    # I and Q carry equal, uncorrelated halves.
    assert abs(10 * math.log10(np.mean(x.real ** 2) / np.mean(x.imag ** 2))) < 0.1
    assert abs(np.mean(x.real * x.imag)) < 0.02 * np.mean(np.abs(x) ** 2)


@pytest.mark.parametrize("mode,cnr", [("am", 20.0), ("usb", 30.0)])
def test_channel_cnr_as_stated(mode, cnr):
    # cnr_db = 10 log10(C / (N0 B)): C from the known carrier (am, depth 0) or the known SSB tone, N0 from the
    # residual's Welch density inside the band; the noise stays inside its band.
    rate, bw = 48000, 6000.0 if mode == "am" else 3000.0
    ch = {"name": "c", "offset": -5000, "mode": mode, "level_dbfs": -20, "cnr_db": cnr}
    ch.update({"depth": 0.0} if mode == "am" else {"message": {"kind": "tone", "freq": 1000}})
    scen = synth.parse_scenario({"sample_rate": rate, "duration": "2s", "seed": 21, "channel": [ch]})
    result = synth.synthesize(scen)
    truth = result.truth["channels"][0]
    x = result.samples.astype(np.complex128) * np.exp(-1j * _carrier_phase(truth, rate, result.n_samples))
    tone = 0.0 if mode == "am" else 1000.0
    ref = np.exp(2j * np.pi * tone * np.arange(x.shape[0]) / rate)
    c = np.mean(x * np.conj(ref))
    residual = x - c * ref
    f, p = _welch(residual, rate, nperseg=8192)
    lo, hi = (-bw / 2, bw / 2) if mode == "am" else (0.0, bw)
    inside = (f > lo + 0.05 * bw) & (f < hi - 0.05 * bw)
    n0 = np.mean(p[inside])
    measured = 10 * math.log10(abs(c) ** 2 / (n0 * bw))
    assert abs(measured - cnr) < 0.3, measured
    total = 10 * math.log10(abs(c) ** 2 / np.mean(np.abs(residual) ** 2))
    assert abs(total - cnr) < 0.3, total
    outside = (f < lo - 0.05 * bw) | (f > hi + 0.05 * bw)
    assert 10 * math.log10(np.max(p[outside]) / n0) < -60
    assert truth["noise"]["density_dbfs_per_hz"] == pytest.approx(-20 - cnr - 10 * math.log10(bw))


def test_carrier_offset_and_drift(tmp_path):
    # Instantaneous frequency = d(phase)/dt / (2 pi) (common practice): a quadratic fit of the unwrapped phase
    # gives the carrier (nominal + carrier_offset_hz) and the drift.
    scen = synth.parse_scenario({"sample_rate": 16000, "center": "127.5M", "duration": "1s", "channel": [
        {"name": "d", "freq": "127.502M", "mode": "am", "depth": 0, "carrier_offset_hz": 120,
         "drift_hz_per_s": 5.0, "phase_deg": 45}]})
    result = synth.synthesize(scen)
    t = np.arange(result.n_samples) / 16000
    phase = np.unwrap(np.angle(result.samples.astype(np.complex128)))
    a, b, c = np.polyfit(t, phase, 2)
    assert b / (2 * np.pi) == pytest.approx(2120.0, abs=0.01)
    assert 2 * a / (2 * np.pi) == pytest.approx(5.0, abs=0.01)
    assert math.degrees(c) == pytest.approx(45.0, abs=0.01)
    carrier = result.truth["channels"][0]["carrier"]
    assert carrier["frequency_hz"] == 127_502_120.0 and carrier["error_hz"] == 120.0


# ----------------------------------------------------------------------------------------------
# Bursts and fading
# ----------------------------------------------------------------------------------------------
def test_burst_times_in_envelope(tmp_path):
    rate = 16000
    scen = _toml(tmp_path / "bursts.toml", """
sample_rate = 16000
duration = "1s"
noise_floor_dbfs_per_hz = -120
[[channel]]
name = "keyed"
offset = 1000
mode = "am"
depth = 0
level_dbfs = -20
bursts = [[0.1, 0.25], [0.4, 0.7], [0.85, 1.0]]
""")
    meta, _, truth_path = synth.write_synth(scen, tmp_path / "b.sigmf-meta")
    from iqsift.captures import open_capture

    with open_capture(meta) as cap:
        env = np.abs(cap.read().astype(np.complex128)) / 0.1
        annotations = [a for a in cap.annotations if "burst" in (a.label or "")]
    above = env > 0.5
    edges = np.flatnonzero(np.diff(above.astype(int)))
    times = []
    for i in edges:  # linear interpolation of the half-amplitude crossing
        times.append((i + (0.5 - env[i]) / (env[i + 1] - env[i])) / rate)
    expected = [0.1, 0.25, 0.4, 0.7, 0.85]  # the last burst runs to the end of the capture
    assert len(times) == len(expected)
    assert max(abs(a - b) for a, b in zip(times, expected)) < 1e-3
    # Raised-cosine edge 5 ms: 10-90 % rise time = 5 ms (acos(-0.8) - acos(0.8)) / pi = 2.95 ms.
    rise = np.flatnonzero((env > 0.1) & (np.arange(env.size) / rate < 0.2))
    top = np.flatnonzero((env > 0.9) & (np.arange(env.size) / rate < 0.2))
    assert (top[0] - rise[0]) / rate == pytest.approx(0.005 * (math.acos(-0.8) - math.acos(0.8)) / math.pi, abs=2e-4)
    assert [(a.sample_start, a.sample_count) for a in annotations] == [(1600, 2400), (6400, 4800), (13600, 2400)]
    truth = json.loads(truth_path.read_text())
    assert truth["channels"][0]["bursts"][1] == {"start_s": 0.4, "end_s": 0.7, "start_sample": 6400,
                                                 "end_sample": 11200}


def _fading_gain_from_output(kind: str, **extra) -> np.ndarray:
    rate = 8000
    fading = {"kind": kind, "doppler_hz": 100.0, **extra}
    scen = synth.parse_scenario({"sample_rate": rate, "duration": "20s", "seed": 11, "channel": [
        {"name": "f", "offset": 0, "mode": "am", "depth": 0, "level_dbfs": -6, "fading": fading}]})
    result = synth.synthesize(scen)
    truth = result.truth["channels"][0]
    return result.samples.astype(np.complex128) * np.exp(-1j * _carrier_phase(truth, rate, result.n_samples)) \
        / 10 ** (-6 / 20)


def test_rayleigh_fading_statistics():
    # Clarke 1968: |g| Rayleigh with E|g|^2 = 1 -> scipy.stats.rayleigh(scale=1/sqrt(2)); power median ln 2;
    # autocorrelation J0(2 pi fd tau) (Jakes 1974; scipy.special.j0).
    g = _fading_gain_from_output("rayleigh")
    assert np.mean(np.abs(g) ** 2) == pytest.approx(1.0, abs=0.05)
    thinned = np.abs(g[::20])  # 400 samples/s: a few per Doppler period
    ks = stats.kstest(thinned, stats.rayleigh(scale=math.sqrt(0.5)).cdf).statistic
    assert ks < 0.04, ks
    assert np.mean(np.abs(g) ** 2 < math.log(2)) == pytest.approx(0.5, abs=0.03)
    for lag in (5, 10, 20, 40):
        r = np.mean(g[lag:] * np.conj(g[:-lag])).real / np.mean(np.abs(g) ** 2)
        assert r == pytest.approx(special.j0(2 * np.pi * 100 * lag / 8000), abs=0.03), lag


def test_rician_fading_statistics():
    # Rician with K = 6 dB: nu^2 = K/(K+1), 2 sigma^2 = 1/(K+1) -> scipy.stats.rice(b = nu/sigma, scale = sigma).
    g = _fading_gain_from_output("rician", k_db=6.0)
    k = 10 ** 0.6
    nu, sigma = math.sqrt(k / (k + 1)), math.sqrt(1 / (2 * (k + 1)))
    assert np.mean(np.abs(g) ** 2) == pytest.approx(1.0, abs=0.05)
    ks = stats.kstest(np.abs(g[::20]), stats.rice(nu / sigma, scale=sigma).cdf).statistic
    assert ks < 0.04, ks


# ----------------------------------------------------------------------------------------------
# Quantisation through the SigMF writer
# ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("datatype,bits,unsigned", [("ci16_le", 16, False), ("cu8", 8, True)])
def test_quantisation_and_clip_count(tmp_path, datatype, bits, unsigned):
    # SigMF datatype scaling (spec; DESIGN.md): signed v / 2^(b-1), unsigned (v - 2^(b-1)) / 2^(b-1).
    text = f"""
sample_rate = 24000
duration = "0.5s"
seed = 5
datatype = "{datatype}"
noise_floor_dbfs_per_hz = -90
[[channel]]
name = "hot"
offset = 3000
mode = "am"
level_dbfs = -2
depth = 0.9
message = {{ kind = "tone", freq = 700 }}
"""
    scen = _toml(tmp_path / "q.toml", text)
    meta, data, truth_path = synth.write_synth(scen, tmp_path / "q.sigmf-meta")
    reference = synth.synthesize(synth.load_scenario(scen)).samples
    half = 2.0 ** (bits - 1)
    comps = np.empty(2 * reference.shape[0])
    comps[0::2], comps[1::2] = reference.real, reference.imag
    codes = np.rint(comps * half)
    expected_clipped = int(np.count_nonzero((codes < -half) | (codes > half - 1)))
    raw = np.fromfile(data, dtype="<i2" if bits == 16 else np.uint8).astype(np.float64)
    decoded = (raw - half) / half if unsigned else raw / half
    truth = json.loads(truth_path.read_text())
    assert expected_clipped > 0
    assert truth["clipped_components"] == expected_clipped
    ok = (codes >= -half) & (codes <= half - 1)
    assert np.max(np.abs(decoded[ok] - comps[ok])) <= 0.5 / half + 1e-7
    assert np.all(np.abs(decoded[~ok]) >= (half - 1) / half)
    if sigmf is not None:
        handle = sigmf.fromfile(str(meta))
        handle.validate()
        assert handle.get_global_field("core:datatype") == datatype
        np.testing.assert_allclose(handle.read_samples(), decoded[0::2] + 1j * decoded[1::2], atol=1e-6)


# ----------------------------------------------------------------------------------------------
# Truth: exact messages
# ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize("mode,message", [
    ("am", {"kind": "tones", "freqs": [400, 1100], "amplitudes": [2, 1]}),
    ("dsb", {"kind": "noise", "low": 0, "high": 2500}),
    ("usb", {"kind": "noise"}),
    ("lsb", {"kind": "file", "path": "voice.wav"}),
    ("dsb", {"kind": "file", "path": "voice.wav", "loop": True}),
])
def test_regenerate_message_returns_samples_used(tmp_path, mode, message):
    _voice_wav(tmp_path / "voice.wav")
    rate = 24000
    ch = {"name": "m", "offset": 3000, "mode": mode, "level_dbfs": -20, "message": message, "drift_hz_per_s": 1.0}
    if mode == "am":
        ch["depth"] = 0.7
    scen_path = _toml(tmp_path / "m.toml", "")
    scen = synth.parse_scenario({"sample_rate": rate, "duration": "0.5s", "seed": 4, "channel": [ch]},
                                str(scen_path), tmp_path)
    meta, _, truth_path = synth.write_synth(scen, tmp_path / "m.sigmf-meta")
    truth = json.loads(truth_path.read_text())["channels"][0]  # from the file on disk
    n = 12000
    x = np.fromfile(meta.with_suffix(".sigmf-data"), "<f4").astype(np.float64)
    x = (x[0::2] + 1j * x[1::2]) * np.exp(-1j * _carrier_phase(truth, rate, n)) / truth["baseband_scale"]
    msg = synth.regenerate_message(truth, rate, n, base_dir=truth_path.parent)  # paths in the truth are relative to it
    if mode == "am":
        used = (x - 1) / truth["depth"]
    elif mode == "lsb":
        used = np.conj(x)
    else:
        used = x
    assert np.iscomplexobj(msg) == (mode in ("usb", "lsb"))
    assert np.max(np.abs(used - msg)) < 2e-5
    real = np.real(msg)
    if message["kind"] in ("tones", "file") and mode != "lsb":
        # Normalisation stated in the truth: peak 1.
        assert np.max(np.abs(real)) == pytest.approx(1.0, abs=0.01)
    if message["kind"] == "noise":
        assert np.sqrt(np.mean(real ** 2)) == pytest.approx(0.25, rel=0.1)
    if message["kind"] == "file":
        spectrum = np.abs(np.fft.rfft(real[:7200]))  # file plays 0.3 s
        assert np.argmax(spectrum) * rate / 7200 == pytest.approx(700, abs=3.4)
        tail = np.abs(real[7400:])
        assert (np.max(tail) < 1e-4) == (not message.get("loop", False))


def test_truth_resolves_every_parameter(full_scenario):
    scen = synth.load_scenario(full_scenario())
    truth = synth.build_truth(scen)
    assert truth["sample_rate_hz"] == 48000 and truth["center_hz"] == 127.5e6
    assert truth["noise"]["density_dbfs_per_hz"] == -110
    assert truth["noise"]["power_dbfs"] == pytest.approx(-110 + 10 * math.log10(48000))
    am, usb, lsb, dsb = truth["channels"]
    assert am["frequency_hz"] == 127_495_000 and am["carrier"]["frequency_hz"] == 127_495_120
    assert am["offset_hz"] == -5000 and am["carrier"]["offset_hz"] == -4880
    assert am["message"]["amplitudes"] == [0.5, 0.3, 0.2] and am["message"]["peak"] == 1.0
    assert am["fading"]["paths"] == 32 and len(am["fading"]["phases_rad"]) == 32
    assert usb["message"]["rng"] == {"entropy": 1234, "spawn_key": [2, 0]}
    assert usb["noise"]["rng"]["spawn_key"] == [2, 2]
    assert usb["band"]["lower_hz"] == 127_509_000 and usb["band"]["upper_hz"] == 127_512_000
    assert lsb["message"]["sha256"] and lsb["message"]["file_rate_hz"] == 11025
    assert dsb["bandwidth_hz"] == 6000 and dsb["message"]["low_hz"] == 0
    json.dumps(truth, allow_nan=False)


def test_emission_designator_sets_bandwidth():
    base = {"sample_rate": 48000, "duration": "0.1s"}
    scen = synth.parse_scenario({**base, "channel": [{"name": "e", "offset": 0, "mode": "am",
                                                      "emission": "8K00A3E"}]})
    assert scen.channels[0].bandwidth_hz == 8000  # ITU RR Appendix 1: 8K00 = 8 kHz
    with pytest.raises(ParameterError, match=r"channel 1 'e': emission"):
        synth.parse_scenario({**base, "channel": [{"name": "e", "offset": 0, "mode": "am", "emission": "2K70J3E"}]})


# ----------------------------------------------------------------------------------------------
# Bad scenarios: one line naming the file, the channel and the key
# ----------------------------------------------------------------------------------------------
GOOD_CHANNEL = 'name = "tower"\noffset = "5k"\nmode = "am"\n'
HEAD = 'sample_rate = "48k"\ncenter = "127.5M"\nduration = "1s"\n'


@pytest.mark.parametrize("channel,key", [
    ('name = "tower"\noffset = "5k"\nmode = "am"\ndepth = "deep"', "depth"),
    ('name = "tower"\noffset = "5k"\nmode = "fm"', "mode"),
    ('name = "tower"\noffset = "5k"\nfreq = "127.4M"\nmode = "am"', "freq"),
    (GOOD_CHANNEL + 'message = { kind = "chirp" }', "message.kind"),
    (GOOD_CHANNEL + 'message = { kind = "tones", freqs = [400, 30000] }', "message.freqs[1]"),
    (GOOD_CHANNEL + 'message = { kind = "tones", freqs = [400, 900], amplitudes = [1] }', "message.amplitudes"),
    (GOOD_CHANNEL + 'message = { kind = "tone", freq = "1kk" }', "message.freq"),
    (GOOD_CHANNEL + 'message = { kind = "file", path = "missing.wav" }', "message.path"),
    (GOOD_CHANNEL + 'message = { kind = "noise", low = 10 }', "message.low"),
    (GOOD_CHANNEL + 'bursts = [[0.2, 0.5], [0.4, 0.8]]', "bursts[1]"),
    (GOOD_CHANNEL + 'bursts = [[0.2, 1.5]]', "bursts[0]"),
    (GOOD_CHANNEL + 'fading = { kind = "nakagami", doppler_hz = 2 }', "fading.kind"),
    (GOOD_CHANNEL + 'fading = { kind = "rayleigh" }', "fading.doppler_hz"),
    (GOOD_CHANNEL + 'dept = 0.5', "dept"),
    (GOOD_CHANNEL + 'bandwidth = "1.5k"', "bandwidth"),
    ('name = "tower"\noffset = "23k"\nmode = "am"', "offset"),
    ('name = "tower"\noffset = "5k"\nmode = "usb"\ndepth = 0.5', "depth"),
    ('name = "tower"\noffset = "5k"\nmode = "usb"\nmessage = { kind = "noise", low = 0 }', "message.low"),
    (GOOD_CHANNEL + 'noise_bandwidth = "3k"', "noise_bandwidth"),
    (GOOD_CHANNEL + 'level_dbfs = "loud"', "level_dbfs"),
])
def test_bad_channel_gives_one_line_naming_file_channel_key(tmp_path, channel, key):
    path = _toml(tmp_path / "bad.toml", HEAD + "[[channel]]\n" + channel + "\n")
    with pytest.raises(ParameterError) as info:
        synth.load_scenario(path)
    message = str(info.value)
    assert "\n" not in message
    assert str(path) in message and "channel 1 'tower'" in message and f": {key}:" in message, message


@pytest.mark.parametrize("text,key", [
    ('center = "127.5M"\nduration = "1s"\n', "sample_rate"),
    ('sample_rate = "48k"\nduration = "1s"\ndatatype = "ri16_le"\nnoise_floor_dbfs_per_hz = -100\n', "datatype"),
    ('sample_rate = "48k"\nduration = "1s"\ndatatype = "cq16"\nnoise_floor_dbfs_per_hz = -100\n', "datatype"),
    ('sample_rate = "48k"\nduration = "1s"\nseed = -1\nnoise_floor_dbfs_per_hz = -100\n', "seed"),
    ('sample_rate = "48k"\nduration = "-1s"\n', "duration"),
    ('sample_rate = "48k"\nduration = "1s"\nnoise_floor = -100\n', "noise_floor"),
    ('sample_rate = "48k"\nduration = "1s"\n[[channel]]\nname = "a"\noffset = 0\nmode = "am"\n'
     '[[channel]]\nname = "a"\noffset = 1000\nmode = "am"\n', "name"),
])
def test_bad_top_level_gives_one_line(tmp_path, text, key):
    path = _toml(tmp_path / "top.toml", text)
    with pytest.raises(ParameterError) as info:
        synth.load_scenario(path)
    message = str(info.value)
    assert "\n" not in message and str(path) in message and f"{key}:" in message, message


def test_unreadable_scenario_files(tmp_path):
    with pytest.raises(ParameterError, match="not found"):
        synth.load_scenario(tmp_path / "nope.toml")
    path = _toml(tmp_path / "broken.toml", 'sample_rate = "48k\n')
    with pytest.raises(ParameterError) as info:
        synth.load_scenario(path)
    assert "not valid TOML" in str(info.value) and "\n" not in str(info.value)


# ----------------------------------------------------------------------------------------------
# Library helpers for test benches
# ----------------------------------------------------------------------------------------------
def test_helper_signals():
    rate, n = 48000, 48000
    msg = synth.multitone_message([1000, 2000], rate, n, amplitudes=[3, 1])
    assert msg[0] == pytest.approx(1.0) and np.max(np.abs(msg)) == pytest.approx(1.0)
    assert synth.tone_message(1000, rate, 4, phase_deg=90)[0] == pytest.approx(0.0, abs=1e-12)
    # Haykin: sideband 20 log10(m/2) dBc for a single tone.
    x = synth.am_signal(synth.tone_message(1000, rate, n), 0.5, level_dbfs=-10, carrier_hz=5000, rate_hz=rate)
    spec = np.abs(np.fft.fft(x.astype(np.complex128)) / n) ** 2
    assert 10 * math.log10(spec[5000]) == pytest.approx(-10, abs=0.01)
    assert 10 * math.log10(spec[6000] / spec[5000]) == pytest.approx(20 * math.log10(0.25), abs=0.01)
    # Exact SSB of tones: the opposite side is empty but for float32 rounding.
    u = synth.ssb_tones([700, 1900], rate, n, sideband="usb", level_dbfs=-20, carrier_hz=-4000)
    spec = np.abs(np.fft.fft(u.astype(np.complex128)) / n) ** 2
    assert 10 * math.log10(spec[-4000 + 700] / max(spec[-4000 - 700], 1e-30)) > 100
    assert 10 * math.log10(np.mean(np.abs(u.astype(np.complex128)) ** 2)) == pytest.approx(-20, abs=0.01)
    # DSB: average power as asked.
    d = synth.dsb_signal(msg, level_dbfs=-15)
    assert 10 * math.log10(np.mean(np.abs(d.astype(np.complex128)) ** 2)) == pytest.approx(-15, abs=0.01)


def test_analytic_message_matches_scipy_hilbert():
    # scipy.signal.hilbert is exact for a periodic record: compare away from the FIR's start/end transients.
    rate, n = 8000, 16000
    x = synth.multitone_message([500, 1250, 2750], rate, n, phases_deg=[10, 70, 200])
    ours = synth.analytic_message(x, rate)
    reference = signal.hilbert(x)
    middle = slice(1000, n - 1000)
    assert np.max(np.abs(ours[middle] - reference[middle])) < 1e-3  # 80 dB design: about 1e-4 expected


def test_ssb_signal_and_awgn_helpers():
    rate = 48000
    noise = synth.awgn(96000, rate_hz=rate, density_dbfs_per_hz=-90, seed=2)
    assert 10 * math.log10(np.mean(np.abs(noise.astype(np.complex128)) ** 2) / rate) == pytest.approx(-90, abs=0.2)
    with pytest.raises(ParameterError):
        synth.awgn(10, power_dbfs=-10, density_dbfs_per_hz=-90, rate_hz=rate)
    msg = np.random.default_rng(1).standard_normal(96000)
    s = synth.ssb_signal(msg, rate, sideband="lsb", level_dbfs=-20, carrier_hz=6000)
    f, p = _welch(s.astype(np.complex128), rate)
    wanted, opposite = _band_power(f, p, 3000, 5700), _band_power(f, p, 6300, 9000)
    assert 10 * math.log10(wanted / opposite) > 60
    g = synth.fading_gain(80000, 8000, 50.0, seed=3)
    assert np.mean(np.abs(g) ** 2) == pytest.approx(1.0, abs=0.1)


# ----------------------------------------------------------------------------------------------
# Command line
# ----------------------------------------------------------------------------------------------
def test_cli_synth(tmp_path, run_cli):
    scen = _toml(tmp_path / "cli.toml", HEAD + "seed = 3\ndatatype = \"cu8\"\n[[channel]]\n" + GOOD_CHANNEL
                 + 'message = { kind = "tones", freqs = [400, 1100] }\nbursts = [[0.1, 0.5]]\n')
    out = tmp_path / "cli.sigmf-meta"
    status, stdout, stderr = run_cli("synth", scen, "-o", out, "--quiet")
    assert status == 0, stderr
    for name in ("cli.sigmf-meta", "cli.sigmf-data", "cli.truth.json"):
        assert name in stdout and (tmp_path / name).exists()
    assert "tower: am at 127.505000 MHz" in stdout and "1 burst(s)" in stdout
    status, _, stderr = run_cli("synth", scen, "-o", out)
    assert status == 2 and "exists" in stderr and stderr.count("\n") == 1
    status, stdout, stderr = run_cli("synth", scen, "-o", out, "--force", "--json")
    assert status == 0, stderr
    result = json.loads(stdout)
    assert result["channels"][0]["name"] == "tower" and result["samples"] == 48000
    assert result["datatype"] == "cu8" and Path(result["truth"]).exists()
    bad = _toml(tmp_path / "bad.toml", HEAD + "[[channel]]\n" + GOOD_CHANNEL + "depth = -1\n")
    status, _, stderr = run_cli("synth", bad, "-o", tmp_path / "bad.sigmf-meta")
    assert status == 2 and stderr.count("\n") == 1 and "channel 1 'tower': depth" in stderr
    assert not (tmp_path / "bad.sigmf-data").exists()
