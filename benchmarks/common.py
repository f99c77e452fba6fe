"""Shared helpers for the iqsift benchmarks: test captures, measured subprocesses, timing, printing.

The benchmarks are scripts, not tests: they print figures (throughput, peak memory, ratios) and
PASS/FAIL against the targets of the issues; they never fail a test run. See benchmarks/README.md.

Peak memory is measured per process: each measured part runs in its own child process, and a small
launcher collects that child's resource usage with ``os.wait4`` (Linux/BSD ``wait4(2)``; ``ru_maxrss``
is in KiB on Linux), so one part's peak never mixes with another's (``RUSAGE_CHILDREN`` would give
the maximum over all children waited for so far, and a child forked straight from the benchmark
process inherits the benchmark's own high-water mark — hence the launcher).

Test captures are invented: amplitude-modulated carriers (one sine tone each) plus complex white
Gaussian noise. The modulated part is periodic with a 10 ms period (24 000 samples at 2.4 MS/s; every
carrier and tone is a multiple of 100 Hz), so it is computed once and tiled; the noise is fresh
in every block. Captures are written block by block with :class:`iqsift.SigMFWriter` (bounded memory).
"""

from __future__ import annotations

import json
import math
import os
import platform
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

HERE = Path(__file__).resolve().parent
PYTHON = sys.executable
RATE_HZ = 2.4e6
PERIOD_SAMPLES = 24000
"""Samples in one period of the modulated part of a generated capture (10 ms at 2.4 MS/s)."""


# ----------------------------------------------------------------------------------------------
# Machine and printing
# ----------------------------------------------------------------------------------------------
def load_note() -> str:
    """One line describing the machine and its current load (the machine is shared)."""
    try:
        la = os.getloadavg()
        load = f"load average {la[0]:.2f} / {la[1]:.2f} / {la[2]:.2f} (1/5/15 min)"
    except OSError:
        load = "load average unavailable"
    return f"{platform.machine()}, {os.cpu_count()} CPUs, Python {platform.python_version()}, {load}"


def versions() -> str:
    import scipy

    import iqsift

    return f"iqsift {iqsift.__version__}, numpy {np.__version__}, scipy {scipy.__version__}"


def header(title: str) -> None:
    print("=" * 78)
    print(title)
    print("=" * 78)
    print("machine:", load_note())
    print("versions:", versions())


def verdict(ok: bool) -> str:
    return "PASS" if ok else "FAIL"


def mb(kib: float) -> float:
    """KiB (ru_maxrss on Linux) to MB (10^6 bytes)."""
    return kib * 1024 / 1e6


def table(rows: Sequence[Sequence[Any]], head: Sequence[str]) -> str:
    """Plain fixed-width table (right-aligned numbers)."""
    cells = [[str(h) for h in head]] + [[c if isinstance(c, str) else _fmt_num(c) for c in r] for r in rows]
    widths = [max(len(row[i]) for row in cells) for i in range(len(head))]
    lines = []
    for j, row in enumerate(cells):
        lines.append("  ".join(c.rjust(w) if j else c.rjust(w) for c, w in zip(row, widths)))
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)


def _fmt_num(v: Any) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        if v == 0:
            return "0"
        if abs(v) >= 100:
            return f"{v:.0f}"
        if abs(v) >= 10:
            return f"{v:.1f}"
        return f"{v:.2f}" if abs(v) >= 0.1 else f"{v:.3g}"
    return str(v)


# ----------------------------------------------------------------------------------------------
# Measured subprocesses
# ----------------------------------------------------------------------------------------------
@dataclass
class Measured:
    """A finished child process: wall time, peak resident set size, output."""

    args: list[str]
    wall_s: float
    peak_rss_kib: int
    returncode: int
    stdout: str
    stderr: str

    @property
    def peak_rss_mb(self) -> float:
        return mb(self.peak_rss_kib)

    def result(self) -> dict[str, Any]:
        """The JSON object printed on the last stdout line of a worker."""
        if self.returncode != 0:
            raise RuntimeError(
                f"benchmark child failed (exit {self.returncode}): {' '.join(self.args)}\n{self.stderr[-3000:]}"
            )
        for line in reversed(self.stdout.strip().splitlines()):
            if line.startswith("{"):
                return json.loads(line)
        raise RuntimeError(f"benchmark child printed no JSON result: {' '.join(self.args)}\n{self.stdout[-2000:]}")


