"""bench_split: one long capture through `batch` whole and with `--split-seconds`, on the same local cluster.

Give a capture and its plan (for instance 60 s at 2.4 MS/s made with `iqsift synth`). The library call
`iqsift.jobs.batch_files` runs on one local Dask cluster of ``--workers`` processes (one thread each), started
once and timed without its start-up: first the capture whole (one task), then cut into pieces of
``--split-seconds``. Printed: both wall times and their ratio, the pieces and back-end units, every worker's
peak resident memory after each run (a fresh cluster per run, so the peaks are each run's own), and whether
the two outputs are byte-identical (audio) and equal apart from timings (report).

    python benchmarks/bench_split.py CAPTURE PLAN [--split-seconds 10] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import resource
import shutil
import sys
import tempfile
import time
import warnings
from pathlib import Path


def peak_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def comparable(report: dict) -> dict:
    out = {k: v for k, v in report.items() if k not in ("processing_s", "elapsed_s", "input_throughput_msps",
                                                          "outputs")}
    out["channels"] = [{k: v for k, v in c.items() if k != "outputs"} for c in report["channels"]]
    return out


def run(capture: str, plan: str, out: Path, workers: int, split_seconds: float | None) -> tuple[float, dict, dict]:
    import dask
    from distributed import Client, LocalCluster

    from iqsift.jobs import batch_files

    with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}), \
            LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                         dashboard_address=None, memory_limit=None) as cluster, Client(cluster) as client:
        client.wait_for_workers(workers)
        t0 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = batch_files([capture], plan, out, client=client, split_seconds=split_seconds, force=True)
        wall = time.perf_counter() - t0
        peaks = client.run(peak_rss_mb)
    line = result.captures[0].to_dict()
    if line["status"] != "ok":
        raise SystemExit(f"bench_split: {line['error']}")
    return wall, line, peaks


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("capture")
    ap.add_argument("plan")
    ap.add_argument("--split-seconds", type=float, default=10.0)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--workdir", default=None)
    args = ap.parse_args(argv)
    work = Path(tempfile.mkdtemp(prefix="iqsift-bench-split-", dir=args.workdir))
    try:
        whole_s, whole, whole_peaks = run(args.capture, args.plan, work / "whole", args.workers, None)
        split_s, split, split_peaks = run(args.capture, args.plan, work / "split", args.workers, args.split_seconds)
        stem = whole["stem"]
        same_audio = all((work / "whole" / stem / p.name).read_bytes() == p.read_bytes()
                         for p in (work / "split" / stem).glob("*.wav"))
        reports = [json.loads((work / side / stem / "report.json").read_text()) for side in ("whole", "split")]
        same_report = comparable(reports[0]) == comparable(reports[1])
        capture_s = whole["timings"]["capture_s"]
        print(f"capture: {args.capture} ({capture_s:.1f} s, {whole['channels']} channels), {args.workers} workers")
        print(f"whole:  {whole_s:7.2f} s  (one task)   worker peak RSS MB: "
              + ", ".join(f"{v:.0f}" for v in whole_peaks.values()))
        print(f"split:  {split_s:7.2f} s  ({split['split']['pieces']} pieces of {split['split']['piece_samples']} "
              f"samples, {split['split']['units']} back-end units)   worker peak RSS MB: "
              + ", ".join(f"{v:.0f}" for v in split_peaks.values()))
        print(f"speed-up: {whole_s / split_s:.2f}x; audio byte-identical: {same_audio}; report equal: {same_report}")
        return 0 if same_audio and same_report else 1
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
