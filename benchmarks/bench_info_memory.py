"""``iqsift info`` on a large ci16 capture: peak memory (target < 300 MB) and throughput.

The capture (default 4 GiB of ci16_le at 2.4 MS/s, about 7.5 minutes) is written quickly:

* ``--fill pattern`` (default): one 4 MiB block (an invented AM carrier + noise, quantised to ci16)
  is written over and over with :class:`iqsift.SigMFWriter` (which also computes the SHA-512);
* ``--fill sparse``: the data file is a sparse file (a hole: all zeros, no disk blocks) and the
  metadata is written directly (no ``core:sha512``, which SigMF makes optional). Seconds to create,
  but the statistics are those of silence.

Then ``iqsift info CAPTURE --json --quiet`` runs in a child process; the script prints its wall time
(interpreter start-up included), input throughput (samples / wall time, MS/s and MB/s of file) and
peak RSS, and checks the sample count it reports. The capture was just written, so with enough RAM
the read comes from the page cache (a warm-cache figure; the sparse file never touches the disk).

Run: ``python benchmarks/bench_info_memory.py [--gib 4] [--fill pattern|sparse]``.
"""

from __future__ import annotations

import argparse
import json
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import common  # noqa: E402

TARGET_RSS_MB = 300.0
BYTES_PER_SAMPLE = 4  # ci16: two int16 components


def write_pattern(stem: Path, samples: int, rate_hz: float) -> float:
    """Repeat one 2^20-sample block (AM carrier + noise) up to ``samples``; returns seconds taken."""
    from iqsift import SigMFWriter

    block_len = 1 << 20
    t = np.arange(block_len) / rate_hz
    rng = np.random.default_rng(7)
    # invented: carrier at +300 kHz (-12 dBFS), 60 % 1 kHz tone, noise at -40 dBFS
    block = 0.25 * (1 + 0.6 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * 300e3 * t)
    block = block + 0.01 / np.sqrt(2) * (rng.standard_normal(block_len) + 1j * rng.standard_normal(block_len))
    block = block.astype(np.complex64)
    start = time.perf_counter()
    writer = SigMFWriter(stem, rate_hz, datatype="ci16_le", force=True,
                         description="invented benchmark capture: a repeated 2^20-sample block")
    try:
        done = 0
        while done < samples:
            n = min(block_len, samples - done)
            writer.write(block[:n])
            done += n
    except BaseException:
        writer.abort()
        raise
    writer.close()
    return time.perf_counter() - start


def write_sparse(stem: Path, samples: int, rate_hz: float) -> float:
    """A sparse all-zero ci16 data file plus minimal SigMF metadata; returns seconds taken."""
    from iqsift.captures import SIGMF_VERSION, sigmf_paths

    start = time.perf_counter()
    meta_path, data_path = sigmf_paths(stem)
    with open(data_path, "wb") as fh:
        fh.truncate(samples * BYTES_PER_SAMPLE)
    meta = {
        "global": {"core:datatype": "ci16_le", "core:sample_rate": rate_hz, "core:version": SIGMF_VERSION,
                   "core:description": "invented benchmark capture: a sparse (all-zero) data file"},
        "captures": [{"core:sample_start": 0}],
        "annotations": [],
    }
    meta_path.write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")
    return time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--gib", type=float, default=4.0, help="data file size in GiB (default 4)")
    ap.add_argument("--fill", choices=("pattern", "sparse"), default="pattern")
    ap.add_argument("--workdir", default=None,
                    help="parent folder for the temporary capture folder (default: the system temp dir)")
    ap.add_argument("--keep", action="store_true", help="keep the capture")
    ap.add_argument("--strict", action="store_true", help="exit with status 1 if the target is missed")
    args = ap.parse_args(argv)

    common.header("bench_info_memory: `iqsift info` on a large ci16 capture")
    rate = common.RATE_HZ
    samples = int(args.gib * (1 << 30)) // BYTES_PER_SAMPLE
    if args.workdir:
        Path(args.workdir).mkdir(parents=True, exist_ok=True)
    workdir = Path(tempfile.mkdtemp(prefix="iqsift-bench-", dir=args.workdir))
    free = shutil.disk_usage(workdir).free
    if args.fill == "pattern" and free < samples * BYTES_PER_SAMPLE * 1.1:
        print(f"not enough disk space in {workdir}: {free / 2**30:.1f} GiB free; use --fill sparse or --gib")
        workdir.rmdir()
        return 1 if args.strict else 0
    failed = False
    try:
        stem = workdir / f"info_{args.gib:g}gib"
        gen = (write_pattern if args.fill == "pattern" else write_sparse)(stem, samples, rate)
        data = Path(str(stem) + ".sigmf-data")
        size = data.stat().st_size
        on_disk = data.stat().st_blocks * 512
        print(f"capture: {size / 2**30:.2f} GiB ci16_le ({samples / 1e6:.0f} M samples, {samples / rate:.0f} s "
              f"at 2.4 MS/s), fill={args.fill}, {on_disk / 2**30:.2f} GiB allocated on disk; written in {gen:.1f} s")
        start_up = common.run_measured(common.cli_args("--help"))
        m = common.run_measured(common.cli_args("info", str(stem) + ".sigmf-meta", "--json", "--quiet"))
        if m.returncode != 0:
            print(f"iqsift info failed (exit {m.returncode}): {m.stderr.strip()[-800:]}")
            return 1 if args.strict else 0
        result = json.loads(m.stdout)
        counted = result.get("samples")
        stats = result.get("stats", {})
        rows = [
            ["`iqsift --help` (start-up alone)", start_up.wall_s, None, None, start_up.peak_rss_mb],
            ["`iqsift info --json --quiet`", m.wall_s, samples / m.wall_s / 1e6, size / m.wall_s / 1e6,
             m.peak_rss_mb],
        ]
        print(common.table(rows, ["process", "wall s", "MS/s", "MB/s of file", "peak RSS MB"]))
        print(f"info reported {counted} samples (expected {samples}), RMS "
              f"{stats.get('rms_dbfs')} dBFS, peak {stats.get('peak_dbfs')} dBFS, "
              f"clipped {stats.get('clipped_samples')}")
        if counted != samples:
            print("WARNING: the sample count disagrees")
            failed = True
        ok = m.peak_rss_mb < TARGET_RSS_MB
        failed |= not ok
        print(f"target: peak RSS of `iqsift info` on a {size / 2**30:.2f} GiB capture < {TARGET_RSS_MB:g} MB: "
              f"{m.peak_rss_mb:.0f} MB  {common.verdict(ok)}")
        print("machine after:", common.load_note())
    finally:
        if args.keep:
            print(f"capture kept in {workdir}")
        else:
            shutil.rmtree(workdir, ignore_errors=True)
    return 1 if (failed and args.strict) else 0


if __name__ == "__main__":
    sys.exit(main())
