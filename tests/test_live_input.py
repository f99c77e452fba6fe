"""Live input: ``-`` reads raw samples from standard input; ``-o -`` writes the audio to standard output."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile

from iqsift.captures.audio_stream import to_pcm16, wav_stream_header

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_captures" / "vhf_airband.sigmf-data"  # ci16_le, 240 kS/s, centre 124.1 MHz
RATE = 240_000
READ = ["--format", "ci16_le", "--rate", "240k", "--center", "124.1M"]
CHANNEL = ["--freq", "124.025M", "--emission", "6K00A3E"]
AUDIO_RATE = 16_000
ON_AIR = 4 * RATE // 2
"""Byte offset 0.5 s into the sample capture, where the first channel's carrier is on."""


def on_air(seconds: float) -> bytes:
    """``seconds`` of the sample capture from 0.5 s."""
    return SAMPLE.read_bytes()[ON_AIR: ON_AIR + 4 * int(RATE * seconds)]


def iqsift(*args: str, **kwargs) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "iqsift", *args], cwd=ROOT, **kwargs)


def rss_kib(pid: int) -> int:
    """Resident set size of a process (Linux /proc/<pid>/status, VmRSS)."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    raise AssertionError("no VmRSS")


def file_audio(tmp_path: Path, data: bytes) -> np.ndarray:
    """The int16 audio of a demod of the same samples read from a file."""
    raw = tmp_path / "same.ci16"
    raw.write_bytes(data)
    out = tmp_path / "file.wav"
    subprocess.run([sys.executable, "-m", "iqsift", "demod", str(raw), *READ, *CHANNEL, "-o", str(out), "-q"],
                   cwd=ROOT, check=True, capture_output=True)
    audio, rate = soundfile.read(out, dtype="int16")
    assert rate == AUDIO_RATE
    return audio


def assert_same_audio(live: np.ndarray, ref: np.ndarray) -> None:
    """Equal sample for sample: every stage rounds the same whatever the block boundaries (before the
    block-invariant filters of dsp/gridfir, 0.1-0.15 % of the samples differed by one 16-bit step)."""
    assert live.shape == ref.shape
    assert np.array_equal(live, ref), f"{np.count_nonzero(live != ref)} of {ref.size} samples differ"


def test_irregular_writes_from_the_start_give_the_file_audio(tmp_path):
    """From the first sample (silence, then bursts: the carrier normaliser's hardest case) in writes of
    irregular sizes, most not whole samples: the audio bytes equal those of the same samples from a file."""
    data = SAMPLE.read_bytes()[: 4 * RATE * 3 // 2]
    proc = iqsift("demod", "-", *READ, *CHANNEL, "-o", "-", stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                  stderr=subprocess.PIPE)
    received = bytearray()
    thread = threading.Thread(target=lambda: received.extend(proc.stdout.read()))
    thread.start()
    sizes = np.random.default_rng(15).integers(1, 12_000, size=len(data) // 1000)
    start = 0
    for size in sizes:
        if start >= len(data):
            break
        proc.stdin.write(data[start:start + int(size)])
        proc.stdin.flush()
        start += int(size)
        if size % 7 == 0:
            time.sleep(0.003)  # now and then let the reader catch up: blocks of whatever has arrived
    proc.stdin.write(data[start:])
    proc.stdin.close()
    thread.join(timeout=60)
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=60) == 0, err
    live = np.frombuffer(bytes(received[44:]), "<i2")
    assert_same_audio(live, file_audio(tmp_path, data))  # whole audio, end included: both end here


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc for the memory figure")
def test_pipeline_small_writes_audio_latency_and_flat_memory(tmp_path):
    data = on_air(2.0)
    chunk = 4 * RATE // 50  # 20 ms of samples per write
    proc = iqsift("demod", "-", *READ, *CHANNEL, "-o", "-", stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                  stderr=subprocess.PIPE)
    arrivals: list[tuple[float, int]] = []  # (time, audio bytes so far)
    received = bytearray()

    def reader() -> None:
        fd = proc.stdout.fileno()
        while True:
            got = os.read(fd, 1 << 16)
            if not got:
                return
            received.extend(got)
            arrivals.append((time.monotonic(), len(received)))

    thread = threading.Thread(target=reader)
    thread.start()
    written: list[tuple[float, int]] = []  # (time, input samples written so far)
    rss: list[int] = []
    # part 1, in real time: 20 ms of samples every 20 ms (2 s)
    for start in range(0, len(data), chunk):
        proc.stdin.write(data[start:start + chunk])
        proc.stdin.flush()
        written.append((time.monotonic(), (start + chunk) // 4))
        time.sleep(0.02)
    # part 2, faster than real time, for the memory: the sample capture again and again (24 s)
    loop = SAMPLE.read_bytes()[: 4 * RATE * 8]
    for round_ in range(3):
        for start in range(0, len(loop), 8 * chunk):
            proc.stdin.write(loop[start:start + 8 * chunk])
            time.sleep(0.002)
        rss.append(rss_kib(proc.pid))
    proc.stdin.close()
    thread.join(timeout=60)
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=60) == 0, err
    # a WAV stream of unknown length: the header, then 16-bit samples
    assert bytes(received[:44]) == wav_stream_header(AUDIO_RATE)
    audio = np.frombuffer(bytes(received[44:]), "<i2")
    total_in = (len(data) + 3 * len(loop)) // 4
    assert audio.size == round(total_in * AUDIO_RATE / RATE)
    # the same samples from a file (which ends there: its last 0.1 s differ, faded and flushed)
    keep = len(data) // 4 * AUDIO_RATE // RATE - AUDIO_RATE // 10
    assert_same_audio(audio[:keep], file_audio(tmp_path, data)[:keep])
    # latency: when the audio of input sample n left, minus when sample n was written (part 1 only)
    times_in = np.array([t for t, _ in written])
    count_in = np.array([n for _, n in written])
    lags = []
    for t_out, nbytes in arrivals:
        n_audio = (nbytes - 44) // 2
        n_in = n_audio * RATE // AUDIO_RATE  # the input sample of the last audio sample out
        if n_audio <= 0 or n_in > count_in[-1]:
            continue
        lags.append(t_out - times_in[np.searchsorted(count_in, n_in)])
    lags_arr = np.array(lags)
    print(f"latency: median {np.median(lags_arr) * 1e3:.1f} ms, 95th percentile "
          f"{np.percentile(lags_arr, 95) * 1e3:.1f} ms over {lags_arr.size} reads; RSS after 8/16/24 s: {rss} KiB")
    assert lags_arr.size > 50
    assert np.median(lags_arr) <= 0.1
    # bounded memory: the resident size does not grow while the stream goes on
    assert rss[-1] - rss[0] < 8 * 1024, rss


def test_sigint_while_reading_keeps_the_outputs(tmp_path):
    out, report = tmp_path / "live.wav", tmp_path / "live.json"
    proc = iqsift("demod", "-", *READ, *CHANNEL, "-o", str(out), "--report", str(report), stdin=subprocess.PIPE,
                  stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    data = on_air(1.0)  # then the stream stays open
    proc.stdin.write(data)
    proc.stdin.flush()
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline and proc.poll() is None and not _pipe_empty(proc):
        time.sleep(0.1)  # until every sample written has been read
    time.sleep(1.0)  # and processed; the stream stays open
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err.decode()
    audio, rate = soundfile.read(out, dtype="int16")
    assert audio.size == AUDIO_RATE  # 1 s of input, 1 s of audio
    assert_same_audio(audio, file_audio(tmp_path, data))
    doc = json.loads(report.read_text())
    assert doc["capture"]["path"] == "-" and doc["capture"]["samples"] == RATE
    assert doc["selection"]["sample_count"] == RATE


def _pipe_empty(proc: subprocess.Popen) -> bool:
    """Whether the child has read all that was written to its stdin (FIONREAD on our end of the pipe)."""
    import fcntl
    import termios

    buf = bytearray(4)
    fcntl.ioctl(proc.stdin.fileno(), termios.FIONREAD, buf)
    return int.from_bytes(buf, sys.byteorder) == 0


def test_sigterm_while_reading_leaves_nothing(tmp_path):
    out = tmp_path / "live.wav"
    proc = iqsift("demod", "-", *READ, *CHANNEL, "-o", str(out), stdin=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdin.write(SAMPLE.read_bytes()[: 4 * RATE // 2])
    proc.stdin.flush()
    time.sleep(2.0)
    proc.send_signal(signal.SIGTERM)
    proc.communicate(timeout=60)
    assert proc.returncode == 143
    assert list(tmp_path.iterdir()) == []


def test_s16_and_end_of_input_and_other_commands(tmp_path):
    data = on_air(2.0)
    run = subprocess.run([sys.executable, "-m", "iqsift", "demod", "-", *READ, *CHANNEL, "-o", "-",
                          "--audio-format", "s16"], input=data, capture_output=True, cwd=ROOT, check=True)
    assert_same_audio(np.frombuffer(run.stdout, "<i2"), file_audio(tmp_path, data))
    assert b"audio      -" in run.stderr  # the summary goes to stderr: stdout carries the audio
    # info from standard input = info from the file (the statistics do not depend on the blocks' sizes
    # beyond float rounding)
    live = json.loads(subprocess.run([sys.executable, "-m", "iqsift", "info", "-", *READ, "--json"], input=data,
                                     capture_output=True, cwd=ROOT, check=True).stdout)
    raw = tmp_path / "same.ci16"
    raw.write_bytes(data)
    ref = json.loads(subprocess.run([sys.executable, "-m", "iqsift", "info", str(raw), *READ, "--json"],
                                    capture_output=True, cwd=ROOT, check=True).stdout)
    assert live["samples"] == ref["samples"] == 2 * RATE
    assert live["stats"]["rms_dbfs"] == pytest.approx(ref["stats"]["rms_dbfs"], abs=1e-9)
    measured = json.loads(subprocess.run([sys.executable, "-m", "iqsift", "measure", "-", *READ, *CHANNEL, "--json"],
                                         input=data, capture_output=True, cwd=ROOT, check=True).stdout)
    assert measured["carrier"]["frequency_hz"] == pytest.approx(124.025e6, abs=100)
    plan = tmp_path / "plan.toml"
    plan.write_text('[[channel]]\nname = "north"\nfreq = "124.025M"\nemission = "6K00A3E"\n')
    subprocess.run([sys.executable, "-m", "iqsift", "extract", "-", "--plan", str(plan), "--out-dir", str(tmp_path / "x"),
                    *READ, "-q"], input=data, capture_output=True, cwd=ROOT, check=True)
    extracted, _ = soundfile.read(tmp_path / "x" / "north.wav", dtype="int16")
    assert extracted.size == 2 * AUDIO_RATE


@pytest.mark.parametrize("args, words", [
    (["--rate", "240k"], "--format"),
    (["--format", "ci16_le"], "--rate"),
    ([*READ, "--start", "1"], "--start"),
])
def test_stdin_needs_format_and_rate(args, words):
    run = subprocess.run([sys.executable, "-m", "iqsift", "demod", "-", *args, *CHANNEL, "-o", "-"], input=b"",
                         capture_output=True, cwd=ROOT)
    assert run.returncode == 2
    lines = run.stderr.decode().strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and run.stdout == b""


def test_pcm16_conversion_matches_the_file_writer(tmp_path, rng):
    x = np.concatenate([rng.uniform(-1.2, 1.2, 10_000), [-1.0, 1.0, 0.5 / 32768, -0.5 / 32768, 0.0]]).astype(np.float32)
    path = tmp_path / "ref.wav"
    soundfile.write(path, x, AUDIO_RATE, subtype="PCM_16")  # libsndfile, the reference
    ref, _ = soundfile.read(path, dtype="int16")
    assert np.array_equal(to_pcm16(np.clip(x, -1, 1)), ref)


def test_survey_refuses_standard_input():
    run = subprocess.run([sys.executable, "-m", "iqsift", "survey", "-", *READ], input=b"\0" * 4000,
                         capture_output=True, cwd=ROOT)
    assert run.returncode == 2 and "standard input" in run.stderr.decode() and run.stderr.decode().count("\n") == 1
