"""Capture readers and writers against numpy-built references and the `sigmf` package.

SigMF references: the SigMF specification (sigmf-spec), core namespace, as
implemented by the `sigmf` package from PyPI, which writes core:version 1.2.6.
Scaling convention (DESIGN.md): integers scale by 1/2^(bits-1), unsigned after
subtracting 2^(bits-1); magnitude 1.0 is full scale.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import sigmf
import soundfile
from hypothesis import given, settings
from hypothesis import strategies as st

from iqsift.captures import (
    ALL_DATATYPES,
    AudioWriter,
    OutputSet,
    SigMFWriter,
    StatsAccumulator,
    open_capture,
)
from iqsift.errors import CaptureError, OutputExistsError, ParameterError

from .conftest import write_sigmf_pair


def reference_components(name: str, n: int, rng) -> tuple[np.ndarray, np.ndarray]:
    """Random stored components for datatype ``name`` and their expected complex values.

    The dtype and scaling are spelled out here from the SigMF datatype grammar
    ((r|c)(f32|f64|i32|i16|u32|u16|i8|u8)(_le|_be)) without using iqsift's parser.
    """
    is_complex = name[0] == "c"
    kind, bits = name[1], int(name[2:].split("_")[0])
    order = {"_le": "<", "_be": ">"}.get(name[-3:], "|")
    dtype = np.dtype(f"{order}{kind}{bits // 8}")
    comps = n * (2 if is_complex else 1)
    if kind == "f":
        values = rng.uniform(-1, 1, comps)
        stored = values.astype(dtype)
        scaled = stored.astype(np.float64)
    else:
        info = np.iinfo(dtype)
        stored = rng.integers(info.min, info.max, comps, endpoint=True, dtype=np.int64 if kind == "i" else np.uint64)
        stored = stored.astype(dtype)
        half = 2.0 ** (bits - 1)
        scaled = (stored.astype(np.float64) - (half if kind == "u" else 0.0)) / half
    if is_complex:
        expected = scaled[0::2] + 1j * scaled[1::2]
    else:
        expected = scaled + 0j
    return stored, expected


@pytest.mark.parametrize("name", ALL_DATATYPES)
def test_every_sigmf_datatype_round_trips(tmp_path, rng, name):
    # SigMF spec: 28 datatypes, components interleaved I then Q, byte order by suffix.
    assert len(ALL_DATATYPES) == 28
    stored, expected = reference_components(name, 1001, rng)
    meta = write_sigmf_pair(tmp_path / "rec", stored.tobytes(), {"core:datatype": name, "core:sample_rate": 48000})
    capture = open_capture(meta)
    assert capture.samples == 1001
    assert capture.is_complex == (name[0] == "c")
    got = np.concatenate(list(capture.blocks(block_size=97)))
    np.testing.assert_allclose(got, expected, rtol=0, atol=2e-7 * max(1.0, np.abs(expected).max()))

    # raw files with --format read the same way
    raw = tmp_path / "rec.bin"
    raw.write_bytes(stored.tobytes())
    np.testing.assert_array_equal(open_capture(raw, format=name, rate="48k").read(), got)


@pytest.mark.parametrize("name", ["cf32_le", "ci16_le", "cu8", "ri16_be", "cf64_be"])
def test_iqsift_writer_validates_with_sigmf_package(tmp_path, rng, name):
    # Interop (SigMF spec v1.2.6 as implemented by the `sigmf` package): what iqsift writes validates
    # and reads back identically in the reference package.
    x = (0.7 * (rng.standard_normal(3000) + 1j * rng.standard_normal(3000)) / 3).astype(np.complex64)
    if name[0] == "r":
        x = x.real.astype(np.complex64)
    with SigMFWriter(tmp_path / "out", 250e3, center_hz=127.5e6, datatype=name,
                     extra={"iqsift:channel": {"name": "test"}}) as writer:
        writer.write(x[:1234])
        writer.write(x[1234:])
    handle = sigmf.fromfile(str(tmp_path / "out.sigmf-meta"))
    handle.validate()
    assert handle.get_global_field("core:version") == "1.2.6"
    assert handle.get_global_field("core:sample_rate") == 250e3
    theirs = handle.read_samples()
    ours = open_capture(tmp_path / "out.sigmf-meta").read()
    np.testing.assert_allclose(ours, theirs if name[0] == "c" else theirs + 0j, atol=1e-7)
    tolerance = 0 if name[1] == "f" else 1.0 / 2 ** (int(name[2:4].rstrip("_")) - 1)
    np.testing.assert_allclose(ours, x, atol=tolerance + 1e-7)


@pytest.mark.parametrize("name", ["cf32_le", "ci16_le", "ci8", "ru16_le"])
def test_recordings_written_by_sigmf_package_read_identically(tmp_path, rng, name):
    # Interop: the reference package writes (core:version 1.2.6), iqsift reads the same samples it does.
    stored, expected = reference_components(name, 500, rng)
    data = tmp_path / "ref.sigmf-data"
    data.write_bytes(stored.tobytes())
    handle = sigmf.SigMFFile(data_file=str(data), global_info={
        "core:datatype": name, "core:sample_rate": 1e6,
        "core:description": "invented test recording"})
    handle.add_capture(0, metadata={"core:frequency": 433.5e6,
                                    "core:datetime": "2026-12-02T08:00:00Z"})
    handle.add_capture(200, metadata={"core:frequency": 434.0e6})
    handle.add_annotation(10, 50, metadata={"core:label": "burst",
                                            "core:freq_lower_edge": 433.4e6,
                                            "core:freq_upper_edge": 433.6e6})
    handle.tofile(str(tmp_path / "ref.sigmf-meta"))
    capture = open_capture(tmp_path / "ref.sigmf-meta")
    theirs = handle.read_samples()
    np.testing.assert_allclose(capture.read(), theirs if name[0] == "c" else theirs + 0j, atol=1e-7)
    np.testing.assert_allclose(capture.read(), expected, atol=1e-7)
    assert [(s.sample_start, s.sample_count, s.frequency_hz) for s in capture.segments] == [
        (0, 200, 433.5e6), (200, 300, 434.0e6)]
    assert capture.segments[0].datetime == "2026-12-02T08:00:00Z"
    ann = capture.annotations[0]
    assert (ann.sample_start, ann.sample_count, ann.label, ann.freq_lower_hz) == (10, 50, "burst", 433.4e6)


def test_range_spanning_two_centres_is_refused(tmp_path):
    meta = write_sigmf_pair(tmp_path / "two", np.zeros(2000, "<f4").tobytes(),
                            {"core:datatype": "cf32_le", "core:sample_rate": 1000},
                            captures=[{"core:sample_start": 0, "core:frequency": 1e8},
                                      {"core:sample_start": 500, "core:frequency": 1.01e8}])
    capture = open_capture(meta)
    assert capture.center_for(capture.select(0, 0.4)) == 1e8
    assert capture.center_for(capture.select(0.6, 0.2)) == 1.01e8
    with pytest.raises(CaptureError, match="different centre frequencies"):
        capture.center_for(capture.select(0.4, 0.2))


def test_sigmf_archive_reads_in_place(tmp_path, rng):
    stored, expected = reference_components("ci16_le", 700, rng)
    data = tmp_path / "arc.sigmf-data"
    data.write_bytes(stored.tobytes())
    handle = sigmf.SigMFFile(data_file=str(data), global_info={
        "core:datatype": "ci16_le", "core:sample_rate": 2e6})
    handle.add_capture(0, metadata={"core:frequency": 1.2e9})
    handle.tofile(str(tmp_path / "arc"), toarchive=True)
    capture = open_capture(tmp_path / "arc.sigmf")
    assert capture.format == "sigmf-archive" and capture.center_hz == 1.2e9
    np.testing.assert_allclose(capture.read(), expected, atol=1e-7)


@settings(max_examples=40, deadline=None)
@given(block=st.integers(1, 700), start=st.integers(0, 999), count=st.integers(0, 1000))
def test_blocks_concatenate_to_one_shot(block, start, count):
    # Streaming contract (DESIGN.md): the concatenated blocks equal a one-shot read of the same range.
    rng = np.random.default_rng(7)
    stored, expected = reference_components("ci8", 1000, rng)
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "x.cs8"
        path.write_bytes(stored.tobytes())
        capture = open_capture(path, format="ci8", rate=1000)
        count = min(count, 1000 - start)
        parts = list(capture.blocks(block_size=block, start=start, count=count))
        assert all(0 < p.shape[0] <= block for p in parts)
        got = np.concatenate(parts) if parts else np.zeros(0, np.complex64)
        np.testing.assert_array_equal(got, expected[start:start + count].astype(np.complex64))
        capture.close()


def test_select_by_seconds_and_samples(tmp_path):
    path = tmp_path / "x.cf32"
    path.write_bytes(np.zeros(2 * 48000, "<f4").tobytes())
    capture = open_capture(path, format="cf32_le", rate="48k")
    r = capture.select("250ms", "0.5")
    assert (r.start, r.count) == (12000, 24000)
    r = capture.select("100sa", "10sa")
    assert (r.start, r.count) == (100, 10)
    with pytest.raises(ParameterError, match="runs past the end"):
        capture.select(0.9, 0.2)


def test_wav_two_channels_are_iq_one_is_real(tmp_path, rng):
    iq = rng.uniform(-0.9, 0.9, (4000, 2))
    soundfile.write(tmp_path / "iq.wav", iq, 96000, subtype="FLOAT")
    capture = open_capture(tmp_path / "iq.wav", center="10.7M")
    assert capture.is_complex and capture.sample_rate_hz == 96000 and capture.center_hz == 10.7e6
    np.testing.assert_allclose(capture.read(), iq[:, 0] + 1j * iq[:, 1], atol=1e-7)
    soundfile.write(tmp_path / "if.flac", iq[:, 0], 48000, subtype="PCM_16")
    real = open_capture(tmp_path / "if.flac")
    assert not real.is_complex and real.center_hz == 0.0
    # FLAC stores 16-bit codes: the value read is code/32768 (DESIGN.md scaling)
    np.testing.assert_allclose(real.read().real, np.round(iq[:, 0] * 32767) / 32768, atol=1.5 / 32768)


def test_writers_are_atomic_and_refuse_overwrite(tmp_path):
    out = tmp_path / "a.wav"
    with AudioWriter(out, 16000) as writer:
        writer.write(np.zeros(100))
    before = out.read_bytes()
    with pytest.raises(OutputExistsError, match="pass force to overwrite"):
        AudioWriter(out, 16000)
    with pytest.raises(RuntimeError):
        with AudioWriter(out, 16000, force=True) as writer:
            writer.write(np.ones(100) * 0.5)
            raise RuntimeError("job failed halfway")
    assert out.read_bytes() == before  # untouched by the failed job
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav"]  # no temporary left behind
    # a group of outputs is all-or-nothing
    with pytest.raises(OutputExistsError):
        with OutputSet() as outputs:
            outputs.reserve(tmp_path / "b.wav")
            outputs.reserve(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.wav"]


def test_audio_writer_counts_clipping(tmp_path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with AudioWriter(tmp_path / "c.flac", 8000) as writer:
            writer.write(np.array([0.5, 1.5, -2.0, 0.0]))
    assert writer.clipped_samples == 2
    assert any("clipped" in str(w.message) for w in caught)
    data, rate = soundfile.read(tmp_path / "c.flac")
    assert rate == 8000 and data[1] == pytest.approx(32767 / 32768)


@pytest.mark.parametrize("finished", [True, False])
def test_clipping_is_reported_only_for_a_file_left_behind(tmp_path, finished):
    # a job interrupted after its audio was written discards it: no warning may name that file
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        outputs = OutputSet()
        writer = AudioWriter(tmp_path / "d.wav", 8000, outputs=outputs)
        writer.write(np.array([0.5, 1.5]))
        writer.close()
        assert not caught  # not yet: the file is not in place
        outputs.commit() if finished else outputs.abort()
    assert (tmp_path / "d.wav").exists() is finished
    assert [str(w.message) for w in caught] == ([f"{tmp_path / 'd.wav'}: 1 audio samples clipped at full scale"]
                                                 if finished else [])


def test_stats_against_numpy(rng):
    # Reference: direct numpy formulas (DESIGN.md: dBFS = 10 log10 mean |x|^2) on the whole array.
    n = 50000
    i = 0.12 * rng.standard_normal(n) + 0.01
    q = 0.10 * rng.standard_normal(n) - 0.02
    x = (i + 1j * q).astype(np.complex64)
    x[5] = 1.0 + 0j
    acc = StatsAccumulator(True, clip_high=1.0)
    for part in np.array_split(x, 7):
        acc.update(part)
    s = acc.result()
    p = np.abs(x.astype(np.complex128)) ** 2
    assert s.rms_dbfs == pytest.approx(10 * np.log10(p.mean()), abs=1e-6)
    assert s.peak_dbfs == pytest.approx(10 * np.log10(p.max()), abs=1e-6)
    assert s.dc_i == pytest.approx(x.real.mean(), abs=1e-6)
    assert s.clipped_samples == 1
    # gain imbalance of independent I/Q with std 0.12 vs 0.10: 20 log10(1.2) = 1.58 dB
    xd = x.astype(np.complex128)
    assert s.gain_imbalance_db == pytest.approx(10 * np.log10(np.var(xd.real) / np.var(xd.imag)), abs=1e-6)
    assert s.gain_imbalance_db == pytest.approx(20 * np.log10(0.12 / 0.10), abs=0.15)
    assert abs(s.phase_imbalance_deg) < 0.5


def test_stats_detect_known_phase_imbalance(rng):
    # Quadrature imbalance model: Q' = sin(phi) I + cos(phi) Q for circular noise gives
    # E[IQ']/sqrt(E[I^2]E[Q'^2]) = sin(phi) (textbook IQ-imbalance model).
    n = 200000
    i, q = rng.standard_normal(n) * 0.2, rng.standard_normal(n) * 0.2
    phi = np.radians(3.0)
    x = (i + 1j * (np.sin(phi) * i + np.cos(phi) * q)).astype(np.complex64)
    acc = StatsAccumulator(True)
    acc.update(x)
    xd = x.astype(np.complex128)
    assert acc.result().phase_imbalance_deg == pytest.approx(
        np.degrees(np.arcsin(np.corrcoef(xd.real, xd.imag)[0, 1])), abs=1e-6)  # numpy reference on the same samples
    assert acc.result().phase_imbalance_deg == pytest.approx(3.0, abs=0.3)  # model value; sampling error ~0.13 deg
