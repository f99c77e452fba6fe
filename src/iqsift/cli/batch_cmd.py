"""``iqsift batch``: many captures, each extracted as ``iqsift extract`` would, on Dask's scheduler."""

from __future__ import annotations

import re
import sys
from typing import Any, Callable, Iterator, List, Optional

import typer

from ..errors import IqsiftError
from .app import app
from .common import emit_json
from .options import (
    CenterOption,
    ForceOption,
    FormatOption,
    HtmlOption,
    IqCorrectOption,
    JsonOption,
    NonfiniteOption,
    OptStr,
    PerChannelBasebandOption,
    PerChannelSpectraOption,
    PlotFormatOption,
    PpmOption,
    QuietOption,
    RateOption,
    StrictOption,
)


@app.command("batch")
def batch_command(
    captures: Optional[List[str]] = typer.Argument(
        None, metavar="CAPTURE...", help="Captures: paths or shell globs (quoted globs are expanded too)."),
    plan_path: OptStr = typer.Option(
        None, "--plan", "-p", help="Channel plan (TOML) for every capture without its own (manifest line)."),
    out_dir: str = typer.Option(
        ..., "--out-dir", "-o", help="Batch folder: <capture stem>/ per capture, batch.jsonl, activity.csv."),
    manifest: OptStr = typer.Option(
        None, "--manifest", help="File listing one capture per line, optionally followed by its plan "
                                 "(paths relative to the manifest's folder); instead of CAPTURE..."),
    workers: Optional[int] = typer.Option(
        None, "--workers", "-w", min=1, help="Worker processes of the local cluster (default: one per core)."),
    scheduler: OptStr = typer.Option(
        None, "--scheduler", help="Run on a running Dask scheduler at ADDRESS (tcp://host:8786)."),
    scheduler_file: OptStr = typer.Option(
        None, "--scheduler-file", help="Run on the Dask scheduler described by FILE (dask scheduler "
                                       "--scheduler-file FILE)."),
    resume: bool = typer.Option(
        False, "--resume", help="Keep captures whose outputs listed in batch.jsonl are intact (sha256); run the rest."),
    split_seconds: Optional[float] = typer.Option(
        None, "--split-seconds", help="Cut each capture into time pieces of about S seconds (rounded to the filter "
                                      "bank's hop) run in parallel; outputs equal a whole pass's.", metavar="S"),
    spectra: bool = PerChannelSpectraOption,
    plot_format: str = PlotFormatOption,
    baseband: bool = PerChannelBasebandOption,
    allow_nonfinite: bool = NonfiniteOption,
    force: bool = ForceOption,
    quiet: bool = QuietOption,
    json_out: bool = JsonOption,
    format: OptStr = FormatOption,
    rate: OptStr = RateOption,
    center: OptStr = CenterOption,
    strict: bool = StrictOption,
    ppm: Optional[float] = PpmOption,
    iq_correct: bool = IqCorrectOption,
    annotate: bool = typer.Option(
        False, "--annotate", help="Also write <capture stem>.annotated.sigmf-meta in each capture's folder: its "
                                  "SigMF metadata (metadata-only) with one annotation per activity segment."),
    html: bool = HtmlOption,
) -> None:
    """Extract every capture with its plan on a Dask cluster; exit status 1 if some captures failed."""
    from ..jobs.batch import batch_files, expand_captures, read_manifest

    if bool(captures) == (manifest is not None):
        raise typer.BadParameter("give captures (CAPTURE...) or --manifest FILE, one of the two")
    try:
        items = read_manifest(manifest) if manifest is not None else expand_captures(captures or ())
        with _progress_bar(quiet, "captures" if split_seconds is None else "pieces") as progress:
            result = batch_files(
                items, plan_path, out_dir, workers=workers, scheduler=scheduler, scheduler_file=scheduler_file,
                spectra=spectra, plot_format=plot_format, baseband=baseband, allow_nonfinite=allow_nonfinite,
                force=force, resume=resume, progress=progress, format=format, rate=rate, center=center,
                strict=strict, ppm=ppm, split_seconds=split_seconds,
                iq_correct=iq_correct, annotate=annotate, html=html,
            )
    except IqsiftError as exc:
        exc.args = (_in_batch_words(str(exc), exc.parameters),)
        raise
    document = result.to_dict()
    for line in document["captures"]:
        if line["status"] == "failed":
            where = "" if line["capture"] in line["error"] else f"{line['capture']}: "
            sys.stderr.write(f"iqsift: error: {where}{line['error']}\n")
    if json_out:
        emit_json(document)
    else:
        typer.echo(format_batch(document))
    if result.failed:
        # Not typer.Exit(1): cli.main runs the app with standalone_mode=False, where click turns Exit
        # into a return value that main does not pass on; SystemExit reaches the process unchanged.
        raise SystemExit(1)


_BATCH_FLAGS = {"captures": "CAPTURE", "plan": "--plan", "resume": "--resume", "workers": "--workers",
                "scheduler": "--scheduler", "scheduler_file": "--scheduler-file", "split_seconds": "--split-seconds"}
"""The batch job's own parameters as this command's flags (the shared ones are in options.FLAGS)."""


def _in_batch_words(message: str, parameters: tuple[str, ...]) -> str:
    for name in sorted(set(parameters) & _BATCH_FLAGS.keys(), key=len, reverse=True):
        message = re.sub(rf"(?<![\w-]){re.escape(name)}(?![\w-])", _BATCH_FLAGS[name], message)
    return message


class _progress_bar:
    """A rich progress bar over captures (or pieces) on stderr, only on a terminal and without ``-q``."""

    def __init__(self, quiet: bool, unit: str = "captures") -> None:
        self.enabled = not quiet and sys.stderr.isatty()
        self.unit = unit
        self._bar: Any = None
        self._task: Any = None

    def __enter__(self) -> Optional[Callable[[int, int], None]]:
        if not self.enabled:
            return None
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

        self._bar = Progress(TextColumn("batch"), BarColumn(), MofNCompleteColumn(), TextColumn(self.unit),
                             TimeElapsedColumn(), console=Console(stderr=True), transient=False)
        self._bar.start()
        return self.advance

    def advance(self, done: int, total: int) -> None:
        if self._task is None:
            self._task = self._bar.add_task("batch", total=total)
        self._bar.advance(self._task, done)

    def __exit__(self, *exc: object) -> None:
        if self._bar is not None:
            self._bar.stop()


def format_batch(result: dict) -> str:
    """Human summary of a batch: one line per capture, then the files and the counts."""
    lines = [f"{'capture':<28} {'status':<8} {'channels':>8} {'active':>7} {'time s':>8}  folder or error"]
    for c in result["captures"]:
        elapsed = c["timings"].get("elapsed_s")
        status = "resumed" if c["resumed"] else c["status"]
        lines.append(f"{c['stem']:<28} {status:<8} {c['channels']:>8} {c['activity_segments']:>7} "
                     f"{'-' if elapsed is None else f'{elapsed:.2f}':>8}  {c['folder'] or c['error']}")
    counts, cluster = result["counts"], result["cluster"]
    where = "no cluster needed" if cluster["kind"] == "none" else (
        f"{cluster['workers']} worker(s), {cluster['kind']} cluster {cluster['address']}")
    lines += [f"batch.jsonl: {result['outputs']['batch_log']}", f"activity.csv: {result['outputs']['activity_csv']}",
              f"{counts['ok']} of {counts['captures']} capture(s) ok ({counts['resumed']} resumed), "
              f"{counts['failed']} failed, in {result['elapsed_s']:.2f} s on {where}"]
    return "\n".join(lines)
