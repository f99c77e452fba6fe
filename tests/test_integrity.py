"""SigMF integrity: ``core:sha512`` checked while the capture streams; segments past the end of the data.

Reference: the SigMF specification, ``core:sha512`` = the SHA-512 of the whole dataset file (FIPS 180-4,
computed here with :mod:`hashlib` from the bytes written), and "a capture segment whose sample_start
lies past the end of the dataset is ignored". The recordings are written by hand (conftest's
``write_sigmf_pair``, a tar file for the archive), independent of iqsift's writer.
"""

from __future__ import annotations

import hashlib
import io
import json
import tarfile
import threading
from pathlib import Path

import numpy as np
import pytest

import iqsift.captures.integrity
from iqsift.captures import ChecksumError, open_capture
from iqsift.errors import CaptureError
from iqsift.jobs import demod_file, info_file
from iqsift import make_channel

from .conftest import write_sigmf_pair

RATE_HZ = 48000.0
WRONG_SHA = hashlib.sha512(b"not the data").hexdigest()


def tone_bytes(samples: int = 48000) -> bytes:
    """A carrier 5 kHz above the centre, 50 % AM by 400 Hz, over a -70 dBFS noise floor (cf32_le)."""
    rng = np.random.default_rng(7)
    t = np.arange(samples) / RATE_HZ
    x = 0.3 * (1 + 0.5 * np.sin(2 * np.pi * 400 * t)) * np.exp(2j * np.pi * 5000 * t)
    x = x + 3e-4 * (rng.standard_normal(samples) + 1j * rng.standard_normal(samples))
    return x.astype(np.complex64).tobytes()


def recording(folder: Path, name: str, sha512: object = "right", raw: bytes | None = None, **extra: object) -> Path:
    """A SigMF pair of :func:`tone_bytes` with ``core:sha512`` right (from hashlib), wrong, or as given."""
    raw = tone_bytes() if raw is None else raw
    glob: dict[str, object] = {"core:datatype": "cf32_le", "core:sample_rate": RATE_HZ}
    if sha512 == "right":
        glob["core:sha512"] = hashlib.sha512(raw).hexdigest()
    elif sha512 == "wrong":
        glob["core:sha512"] = WRONG_SHA
    elif sha512 is not None:
        glob["core:sha512"] = sha512
    glob.update(extra.pop("global_", {}))  # type: ignore[call-overload]
    return write_sigmf_pair(folder / name, raw, glob, **extra)  # type: ignore[arg-type]


def one_error_line(result: tuple[int, str, str]) -> str:
    status, out, err = result
    assert status == 2, (status, err)
    assert "Traceback" not in err and out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    return lines[0]


def assert_checksum_error(line: str, data_path: Path, raw: bytes) -> None:
    assert line.startswith(f"iqsift: error: {data_path}: the data does not match its checksum"), line
    assert hashlib.sha512(raw).hexdigest()[:16] in line and WRONG_SHA[:16] in line  # both digests named
    assert "--no-verify" in line and "verify=False" not in line


# -- info -------------------------------------------------------------------------------------------
def test_info_verifies_the_checksum(run_cli, tmp_path):
    raw = tone_bytes()
    good = recording(tmp_path, "good")
    bad = recording(tmp_path, "bad", "wrong")
    status, out, err = run_cli("info", good, "--json")
    assert status == 0 and err == ""
    assert_checksum_error(one_error_line(run_cli("info", bad)), bad.with_suffix(".sigmf-data"), raw)
    status, out_unverified, err = run_cli("info", bad, "--json", "--no-verify")
    assert status == 0 and err == ""
    assert json.loads(out_unverified)["stats"] == json.loads(out)["stats"]


def test_uppercase_digest_is_accepted(run_cli, tmp_path):
    meta = recording(tmp_path, "upper", hashlib.sha512(tone_bytes()).hexdigest().upper())
    assert run_cli("info", meta)[0] == 0


