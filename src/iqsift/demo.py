"""The Quick start demo (``make demo``): survey a sample capture, then extract every channel found.

Run as ``python -m iqsift.demo [--out DIR]``. It prints each iqsift command before running it,
so the output doubles as a tutorial, and ends with where the results are.
"""

from __future__ import annotations

import argparse
import json
import shlex
import time
from pathlib import Path

from .cli import main as cli_main

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample_captures"


def _run(args: list[str]) -> None:
    shown = " ".join(shlex.quote(a) for a in ["iqsift", *args])
    print(f"\n$ {shown}", flush=True)
    status = cli_main(args)
    if status != 0:
        raise SystemExit(status)


def run(out: Path, samples: Path = SAMPLES) -> int:
    """Survey and extract both sample captures into ``out``."""
    started = time.perf_counter()
    out.mkdir(parents=True, exist_ok=True)
    jobs = [("vhf_airband", ["--raster", "8.33k"]), ("hf_segment", [])]
    for name, survey_options in jobs:
        capture = samples / f"{name}.sigmf-meta"
        if not capture.exists():
            print(f"iqsift demo: {capture} is missing; run from a full clone of the repository")
            return 2
        plan = out / f"{name}_plan.toml"
        folder = out / name
        _run(["survey", str(capture), *survey_options, "--plan-out", str(plan), "--force"])
        _run(["extract", str(capture), "--plan", str(plan), "--out-dir", str(folder), "--spectra", "--force",
              "--quiet"])
    elapsed = time.perf_counter() - started
    print(f"\nDemo finished in {elapsed:.1f} s. What it wrote:")
    for name, _ in jobs:
        folder = out / name
        report = json.loads((folder / "report.json").read_text())
        print(f"  {folder}/")
        for ch in report["channels"]:
            c = ch["channel"]
            carrier = ch.get("carrier") or {}
            err = carrier.get("error_hz")
            err_text = "" if err is None else f", carrier error {err:+.1f} Hz"
            print(f"    {Path(ch['outputs']['audio']).name:<22} {c['mode']:<8} {c['frequency_hz'] / 1e6:.6f} MHz, "
                  f"{len(ch.get('activity') or [])} active segment(s){err_text}")
        print(f"    report.json, spectra/<channel>/overview.png (stage spectra), plan: {out / (name + '_plan.toml')}")
    print("\nListen to the .wav files, open the overview.png figures, or read report.json.")
    return 0


def main() -> int:
    parser = argparse.ArgumentParser(prog="python -m iqsift.demo", description=__doc__)
    parser.add_argument("--out", type=Path, default=Path("demo_output"), help="output folder (default demo_output)")
    args = parser.parse_args()
    return run(args.out)


if __name__ == "__main__":
    raise SystemExit(main())
