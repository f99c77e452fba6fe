"""Figures for debugging a receiver chain: per-stage spectra, spectrograms, audio waveforms.

matplotlib is imported lazily, inside the functions, so ``import iqsift.plots``
(and the CLI that imports it) stays fast and works without a display. The
figures are drawn with the non-interactive Agg machinery: each function calls
``matplotlib.use("Agg")`` unless :mod:`matplotlib.pyplot` has already been
imported by the caller (switching then would close the caller's open figures),
and builds a :class:`matplotlib.figure.Figure` directly, never touching pyplot's
global figure list.

Every writer takes the output path and ``fmt`` ("png" or "svg") and writes the
file atomically: a hidden temporary file in the target folder, renamed into place
with :func:`os.replace` once complete. Each returns the path written.

Conventions
-----------
* Colours: the project's own small palette, :data:`PALETTE`.
* Frequency axes are drawn relative to the spectrum's ``center_hz`` in Hz, kHz or
  MHz (whichever suits the span); the axis label names the centre when it is not 0.
  Overlay edges (``filter_overlay``, ``channel_band``) are given relative to that
  centre too.
* dB ranges: :func:`db_range` — from a robust noise floor (a low percentile of the
  levels) minus a margin up to the peak plus a margin, rounded out to 10 dB and kept
  between ``min_span_db`` and ``max_span_db``. In the stage overview every panel
  gets the same dB span (the widest any panel needs), each topped at its own peak,
  so slopes and floors compare by eye.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
import os
import sys
from pathlib import Path
from types import ModuleType
from typing import IO, TYPE_CHECKING, Any, Mapping, Sequence, Union

import numpy as np
from numpy.typing import ArrayLike

from .captures.atomic import write_atomically
from .errors import ParameterError
from .plot_data import save_plot_data
from .spectra import Spectrum
from .units import format_hz

if TYPE_CHECKING:  # matplotlib itself is imported lazily, in _matplotlib()
    from matplotlib.figure import Figure

__all__ = [
    "Band",
    "PALETTE",
    "db_range",
    "load_matplotlib",
    "plot_stage_spectrum",
    "plot_overview",
    "plot_spectrogram",
    "plot_waveform",
    "save_plot_data",
]

PALETTE: dict[str, str] = {
    "trace": "#1d3f6e",  # deep ink blue: measured spectra, waveforms
    "filter": "#c2571a",  # burnt orange: designed filter response
    "passband": "#2f7d4f",  # pine green: passband edges
    "stopband": "#8a8f98",  # slate grey: stopband shading
    "channel": "#e8b93c",  # ochre: the channel's stated bandwidth
    "envelope": "#a3263f",  # garnet: envelope / level traces
    "clip": "#d4122a",  # signal red: samples clipped at full scale
    "grid": "#dfe3e8",
    "text": "#22262b",
    "face": "#fbfbf8",
}
"""The project's own colour scheme (names → hex colours)."""

PlotTarget = Union[str, "os.PathLike[str]", IO[bytes]]
"""Where a figure goes: a file path (written atomically) or an open binary file (written as is)."""

_FORMATS = ("png", "svg")
_DPI = 110
_WIDTH_IN = 10.0

_RC = {
    "svg.hashsalt": "iqsift",  # fixed ids in SVG output: byte-reproducible figures
    "font.size": 10.5,
    "axes.titlesize": 11,
    "axes.titley": 1.0,  # titles sit on the top spine (nothing is drawn above the axes): no search for their height
    "axes.labelsize": 10.5,
    "xtick.labelsize": 9.5,
    "ytick.labelsize": 9.5,
    "legend.fontsize": 9,
    "figure.titlesize": 13,
    "axes.edgecolor": "#5b6068",
    "axes.labelcolor": PALETTE["text"],
    "text.color": PALETTE["text"],
    "xtick.color": "#3a3f45",
    "ytick.color": "#3a3f45",
    "axes.grid": True,
    "grid.color": PALETTE["grid"],
    "grid.linewidth": 0.7,
    "axes.facecolor": "#ffffff",
    "figure.facecolor": PALETTE["face"],
    "savefig.facecolor": PALETTE["face"],
    "axes.spines.top": False,
    "axes.spines.right": False,
    "svg.fonttype": "path",
}


# ----------------------------------------------------------------------------- helpers


