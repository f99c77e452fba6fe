"""Run every iqsift benchmark with modest defaults and collect the PASS/FAIL lines at the end.

Each benchmark runs as its own process (``make bench`` calls this script). Defaults are the sizes
the issues name (a 10 s capture for the single-channel and multi-channel benchmarks, a 4 GiB
capture for ``info``); ``--quick`` shrinks them for a smoke run (the figures are then not the
issues' figures). The exit status is 0 unless ``--strict`` and a target was missed.

Run: ``python benchmarks/run_all.py [--quick] [--workers 1] [--repeat 1] [--only demod,channels,info]``.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent

PLANS = {
    "demod": (["bench_demod.py"], ["--seconds", "10"], ["--seconds", "10", "--long-seconds", "20"]),
    "channels": (["bench_channels.py"], ["--seconds", "10"], ["--seconds", "4", "--plain-channels", "1"]),
    "info": (["bench_info_memory.py"], ["--gib", "4"], ["--gib", "1"]),
    "whole": (["bench_whole.py"], ["--seconds", "20"], ["--seconds", "4", "--repeat", "1"]),
}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="smaller captures (a smoke run, not the issues' sizes)")
    ap.add_argument("--workers", type=int, default=1, help="FFT threads (demod and channels benchmarks)")
    ap.add_argument("--repeat", type=int, default=1,
                    help="runs per measurement in the demod and channels benchmarks (the fastest is kept)")
    ap.add_argument("--only", default="demod,channels,info,whole", help="comma-separated subset to run")
    ap.add_argument("--workdir", default=None, help="folder for the generated captures (default: temp dirs)")
    ap.add_argument("--strict", action="store_true", help="exit with status 1 if any target is missed")
    args = ap.parse_args(argv)
    names = [n.strip() for n in args.only.split(",") if n.strip()]
    unknown = [n for n in names if n not in PLANS]
    if unknown:
        ap.error(f"--only: unknown benchmark(s) {unknown}; choose from {', '.join(PLANS)}")
    verdicts: list[str] = []
    started = time.perf_counter()
    failed_runs = []
    for name in names:
        script, full, quick = PLANS[name]
        cmd = [sys.executable, str(HERE / script[0]), *(quick if args.quick else full)]
        if name in ("demod", "channels"):
            cmd += ["--workers", str(args.workers), "--repeat", str(args.repeat)]
        if args.workdir:
            cmd += ["--workdir", args.workdir]
        print(f"\n$ {' '.join(cmd[1:])}", flush=True)
        proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, text=True)
        assert proc.stdout is not None
        for line in proc.stdout:
            sys.stdout.write(line)
            sys.stdout.flush()
            if line.startswith(("target:", "WARNING")):
                verdicts.append(f"[{name}] {line.rstrip()}")
        if proc.wait() != 0:
            failed_runs.append(name)
    print("\n" + "=" * 78)
    print(f"summary ({time.perf_counter() - started:.0f} s{', quick sizes' if args.quick else ''})")
    print("=" * 78)
    for v in verdicts:
        print(v)
    for name in failed_runs:
        print(f"[{name}] the benchmark itself failed (see its output above)")
    missed = any("FAIL" in v or "WARNING" in v for v in verdicts) or failed_runs
    return 1 if (args.strict and missed) else 0


if __name__ == "__main__":
    sys.exit(main())