def test_malformed_digest_is_refused_when_checking(run_cli, tmp_path):
    meta = recording(tmp_path, "short", "abc123")
    line = one_error_line(run_cli("info", meta))
    assert "core:sha512 must be 128 hexadecimal digits" in line and "'abc123'" in line and "--no-verify" in line
    assert run_cli("info", meta, "--no-verify")[0] == 0


def test_checksum_covers_header_and_trailing_bytes(run_cli, tmp_path):
    """The digest is of the whole file: segment header bytes and trailing bytes count, though never read as samples."""
    samples = tone_bytes(1000)
    header_a, header_b, trailer = b"HEAD" * 4, b"hdr2" * 2, b"TAIL" * 3
    raw = header_a + samples[:4000] + header_b + samples[4000:] + trailer
    segments = [{"core:sample_start": 0, "core:header_bytes": len(header_a)},
                {"core:sample_start": 500, "core:header_bytes": len(header_b)}]
    extra = {"captures": segments, "global_": {"core:trailing_bytes": len(trailer)}}
    meta = recording(tmp_path, "ncd", "right", raw=raw, **extra)
    status, out, err = run_cli("info", meta, "--json")
    assert status == 0 and err == "" and json.loads(out)["samples"] == 1000
    data = meta.with_suffix(".sigmf-data")
    for position in (1, len(header_a) + 4000 + 2, len(raw) - 1):  # first header, second header, trailer
        changed = bytearray(raw)
        changed[position] ^= 0xFF
        data.write_bytes(bytes(changed))
        line = one_error_line(run_cli("info", meta))
        assert "does not match its checksum" in line
        assert hashlib.sha512(bytes(changed)).hexdigest()[:16] in line
    data.write_bytes(raw)
    assert run_cli("info", meta)[0] == 0


def test_archive_checksum_is_of_the_data_member(run_cli, tmp_path):
    raw = tone_bytes(2000)
    for name, sha in (("good", hashlib.sha512(raw).hexdigest()), ("bad", WRONG_SHA)):
        meta = {"global": {"core:datatype": "cf32_le", "core:sample_rate": RATE_HZ, "core:version": "1.2.6",
                           "core:sha512": sha}, "captures": [{"core:sample_start": 0}], "annotations": []}
        archive = tmp_path / f"{name}.sigmf"
        with tarfile.open(archive, "w") as tar:
            for member, content in ((f"{name}/{name}.sigmf-meta", json.dumps(meta).encode()),
                                    (f"{name}/{name}.sigmf-data", raw)):
                info = tarfile.TarInfo(member)
                info.size = len(content)
                tar.addfile(info, io.BytesIO(content))
    assert run_cli("info", tmp_path / "good.sigmf")[0] == 0
    line = one_error_line(run_cli("info", tmp_path / "bad.sigmf"))
    assert line.startswith(f"iqsift: error: {tmp_path / 'bad.sigmf'}: the data does not match its checksum")
    assert hashlib.sha512(raw).hexdigest()[:16] in line
    assert run_cli("info", tmp_path / "bad.sigmf", "--no-verify")[0] == 0


# -- the processing commands ------------------------------------------------------------------------
PLAN = '[[channel]]\nname = "tone"\noffset = "5k"\nbandwidth = "6k"\n'


def command(name: str, capture: Path, folder: Path) -> list[str]:
    """Each command that reads a whole capture, with every output it can write."""
    return {
        "demod": ["demod", capture, "--offset", "5k", "-o", folder / "a.wav", "--baseband", folder / "bb.sigmf-meta",
                  "--report", folder / "r.json", "--spectra", folder / "sp", "-q"],
        "measure": ["measure", capture, "--offset", "5k", "--tone", "400"],
        "survey": ["survey", capture, "--plan-out", folder / "plan.toml", "-q"],
        "extract": ["extract", capture, "--plan", folder.parent / "plan.toml", "--out-dir", folder / "out", "-q"],
    }[name]


