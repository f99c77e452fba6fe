"""The activity timeline: every channel's activity segments in one figure (the HTML report's picture).

One row per channel, time across; each segment is a bar coloured by its level (dBFS) on one
shared colour scale, so a busy strong channel and a faint one read apart at a glance. matplotlib
is imported lazily and drawn off screen (Agg), as in :mod:`iqsift.plots`; SVG output is
byte-reproducible (fixed hash salt, no date).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Any, Sequence

from .captures.atomic import write_atomically
from .errors import ParameterError
from .plots import PALETTE

__all__ = ["ActivityRow", "plot_activity_timeline"]

ActivityRow = tuple[str, Sequence[tuple[float, float, float | None]]]
"""A channel's label and its segments ``(start_s, end_s, level_dbfs)``."""

_DPI = 110


def plot_activity_timeline(
    rows: Sequence[ActivityRow],
    path: str | os.PathLike[str],
    *,
    start_s: float,
    end_s: float,
    title: str,
    fmt: str = "png",
    force: bool = True,
) -> Path:
    """Draw every channel's activity segments on one time axis and write the figure atomically.

    Parameters
    ----------
    rows : sequence of (label, segments)
        One per channel, top to bottom; segments are ``(start_s, end_s, level_dbfs)`` in seconds
        of the capture (level may be None: drawn in the neutral trace colour).
    path : path
        Output file (``.png`` or ``.svg``, agreeing with ``fmt``).
    start_s, end_s : float
        The time span shown (s): the part of the capture that was processed.
    title : str
        Figure title (names the capture).
    fmt : {"png", "svg"}
    force : bool
        Overwrite an existing file.
    """
    if fmt not in ("png", "svg"):
        raise ParameterError(f"fmt: must be 'png' or 'svg', got {fmt!r}")
    if not rows:
        raise ParameterError("rows: no channels to draw")
    if not end_s > start_s:
        raise ParameterError(f"end_s: must be after start_s ({start_s} s), got {end_s} s")
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")
    from matplotlib.colors import LinearSegmentedColormap, Normalize
    from matplotlib.figure import Figure

    levels = [lv for _, segs in rows for *_, lv in segs if lv is not None]
    lo, hi = (min(levels), max(levels)) if levels else (-60.0, 0.0)
    if hi - lo < 10:  # a colour scale at least 10 dB wide: equal levels should not look far apart
        lo, hi = 0.5 * (lo + hi) - 5, 0.5 * (lo + hi) + 5
    # faint (slate) to strong (garnet) through the ink blue of the project's palette
    cmap = LinearSegmentedColormap.from_list("iqsift-level", [PALETTE["stopband"], PALETTE["trace"],
                                                              PALETTE["envelope"]])
    norm = Normalize(lo, hi)
    n = len(rows)
    with matplotlib.rc_context({
        "svg.hashsalt": "iqsift", "svg.fonttype": "path", "font.size": 10, "axes.spines.top": False,
        "axes.spines.right": False, "figure.facecolor": PALETTE["face"], "savefig.facecolor": PALETTE["face"],
        "text.color": PALETTE["text"], "axes.labelcolor": PALETTE["text"],
    }):
        fig = Figure(figsize=(10.0, 1.5 + 0.42 * n), layout="constrained")
        ax = fig.add_subplot()
        for i, (label, segs) in enumerate(rows):
            y = n - 1 - i
            if i % 2 == 0:
                ax.axhspan(y - 0.5, y + 0.5, color=PALETTE["grid"], alpha=0.45, lw=0, zorder=0)
            bars = [(s, e - s) for s, e, _ in segs]
            colours = [PALETTE["trace"] if lv is None else cmap(norm(lv)) for *_, lv in segs]
            if bars:
                ax.broken_barh(bars, (y - 0.32, 0.64), facecolors=colours, edgecolor="none", zorder=2)
        ax.set_yticks(range(n), [label for label, _ in reversed(rows)])
        ax.set_ylim(-0.5, n - 0.5)
        ax.set_xlim(start_s, end_s)
        ax.set_xlabel("time in the capture (s)")
        ax.grid(axis="x", color=PALETTE["grid"], lw=0.7)
        ax.set_axisbelow(True)
        ax.set_title(title, loc="left", fontweight="bold")
        from matplotlib.cm import ScalarMappable

        bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), ax=ax, pad=0.01, aspect=max(8, 6 * n))
        bar.set_label("segment level (dBFS)")
    metadata = {"Date": None} if fmt == "svg" else {}

    def write(fh: Any) -> None:
        with matplotlib.rc_context({"svg.hashsalt": "iqsift"}):
            fig.savefig(fh, format=fmt, dpi=_DPI, metadata=metadata)

    return write_atomically(path, write, binary=True, force=force)
