"""Helpers shared by the command modules: JSON output, progress bar, capture opening."""

from __future__ import annotations

import json
import math
import sys
import time
from typing import Any, Iterable, Iterator

import numpy as np

__all__ = ["emit_json", "to_jsonable", "Progress", "progress_blocks"]


def to_jsonable(obj: Any) -> Any:
    """Convert numpy scalars/arrays, paths and non-finite floats (→ null) for JSON."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if hasattr(obj, "__fspath__"):
        return str(obj)
    return obj


def emit_json(obj: Any) -> None:
    """Print ``obj`` as indented JSON on stdout."""
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")


class Progress:
    """A one-line progress bar on stderr, shown only when stderr is a terminal.

    Parameters
    ----------
    total : int
        Units of work (samples).
    label : str
        Text before the bar.
    quiet : bool
        Never show anything.
    """

    def __init__(self, total: int, label: str = "", quiet: bool = False) -> None:
        self.total = max(int(total), 1)
        self.label = label
        self.enabled = not quiet and sys.stderr.isatty()
        self.done = 0
        self._start = time.monotonic()
        self._last = 0.0

    def advance(self, n: int) -> None:
        """Record ``n`` more units done and redraw at most ten times a second."""
        self.done += int(n)
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self._last < 0.1 and self.done < self.total:
            return
        self._last = now
        share = min(self.done / self.total, 1.0)
        width = 30
        filled = int(round(share * width))
        elapsed = now - self._start
        eta = elapsed * (1 - share) / share if share > 0 else 0.0
        sys.stderr.write(
            f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] {100 * share:5.1f}%  "
            f"{elapsed:5.1f} s elapsed, {eta:5.1f} s left "
        )
        sys.stderr.flush()

    def close(self) -> None:
        """Finish the line."""
        if self.enabled:
            sys.stderr.write("\n")
            sys.stderr.flush()


def progress_blocks(blocks: Iterable[np.ndarray], total: int, label: str, quiet: bool) -> Iterator[np.ndarray]:
    """Pass blocks through while advancing a :class:`Progress` bar by their lengths."""
    bar = Progress(total, label, quiet)
    try:
        for block in blocks:
            yield block
            bar.advance(block.shape[0])
    finally:
        bar.close()
