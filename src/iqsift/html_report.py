"""``report.html``: one page to look at and listen to an extraction (``extract --html``, ``demod --html``).

The page is built with the standard library (:func:`html.escape` and string building) and is
self-contained for opening from disk: its style sheet is inline, it has no scripts, and every
reference is a relative path to a file beside it (the channels' audio, the figures under
``report_files/``, the JSON files). Nothing remote (no ``http:``, ``https:`` or ``//`` address)
is referenced, so it works offline and can be sent, with its folder, to a colleague.

Contents: a summary of the capture; a table of channels (frequency, mode, level, carrier error,
depth, SNR, activity share) with row and column headers; the activity timeline of all channels as
one figure (:mod:`iqsift.activity_plot`); and per channel an ``<audio controls>`` player, its
stage-spectra overview figure and links to its JSON. Written for reading on screen and on paper
(a print style keeps each channel on one page where it fits); the page carries no date, so the
same run gives the same page.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from html import escape
from pathlib import Path, PurePosixPath
from typing import Any, Mapping, Sequence
from urllib.parse import quote

from . import __version__
from .captures.atomic import check_output_path
from .units import format_hz

__all__ = ["PageChannel", "capture_rows", "render_report_page", "report_file_paths", "check_report_files", "write_html_report"]

REPORT_NAME = "report.html"
FIGURE_FOLDER = "report_files"


@dataclass(frozen=True)
class PageChannel:
    """One channel as the page shows it.

    Attributes
    ----------
    report : Mapping
        The channel's report (``channel``, ``carrier``, ``modulation``, ``audio``, ``activity`` ...),
        as in ``report.json``.
    audio : str
        Its audio file, relative to the page (POSIX separators).
    overview : str or None
        Its stage-spectra overview figure, relative to the page.
    links : sequence of (label, relative path)
        Its JSON files (inside the page's folder; files elsewhere are named in the page's footer).
    """

    report: Mapping[str, Any]
    audio: str
    overview: str | None
    links: Sequence[tuple[str, str]]

    @property
    def name(self) -> str:
        return str(self.report["channel"]["name"])


def capture_rows(path: Any, center_hz: float | None, rate_hz: float, start_s: float,
                 duration_s: float) -> list[tuple[str, str]]:
    """The summary rows every page starts with: the capture, its centre and rate, the span processed (s)."""
    centre = "centre unknown" if center_hz is None else format_hz(center_hz)
    return [
        ("Capture", str(path)),
        ("Centre, rate", f"{centre}, {rate_hz:g} S/s"),
        ("Processed", f"{start_s:.3f} s to {start_s + duration_s:.3f} s ({duration_s:.3f} s)"),
    ]


def _href(relative: str) -> str:
    """A relative file path as an attribute value: percent-encoded, never read as an address."""
    path = PurePosixPath(relative)
    if path.is_absolute() or ".." in path.parts:
        raise ValueError(f"{relative}: a page reference must lie inside the report folder")
    return escape(quote(str(path), safe="/"), quote=True)


def _anchor(name: str) -> str:
    return "ch-" + re.sub(r"[^A-Za-z0-9_.-]", "-", name)


def _num(value: Any, fmt: str, unit: str = "") -> str:
    if value is None:
        return "—"
    text = f"{value:{fmt}}"
    if text.lstrip("+-").strip("0.") == "":  # no "-0.0": a value that rounds to zero shows unsigned
        text = f"{0.0:{fmt.lstrip('+')}}"
    return text + unit


def _frequency(ch: Mapping[str, Any]) -> str:
    if ch.get("frequency_hz") is not None:
        return format_hz(ch["frequency_hz"], 6)
    return f"{ch.get('offset_hz', 0.0):+.1f} Hz offset"


def activity_share(report: Mapping[str, Any], duration_s: float) -> float | None:
    """The share of the processed time (0..1) the channel was active: total segment length / duration."""
    if not duration_s > 0:
        return None
    total = sum(max(0.0, seg["end_s"] - seg["start_s"]) for seg in report.get("activity") or [])
    return min(1.0, total / duration_s)


def _row(pc: PageChannel, duration_s: float) -> str:
    r = pc.report
    ch = r["channel"]
    carrier = r.get("carrier") or {}
    modulation = r.get("modulation") or {}
    audio = r.get("audio") or {}
    share = activity_share(r, duration_s)
    snr = audio.get("snr_db")
    snr_cell = _num(snr, ".1f", " dB")
    if snr is None and r.get("audio_reason"):
        snr_cell = f'<abbr title="{escape(str(r["audio_reason"]))}">—</abbr>'
    cells = [
        _frequency(ch),
        escape(str(ch.get("mode", ""))),
        _num(ch.get("level_dbfs"), ".1f", " dBFS"),
        _num(carrier.get("error_hz"), "+.1f", " Hz"),
        _num(modulation.get("depth_percent"), ".0f", " %"),
        snr_cell,
        "—" if share is None else f"{100 * share:.0f} %",
    ]
    return (f'<tr><th scope="row"><a href="#{_anchor(pc.name)}">{escape(pc.name)}</a></th>'
            + "".join(f"<td>{c}</td>" for c in cells) + "</tr>")


def _channel_section(pc: PageChannel, duration_s: float) -> str:
    r = pc.report
    ch = r["channel"]
    segs = r.get("activity") or []
    share = activity_share(r, duration_s)
    when = "; ".join(f"{s['start_s']:.2f}–{s['end_s']:.2f} s" for s in segs) or "no activity found"
    kind = "audio/flac" if pc.audio.lower().endswith(".flac") else "audio/wav"
    parts = [
        f'<section class="channel" id="{_anchor(pc.name)}" aria-labelledby="{_anchor(pc.name)}-h">',
        f'<h3 id="{_anchor(pc.name)}-h">{escape(pc.name)} <span class="sub">{_frequency(ch)}, '
        f'{escape(str(ch.get("mode", "")))}, {_num(ch.get("bandwidth_hz"), "g", " Hz")}</span></h3>',
        f'<p class="when">Active: {escape(when)}'
        + ("" if share is None else f" ({100 * share:.0f} % of the time)") + "</p>",
        f'<audio controls preload="metadata" src="{_href(pc.audio)}" aria-label="audio of {escape(pc.name)}">'
        f'<a href="{_href(pc.audio)}">{escape(pc.audio)}</a></audio>',
        f'<p class="file">Audio file: <a href="{_href(pc.audio)}">{escape(pc.audio)}</a></p>',
    ]
    if pc.overview:
        parts.append(
            f'<figure><img src="{_href(pc.overview)}" alt="Stage spectra of {escape(pc.name)}: the input around '
            f'the channel, the channel baseband, the detector output and the audio, stacked in chain order" '
            f'><figcaption>Spectrum at each stage of the receiver chain, input at the top.'
            "</figcaption></figure>")
    if pc.links:
        items = "".join(f'<li><a href="{_href(path)}">{escape(label)}</a></li>' for label, path in pc.links)
        parts.append(f'<ul class="links" aria-label="JSON files of {escape(pc.name)}">{items}</ul>')
    parts.append("</section>")
    return "\n".join(parts)


_STYLE = """
:root { --ink:#22262b; --muted:#5b6068; --rule:#dfe3e8; --accent:#2f7d4f; --mark:#e8b93c; --paper:#fbfbf8; }
* { box-sizing: border-box; }
body { margin: 0 auto; max-width: 62rem; padding: 1.5rem 1.25rem 3rem; background: var(--paper); color: var(--ink);
  font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", sans-serif; }
header { border-bottom: 3px solid var(--accent); padding-bottom: .6rem; margin-bottom: 1rem; }
h1 { font-size: 1.55rem; margin: 0 0 .2rem; letter-spacing: .01em; }
h2 { font-size: 1.2rem; margin: 2rem 0 .6rem; padding-left: .55rem; border-left: 6px solid var(--mark); }
h3 { font-size: 1.08rem; margin: 0 0 .3rem; }
.sub { font-weight: normal; color: var(--muted); }
dl.summary { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1.2rem; margin: .6rem 0 0; }
dl.summary dt { color: var(--muted); } dl.summary dd { margin: 0; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
caption { text-align: left; color: var(--muted); padding-bottom: .35rem; }
th, td { padding: .35rem .55rem; border-bottom: 1px solid var(--rule); text-align: right; white-space: nowrap; }
thead th { border-bottom: 2px solid var(--ink); vertical-align: bottom; }
th[scope=row], thead th:first-child { text-align: left; }
tbody tr:nth-child(even) { background: #f1f3ef; }
abbr { text-decoration: underline dotted; cursor: help; }
figure { margin: .8rem 0; } figure img { width: 100%; height: auto; border: 1px solid var(--rule); background: #fff; }
figcaption { color: var(--muted); font-size: .9rem; }
.channel { border: 1px solid var(--rule); border-top: 4px solid var(--accent); background: #fff;
  padding: .9rem 1rem .4rem; margin: 1.2rem 0; }
.channel audio { width: 100%; margin: .3rem 0; }
.when, .file { margin: .2rem 0; } .file { font-size: .9rem; color: var(--muted); }
ul.links { display: flex; flex-wrap: wrap; gap: .3rem 1.2rem; padding: 0; list-style: none; margin: .3rem 0 .6rem; }
a { color: #1d3f6e; }
footer { margin-top: 2rem; color: var(--muted); font-size: .85rem; border-top: 1px solid var(--rule); padding-top: .5rem; }
@media print {
  body { background: #fff; max-width: none; font-size: 11pt; }
  .channel { break-inside: avoid; border-color: #999; }
  audio { display: none; } .file { color: var(--ink); }
  a { color: inherit; text-decoration: none; }
}
"""


def render_report_page(
    *,
    title: str,
    summary: Sequence[tuple[str, str]],
    channels: Sequence[PageChannel],
    timeline: str | None,
    duration_s: float,
    report_json: str | None = None,
    elsewhere: str | None = None,
) -> str:
    """The whole page as text.

    Parameters
    ----------
    title : str
        Page heading (names the capture).
    summary : sequence of (term, value)
        Facts about the run shown under the heading (plain text; escaped here).
    channels : sequence of PageChannel
    timeline : str or None
        The activity timeline figure, relative to the page.
    duration_s : float
        The processed duration (s), for the activity shares.
    report_json : str, optional
        The run's whole JSON report, relative to the page.
    elsewhere : str, optional
        The JSON report when it lies outside the page's folder: named as text, not linked.
    """
    notes = sorted({str(pc.report["audio_reason"]) for pc in channels if pc.report.get("audio_reason")})
    head = ("Channel", "Frequency", "Mode", "Level", "Carrier error", "Depth", "SNR", "Active")
    table = [
        '<table>',
        f"<caption>{len(channels)} channel(s). Level: mean power in the channel; carrier error: measured minus "
        "nominal; depth: AM modulation depth; active: share of the processed time.</caption>",
        "<thead><tr>" + "".join(f'<th scope="col">{h}</th>' for h in head) + "</tr></thead>",
        "<tbody>", *(_row(pc, duration_s) for pc in channels), "</tbody>", "</table>",
    ]
    if notes:
        table.append('<p class="file">SNR —: ' + escape("; ".join(notes)) + "</p>")
    body = [
        "<header>", f"<h1>{escape(title)}</h1>",
        '<dl class="summary">' + "".join(f"<dt>{escape(k)}</dt><dd>{escape(v)}</dd>" for k, v in summary) + "</dl>",
        "</header>", "<main>",
        '<section aria-labelledby="channels-h"><h2 id="channels-h">Channels</h2>', *table, "</section>",
    ]
    if timeline:
        body += [
            '<section aria-labelledby="timeline-h"><h2 id="timeline-h">Activity timeline</h2>',
            f'<figure><img src="{_href(timeline)}" alt="Activity timeline: one row per channel, time across, a bar '
            f'for each stretch of activity coloured by its level in dBFS"><figcaption>When each channel was '
            "active. Bar colour: level of the segment (scale at the right).</figcaption></figure>",
            "</section>",
        ]
    body += ['<section aria-labelledby="listen-h"><h2 id="listen-h">Listen and look, channel by channel</h2>',
             *(_channel_section(pc, duration_s) for pc in channels), "</section>", "</main>"]
    foot = f"Written by iqsift {escape(__version__)}."
    if report_json:
        foot += f' All numbers: <a href="{_href(report_json)}">{escape(report_json)}</a>.'
    elif elsewhere:
        foot += f" All numbers: {escape(elsewhere)} (outside this folder, not linked)."
    body.append(f"<footer>{foot}</footer>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            f"<title>{escape(title)}</title>\n<style>{_STYLE}</style>\n</head>\n<body>\n"
            + "\n".join(body) + "\n</body>\n</html>\n")


def report_file_paths(folder: Path, stems: Sequence[str], fmt: str) -> dict[str, Any]:
    """Every file :func:`write_html_report` writes into ``folder``: page, timeline, per-stem figure and data."""
    figs = Path(folder) / FIGURE_FOLDER
    return {
        "html": Path(folder) / REPORT_NAME,
        "timeline": figs / f"activity.{fmt}",
        "overview": [figs / f"{stem}.overview.{fmt}" for stem in stems],
        "data": [figs / f"{stem}.overview.json" for stem in stems],
    }


def check_report_files(folder: Path, stems: Sequence[str], fmt: str, force: bool, protect: tuple[Any, ...] = ()) -> None:
    """Before any work: none of the page's files may be overwritten without ``force`` (inputs never)."""
    paths = report_file_paths(folder, stems, fmt)
    for path in (paths["html"], paths["timeline"], *paths["overview"], *paths["data"]):
        if path.parent.is_dir():
            check_output_path(path, force, protect)


def _rel(path: str | os.PathLike[str], folder: Path) -> str:
    return PurePosixPath(*Path(os.path.relpath(Path(path).absolute(), Path(folder).absolute())).parts).as_posix()


def write_html_report(
    folder: Path,
    *,
    receivers: Sequence[Any],
    stems: Sequence[str],
    reports: Sequence[Mapping[str, Any]],
    audio_files: Sequence[str | os.PathLike[str]],
    capture_name: str,
    summary: Sequence[tuple[str, str]],
    start_s: float,
    duration_s: float,
    fmt: str,
    outputs: Any,
    report_json: str | os.PathLike[str] | None = None,
) -> list[Path]:
    """Write ``report.html`` and its figures into ``folder`` through ``outputs`` (an OutputSet).

    Per channel the stage-spectra overview (``report_files/<stem>.overview.<fmt>``, and its data as
    JSON) is drawn from the receiver's accumulated spectra; the activity timeline of all channels is
    ``report_files/activity.<fmt>``. Returns the final paths (committed with the job's other outputs).
    """
    from .activity_plot import plot_activity_timeline
    from .stage_plots import write_overview

    folder = Path(folder)
    paths = report_file_paths(folder, stems, fmt)
    inside = report_json is not None and Path(folder).absolute() in Path(report_json).absolute().parents
    json_rel = _rel(report_json, folder) if inside and report_json is not None else None
    outputs.make_folder(folder / FIGURE_FOLDER)
    written: list[Path] = []
    channels = []
    for rx, report, audio, fig, data in zip(receivers, reports, audio_files, paths["overview"], paths["data"]):
        made = write_overview(rx, fig, capture_name=capture_name, fmt=fmt, data_path=data, outputs=outputs)
        written += made
        links = [("stage spectra data (JSON)", _rel(data, folder))] if made else []
        if json_rel is not None:
            links.insert(0, ("report (JSON)", json_rel))
        channels.append(PageChannel(report=report, audio=_rel(audio, folder),
                                    overview=_rel(fig, folder) if made else None, links=links))
    rows = [(pc.name, [(s["start_s"], s["end_s"], s.get("level_dbfs")) for s in pc.report.get("activity") or []])
            for pc in channels]
    plot_activity_timeline(rows, outputs.reserve(paths["timeline"]), start_s=start_s,
                           end_s=start_s + max(duration_s, 1e-9), title=f"{capture_name}: activity", fmt=fmt)
    written.append(paths["timeline"])
    page = render_report_page(
        title=f"iqsift report: {capture_name}", summary=summary, channels=channels,
        timeline=_rel(paths["timeline"], folder), duration_s=duration_s,
        report_json=json_rel, elsewhere=None if inside or report_json is None else str(report_json))
    outputs.reserve(paths["html"]).write_text(page, encoding="utf-8")
    written.append(paths["html"])
    return written
