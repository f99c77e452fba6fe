"""Options that meet at the edges: each combination either works or is refused in one line (exit 2), never half.

Found by reading this round's changes together: live input with --annotate, --ppm or --html; a manifest that is
not text; the unit of --ppm in its own error; a survey that finds nothing with --annotate.
"""

from __future__ import annotations

import io
import json
import subprocess
import sys
import wave
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
VHF = ROOT / "sample_captures" / "vhf_airband.sigmf-meta"
RAW = VHF.with_suffix(".sigmf-data")
STDIN = ("--format", "ci16_le", "--rate", "240k", "--center", "124.1M")
CHANNEL = ("--freq", "124.15M", "-e", "6K00A3E")


def iqsift(*args: object, stdin: bytes = b"", cwd: Path = ROOT) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "iqsift", *map(str, args)], input=stdin, capture_output=True,
                          cwd=cwd)


def one_error_line(result: subprocess.CompletedProcess, text: str) -> None:
    err = result.stderr.decode()
    assert result.returncode == 2 and err.count("\n") == 1 and err.startswith("iqsift: error: "), err
    assert text in err, err


def test_annotating_a_live_stream_is_refused_in_one_line(tmp_path):
    result = iqsift("demod", "-", *STDIN, *CHANNEL, "-o", tmp_path / "a.wav", "--annotate", tmp_path / "x.sigmf-meta",
                    stdin=RAW.read_bytes()[:96_000])
    one_error_line(result, "--annotate: standard input has no data file")
    assert list(tmp_path.iterdir()) == []


def test_audio_on_standard_output_with_a_receiver_correction():
    # the corrected audio rate (16000.128 S/s at +8 ppm) is written as 16000, as a file would be (jobs.common)
    result = iqsift("demod", "-", *STDIN, *CHANNEL, "--ppm", "8", "-o", "-", "-q", stdin=RAW.read_bytes()[:960_000])
    assert result.returncode == 0, result.stderr.decode()
    with wave.open(io.BytesIO(result.stdout)) as header:  # RIFF/WAVE header (Microsoft / IBM 1991)
        assert header.getframerate() == 16000 and header.getnchannels() == 1


def test_a_page_needs_an_audio_file(tmp_path):
    one_error_line(iqsift("demod", VHF, *CHANNEL, "-o", "-", "--html", cwd=tmp_path), "--html: the page links")
    assert list(tmp_path.iterdir()) == []


def test_the_page_of_demod_shows_the_channel_activity(tmp_path):
    # a continuous test transmission (sample_captures/README: ramp-test, 0-8 s) is active all the time
    result = iqsift("demod", VHF, *CHANNEL, "-o", tmp_path / "t.wav", "--html", "-q")
    assert result.returncode == 0, result.stderr.decode()
    assert "(100 % of the time)" in (tmp_path / "report.html").read_text()


def test_the_unit_of_ppm_is_not_taken_for_the_flag():
    one_error_line(iqsift("info", VHF, "--ppm", "5000"),
                   "--ppm: got 5000.0; a reference error must lie within ±1000 parts per million")


def test_a_manifest_that_is_not_text(tmp_path):
    manifest = tmp_path / "list.txt"
    manifest.write_bytes(np.arange(256, dtype=np.uint8).tobytes()[128:])
    (tmp_path / "plan.toml").write_text('[[channel]]\nname = "a"\nfreq = "124.15M"\nemission = "6K00A3E"\n')
    one_error_line(iqsift("batch", "--manifest", manifest, "--plan", tmp_path / "plan.toml", "--out-dir",
                          tmp_path / "out"), "not a text file")
    assert not (tmp_path / "out").exists()


def test_a_survey_that_finds_nothing_writes_no_annotations_and_says_so(tmp_path):
    noise = (np.random.default_rng(3).standard_normal((96_000, 2)) * 300).astype("<i2")
    noise.tofile(tmp_path / "n.raw")
    # SigMF's core:dataset names the data file beside the metadata, so the annotations go there
    meta = tmp_path / "n.sigmf-meta"
    result = iqsift("survey", tmp_path / "n.raw", "--format", "ci16_le", "--rate", "96k", "--center", "7.1M",
                    "--annotate", meta, "--json")
    assert result.returncode == 0, result.stderr.decode()
    assert json.loads(result.stdout)["emissions"] == []
    assert "not written: no emission found" in result.stderr.decode()
    assert not meta.exists()