def _matplotlib() -> tuple[ModuleType, type[Figure]]:
    """Import matplotlib for off-screen drawing; returns (matplotlib, Figure)."""
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules:
        matplotlib.use("Agg")
    from matplotlib.figure import Figure

    return matplotlib, Figure


def load_matplotlib() -> None:
    """Import matplotlib for off-screen drawing now (every writer does it when first called).

    For a caller that forks (:mod:`iqsift.plot_fork`): the import is then paid once, before the fork.
    """
    _matplotlib()
    import matplotlib.backends.backend_agg  # noqa: F401  (the canvas every writer draws on)


def _check_fmt(fmt: str, path: PlotTarget) -> str:
    if fmt not in _FORMATS:
        raise ParameterError(f"fmt: must be 'png' or 'svg', got {fmt!r}")
    if hasattr(path, "write"):
        return fmt  # an open file: no name to agree with
    suffix = Path(path).suffix.lower().lstrip(".")
    if suffix in _FORMATS and suffix != fmt:
        raise ParameterError(f"{path}: the file name says .{suffix} but fmt={fmt!r}; make them agree")
    return fmt


@dataclass(frozen=True)
class Band:
    """A band to shade on a spectrum (Hz, relative to the spectrum's centre) and its legend text."""

    lo_hz: float
    hi_hz: float
    label: str


def _check_title(title: Any) -> str:
    if not isinstance(title, str) or not title.strip():
        raise ParameterError(f"title: must name the capture and channel, got {title!r}")
    return title


def _save(fig: Any, path: PlotTarget, fmt: str, force: bool) -> Path | IO[bytes]:
    # no creation date in the file, so the same figure is the same bytes (PNG carries none by default)
    metadata = {"Date": None} if fmt == "svg" else {}

    mpl, _ = _matplotlib()

    def write(fh: Any) -> None:
        with mpl.rc_context({"svg.hashsalt": _RC["svg.hashsalt"]}):
            fig.savefig(fh, format=fmt, dpi=_DPI, metadata=metadata)

    if not isinstance(path, (str, os.PathLike)):
        write(path)
        return path
    return write_atomically(path, write, binary=True, force=force)


def db_range(
    values_db: Any,
    *,
    floor_percentile: float = 10.0,
    margin_below_db: float = 10.0,
    margin_above_db: float = 6.0,
    min_span_db: float = 30.0,
    max_span_db: float = 140.0,
) -> tuple[float, float]:
    """Y-axis limits (dB) for a spectrum: robust floor − margin to peak + margin.

    The floor is the ``floor_percentile`` percentile of the finite levels (a robust
    noise-floor estimate that ignores the signals above it and a few deep nulls);
    the peak is the maximum. Limits are rounded outwards to multiples of 10 dB and the
    span is kept within ``[min_span_db, max_span_db]`` (the top is kept, the bottom
    moves), so digital silence at -300 dB does not squash the picture.

    Returns
    -------
    (low_db, high_db) : tuple of float
    """
    v = np.asarray(values_db, dtype=np.float64).ravel()
    v = v[np.isfinite(v)]
    if v.size == 0:
        raise ParameterError("values_db: no finite level to set a dB range from")
    floor = float(np.percentile(v, floor_percentile))
    peak = float(np.max(v))
    high = math.ceil((peak + margin_above_db) / 10.0) * 10.0
    low = math.floor((floor - margin_below_db) / 10.0) * 10.0
    if high - low < min_span_db:
        low = high - math.ceil(min_span_db / 10.0) * 10.0
    if high - low > max_span_db:
        low = high - math.floor(max_span_db / 10.0) * 10.0
    return low, high


def _freq_scale(freqs_rel: np.ndarray) -> tuple[float, str]:
    top = float(np.max(np.abs(freqs_rel))) if freqs_rel.size else 0.0
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if top >= scale:
            return scale, unit
    return 1.0, "Hz"


def _freq_label(center_hz: float, unit: str) -> str:
    if center_hz:
        return f"Frequency offset from {format_hz(center_hz)} [{unit}]"
    return f"Frequency [{unit}]"


def _short_hz(value: float) -> str:
    text = format_hz(value, digits=3)
    return text.replace(".000 ", " ")


