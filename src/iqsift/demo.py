"""The Quick start demo (``make demo``): show the main job on a small capture.

Run as ``python -m iqsift.demo --out DIR``.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from .captures import SigMFWriter
from .cli import main as cli_main


def _demo_capture(path: Path) -> Path:
    """A 0.5 s, 250 kS/s capture: one invented AM carrier 40 kHz above centre, 1 kHz tone, m = 0.5, in noise."""
    rate, n = 250_000, 125_000
    rng = np.random.default_rng(2026)
    t = np.arange(n) / rate
    x = 0.2 * (1 + 0.5 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * 40_000 * t)
    x += 0.001 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    with SigMFWriter(path, rate, center_hz=121.0e6, datatype="ci16_le", force=True,
                     description="iqsift demo: invented AM test carrier") as writer:
        writer.write(x)
    return path


def run(out: Path) -> int:
    """Write the demo capture into ``out`` and describe it."""
    out.mkdir(parents=True, exist_ok=True)
    capture = _demo_capture(out / "demo_tone.sigmf-meta")
    print(f"demo capture written to {capture}\n")
    return cli_main(["info", str(capture)])


def main() -> int:
    parser = argparse.ArgumentParser(prog="python -m iqsift.demo", description=__doc__)
    parser.add_argument("--out", type=Path, default=Path("demo_output"), help="output folder")
    args = parser.parse_args()
    return run(args.out)


if __name__ == "__main__":
    raise SystemExit(main())