# A minimal launcher: fork + exec the command, wait4 for it, write wall time and rusage to a file.
# Linux copies the parent's high-water RSS into a child at fork/exec (``ru_maxrss`` of a child
# started straight from this benchmark process would be at least this process's own peak, e.g. after
# generating a capture). Forking from this small, freshly started interpreter keeps that floor at a
# few MB, below any Python child's own peak.
_LAUNCHER = r"""
import json, os, sys, time
out = sys.argv[1]
start = time.perf_counter()
pid = os.fork()
if pid == 0:
    try:
        os.execvp(sys.argv[2], sys.argv[2:])
    finally:
        os._exit(127)
_, status, ru = os.wait4(pid, 0)
wall = time.perf_counter() - start
with open(out, "w") as fh:
    json.dump({"wall_s": wall, "maxrss_kib": ru.ru_maxrss, "code": os.waitstatus_to_exitcode(status)}, fh)
"""


def run_measured(args: Sequence[str], *, cwd: str | os.PathLike | None = None,
                 env: dict[str, str] | None = None) -> Measured:
    """Run ``args`` in a child process; return its wall-clock time and its own peak RSS.

    The child is started by a small launcher process (see ``_LAUNCHER``) so that its ``ru_maxrss``
    does not inherit this process's high-water mark. The wall time runs from the fork to the
    return of ``wait4`` in the launcher: it includes the child's interpreter start-up and imports.
    Output goes through temporary files (no pipe dead-locks on large outputs).
    """
    import tempfile

    args = [str(a) for a in args]
    with tempfile.TemporaryFile("w+") as out, tempfile.TemporaryFile("w+") as err, \
            tempfile.TemporaryDirectory() as tmp:
        report = Path(tmp) / "usage.json"
        proc = subprocess.run([PYTHON, "-I", "-S", "-c", _LAUNCHER, str(report), *args], stdout=out, stderr=err,
                              cwd=cwd, env=env)
        out.seek(0)
        err.seek(0)
        stdout, stderr = out.read(), err.read()
        if proc.returncode != 0 or not report.exists():
            raise RuntimeError(f"launcher failed (exit {proc.returncode}) for {' '.join(args)}: {stderr[-2000:]}")
        usage = json.loads(report.read_text())
        return Measured(args, usage["wall_s"], int(usage["maxrss_kib"]), int(usage["code"]), stdout, stderr)


def run_worker(script: str | os.PathLike, spec: dict[str, Any]) -> tuple[dict[str, Any], Measured]:
    """Run ``python script --worker '<json spec>'`` measured; return (its JSON result, the measurement)."""
    m = run_measured([PYTHON, str(script), "--worker", json.dumps(spec)])
    return m.result(), m


def worker_spec(argv: Sequence[str]) -> dict[str, Any] | None:
    """The spec if this process was started as a worker (``--worker JSON``), else None."""
    if len(argv) >= 3 and argv[1] == "--worker":
        return json.loads(argv[2])
    return None


def emit(result: dict[str, Any]) -> None:
    """Print a worker's result as the last stdout line."""
    sys.stdout.write(json.dumps(result) + "\n")
    sys.stdout.flush()


def baseline_rss() -> Measured:
    """Peak RSS of a child that only imports numpy, scipy.signal and iqsift (interpreter + libraries)."""
    return run_measured([PYTHON, "-c", "import numpy, scipy.signal, scipy.fft, iqsift"])


def self_peak_rss_kib() -> int:
    """Peak RSS of the calling process so far (KiB on Linux)."""
    import resource

    return int(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)