def _pair(value: Any, name: str, onesided: bool) -> tuple[float, float]:
    """An edge given as a number (±f, or 0..f one-sided) or as a (lo, hi) pair, in Hz."""
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        f = abs(float(value))
        pair = (0.0, f) if onesided else (-f, f)
    else:
        try:
            lo, hi = (float(v) for v in value)
        except (TypeError, ValueError):
            raise ParameterError(f"{name}: must be a frequency in Hz or a (low, high) pair, got {value!r}") from None
        pair = (lo, hi)
    if not all(math.isfinite(v) for v in pair) or pair[0] >= pair[1]:
        raise ParameterError(f"{name}: must be finite with low < high, got {value!r}")
    return pair


def _check_spectrum(spectrum: Any) -> Spectrum:
    if not isinstance(spectrum, Spectrum):
        raise ParameterError(f"spectrum: must be an iqsift.spectra.Spectrum, got {type(spectrum).__name__}")
    if spectrum.values_db.size == 0:
        raise ParameterError(f"spectrum {spectrum.name!r}: has no bins to plot")
    return spectrum


def _draw_spectrum(ax: Any, spectrum: Spectrum, *, overlay: Mapping[str, Any] | None, band: Any, ylim: tuple[float, float]) -> list[Any]:
    """Draw one spectrum (and its overlays) into ``ax``; returns extra axes created."""
    rel = spectrum.relative_freqs_hz
    scale, unit = _freq_scale(rel)
    x = rel / scale
    extra = []
    ax.plot(x, spectrum.values_db, color=PALETTE["trace"], lw=0.9, label="measured", zorder=3)
    pad = 0.006 * float(x[-1] - x[0]) if spectrum.onesided else 0.0  # keep the DC bin off the spine
    ax.set_xlim(float(x[0]) - pad, float(x[-1]) + pad)
    ax.set_ylim(*ylim)
    ax.set_xlabel(_freq_label(spectrum.center_hz, unit))
    ax.set_ylabel(f"Level [{spectrum.units}]")
    xmin, xmax = ax.get_xlim()
    if band is not None:
        band_label = "channel bandwidth (stated)"
        if isinstance(band, Band):
            band, band_label = (band.lo_hz, band.hi_hz), band.label
        lo, hi = _pair(band, "channel_band", spectrum.onesided)
        ax.axvspan(lo / scale, hi / scale, color=PALETTE["channel"], alpha=0.22, lw=0, zorder=1, label=band_label)
    if overlay:
        unknown = set(overlay) - {"passband_hz", "stopband_hz", "response", "label"}
        if unknown:
            raise ParameterError(f"filter_overlay: unknown keys {sorted(unknown)}; use passband_hz, stopband_hz, response, label")
        if overlay.get("passband_hz") is not None:
            lo, hi = _pair(overlay["passband_hz"], "filter_overlay passband_hz", spectrum.onesided)
            label: str | None = "passband edge"
            for edge in (lo, hi):
                if spectrum.onesided and edge <= 0:
                    continue  # one-sided: no edge at or below DC
                if xmin < edge / scale < xmax:
                    ax.axvline(edge / scale, color=PALETTE["passband"], ls="--", lw=1.1, zorder=4, label=label)
                    label = None
        if overlay.get("stopband_hz") is not None:
            lo, hi = _pair(overlay["stopband_hz"], "filter_overlay stopband_hz", spectrum.onesided)
            label = "stopband"
            for a, b in ((xmin, min(lo / scale, xmax)), (max(hi / scale, xmin), xmax)):
                if b > a and not (spectrum.onesided and b <= 0):
                    ax.axvspan(a, b, color=PALETTE["stopband"], alpha=0.16, lw=0, zorder=0, label=label)
                    label = None
        if overlay.get("response") is not None:
            try:
                rf, rdb = (np.asarray(v, dtype=np.float64) for v in overlay["response"])
            except (TypeError, ValueError):
                raise ParameterError("filter_overlay response: must be (freqs_hz, response_db) arrays") from None
            if rf.shape != rdb.shape or rf.ndim != 1 or rf.size < 2:
                raise ParameterError(
                    f"filter_overlay response: freqs_hz and response_db must be 1-D of equal length >= 2, got {rf.shape} and {rdb.shape}"
                )
            ax2 = ax.twinx()
            ax2.grid(False)
            ax2.spines["top"].set_visible(False)
            ax2.spines["right"].set_visible(True)
            # measured trace above the response: the spectrum's axes in front, transparent
            ax.set_zorder(ax2.get_zorder() + 1)
            ax.patch.set_visible(False)
            ax2.patch.set_visible(True)
            ax2.set_facecolor("#ffffff")
            order = np.argsort(rf)
            ax2.plot(rf[order] / scale, rdb[order], color=PALETTE["filter"], lw=0.9, alpha=0.8,
                     label=overlay.get("label", "filter response (designed)"), zorder=2)
            finite = rdb[np.isfinite(rdb)]
            bottom = max(-150.0, math.floor((float(np.min(finite)) - 5) / 10) * 10) if finite.size else -100.0
            ax2.set_ylim(bottom, 5.0)
            ax2.set_ylabel("Filter response [dB]", color=PALETTE["filter"])
            ax2.tick_params(axis="y", colors=PALETTE["filter"])
            ax2.set_xlim(xmin, xmax)
            extra.append(ax2)
    return extra


