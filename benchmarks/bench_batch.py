"""bench_batch: `iqsift batch --workers 2` against a sequential loop of `iqsift extract` processes.

Four invented 20 s captures at 2.4 MS/s cf32 (two AM channels each, 25 kHz apart) are made by this
script (see common.write_am_capture). Timed as a user would run them, each a whole process from its
start: the loop runs `iqsift extract` once per capture, one after the other; `iqsift batch --workers 2`
does all four on a local Dask cluster of two worker processes, cluster start-up included. Printed: both
wall times, their ratio (target >= 1.6x on 2 cores), each capture's time inside its worker, and the peak
RSS of every worker process (from batch.jsonl: each worker reports its own high-water mark) beside the
peak RSS of one `iqsift extract` process. The outputs of both runs are compared file by file.

    python benchmarks/bench_batch.py [--seconds 20] [--captures 4] [--workers 2] [--repeat 1] [--keep]
"""

from __future__ import annotations

import argparse
import hashlib
import json
import shutil
import sys
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import common

TARGET_RATIO = 1.6
PLAN = ('[[channel]]\nname = "low"\noffset = "-25k"\nemission = "6K00A3E"\n\n'
        '[[channel]]\nname = "centre"\noffset = "0"\nemission = "6K00A3E"\n')


def digests(folder: Path) -> dict[str, str]:
    """SHA-256 of every audio file under ``folder`` (by path relative to it)."""
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*.wav"))}


def _epoch(utc: str) -> float:
    return datetime.strptime(utc, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=timezone.utc).timestamp()


def best_of(repeat: int, run):
    runs = [run(i) for i in range(max(1, repeat))]
    return min(runs, key=lambda m: m.wall_s)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=20.0, help="length of each capture (s)")
    ap.add_argument("--captures", type=int, default=4, help="number of captures")
    ap.add_argument("--workers", type=int, default=2, help="worker processes of the batch")
    ap.add_argument("--repeat", type=int, default=1, help="runs of each side; the fastest is kept")
    ap.add_argument("--workdir", default=None, help="parent of the temporary folder (default: system temp dir)")
    ap.add_argument("--keep", action="store_true", help="keep the generated captures and outputs")
    ap.add_argument("--strict", action="store_true", help="exit with status 1 if the target is missed")
    args = ap.parse_args(argv)

    common.header(f"bench_batch: iqsift batch --workers {args.workers} vs a loop of iqsift extract processes")
    if args.workdir:
        Path(args.workdir).mkdir(parents=True, exist_ok=True)
    workdir = Path(tempfile.mkdtemp(prefix="iqsift-bench-", dir=args.workdir))
    try:
        carriers = common.raster(2)
        metas, total_bytes, made_s = [], 0, 0.0
        for i in range(args.captures):
            cap = common.write_am_capture(workdir / f"capture{i + 1}", args.seconds, carriers, seed=i + 1)
            metas.append(cap["meta"])
            total_bytes += cap["bytes"]
            made_s += cap["generate_s"]
        plan = workdir / "plan.toml"
        plan.write_text(PLAN)
        print(f"captures: {args.captures} x {args.seconds:g} s at 2.4 MS/s cf32_le ({total_bytes / 1e9:.2f} GB in all), "
              f"2 AM channels each ({carriers[0].offset_hz / 1e3:+g} and {carriers[1].offset_hz / 1e3:+g} kHz); "
              f"written in {made_s:.1f} s")

        def sequential(run: int) -> common.Measured:
            out = workdir / f"sequential{run}"
            out.mkdir()
            walls, peak = 0.0, 0
            for meta in metas:
                m = common.run_measured(common.cli_args("extract", meta, "--plan", str(plan), "--out-dir",
                                                        str(out / Path(meta).stem), "-q"))
                if m.returncode != 0:
                    raise RuntimeError(f"iqsift extract failed: {m.stderr[-2000:]}")
                walls += m.wall_s
                peak = max(peak, m.peak_rss_kib)
            return common.Measured(["loop"], walls, peak, 0, str(out), "")

        def batch(run: int) -> common.Measured:
            out = workdir / f"batch{run}"
            m = common.run_measured(common.cli_args("batch", *metas, "--plan", str(plan), "--out-dir", str(out),
                                                    "--workers", str(args.workers), "-q"))
            if m.returncode != 0:
                raise RuntimeError(f"iqsift batch failed (exit {m.returncode}): {m.stderr[-2000:]}")
            m.stdout = str(out)
            return m

        seq = best_of(args.repeat, sequential)
        par = best_of(args.repeat, batch)
        lines = [json.loads(t) for t in (Path(par.stdout) / "batch.jsonl").read_text().splitlines()]
        same = digests(Path(seq.stdout)) == digests(Path(par.stdout))

        rows = [[line["stem"], line["worker"], line["timings"]["elapsed_s"], line["timings"]["processing_s"],
                 line["worker_peak_rss_mb"]] for line in lines]
        print(common.table(rows, ["capture", "worker", "task s", "streaming s", "worker peak RSS MB so far"]))
        per_worker: dict[str, float] = {}
        for line in lines:
            per_worker[line["worker"]] = max(per_worker.get(line["worker"], 0.0), line["worker_peak_rss_mb"])
        ratio = seq.wall_s / par.wall_s
        span_s = (max(_epoch(line["timings"]["finished_utc"]) for line in lines)
                  - min(_epoch(line["timings"]["started_utc"]) for line in lines))
        busy_s = sum(line["timings"]["elapsed_s"] for line in lines)
        print(f"sequential: {args.captures} iqsift extract processes, {seq.wall_s:.2f} s in all; "
              f"peak RSS of one {seq.peak_rss_mb:.0f} MB")
        print(f"batch:      one iqsift batch --workers {args.workers} process, {par.wall_s:.2f} s (cluster start-up "
              f"included); peak RSS per worker {', '.join(f'{v:.0f}' for v in per_worker.values())} MB; "
              f"the batch process and its children at most {par.peak_rss_mb:.0f} MB")
        captured_s = args.captures * args.seconds
        print(f"throughput: {captured_s / par.wall_s:.1f} s of capture per second "
              f"({captured_s / par.wall_s / len(per_worker):.1f} per worker), "
              f"{total_bytes / par.wall_s / 1e6:.0f} MB/s read")
        print(f"tasks: {span_s:.2f} s from the first start to the last finish, {busy_s:.2f} s of work in all: "
              f"{100 * busy_s / span_s / len(per_worker):.0f} % of {len(per_worker)} workers busy; the rest of the "
              f"{par.wall_s:.2f} s is start-up (imports, cluster) and shut-down")
        print(f"audio identical in both runs: {same}")
        ok = ratio >= TARGET_RATIO and same
        print(f"target: batch speed-up {ratio:.2f}x >= {TARGET_RATIO}x -> {common.verdict(ok)}")
        return 1 if args.strict and not ok else 0
    finally:
        if args.keep:
            print(f"kept: {workdir}")
        else:
            shutil.rmtree(workdir, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
