"""SIGINT and SIGTERM: exit status 130/143, one line on stderr, no traceback, nothing left behind.

The runs are real processes (``sys.executable -m iqsift``, not a shell background job, which would
ignore SIGINT) over a large sparse raw capture: a 2 GB file of zeros costs no disk and reads fast, so
a run is still busy when the signal comes. 130 and 143 are 128 + the signal number, the status POSIX
shells report for a process ended by that signal.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path
from typing import Callable, Iterator

import numpy as np
import pytest

from iqsift.captures import OutputSet, signals_deferred
from iqsift.cli import main

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="signals and /proc as on Linux")

PLAN = """
[[channel]]
name = "low"
offset = "-100k"
bandwidth = "6k"

[[channel]]
name = "high"
offset = "200k"
bandwidth = "6k"
"""
RAW = ("--format", "cf32_le", "--rate", "2.4M")
WAIT_S = 60.0  # generous: the machine is shared; a run normally gets there in about a second


@pytest.fixture
def big_capture(tmp_path: Path) -> Path:
    """A sparse 2 GB cf32 file (zeros: 268 M samples, about 110 s at 2.4 MS/s) and a plan of two channels."""
    path = tmp_path / "big.cf32"
    with open(path, "wb") as handle:
        handle.truncate(2 << 30)
    (tmp_path / "plan.toml").write_text(PLAN)
    return path


def as_from_a_terminal() -> None:
    """SIGINT as a foreground shell leaves it: a suite started as a background job inherits it ignored."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def start(tmp_path: Path, *args: str) -> subprocess.Popen[bytes]:
    return subprocess.Popen([sys.executable, "-m", "iqsift", *args], cwd=tmp_path,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, preexec_fn=as_from_a_terminal)


@pytest.fixture
def python_sigint() -> Iterator[None]:
    """Python's own SIGINT handler (KeyboardInterrupt), which a process started with SIGINT ignored lacks."""
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    yield
    signal.signal(signal.SIGINT, previous)


def wait_for(process: subprocess.Popen[bytes], condition: Callable[[], bool], what: str) -> None:
    """Poll ``condition`` until it holds; fail (and stop the process) if the run ends or time runs out first."""
    deadline = time.monotonic() + WAIT_S
    while not condition():
        if process.poll() is not None or time.monotonic() > deadline:
            process.kill()
            out, err = process.communicate()
            pytest.fail(f"never saw {what}; status {process.returncode}, stderr {err.decode()!r}")
        time.sleep(0.002)


def stop(process: subprocess.Popen[bytes], signum: int) -> tuple[int, str, str]:
    process.send_signal(signum)
    out, err = process.communicate(timeout=WAIT_S)
    return process.returncode, out.decode(), err.decode()


def part_files(folder: Path) -> list[Path]:
    return [p for p in folder.rglob("*") if ".part" in p.name]


def assert_interrupted(result: tuple[int, str, str], signum: int) -> None:
    status, out, err = result
    name = signal.Signals(signum).name
    assert "Traceback" not in err, err
    assert err == f"iqsift: interrupted by {name}\n", err  # exactly one line
    assert out == ""
    assert status == 128 + signum  # 130 for SIGINT, 143 for SIGTERM


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_extract_interrupted_leaves_nothing(tmp_path, big_capture, signum):
    before = sorted(tmp_path.iterdir())
    out_dir = tmp_path / "out"
    process = start(tmp_path, "extract", big_capture.name, *RAW, "--plan", "plan.toml", "--out-dir", "out")
    wait_for(process, lambda: bool(out_dir.is_dir() and part_files(out_dir)), "a .part file in the output folder")
    assert_interrupted(stop(process, signum), signum)
    assert not out_dir.exists()  # the folder the run made is gone with its temporary files
    assert sorted(tmp_path.iterdir()) == before
    assert part_files(tmp_path) == []


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_demod_interrupted_leaves_nothing(tmp_path, big_capture, signum):
    before = sorted(tmp_path.iterdir())
    process = start(tmp_path, "demod", big_capture.name, *RAW, "--offset", "10k", "-o", "a.wav",
                    "--baseband", "bb.sigmf-meta", "--report", "r.json")
    wait_for(process, lambda: len(part_files(tmp_path)) >= 4, "the .part files of audio, baseband and report")
    assert_interrupted(stop(process, signum), signum)
    assert sorted(tmp_path.iterdir()) == before  # no output, no hidden temporary file