def _figure_legend(fig: Any, axes: Sequence[Any]) -> None:
    """One legend for the whole figure (colours mean the same in every panel), below the panels.

    Kept outside the panels so it never hides a signal.
    """
    seen: dict[str, Any] = {}
    for a in axes:
        for h, lab in zip(*a.get_legend_handles_labels()):
            seen.setdefault(lab, h)
    if len(seen) > 1:
        fig.legend(list(seen.values()), list(seen.keys()), loc="outside lower center", ncols=min(len(seen), 4),
                   frameon=False)


def _panel_info(s: Spectrum) -> str:
    return f"fs {_short_hz(s.rate_hz).replace('Hz', 'S/s')} · RBW {_short_hz(s.enbw_hz)} · {s.segments_averaged} avg"


# ----------------------------------------------------------------------------- spectra


def _build_stage_figure(
    spectrum: Spectrum,
    *,
    title: str,
    filter_overlay: Mapping[str, Any] | None = None,
    channel_band: tuple[float, float] | float | None = None,
) -> Figure:
    mpl, Figure = _matplotlib()
    spectrum = _check_spectrum(spectrum)
    with mpl.rc_context(_RC):
        fig = Figure(figsize=(_WIDTH_IN, 4.6), layout="constrained")
        ax = fig.add_subplot()
        _draw_spectrum(ax, spectrum, overlay=filter_overlay, band=channel_band, ylim=db_range(spectrum.values_db))
        ax.set_title(spectrum.name or "spectrum", loc="left", fontweight="bold")
        ax.set_title(_panel_info(spectrum), loc="right", fontsize=9, color="#4a4f56")
        fig.suptitle(title)
        _figure_legend(fig, fig.axes)
    return fig


def plot_stage_spectrum(
    spectrum: Spectrum,
    path: PlotTarget,
    *,
    title: str,
    filter_overlay: Mapping[str, Any] | None = None,
    channel_band: tuple[float, float] | float | None = None,
    fmt: str = "png",
    force: bool = True,
) -> Path | IO[bytes]:
    """Plot one tap point's spectrum.

    Parameters
    ----------
    spectrum : Spectrum
        From :meth:`iqsift.spectra.WelchAccumulator.result`.
    path : path-like or binary file
        Output file (written atomically), or an open binary file to write the figure into.
    title : str
        Figure title; name the capture and the channel.
    filter_overlay : mapping, optional
        ``passband_hz`` and ``stopband_hz``: edges relative to the spectrum's centre
        (Hz), each a number (±f; 0..f for a one-sided spectrum) or a (low, high) pair;
        passband edges are dashed lines, the stopband is shaded. ``response``:
        ``(freqs_hz, response_db)`` of the designed filter's measured response
        (relative Hz), drawn on a secondary dB axis. ``label``: legend text for it.
    channel_band : (low_hz, high_hz), float or Band, optional
        The channel's stated bandwidth relative to the centre, shaded (a :class:`Band` carries its own
        legend text, e.g. for the audio band).
    fmt : {"png", "svg"}
    force : bool, default True
        Overwrite an existing file (False: refuse with OutputExistsError).

    Returns
    -------
    pathlib.Path or the file given
    """
    _check_fmt(fmt, path)
    fig = _build_stage_figure(spectrum, title=_check_title(title), filter_overlay=filter_overlay, channel_band=channel_band)
    return _save(fig, path, fmt, force)


