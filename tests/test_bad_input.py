"""Bad input: one line on stderr naming the file and the problem, exit status 2, no traceback."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile

from iqsift.captures import open_capture
from iqsift.errors import CaptureError

from .conftest import write_sigmf_pair

GOOD_GLOBAL = {"core:datatype": "ci16_le", "core:sample_rate": 1e6}


def assert_one_line_error(result, *fragments):
    status, out, err = result
    assert status == 2, (status, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("iqsift: error: ")
    assert "Traceback" not in err
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


def test_missing_file(run_cli, tmp_path):
    assert_one_line_error(run_cli("info", tmp_path / "none.cf32", "--format", "cf32_le", "--rate", "1M"),
                          "none.cf32", "no such file")
    assert_one_line_error(run_cli("info", tmp_path / "none.sigmf-meta"), "none.sigmf-meta", "not found")


def test_missing_data_file_of_a_pair(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "rec", b"\0" * 40, GOOD_GLOBAL)
    meta.with_suffix(".sigmf-data").unlink()
    assert_one_line_error(run_cli("info", meta), "rec.sigmf-data", "not found")


def test_empty_files(run_cli, tmp_path):
    raw = tmp_path / "empty.cu8"
    raw.write_bytes(b"")
    assert_one_line_error(run_cli("info", raw, "--format", "cu8", "--rate", "2.4M"), "empty.cu8", "empty")
    meta = write_sigmf_pair(tmp_path / "e", b"", GOOD_GLOBAL)
    assert_one_line_error(run_cli("info", meta), "e.sigmf-meta", "empty")
    meta.write_text("")
    assert_one_line_error(run_cli("info", meta), "e.sigmf-meta", "metadata file is empty")


def test_partial_sample_is_dropped_with_warning_or_refused_when_strict(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "p", b"\1\0" * 2 * 10 + b"\7\7\7", GOOD_GLOBAL)
    status, out, err = run_cli("info", meta, "--json")
    assert status == 0
    assert json.loads(out)["samples"] == 10
    assert err.count("\n") == 1 and err.startswith("iqsift: warning:") and "last 3 bytes" in err
    assert_one_line_error(run_cli("info", meta, "--strict"), "p.sigmf-meta", "not a whole number")


def test_unknown_datatype(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "u", b"\0" * 16, {"core:datatype": "cf16_le", "core:sample_rate": 1e6})
    assert_one_line_error(run_cli("info", meta), "u.sigmf-meta", "unknown datatype 'cf16_le'")
    raw = tmp_path / "x.bin"
    raw.write_bytes(b"\0" * 16)
    assert_one_line_error(run_cli("info", raw, "--format", "iq16", "--rate", "1M"), "--format", "unknown datatype")
    assert_one_line_error(run_cli("info", raw, "--rate", "1M"), "x.bin", "--format")


@pytest.mark.parametrize("rate,fragment", [(None, "missing"), (0, "greater than 0"), (-48000, "greater than 0"),
                                           ("fast", "must be a number")])
def test_bad_rate_in_metadata(run_cli, tmp_path, rate, fragment):
    glob = {"core:datatype": "cf32_le"}
    if rate is not None:
        glob["core:sample_rate"] = rate
    meta = write_sigmf_pair(tmp_path / "r", b"\0" * 80, glob)
    line = assert_one_line_error(run_cli("info", meta), "r.sigmf-meta", fragment)
    assert "--rate" in line
    # the user can supply it
    assert run_cli("info", meta, "--rate", "48k")[0] == 0


@pytest.mark.parametrize("rate", ["0", "-1M", "nan"])
def test_bad_rate_option(run_cli, tmp_path, rate):
    raw = tmp_path / "x.cf32"
    raw.write_bytes(b"\0" * 80)
    assert_one_line_error(run_cli("info", raw, "--format", "cf32_le", f"--rate={rate}"), "--rate")


def test_raw_needs_rate(run_cli, tmp_path):
    raw = tmp_path / "x.cf32"
    raw.write_bytes(b"\0" * 80)
    assert_one_line_error(run_cli("info", raw, "--format", "cf32_le"), "x.cf32", "--rate")


@pytest.mark.parametrize("text,fragment", [
    ('{"global": {"core:datatype": "ci16_le", ', "line 1 column"),
    ('{"global": {"core:datatype": "ci16_le",\n "core:sample_rate": 1e6,,}}', "line 2 column"),
    ("[1, 2, 3]", "no 'global' object"),
])
def test_malformed_or_truncated_metadata(run_cli, tmp_path, text, fragment):
    meta = write_sigmf_pair(tmp_path / "m", b"\0" * 40, GOOD_GLOBAL)
    meta.write_text(text)
    assert_one_line_error(run_cli("info", meta), "m.sigmf-meta", fragment)


def test_metadata_disagrees_with_data_size(run_cli, tmp_path):
    # a capture segment starting past the end of the data is ignored with a warning (SigMF), not refused:
    # tests/test_integrity.py checks it
    meta = write_sigmf_pair(tmp_path / "a", b"\0" * 400, GOOD_GLOBAL,
                            annotations=[{"core:sample_start": 90, "core:sample_count": 20}])
    assert_one_line_error(run_cli("info", meta), "a.sigmf-meta", "disagrees with data file size", "annotations[0]")


def test_unsorted_captures(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "s", b"\0" * 400, GOOD_GLOBAL,
                            captures=[{"core:sample_start": 50}, {"core:sample_start": 10}])
    assert_one_line_error(run_cli("info", meta), "s.sigmf-meta", "sorted")


def test_nonfinite_samples_reported_by_info_refused_by_processing(run_cli, tmp_path):
    x = np.zeros(100, np.complex64)
    x[17] = np.nan
    x[40] = np.inf
    meta = write_sigmf_pair(tmp_path / "n", x.tobytes(), {"core:datatype": "cf32_le", "core:sample_rate": 8000})
    status, out, _ = run_cli("info", meta, "--json")
    assert status == 0 and json.loads(out)["stats"]["nonfinite_samples"] == 2
    capture = open_capture(meta)
    with pytest.raises(CaptureError, match="sample 17 is NaN or infinite"):
        list(capture.blocks())
    cleaned = capture.read(nonfinite="zero")
    assert cleaned[17] == 0 and np.isfinite(cleaned).all()


def test_wav_with_three_channels(run_cli, tmp_path):
    path = tmp_path / "three.wav"
    soundfile.write(path, np.zeros((100, 3)), 48000)
    assert_one_line_error(run_cli("info", path), "three.wav", "3 channels")


def test_corrupt_wav(run_cli, tmp_path):
    path = tmp_path / "junk.wav"
    path.write_bytes(b"RIFF....not really a wave file")
    assert_one_line_error(run_cli("info", path), "junk.wav", "not a readable WAV/FLAC")


def test_directory_given_as_file(run_cli, tmp_path):
    folder = tmp_path / "captures.sigmf-meta"
    folder.mkdir()
    assert_one_line_error(run_cli("info", folder), "captures.sigmf-meta", "directory")
    assert_one_line_error(run_cli("info", tmp_path, "--format", "cu8", "--rate", "1M"), str(tmp_path), "directory")


def test_multichannel_sigmf_refused(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "mc", b"\0" * 400, {**GOOD_GLOBAL, "core:num_channels": 2})
    assert_one_line_error(run_cli("info", meta), "mc.sigmf-meta", "num_channels")


def test_unknown_option_is_one_line(run_cli, tmp_path):
    assert_one_line_error(run_cli("info", "x.wav", "--frobnicate"), "--frobnicate")


def test_processing_commands_refuse_nan_and_leave_no_output(run_cli, tmp_path):
    x = (0.1 * np.exp(2j * np.pi * 0.05 * np.arange(20000))).astype(np.complex64)
    x[5000] = np.nan
    meta = write_sigmf_pair(tmp_path / "n", x.tobytes(), {"core:datatype": "cf32_le", "core:sample_rate": 48000})
    plan = tmp_path / "p.toml"
    plan.write_text('[[channel]]\nname = "a"\noffset = "2400"\nbandwidth = "6k"\n')
    for args in (["demod", meta, "--offset", "2400", "-o", tmp_path / "a.wav"],
                 ["measure", meta, "--offset", "2400"],
                 ["extract", meta, "--plan", plan, "--out-dir", tmp_path / "out"]):
        assert_one_line_error(run_cli(*args), "n.sigmf-meta", "sample 5000 is NaN or infinite", "--allow-nonfinite")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["n.sigmf-data", "n.sigmf-meta", "p.toml"]
    status, _, _ = run_cli("demod", meta, "--offset", "2400", "-o", tmp_path / "a.wav", "--allow-nonfinite", "--quiet")
    assert status == 0 and (tmp_path / "a.wav").exists()


def test_an_input_is_never_overwritten_even_with_force(run_cli, tmp_path):
    soundfile.write(tmp_path / "iq.wav", np.zeros((4800, 2)), 48000)
    before = (tmp_path / "iq.wav").read_bytes()
    assert_one_line_error(run_cli("demod", tmp_path / "iq.wav", "--offset", "1k", "-o", tmp_path / "iq.wav", "--force"),
                          "iq.wav", "is an input")
    meta = write_sigmf_pair(tmp_path / "g", np.zeros(9600, "<f4").tobytes(),
                            {"core:datatype": "cf32_le", "core:sample_rate": 48000})
    assert_one_line_error(run_cli("demod", meta, "--offset", "1k", "-o", tmp_path / "x.wav", "--baseband", meta,
                                  "--force"), "is an input")
    assert (tmp_path / "iq.wav").read_bytes() == before


def test_annotation_fields_of_the_wrong_type(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "a", b"\0" * 400, GOOD_GLOBAL,
                            annotations=[{"core:sample_start": 0, "core:freq_lower_edge": "abc",
                                          "core:freq_upper_edge": 1e6}])
    assert_one_line_error(run_cli("info", meta), "a.sigmf-meta", "core:freq_lower_edge", "finite number")
    meta = write_sigmf_pair(tmp_path / "f", b"\0" * 400, GOOD_GLOBAL,
                            captures=[{"core:sample_start": 0, "core:frequency": "127M"}])
    assert_one_line_error(run_cli("info", meta), "f.sigmf-meta", "core:frequency")


def test_spectra_folder_is_checked_before_any_work(run_cli, tmp_path):
    meta = write_sigmf_pair(tmp_path / "s", np.zeros(96000, "<f4").tobytes(),
                            {"core:datatype": "cf32_le", "core:sample_rate": 48000})
    (tmp_path / "sp").mkdir()
    (tmp_path / "sp" / "overview.png").write_bytes(b"old")
    assert_one_line_error(run_cli("demod", meta, "--offset", "1k", "-o", tmp_path / "a.wav", "--spectra",
                                  tmp_path / "sp"), "overview.png", "--force")
    assert not (tmp_path / "a.wav").exists()
    assert_one_line_error(run_cli("demod", meta, "--offset", "1k", "-o", tmp_path / "a.wav", "--spectra",
                                  tmp_path / "no" / "sp"), "does not exist")


LIBRARY_WORDS = ("stopband_hz", "passband_hz", "ripple_db", "atten_db", "parse_emission_class", "tone_hz", "x_db",
                 "Kaiser's formula:", "rate_hz=")


@pytest.mark.parametrize(("args", "fragments"), [
    (["design", "--rate", "240k", "-e", "6K00A3E", "--audio-rate", "8000.5"], ["--audio-rate", "whole number"]),
    (["design", "--rate", "240k", "-e", "6K00A3E", "--transition", "1"], ["--transition", "too narrow", "wider"]),
    (["design", "--rate", "2.4M", "-e", "6K00A3E", "--transition", "0.5", "--engine", "polyphase"],
     ["--transition", "too narrow"]),
    (["design", "--rate", "240k", "-e", "A3E"], ["--emission", "6K00A3E"]),
    (["design", "--rate", "240k", "-e", "6K00A3E", "--ripple", "-1"], ["--ripple"]),
    (["measure", "SAMPLE", "--offset", "0", "--tone", "50k"], ["--tone", "audio band"]),
    (["measure", "SAMPLE", "--offset", "0", "--x-db", "-5"], ["--x-db"]),
    (["measure", "SAMPLE", "--offset", "0", "--weighting", "bogus"], ["--weighting"]),
    (["demod", "SAMPLE", "--freq", "1", "--offset", "2", "-o", "OUT.wav"], ["--freq", "--offset"]),
])
def test_errors_speak_in_the_users_words(run_cli, tmp_path, args, fragments):
    # [2/6] item 11: refused (exit 2, one line), in flags rather than library parameter names
    sample = str(Path(__file__).resolve().parents[1] / "sample_captures" / "vhf_airband.sigmf-meta")
    args = [sample if a == "SAMPLE" else str(tmp_path / a) if a == "OUT.wav" else a for a in args]
    line = assert_one_line_error(run_cli(*args), *fragments)
    assert not any(word in line for word in LIBRARY_WORDS), line
    assert not (tmp_path / "OUT.wav").exists()


def test_paths_that_cannot_be_used_are_named_for_what_they_are(run_cli, tmp_path, monkeypatch):
    # Issue [2/6] item 11: "-o .wav" said "must end in .wav", a path under a regular file "folder does not exist",
    # and a symbolic link loop "no such file".
    monkeypatch.chdir(tmp_path)
    capture = Path(__file__).resolve().parents[1] / "sample_captures" / "vhf_airband.sigmf-meta"
    (tmp_path / "afile").write_text("x")
    (tmp_path / "loop1").symlink_to("loop2")
    (tmp_path / "loop2").symlink_to("loop1")
    (tmp_path / "dangling").symlink_to("nothere")
    demod = ("demod", capture, "--freq", "124.15M", "-e", "6K00A3E", "--duration", "0.1", "-o")
    cases = [
        ((*demod, ".wav"), ".wav: give the audio file a name before its extension, e.g. audio.wav"),
        ((*demod, "afile/x.wav"), "afile/x.wav: afile is a file, not a folder"),
        ((*demod, "loop1/x.wav"), "loop1/x.wav: loop1 is a symbolic link that leads round in a loop"),
        ((*demod, "nodir/x.wav"), "nodir/x.wav: the folder nodir does not exist"),
        (("info", "loop1"), "loop1: is a symbolic link that leads round in a loop"),
        (("info", "dangling"), "dangling: is a symbolic link to nothere, which does not exist"),
    ]
    before = sorted(p.name for p in tmp_path.iterdir())
    for args, message in cases:
        status, out, err = run_cli(*args)
        assert (status, err) == (2, f"iqsift: error: {message}\n"), args
    assert sorted(p.name for p in tmp_path.iterdir()) == before  # nothing written
