"""Per-stage spectra figures of a finished receiver run (``--spectra DIR``).

Writes one figure per tap point, an overview with every stage stacked, the
data behind each as JSON, spectrograms of the channel baseband and of the
audio, and a waveform plot of the audio. With the FFT engine mixing, channel
filtering and decimation are one step, so the "channel" tap shows the result
of all three; the input is shown around the channel (the full-band data is in
its JSON file only when cropping left too few bins). The designed
channel filter's edges and its response are drawn on the stages it acts on.
"""

from __future__ import annotations

from functools import partial
from pathlib import Path
from typing import Any

import numpy as np

from .captures.atomic import write_atomically
from .plot_data import save_plot_data
from .plot_fork import Draw, draw_figures

__all__ = ["AudioKeeper", "write_stage_plots", "stage_overlays", "stage_plot_names", "check_stage_plot_folder"]

KEEP_AUDIO_S = 1200.0
"""The waveform plot shows at most the first 20 minutes of audio (19 MB kept at 16 kHz)."""


class AudioKeeper:
    """Keeps the first :data:`KEEP_AUDIO_S` seconds of a receiver's audio for the waveform plot.

    Attach it with ``receiver.on_audio(keeper.feed)`` (or :meth:`attach`); memory stays bounded
    however long the run.
    """

    def __init__(self, rate_hz: float, max_s: float = KEEP_AUDIO_S) -> None:
        self.room = int(max_s * rate_hz)
        self._parts: list[np.ndarray] = []

    @classmethod
    def attach(cls, receiver: Any) -> "AudioKeeper":
        """A keeper fed by ``receiver``'s audio."""
        keeper = cls(receiver.audio_rate_hz)
        receiver.on_audio(keeper.feed)
        return keeper

    def feed(self, audio: np.ndarray) -> None:
        if self.room > 0:
            self._parts.append(audio[: self.room].copy())
            self.room -= min(self.room, audio.size)

    def audio(self) -> np.ndarray:
        """The audio kept so far."""
        return np.concatenate(self._parts) if self._parts else np.zeros(0, np.float32)

_TITLES = {
    "input": "input around the channel (capture, before any processing)",
    "channel": "channel baseband (carrier at 0 Hz, channel filter applied, decimated)",
    "detector": "detector output",
    "audio": "audio",
}


def _stage_title(receiver, name: str) -> str:
    if name.startswith("stage"):
        k = int(name[5:])
        st = receiver.design.polyphase_plan.stages[k - 1]
        what = "mixing, low-pass and decimation" if k == 1 else "low-pass and decimation"
        return (f"after decimation stage {k} ({what} by {st.down}: {st.rate_in_hz:g} -> {st.rate_out_hz:g} S/s, "
                f"{st.lowpass.num_taps} taps)")
    return _TITLES[name]


def stage_plot_names(fmt: str, stages: int = 4) -> list[str]:
    """Every file name :func:`write_stage_plots` may write into its folder (up to ``stages`` decimation stages)."""
    names = []
    taps = ("input", *(f"stage{k + 1}" for k in range(stages)), "channel", "detector", "audio")
    for i in range(len(taps)):
        for name in taps:
            names += [f"{i + 1}_{name}.{fmt}", f"{i + 1}_{name}.json"]
    names += [f"overview.{fmt}", f"waveform.{fmt}"]
    for name in ("channel", "audio"):
        names += [f"spectrogram_{name}.{fmt}", f"spectrogram_{name}.json"]
    return names


def check_stage_plot_folder(folder: Path, fmt: str, force: bool, create: bool = True) -> None:
    """Before any work: the folder's parent must exist, and no plot file may be overwritten without force."""
    from .captures.atomic import check_output_path
    from .errors import ParameterError

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise ParameterError(f"{folder}: exists and is not a folder")
    parent = folder.parent if str(folder.parent) else Path(".")
    if not parent.is_dir():
        raise ParameterError(f"{folder}: the folder {parent} does not exist")
    if folder.is_dir():
        for name in stage_plot_names(fmt):
            check_output_path(folder / name, force)