def _per_panel(value: Any, spectra: Sequence[Spectrum], name: str, single_types: tuple) -> list[Any]:
    """Spread an overlay argument over the panels: None, one value for all, a sequence, or a name mapping."""
    n = len(spectra)
    if value is None:
        return [None] * n
    if isinstance(value, Mapping) and not (name == "overlays" and set(value) <= {"passband_hz", "stopband_hz", "response", "label"}):
        unknown = set(value) - {s.name for s in spectra}
        if unknown:
            raise ParameterError(f"{name}: names {sorted(unknown)} match no spectrum; known: {[s.name for s in spectra]}")
        return [value.get(s.name) for s in spectra]
    if isinstance(value, single_types):
        return [value] * n
    items = list(value)
    if name == "channel_band" and len(items) == 2 and all(isinstance(v, (int, float, np.number)) for v in items):
        return [tuple(items)] * n
    if len(items) != n:
        raise ParameterError(f"{name}: gives {len(items)} entries for {n} spectra; give one per spectrum (None to skip)")
    return items


def _build_overview_figure(
    spectra: Sequence[Spectrum], *, title: str, overlays: Any = None, channel_band: Any = None
) -> tuple[Figure, list[Any]]:
    mpl, Figure = _matplotlib()
    spectra = [_check_spectrum(s) for s in spectra]
    if not spectra:
        raise ParameterError("spectra: nothing to plot; give at least one Spectrum")
    ovl = _per_panel(overlays, spectra, "overlays", (Mapping,))
    bands = _per_panel(channel_band, spectra, "channel_band", (int, float, np.number, Band))
    ranges = [db_range(s.values_db) for s in spectra]
    span = max(hi - lo for lo, hi in ranges)
    n = len(spectra)
    with mpl.rc_context(_RC):
        fig = Figure(figsize=(_WIDTH_IN, 1.2 + 2.7 * n), layout="constrained")
        panels = fig.subplots(n, 1, squeeze=False)[:, 0].tolist()
        for ax, s, o, b, (lo, hi) in zip(panels, spectra, ovl, bands, ranges):
            _draw_spectrum(ax, s, overlay=o, band=b, ylim=(hi - span, hi))
            ax.set_title(s.name or "spectrum", loc="left", fontweight="bold")
            ax.set_title(_panel_info(s), loc="right", fontsize=9, color="#4a4f56")
        fig.suptitle(title)
        _figure_legend(fig, fig.axes)
    return fig, panels


def plot_overview(
    spectra: Sequence[Spectrum],
    path: PlotTarget,
    *,
    title: str,
    overlays: Any = None,
    channel_band: Any = None,
    fmt: str = "png",
    force: bool = True,
) -> Path | IO[bytes]:
    """Every stage's spectrum, stacked top to bottom in chain order, in one figure.

    Each panel has its own frequency axis (the rates differ) and the same dB span.

    Parameters
    ----------
    spectra : sequence of Spectrum
        In chain order (input, mixer, decimation stages, detector, audio ...).
    path, title, fmt, force
        As :func:`plot_stage_spectrum`.
    overlays : None, sequence or mapping
        Per panel ``filter_overlay`` dicts: a sequence aligned with ``spectra``
        (None entries skip a panel) or a mapping from spectrum name to dict.
    channel_band : None, (low, high), sequence or mapping
        One (low, high) pair for every panel (relative to each panel's centre), a
        sequence aligned with ``spectra``, or a mapping from spectrum name to pair.

    Returns
    -------
    pathlib.Path
    """
    _check_fmt(fmt, path)
    fig, _ = _build_overview_figure(spectra, title=_check_title(title), overlays=overlays, channel_band=channel_band)
    return _save(fig, path, fmt, force)


# ----------------------------------------------------------------------------- spectrogram


def _edges(centres: np.ndarray, fallback: float) -> np.ndarray:
    if centres.size == 1:
        half = fallback / 2
        return np.array([centres[0] - half, centres[0] + half])
    mid = (centres[1:] + centres[:-1]) / 2
    return np.concatenate([[2 * centres[0] - mid[0]], mid, [2 * centres[-1] - mid[-1]]])


