"""Whole-process times of every command beside the references a user compares them with.

On one invented capture (default 20 s of 2.4 MS/s cf32, one AM carrier at +125 kHz, -20 dBFS, over
-50 dBFS noise), in the same run:

* references: a dd-style read of the data file (1 MiB reads, nothing done), a numpy one-pass power
  computation (interpreter start-up included), the bare interpreter + numpy start-up, and the plain
  numpy/scipy demodulation recipe (see README, "The plain recipe") as a whole process;
* ``iqsift --help``, ``info``, ``demod``, ``demod --spectra``, ``survey`` as whole processes: median
  wall time of ``--repeat`` runs and peak RSS (``wait4``), on every CPU and pinned to one CPU
  (``taskset -c 0``, when available) to show what the second core brings.

The captured file is read from the page cache (it was just written): warm-cache figures.
Targets (issue "Speed of the whole process"): --help <= 0.3 s; demod >= 10x the plain recipe;
info <= 0.8 s; survey <= 2 s; demod --spectra <= 2x demod; peak RSS <= 250 MB everywhere.

Run: ``python benchmarks/bench_whole.py [--seconds 20] [--repeat 3] [--no-single-core]``.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import sys
import tempfile
from pathlib import Path

import common

PYTHON = common.PYTHON

POWER_SCRIPT = """
import sys, numpy as np
acc, n = 0.0, 0
with open(sys.argv[1], 'rb') as fh:
    while True:
        x = np.fromfile(fh, np.complex64, 1 << 21)
        if not x.size:
            break
        acc += float(np.vdot(x, x).real); n += x.size
print(10 * np.log10(acc / n))
"""

READ_SCRIPT = """
import sys
with open(sys.argv[1], 'rb', buffering=0) as fh:
    buf = bytearray(1 << 20)
    while fh.readinto(buf):
        pass
"""

RECIPE_SCRIPT = """
import sys, numpy as np, scipy.signal
path, rate, f = sys.argv[1], float(sys.argv[2]), float(sys.argv[3])
x = np.fromfile(path, np.complex64)
y = x * np.exp(-2j * np.pi * f * np.arange(x.size) / rate)
audio = np.abs(scipy.signal.resample_poly(y, 1, 150))
print(audio.size)
"""


def timed(args: list[str], repeat: int, pin: bool) -> tuple[float, float, int]:
    """(median wall s, peak RSS MB over the runs, last exit status) of ``repeat`` whole-process runs."""
    if pin:
        args = ["taskset", "-c", "0", *args]
    walls, peaks, code = [], [], 0
    for _ in range(repeat):
        m = common.run_measured(args)
        walls.append(m.wall_s)
        peaks.append(m.peak_rss_mb)
        code = m.returncode
        if code != 0:
            print(f"  (exit {code}: {' '.join(args)}: {m.stderr.strip()[-300:]})")
    return statistics.median(walls), max(peaks), code


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seconds", type=float, default=20.0, help="capture length (s) at 2.4 MS/s cf32")
    ap.add_argument("--repeat", type=int, default=3, help="runs per figure (the median is printed)")
    ap.add_argument("--no-single-core", action="store_true", help="skip the runs pinned to one CPU")
    ap.add_argument("--workdir", default=None, help="parent folder of the temporary capture")
    ap.add_argument("--keep", action="store_true", help="keep the generated capture")
    args = ap.parse_args(argv)
    common.header(f"whole-process times on a {args.seconds:g} s, 2.4 MS/s cf32 capture")
    tmp = Path(tempfile.mkdtemp(prefix="iqsift-whole-", dir=args.workdir))
    try:
        cap = common.write_am_capture(tmp / "whole", args.seconds, [common.AmCarrier(125e3, 1000.0)])
        meta, data = cap["meta"], cap["data"]
        print(f"capture: {cap['samples']} samples, {cap['bytes'] / 1e6:.0f} MB, written in {cap['generate_s']:.1f} s")
        out = tmp / "out"
        out.mkdir()
        demod = ["demod", meta, "--offset", "125k", "-e", "6K00A3E", "-o", str(out / "a.wav"), "--force", "-q"]
        jobs: list[tuple[str, list[str]]] = [
            ("ref: read the file (1 MiB reads)", [PYTHON, "-c", READ_SCRIPT, data]),
            ("ref: numpy one-pass power", [PYTHON, "-c", POWER_SCRIPT, data]),
            ("ref: interpreter + numpy start-up", [PYTHON, "-c", "import numpy"]),
            ("ref: plain numpy/scipy recipe", [PYTHON, "-c", RECIPE_SCRIPT, data, "2.4e6", "125e3"]),
            ("iqsift --help", common.cli_args("--help")),
            ("iqsift info", common.cli_args("info", meta)),
            ("iqsift demod", common.cli_args(*demod)),
            ("iqsift demod --spectra", common.cli_args(*demod, "--spectra", str(out / "spectra"))),
            ("iqsift survey", common.cli_args("survey", meta)),
        ]
        pinned = not args.no_single_core and shutil.which("taskset") is not None
        rows, fig = [], {}
        for name, cmd in jobs:
            wall, peak, _ = timed(cmd, args.repeat, False)
            wall1 = timed(cmd, args.repeat, True)[0] if pinned and not name.startswith("ref: plain") else None
            fig[name] = (wall, peak)
            rate = cap["samples"] / wall / 1e6 if name in ("iqsift info", "iqsift demod", "iqsift survey") else None
            rows.append([name, wall, wall1, None if wall1 is None else wall1 / wall, rate, peak])
        print()
        print(common.table(rows, ["whole process", "wall s (all CPUs)", "wall s (1 CPU)", "1 CPU / all",
                                  "MS/s", "peak RSS MB"]))
        print("(median of", args.repeat, "runs each; the machine may be shared: compare ratios within this run)")
        demod_s, recipe_s = fig["iqsift demod"][0], fig["ref: plain numpy/scipy recipe"][0]
        checks = [
            ("--help <= 0.3 s", fig["iqsift --help"][0], fig["iqsift --help"][0] <= 0.3),
            ("demod >= 10x the plain recipe (x)", recipe_s / demod_s, recipe_s / demod_s >= 10),
            ("info <= 0.8 s", fig["iqsift info"][0], fig["iqsift info"][0] <= 0.8),
            ("survey <= 2 s", fig["iqsift survey"][0], fig["iqsift survey"][0] <= 2.0),
            ("demod --spectra <= 2x demod (x)", fig["iqsift demod --spectra"][0] / demod_s,
             fig["iqsift demod --spectra"][0] / demod_s <= 2.0),
        ]
        worst = max(p for n, (_, p) in fig.items() if n.startswith("iqsift"))
        checks.append(("peak RSS <= 250 MB, every command (MB)", worst, worst <= 250))
        print()
        for label, value, ok in checks:
            print(f"target: {label}: {float(value):.3g} {common.verdict(ok)}")
        print("machine after:", common.load_note())
    finally:
        if not args.keep:
            shutil.rmtree(tmp, ignore_errors=True)
        else:
            print("kept:", tmp)
    return 0


if __name__ == "__main__":
    sys.exit(main())