def stage_overlays(receiver) -> dict[str, Any]:
    """Filter overlays and channel bands per tap point, in each spectrum's own frequency axis."""
    d = receiver.design
    ch = d.channel
    lo, hi = ch.passband_hz
    overlays: dict[str, Any] = {}
    bands: dict[str, Any] = {}
    # the input spectrum's axis is drawn relative to the capture centre: overlays use offsets from it
    centre = d.carrier_offset_hz
    if d.prototype is not None:
        proto = d.prototype
        freqs, resp = _response(proto.taps, d.rate_hz, 4 * (proto.stopband_hz + abs(lo + hi)))
        mid = 0.5 * (lo + hi)
        overlays["channel"] = {
            "passband_hz": (lo, hi),
            "stopband_hz": (mid - proto.stopband_hz, mid + proto.stopband_hz),
            "response": (freqs + mid, resp),
        }
        overlays["input"] = {
            "passband_hz": (centre + lo, centre + hi),
            "stopband_hz": (centre + mid - proto.stopband_hz, centre + mid + proto.stopband_hz),
            "response": (freqs + centre + mid, resp),
        }
    elif d.polyphase_plan is not None:
        # the time-domain engine: each decimation stage's own low-pass, on its output spectrum (centred on the
        # channel filter's centre after the translating first stage), and the channel's edges on input and channel
        mid = 0.5 * (lo + hi)
        half = 0.5 * (hi - lo)
        edge = half + ch.transition
        for stage in d.polyphase_plan.stages:
            lp = stage.lowpass
            freqs, resp = _response(lp.taps, stage.rate_in_hz, 0.5 * stage.rate_out_hz)
            overlays[f"stage{stage.index + 1}"] = {
                "passband_hz": (-lp.passband_hz, lp.passband_hz),
                "stopband_hz": (-lp.stopband_hz, lp.stopband_hz),
                "response": (freqs, resp),
                "label": "decimation-stage low-pass (designed)",
            }
        overlays["channel"] = {"passband_hz": (lo, hi), "stopband_hz": (mid - edge, mid + edge)}
        overlays["input"] = {"passband_hz": (centre + lo, centre + hi),
                             "stopband_hz": (centre + mid - edge, centre + mid + edge)}
    from .plots import Band

    bands["input"] = (centre + lo, centre + hi)
    bands["channel"] = (lo, hi)
    if ch.audio_band:
        bands["detector"] = Band(ch.audio_band[0], ch.audio_band[1], "audio band (designed)")
        bands["audio"] = Band(ch.audio_band[0], ch.audio_band[1], "audio band (designed)")
    return {"overlays": overlays, "bands": bands}


def _response(taps: np.ndarray, rate: float, span: float, points: int = 2048):
    from scipy.signal import freqz

    f = np.linspace(-span, span, points)
    _, h = freqz(taps, 1, worN=f, fs=rate)
    return f, 20 * np.log10(np.maximum(np.abs(h), 1e-12))