def _build_spectrogram_figure(
    times: ArrayLike, freqs: ArrayLike, power_db: ArrayLike, *, title: str, units: str = "dBFS/Hz",
    center_hz: float = 0.0
) -> Figure:
    mpl, Figure = _matplotlib()
    t = np.asarray(times, dtype=np.float64)
    f = np.asarray(freqs, dtype=np.float64)
    p = np.asarray(power_db, dtype=np.float64)
    if t.ndim != 1 or f.ndim != 1 or t.size == 0 or f.size == 0 or p.shape != (f.size, t.size):
        raise ParameterError(
            f"power_db: must have shape (len(freqs), len(times)) = ({f.size}, {t.size}) with both non-empty, got {p.shape}"
        )
    rel = f - float(center_hz)
    scale, unit = _freq_scale(rel)
    lo, hi = db_range(p, floor_percentile=5.0, margin_below_db=5.0, margin_above_db=0.0, min_span_db=30.0, max_span_db=100.0)
    with mpl.rc_context(_RC):
        fig = Figure(figsize=(_WIDTH_IN, 5.2), layout="constrained")
        ax = fig.add_subplot()
        ax.grid(False)
        fallback = float(t[0] * 2) if t[0] > 0 else 1.0
        mesh = ax.pcolormesh(_edges(t, fallback), _edges(rel / scale, 1.0), p, cmap="cividis", vmin=lo, vmax=hi,
                             shading="flat", rasterized=True)
        cb = fig.colorbar(mesh, ax=ax, pad=0.01)
        cb.set_label(f"Level [{units}]")
        ax.set_xlabel("Time [s]")
        ax.set_ylabel(_freq_label(float(center_hz), unit))
        ax.set_title(f"{t.size} columns · {f.size} bins", loc="right", fontsize=9, color="#4a4f56")
        fig.suptitle(title)
    return fig


def plot_spectrogram(
    times: ArrayLike,
    freqs: ArrayLike,
    power_db: ArrayLike,
    path: PlotTarget,
    *,
    title: str,
    fmt: str = "png",
    units: str = "dBFS/Hz",
    center_hz: float = 0.0,
    force: bool = True,
) -> Path | IO[bytes]:
    """Time-frequency picture (e.g. from :class:`iqsift.spectra.SpectrogramAccumulator`).

    Parameters
    ----------
    times : array_like
        Column centres (s).
    freqs : array_like
        Bin frequencies (Hz), ascending.
    power_db : array_like
        Levels, shape ``(len(freqs), len(times))``.
    units : str
        Level units for the colour bar.
    center_hz : float
        Frequency subtracted for the axis (Hz), named in the axis label.
    path, title, fmt, force
        As :func:`plot_stage_spectrum`.
    """
    _check_fmt(fmt, path)
    fig = _build_spectrogram_figure(times, freqs, power_db, title=_check_title(title), units=units, center_hz=center_hz)
    return _save(fig, path, fmt, force)


# ----------------------------------------------------------------------------- waveform