@pytest.mark.parametrize("name", ["demod", "measure", "survey", "extract"])
def test_commands_refuse_a_mismatch_and_write_nothing(run_cli, tmp_path, name):
    raw = tone_bytes()
    (tmp_path / "plan.toml").write_text(PLAN)
    bad = recording(tmp_path, "bad", "wrong")
    outputs = tmp_path / "outputs"
    outputs.mkdir()
    line = one_error_line(run_cli(*command(name, bad, outputs)))
    assert_checksum_error(line, bad.with_suffix(".sigmf-data"), raw)
    assert list(outputs.iterdir()) == []  # no output, no temporary file, no folder

    status, out, err = run_cli(*command(name, bad, outputs), "--no-verify")
    assert status == 0 and "Traceback" not in err


@pytest.mark.parametrize("name", ["demod", "extract"])
def test_no_verify_changes_no_output(run_cli, tmp_path, name):
    """The same audio from a verified capture, the same capture unverified, and a mismatching one unverified."""
    (tmp_path / "plan.toml").write_text(PLAN)
    good = recording(tmp_path, "good")
    bad = recording(tmp_path, "bad", "wrong")
    audio = []
    for run, (capture, flags) in enumerate(((good, ()), (good, ("--no-verify",)), (bad, ("--no-verify",)))):
        folder = tmp_path / f"run{run}"
        folder.mkdir()
        assert run_cli(*command(name, capture, folder), *flags)[0] == 0
        audio.append(next(folder.rglob("*.wav")).read_bytes())
    assert audio[0] == audio[1] == audio[2]


def test_a_part_of_the_capture_is_not_checked(run_cli, tmp_path):
    bad = recording(tmp_path, "bad", "wrong")
    for flags in (("--start", "0.25"), ("--duration", "0.5"), ("--start", "0.1", "--duration", "0.2")):
        status, out, err = run_cli("demod", bad, "--offset", "5k", "-o", tmp_path / "a.wav", "--force", "-q", *flags)
        assert status == 0 and err == "", (flags, err)


# -- the library ------------------------------------------------------------------------------------
def test_library_verify_option(tmp_path):
    bad = recording(tmp_path, "bad", "wrong")
    channel = make_channel(offset="5k", bandwidth="6k")
    with pytest.raises(ChecksumError, match="pass verify=False to read it anyway"):
        demod_file(bad, channel, tmp_path / "a.wav")
    assert not (tmp_path / "a.wav").exists()
    demod_file(bad, channel, tmp_path / "a.wav", verify=False)
    assert (tmp_path / "a.wav").exists()

    with open_capture(bad) as capture:
        assert capture.verify
        info_file(capture, verify=False)  # the job's verify=False holds for this job only
        assert capture.verify
        with pytest.raises(ChecksumError):
            info_file(capture)
        with pytest.raises(ChecksumError):
            capture.read()
        assert capture.read(0, 100).shape == (100,)  # a part: not checked
        handed_out = []
        with pytest.raises(ChecksumError):
            for block in capture.blocks(block_size=10000):
                handed_out.append(block.shape[0])
        assert sum(handed_out) == 48000  # every block comes before the error
    with open_capture(bad, verify=False) as capture:
        assert capture.read().shape == (48000,)
        info_file(capture)  # an opened capture's own verify=False is kept
    with pytest.raises(CaptureError):  # ChecksumError is a CaptureError (and a ValueError)
        open_capture(bad).read()


