"""Helpers shared by the command modules: JSON output and the progress bar."""

from __future__ import annotations

import sys
import time
from typing import Any, Callable

__all__ = ["emit_json", "live_input", "Progress", "ProgressBar", "reference_text"]


def emit_json(obj: Any) -> None:
    """Print ``obj`` as indented JSON on stdout."""
    from ..jsonable import dumps  # numpy-aware: imported when there is something to print

    sys.stdout.write(dumps(obj))


def live_input(capture_path: str) -> bool:
    """Whether the capture is standard input (``-``); if so, SIGINT from now on ends the input, not the run
    (:func:`~iqsift.cli.interrupts.end_input_on_sigint`). A stream of unknown length shows no progress bar."""
    if capture_path != "-":
        return False
    from .interrupts import end_input_on_sigint

    end_input_on_sigint()
    return True


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


class ProgressBar:
    """A job's ``progress`` callback drawing a :class:`Progress` bar, made when the job states its total.

    Use as a context manager around the job call; the bar's line is finished on exit.
    """

    def __init__(self, label: str, quiet: bool) -> None:
        self.label = label
        self.quiet = quiet
        self._bar: Progress | None = None

    def __call__(self, samples: int, total: int) -> None:
        if self._bar is None:
            self._bar = Progress(total, self.label, self.quiet)
        self._bar.advance(samples)

    def __enter__(self) -> Callable[[int, int], None]:
        return self

    def __exit__(self, *exc: object) -> None:
        if self._bar is not None:
            self._bar.close()


def reference_text(capture: dict[str, Any]) -> str | None:
    """The receiver reference correction a result was made with, for people; None when there was none."""
    ref = capture.get("frequency_reference") or {}
    ppm = ref.get("correction_ppm") or 0.0
    if not ppm:
        return None
    centre = capture.get("center_hz")
    where = f", centre {centre:.1f} Hz" if centre is not None else ""
    return (f"corrected for a receiver reference {ppm:+.3f} ppm off: true rate {capture['sample_rate_hz']:.3f} S/s"
            f"{where} (file: {ref['nominal_sample_rate_hz']:g} S/s)")