def _columns(x: np.ndarray, ncols: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Split ``x`` into ``ncols`` equal runs (the last may be short).

    Returns per run: min, max, sum of squares, sample count, centre (fractional sample index).
    """
    per = math.ceil(x.size / ncols)
    ncols = math.ceil(x.size / per)
    padded = np.zeros(ncols * per)
    padded[: x.size] = x
    m = padded.reshape(ncols, per)
    counts = np.minimum(per, x.size - np.arange(ncols) * per)
    valid = np.arange(per)[None, :] < counts[:, None]
    mn = np.where(valid, m, np.inf).min(axis=1)
    mx = np.where(valid, m, -np.inf).max(axis=1)
    centres = np.arange(ncols) * per + (counts - 1) / 2.0
    return mn, mx, np.sum(m * m, axis=1), counts, centres


def _sliding_mean_square(sums: np.ndarray, counts: np.ndarray, width: int) -> np.ndarray:
    """Mean square over a centred window of ``width`` grid cells (shorter at the ends)."""
    cs = np.concatenate([[0.0], np.cumsum(sums)])
    cc = np.concatenate([[0], np.cumsum(counts)])
    i = np.arange(sums.size)
    lo = np.maximum(i - width // 2, 0)
    hi = np.minimum(i - width // 2 + width, sums.size)
    return np.maximum(cs[hi] - cs[lo], 0.0) / (cc[hi] - cc[lo])


def _build_waveform_figure(audio: ArrayLike, rate_hz: float, *, title: str) -> Figure:
    mpl, Figure = _matplotlib()
    x = np.asarray(audio)
    if x.ndim != 1 or x.size == 0 or x.dtype.kind not in "biuf":
        raise ParameterError(f"audio: must be a non-empty 1-D array of real samples, got shape {x.shape} dtype {x.dtype}")
    x = x.astype(np.float64)
    if not np.all(np.isfinite(x)):
        raise ParameterError("audio: contains NaN or infinite samples")
    clipped_at = np.flatnonzero(np.abs(x) > 1.0)  # what the 16-bit file holds is clipped at full scale
    x = np.clip(x, -1.0, 1.0)
    try:
        fs = float(rate_hz)
    except (TypeError, ValueError):
        fs = float("nan")
    if not math.isfinite(fs) or fs <= 0:
        raise ParameterError(f"rate_hz: must be a finite rate > 0 Hz, got {rate_hz!r}")
    pixels = int(_WIDTH_IN * _DPI * 0.85)
    long_audio = x.size > 2 * pixels
    if long_audio:
        mn, mx, sums, counts, centres = _columns(x, pixels)
    else:
        sums, counts, centres = x * x, np.ones(x.size), np.arange(x.size, dtype=np.float64)
    # envelope: RMS over a sliding ~10 ms window (at least one grid cell)
    per = float(counts[0])
    width = max(1, int(round(0.010 * fs / per)))
    ms = _sliding_mean_square(sums, counts, width)
    rms = np.sqrt(ms)
    level_db = 10 * np.log10(np.maximum(ms, 1e-15))
    tc = centres / fs
    with mpl.rc_context(_RC):
        fig = Figure(figsize=(_WIDTH_IN, 5.6), layout="constrained")
        ax, axl = fig.subplots(2, 1, sharex=True, height_ratios=[3, 2])
        if long_audio:
            ax.fill_between(tc, mn, mx, color=PALETTE["trace"], lw=0, alpha=0.85, step="mid", zorder=2,
                            label="waveform (min/max per pixel column)")
        else:
            ax.plot(tc, x, color=PALETTE["trace"], lw=0.8, label="waveform", zorder=2)
        ax.plot(tc, rms, color=PALETTE["envelope"], lw=1.2, label="± RMS envelope (10 ms)", zorder=3)
        ax.plot(tc, -rms, color=PALETTE["envelope"], lw=1.2, zorder=3)
        if clipped_at.size:
            ax.plot(clipped_at / fs, np.sign(x[clipped_at]), ls="none", marker="|", ms=9, mew=1.2,
                    color=PALETTE["clip"], zorder=4, label=f"clipped at full scale in the file ({clipped_at.size} samples)")
        peak = float(np.max(np.abs(x)))
        lim = 1.0 if peak == 0 else min(1.05, max(peak * 1.15, 1e-6))
        ax.set_ylim(-lim, lim)
        ax.set_ylabel("Amplitude [FS]")
        ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), ncols=2, frameon=False, borderaxespad=0.2)
        ax.set_title(
            f"{x.size / fs:.3f} s · {_short_hz(fs).replace('Hz', 'S/s')} · peak {20 * np.log10(max(peak, 1e-15)):.1f} dBFS",
            loc="right", fontsize=9, color="#4a4f56",
        )
        axl.plot(tc, level_db, color=PALETTE["envelope"], lw=1.1)
        lo, hi = db_range(level_db, floor_percentile=5.0, margin_below_db=6.0, margin_above_db=3.0, min_span_db=30.0,
                          max_span_db=100.0)
        axl.set_ylim(lo, min(hi, 10.0))
        axl.set_ylabel("RMS level [dBFS]")
        axl.set_xlabel("Time [s]")
        axl.set_xlim(0.0, x.size / fs)
        fig.suptitle(title)
    return fig


def plot_waveform(
    audio: ArrayLike, rate_hz: float, path: PlotTarget, *, title: str, fmt: str = "png", force: bool = True
) -> Path | IO[bytes]:
    """Audio waveform (top) and short-term level in dBFS (bottom) against time in seconds.

    Short audio is drawn sample by sample; long audio as the min/max of each pixel
    column (so a ten-minute recording keeps its peaks). The red traces are the RMS
    envelope (±RMS over ~10 ms windows, or per pixel column when longer) and its
    level ``10·log10(mean x²)`` in dBFS (full scale 1.0).

    Parameters
    ----------
    audio : array_like
        Real samples, full scale 1.0.
    rate_hz : float
        Sample rate (samples/s).
    path, title, fmt, force
        As :func:`plot_stage_spectrum`.
    """
    _check_fmt(fmt, path)
    fig = _build_waveform_figure(audio, rate_hz, title=_check_title(title))
    return _save(fig, path, fmt, force)