def write_stage_plots(receiver, out_dir: Path, *, capture_name: str, fmt: str = "png", outputs=None,
                      audio: np.ndarray | None = None) -> list[Path]:
    """Write the stage figures and their data into ``out_dir``; returns the paths.

    With ``outputs`` (an :class:`~iqsift.captures.OutputSet`) the files are
    committed with the job's other outputs, and the folders made for them are
    removed again if the job does not finish; otherwise written directly. The waveform
    plot is drawn from ``audio`` (e.g. kept by an :class:`AudioKeeper`), when given.
    """
    from . import plots

    out_dir = Path(out_dir)
    # callers have checked that the user's folder's parent exists; folders made through ``outputs``
    # are removed again if the job fails or is interrupted
    if outputs is not None:
        outputs.make_folder(out_dir, parents=True)
    else:
        out_dir.mkdir(parents=True, exist_ok=True)
    spectra = receiver.spectra("density")
    if not spectra:
        return []
    ch = receiver.channel
    title = f"{capture_name}: {ch.name} ({ch.mode}, {ch.bandwidth_hz:g} Hz)"
    extras = stage_overlays(receiver)

    def target(name: str) -> Path:
        final = out_dir / name
        return outputs.reserve(final) if outputs is not None else final

    if "input" in spectra:
        spectra["input"] = _around_channel(spectra["input"], receiver)
    stage_names = sorted((n for n in spectra if n.startswith("stage")), key=lambda n: int(n[5:]))
    order = [n for n in ("input", *stage_names, "channel", "detector", "audio") if n in spectra]
    figures: list[tuple[str, Draw]] = []  # (file name, draw into a file), in the order written
    data: dict[str, Any] = {}  # figure file name -> (JSON file name, the data behind that figure)
    for i, name in enumerate(order):
        spec = spectra[name]
        figures.append((f"{i + 1}_{name}.{fmt}", partial(
            plots.plot_stage_spectrum, spec, title=f"{title}\n{_stage_title(receiver, name)}",
            filter_overlay=extras["overlays"].get(name), channel_band=extras["bands"].get(name), fmt=fmt)))
        data[f"{i + 1}_{name}.{fmt}"] = (f"{i + 1}_{name}.json", spec)
    figures.append((f"overview.{fmt}", partial(
        plots.plot_overview, [spectra[n] for n in order], title=title,
        overlays=[extras["overlays"].get(n) for n in order],
        channel_band=[extras["bands"].get(n) for n in order], fmt=fmt)))
    labels = {"channel": "channel baseband (after the channel filter)", "audio": "audio"}
    for name, gram in receiver.spectrogram_results().items():
        times, freqs, power, units = gram
        stem = f"spectrogram_{name}"
        figures.append((f"{stem}.{fmt}", partial(plots.plot_spectrogram, times, freqs, power,
                                                 title=f"{title}\n{labels[name]}", fmt=fmt, units=units)))
        # levels to 0.1 dB (far finer than a plot shows) keep the file small
        data[f"{stem}.{fmt}"] = (f"{stem}.json", {
            "times_s": np.round(np.asarray(times), 4), "freqs_hz": np.round(np.asarray(freqs), 3),
            "power_db": np.round(np.asarray(power), 1), "units": units})
    if audio is not None and audio.size:
        figures.append((f"waveform.{fmt}", partial(plots.plot_waveform, audio, receiver.audio_rate_hz,
                                                   title=f"{title}\naudio", fmt=fmt)))
    names = [n for fig, _ in figures for n in (fig, *([data[fig][0]] if fig in data else []))]
    paths = {n: target(n) for n in names}  # every file claimed before the drawing starts
    # the child process draws the biggest figures while this one draws the rest
    plots.load_matplotlib()  # imported once, before the fork
    drawn = draw_figures(figures,
                         child_share=[f"overview.{fmt}", f"waveform.{fmt}", f"spectrogram_audio.{fmt}"])
    for name, _ in figures:
        write_atomically(paths[name], partial(_write_bytes, drawn[name]), binary=True, force=True)
        if name in data:
            json_name, values = data[name]
            save_plot_data(values, paths[json_name])
    return [out_dir / n for n in names]


def _write_bytes(content: bytes, fh: Any) -> None:
    fh.write(content)


def _around_channel(spectrum, receiver):
    """The input spectrum cropped to the channel and its neighbourhood: ±max(4·B, 25 kHz) around the carrier."""
    import dataclasses

    d = receiver.design
    centre = (receiver.center_hz or 0.0) + d.carrier_offset_hz
    span = max(4 * d.channel.bandwidth_hz, 25e3)
    f = np.asarray(spectrum.freqs_hz)
    keep = (f >= centre - span) & (f <= centre + span)
    if keep.sum() < 16:
        return spectrum
    return dataclasses.replace(spectrum, freqs_hz=f[keep], values_db=np.asarray(spectrum.values_db)[keep])


def write_overview(receiver, path: Path, *, capture_name: str, fmt: str = "png", data_path: Path | None = None,
                   outputs=None) -> list[Path]:
    """Only the overview figure (every stage's spectrum stacked), and optionally the data behind it as JSON.

    For the HTML report, which shows the overview whether or not the full ``--spectra`` set is
    written. Same figure as :func:`write_stage_plots` draws; returns the final paths written
    (none when the receiver accumulated no spectra).
    """
    from . import plots

    spectra = receiver.spectra("density")
    if not spectra:
        return []
    ch = receiver.channel
    title = f"{capture_name}: {ch.name} ({ch.mode}, {ch.bandwidth_hz:g} Hz)"
    extras = stage_overlays(receiver)
    if "input" in spectra:
        spectra["input"] = _around_channel(spectra["input"], receiver)
    stage_names = sorted((n for n in spectra if n.startswith("stage")), key=lambda n: int(n[5:]))
    order = [n for n in ("input", *stage_names, "channel", "detector", "audio") if n in spectra]

    def target(final: Path) -> Path:
        return outputs.reserve(final) if outputs is not None else final

    plots.plot_overview([spectra[n] for n in order], target(Path(path)), title=title,
                        overlays=[extras["overlays"].get(n) for n in order],
                        channel_band=[extras["bands"].get(n) for n in order], fmt=fmt)
    written = [Path(path)]
    if data_path is not None:
        plots.save_plot_data({"stages": [spectra[n] for n in order]}, target(Path(data_path)))
        written.append(Path(data_path))
    return written