def test_checked_on_a_thread_of_its_own_that_a_stopped_pass_stops(tmp_path, monkeypatch):
    """The check hashes on its own thread beside the pass; a pass abandoned early leaves no thread behind."""
    meta = recording(tmp_path, "good")
    release = threading.Event()

    class HeldSha:  # a SHA-512 that waits until the test lets it go on, so the thread is seen running
        def __init__(self) -> None:
            self._sha = hashlib.new("sha512")  # not the patched name

        def update(self, data) -> None:
            release.wait(10)
            self._sha.update(data)

        def hexdigest(self) -> str:
            return self._sha.hexdigest()

    def checking() -> list[threading.Thread]:
        return [t for t in threading.enumerate() if t.name == "iqsift-checksum"]

    monkeypatch.setattr(iqsift.captures.integrity, "_THREAD_CHUNK_BYTES", 4096)
    with open_capture(meta) as capture:
        monkeypatch.setattr(iqsift.captures.integrity.hashlib, "sha512", HeldSha)
        blocks = capture.blocks(block_size=4096)
        next(blocks)
        assert len(checking()) == 1  # hashing beside the pass, not after it
        release.set()
        blocks.close()  # the consumer stops early: the check is stopped and joined
        assert checking() == []
        monkeypatch.undo()
        samples = np.concatenate(list(capture.blocks(block_size=4096)))  # a whole pass: checked, then gone
    assert samples.tobytes() == tone_bytes() and checking() == []


# -- capture segments past the end ------------------------------------------------------------------
def test_segments_past_the_end_are_ignored_with_a_warning(run_cli, tmp_path):
    raw = b"\0" * 400  # 50 cf32 samples
    segments = [{"core:sample_start": 0, "core:frequency": 1e6}, {"core:sample_start": 50, "core:frequency": 2e6},
                {"core:sample_start": 900}]
    meta = recording(tmp_path, "seg", "right", raw=raw, captures=segments)
    status, out, err = run_cli("info", meta, "--json")
    assert status == 0
    assert err.splitlines() == [
        f"iqsift: warning: {meta}: captures[1] core:sample_start 50 lies past the end of the data (50 samples); "
        "the segment is ignored",
        f"iqsift: warning: {meta}: captures[2] core:sample_start 900 lies past the end of the data (50 samples); "
        "the segment is ignored",
    ]
    report = json.loads(out)
    assert [s["sample_start"] for s in report["segments"]] == [0] and report["center_hz"] == 1e6
    assert report["segments"][0]["sample_count"] == 50

    only = recording(tmp_path, "only", "right", raw=raw, captures=[{"core:sample_start": 60, "core:frequency": 1e6}])
    status, out, err = run_cli("info", only, "--json")
    assert status == 0 and len(err.splitlines()) == 1 and "captures[0]" in err
    report = json.loads(out)  # SigMF: no segment left means one segment from sample 0, nothing known about it
    assert [(s["sample_start"], s["sample_count"]) for s in report["segments"]] == [(0, 50)]
    assert report["center_hz"] is None


def test_segment_past_the_end_with_header_bytes_is_refused(run_cli, tmp_path):
    segments = [{"core:sample_start": 0}, {"core:sample_start": 90, "core:header_bytes": 8}]
    meta = recording(tmp_path, "hdr", None, raw=b"\0" * 400, captures=segments)
    line = one_error_line(run_cli("info", meta))
    assert "captures[1]" in line and "core:header_bytes 8" in line and "past the end" in line


def test_check_started_ahead_is_taken_by_the_whole_pass(tmp_path, monkeypatch):
    """check_ahead() starts the hash at once; the next whole pass uses it (one hash), a part does not."""
    good, bad = recording(tmp_path, "good"), recording(tmp_path, "bad", "wrong")
    started = []
    original = iqsift.captures.integrity.ChecksumPass.__init__

    def counting(self, recorded):
        started.append(recorded.data_path.name)
        original(self, recorded)

    monkeypatch.setattr(iqsift.captures.integrity.ChecksumPass, "__init__", counting)
    with open_capture(bad) as capture:
        capture.check_ahead()
        assert started == ["bad.sigmf-data"]
        list(capture.blocks(block_size=4096, start=10, count=100))  # a part: not checked, keeps the check
        with pytest.raises(ChecksumError):
            list(capture.blocks(block_size=4096))
        assert started == ["bad.sigmf-data"]  # the whole pass took the check started ahead
    with open_capture(good) as capture:
        capture.check_ahead(10, 100)  # a part of the capture is never checked: nothing starts
        assert started == ["bad.sigmf-data"]
        capture.check_ahead()
    assert not any(t.name == "iqsift-checksum" for t in threading.enumerate())  # close() stopped it