def cli_path() -> str:
    """The ``iqsift`` console script next to this interpreter (falls back to ``python -m iqsift``)."""
    exe = Path(PYTHON).with_name("iqsift")
    return str(exe) if exe.exists() else ""


def cli_args(*args: str) -> list[str]:
    exe = cli_path()
    return [exe, *args] if exe else [PYTHON, "-m", "iqsift", *args]


# ----------------------------------------------------------------------------------------------
# Test captures
# ----------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class AmCarrier:
    """An invented AM channel: carrier offset from the capture centre and modulating tone (Hz)."""

    offset_hz: float
    tone_hz: float


def raster(count: int, spacing_hz: float = 25e3, tone0_hz: float = 500.0) -> list[AmCarrier]:
    """``count`` AM channels on a ``spacing_hz`` raster centred on 0 Hz (invented channel plan).

    Offsets are ``(k - count//2) · spacing`` for ``k = 0 .. count-1``. Tones step by 100 Hz from
    ``tone0_hz`` through 25 values, so neighbouring channels carry different tones.
    """
    return [AmCarrier((k - count // 2) * spacing_hz, tone0_hz + 100.0 * (k % 25)) for k in range(count)]


def _check_periodic(carriers: Sequence[AmCarrier], rate_hz: float) -> None:
    step = rate_hz / PERIOD_SAMPLES
    for c in carriers:
        for f in (c.offset_hz, c.tone_hz):
            if abs(f / step - round(f / step)) > 1e-9:
                raise ValueError(f"frequency {f} Hz is not a multiple of {step} Hz (the tiled period)")


def modulated_period(carriers: Sequence[AmCarrier], amplitude: float, depth: float,
                     rate_hz: float = RATE_HZ) -> np.ndarray:
    """One period (PERIOD_SAMPLES) of the sum of the AM carriers, complex64.

    Each channel is ``A · (1 + m·cos(2π f_tone t + φ)) · exp(j(2π f_c t + θ))`` with invented
    phases; ``A`` is the carrier amplitude (full scale 1.0) and ``m`` the modulation depth.
    """
    _check_periodic(carriers, rate_hz)
    t = np.arange(PERIOD_SAMPLES) / rate_hz
    rng = np.random.default_rng(12345)
    out = np.zeros(PERIOD_SAMPLES, np.complex128)
    for c in carriers:
        phi, theta = rng.uniform(0, 2 * np.pi, 2)
        env = amplitude * (1.0 + depth * np.cos(2 * np.pi * c.tone_hz * t + phi))
        out += env * np.exp(1j * (2 * np.pi * c.offset_hz * t + theta))
    return out.astype(np.complex64)


def write_am_capture(
    stem: str | os.PathLike,
    seconds: float,
    carriers: Sequence[AmCarrier],
    *,
    rate_hz: float = RATE_HZ,
    carrier_dbfs: float | None = None,
    depth: float = 0.6,
    noise_dbfs: float = -50.0,
    datatype: str = "cf32_le",
    seed: int = 1,
    block_periods: int = 20,
) -> dict[str, Any]:
    """Write an invented AM capture block by block; return paths, sizes and the generation time.

    Parameters
    ----------
    carrier_dbfs : float, optional
        Carrier power of each channel (dBFS). Default: -20 dBFS for one channel, else the level that
        keeps the worst-case peak of the sum at -6 dBFS (no clipping for integer datatypes).
    noise_dbfs : float
        Total noise power over the whole capture band (dBFS); per 6 kHz channel it is
        10·log10(6 kHz / rate) lower (-26 dB at 2.4 MS/s).
    """
    from iqsift import SigMFWriter

    n_total = int(round(seconds * rate_hz))
    if carrier_dbfs is None:
        carrier_dbfs = -20.0 if len(carriers) == 1 else 20 * math.log10(0.5 / (len(carriers) * (1 + depth)))
    amplitude = 10 ** (carrier_dbfs / 20)
    period = modulated_period(carriers, amplitude, depth, rate_hz)
    block = np.tile(period, block_periods)
    sigma = np.float32(10 ** (noise_dbfs / 20) / math.sqrt(2))
    rng = np.random.default_rng(seed)
    start = time.perf_counter()
    writer = SigMFWriter(stem, rate_hz, datatype=datatype, force=True,
                         description=f"invented benchmark capture: {len(carriers)} AM channel(s) + noise")
    try:
        done = 0
        while done < n_total:
            n = min(block.size, n_total - done)
            noise = rng.standard_normal(2 * n, dtype=np.float32).view(np.complex64)
            noise *= sigma
            noise += block[:n]
            writer.write(noise)
            done += n
    except BaseException:
        writer.abort()
        raise
    writer.close()
    elapsed = time.perf_counter() - start
    return {
        "meta": str(writer.meta_path),
        "data": str(writer.data_path),
        "samples": n_total,
        "seconds": n_total / rate_hz,
        "bytes": os.path.getsize(writer.data_path),
        "generate_s": elapsed,
        "carrier_dbfs": carrier_dbfs,
        "noise_dbfs": noise_dbfs,
    }


# ----------------------------------------------------------------------------------------------
# Checks on the audio (that the benchmarked code did the job)
# ----------------------------------------------------------------------------------------------
def dominant_tone_hz(audio: np.ndarray, rate_hz: float, skip_s: float = 0.25, min_hz: float = 100.0) -> float | None:
    """Frequency of the strongest spectral line above ``min_hz`` (Hz), from a Hann-windowed FFT.

    Used only as a sanity check that a benchmarked chain recovered the modulating tone.
    """
    a = np.asarray(audio, dtype=np.float64)[int(skip_s * rate_hz):]
    if a.size < 256:
        return None
    a = a[: 1 << int(math.log2(a.size))]
    a = a - a.mean()
    spec = np.abs(np.fft.rfft(a * np.hanning(a.size)))
    freqs = np.fft.rfftfreq(a.size, 1 / rate_hz)
    spec[freqs < min_hz] = 0
    k = int(np.argmax(spec))
    if 0 < k < spec.size - 1:  # parabolic interpolation of the peak (common practice)
        y0, y1, y2 = np.log(spec[k - 1 : k + 2] + 1e-300)
        k = k + 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
    return float(k * rate_hz / a.size)


def tone_ok(measured: float | None, expected: float, tol_hz: float = 2.0) -> bool:
    return measured is not None and abs(measured - expected) <= tol_hz


class AudioKeeper:
    """Keeps the first ``seconds`` of a streamed audio channel (bounded) and counts the rest."""

    def __init__(self, rate_hz: float, seconds: float = 2.0) -> None:
        self.rate_hz = rate_hz
        self.limit = int(seconds * rate_hz)
        self.parts: list[np.ndarray] = []
        self.kept = 0
        self.count = 0

    def add(self, audio: np.ndarray) -> None:
        self.count += audio.size
        if self.kept < self.limit and audio.size:
            piece = audio[: self.limit - self.kept]
            self.parts.append(np.array(piece, copy=True))
            self.kept += piece.size

    def tone_hz(self) -> float | None:
        if not self.parts:
            return None
        return dominant_tone_hz(np.concatenate(self.parts), self.rate_hz)


# ----------------------------------------------------------------------------------------------
# Profiling
# ----------------------------------------------------------------------------------------------
def profile_call(func, *args, top: int = 25, **kwargs):
    """Run ``func`` under cProfile; print the top functions by own time and by cumulative time."""
    import cProfile
    import io
    import pstats

    prof = cProfile.Profile()
    prof.enable()
    try:
        result = func(*args, **kwargs)
    finally:
        prof.disable()
    for key in ("tottime", "cumulative"):
        buf = io.StringIO()
        pstats.Stats(prof, stream=buf).strip_dirs().sort_stats(key).print_stats(top)
        print(f"--- cProfile, sorted by {key} ---", file=sys.stderr)
        print(buf.getvalue(), file=sys.stderr)
    return result