def test_spectra_folders_removed_when_interrupted_while_plotting(tmp_path):
    # small enough to reach the plots at once: the signal comes while the spectra folders fill
    capture = tmp_path / "small.cf32"
    noise = np.random.default_rng(1).standard_normal(2 << 20).astype(np.float32) * 0.01  # 1 M samples
    capture.write_bytes(noise.tobytes())
    (tmp_path / "plan.toml").write_text(PLAN)
    before = sorted(tmp_path.iterdir())

    process = start(tmp_path, "demod", capture.name, *RAW, "--offset", "10k", "-o", "a.wav", "--spectra", "sp")
    wait_for(process, lambda: bool((tmp_path / "sp").is_dir() and part_files(tmp_path / "sp")),
             "a .part file in the demod --spectra folder")
    assert_interrupted(stop(process, signal.SIGINT), signal.SIGINT)
    assert sorted(tmp_path.iterdir()) == before

    process = start(tmp_path, "extract", capture.name, *RAW, "--plan", "plan.toml", "--out-dir", "out", "--spectra")
    spectra = tmp_path / "out" / "spectra"
    wait_for(process, lambda: bool(spectra.is_dir() and part_files(spectra)), "a .part file under out/spectra/")
    assert_interrupted(stop(process, signal.SIGTERM), signal.SIGTERM)
    assert sorted(tmp_path.iterdir()) == before  # out/, out/spectra/ and out/spectra/<name>/ all gone


def test_existing_folder_is_kept(tmp_path, big_capture):
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    (out_dir / "notes.txt").write_text("mine")
    process = start(tmp_path, "extract", big_capture.name, *RAW, "--plan", "plan.toml", "--out-dir", "out")
    wait_for(process, lambda: bool(part_files(out_dir)), "a .part file in the output folder")
    assert_interrupted(stop(process, signal.SIGINT), signal.SIGINT)
    assert sorted(p.name for p in out_dir.iterdir()) == ["notes.txt"]


# -- start-up ---------------------------------------------------------------------------------------
def _caught_signals(pid: int) -> int:
    """The mask of signals the process has handlers for (``SigCgt`` in /proc/PID/status)."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("SigCgt:"):
            return int(line.split()[1], 16)
    return 0


def _handlers_installed(pid: int) -> bool:
    # Python itself never catches SIGTERM: once it is caught, iqsift's main() has begun
    return bool(_caught_signals(pid) & (1 << (signal.SIGTERM - 1)))


def _mapped(pid: int, fragment: str) -> bool:
    """Whether a shared library whose path holds ``fragment`` is loaded (numpy's or scipy's extensions)."""
    return fragment in Path(f"/proc/{pid}/maps").read_text()


def _reading(pid: int, path: Path) -> bool:
    for fd in Path(f"/proc/{pid}/fd").iterdir():
        try:
            if Path(os.readlink(fd)) == path:
                return True
        except OSError:  # closed meanwhile
            pass
    return False


@pytest.mark.parametrize("moment", ["handlers", "handlers+50ms", "numpy", "scipy", "reading"])
def test_sigint_during_start_up(tmp_path, big_capture, moment):
    """SIGINT while typer, the command, numpy and scipy load, and as the capture opens: no traceback, 130."""
    process = start(tmp_path, "demod", big_capture.name, *RAW, "--offset", "10k", "-o", "a.wav")
    pid = process.pid
    wait_for(process, lambda: _handlers_installed(pid), "iqsift's signal handlers")
    if moment == "handlers+50ms":
        time.sleep(0.05)
    elif moment in ("numpy", "scipy"):
        wait_for(process, lambda: _mapped(pid, f"/{moment}/"), f"{moment} loading")
    elif moment == "reading":
        wait_for(process, lambda: _reading(pid, big_capture), "the capture being read")
    assert_interrupted(stop(process, signal.SIGINT), signal.SIGINT)
    assert part_files(tmp_path) == [] and not (tmp_path / "a.wav").exists()


# -- in-process -------------------------------------------------------------------------------------
def test_main_maps_a_signal_and_restores_the_handlers(run_cli, tmp_path, monkeypatch):
    """A signal during a command: status 130/143, one line; afterwards the caller's handlers are back."""
    import iqsift.jobs

    def interrupted_job(*args, **kwargs):
        os.kill(os.getpid(), signal.SIGTERM)
        time.sleep(1)  # the handler raises before this ends
        raise AssertionError("not interrupted")

    monkeypatch.setattr(iqsift.jobs, "info_file", interrupted_job)
    handlers = {s: signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM)}
    status, out, err = run_cli("info", tmp_path / "x.cf32", *RAW)
    assert (status, out, err) == (143, "", "iqsift: interrupted by SIGTERM\n")
    assert {s: signal.getsignal(s) for s in handlers} == handlers
    assert main(["--version"]) == 0 and {s: signal.getsignal(s) for s in handlers} == handlers


def test_signals_deferred_holds_a_signal_until_the_block_ends(python_sigint):
    done = []
    with pytest.raises(KeyboardInterrupt):
        with signals_deferred():
            os.kill(os.getpid(), signal.SIGINT)  # Python's default handler: KeyboardInterrupt, once delivered
            time.sleep(0.05)
            done.append("the whole block")
    assert done == ["the whole block"]


def test_commit_is_never_half_done(tmp_path, monkeypatch, python_sigint):
    """A signal during the renames of a commit acts only after the last one."""
    outputs = OutputSet()
    for name in ("a", "b", "c"):
        outputs.reserve(tmp_path / name).write_text(name)
    real_replace = os.replace
    renames = []

    def replace_then_signal(src, dst):
        real_replace(src, dst)
        renames.append(dst)
        if len(renames) == 1:
            os.kill(os.getpid(), signal.SIGINT)

    monkeypatch.setattr(os, "replace", replace_then_signal)
    with pytest.raises(KeyboardInterrupt):
        outputs.commit()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a", "b", "c"]


def test_output_set_removes_the_folders_it_made(tmp_path):
    keep = tmp_path / "existing"
    keep.mkdir()
    with pytest.raises(KeyboardInterrupt):
        with OutputSet() as outputs:
            outputs.make_folder(tmp_path / "out")
            outputs.make_folder(tmp_path / "out" / "spectra" / "ch1", parents=True)
            outputs.make_folder(keep)  # existed: not the set's to remove
            outputs.reserve(tmp_path / "out" / "spectra" / "ch1" / "p.png").write_text("x")
            outputs.reserve(keep / "k.wav")
            raise KeyboardInterrupt
    assert sorted(p.name for p in tmp_path.iterdir()) == ["existing"]
    assert list(keep.iterdir()) == []

    with pytest.raises(RuntimeError):  # a folder someone else filled meanwhile stays
        with OutputSet() as outputs:
            outputs.make_folder(tmp_path / "shared")
            (tmp_path / "shared" / "theirs.txt").write_text("x")
            raise RuntimeError
    assert [p.name for p in (tmp_path / "shared").iterdir()] == ["theirs.txt"]

    with OutputSet() as outputs:  # a finished job keeps its folders
        outputs.make_folder(tmp_path / "done" / "sub", parents=True)
        outputs.reserve(tmp_path / "done" / "sub" / "f.txt").write_text("x")
    assert (tmp_path / "done" / "sub" / "f.txt").read_text() == "x"


def test_make_folder_refusals(tmp_path):
    (tmp_path / "file").write_text("x")
    outputs = OutputSet()
    with pytest.raises(ValueError, match="exists and is not a folder"):
        outputs.make_folder(tmp_path / "file")
    with pytest.raises(ValueError, match="does not exist"):
        outputs.make_folder(tmp_path / "missing" / "sub")
    with pytest.raises(ValueError, match="exists and is not a folder"):
        outputs.make_folder(tmp_path / "file" / "sub", parents=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["file"]
