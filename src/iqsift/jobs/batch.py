"""The ``batch`` job: many captures, each extracted exactly as ``iqsift extract`` would, on Dask's scheduler.

Each capture is one task (:mod:`iqsift.jobs.batch_capture`): :func:`~iqsift.jobs.extract_file` into a
hidden staging folder beside its final place, then one rename of the whole folder, so ``out_dir/<stem>/``
is either complete or absent (a task that fails, or a worker killed halfway, leaves only a staging
folder, removed when the batch ends). Tasks run on Dask's distributed scheduler: a local cluster of worker processes by default, or a
running cluster given by address or scheduler file, whose workers must see the captures and the output
folder under the same paths (shared storage). Dask and distributed are imported only when a batch
runs, never when iqsift is imported.

The batch folder also gets ``batch.jsonl`` (one line per capture: status, error, outputs with their
SHA-256, timings, versions) and ``activity.csv`` (every channel's activity across captures, with
absolute UTC times where a capture states ``core:datetime``), both written atomically (:mod:`iqsift.jobs.batch_records`).
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import time
import uuid
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterator, Mapping, Sequence, Union

from ..captures.atomic import write_atomically
from ..captures.integrity import sha256_of_file
from ..errors import IqsiftError, OutputExistsError, ParameterError
from ..jsonable import to_jsonable
from ..plan import load_plan
from .batch_capture import STAGING_MARK, CaptureTask, annotation_name, one_line, run_capture, utc_now
from .batch_inputs import capture_stem, expand_captures, read_manifest
from .batch_records import (
    ACTIVITY_CSV,
    BATCH_LOG,
    ActivitySegment,
    BatchResult,
    CaptureOutcome,
    OutputFile,
    activity_csv_writer,
    activity_segments,
    parse_utc,
    utc_at,
)
from .common import Progress, check_plot_format
from .split import check_split, submit_capture

if TYPE_CHECKING:
    from distributed import Client, Future

__all__ = [
    "ActivitySegment",
    "BatchResult",
    "CaptureOutcome",
    "OutputFile",
    "activity_segments",
    "batch_files",
    "capture_stem",
    "expand_captures",
    "parse_utc",
    "read_manifest",
    "utc_at",
]

TASK_RETRIES = 2
"""Dask re-runs a task whose code raised an unexpected error (storage hiccup, memory) this many times;
a worker that dies mid-task is replaced and its task rescheduled by the scheduler itself."""
CaptureItem = Union[str, "os.PathLike[str]", tuple[Union[str, "os.PathLike[str]"], Union[str, "os.PathLike[str]", None]]]
"""A capture path, or ``(capture, plan)`` for a capture with its own plan (a manifest line)."""


# -- the batch ------------------------------------------------------------------------------------
def _batch_folder(out_dir: str | os.PathLike[str]) -> Path:
    folder = Path(os.path.abspath(out_dir))
    if folder.exists() and not folder.is_dir():
        raise ParameterError(f"out_dir {out_dir}: exists and is not a folder", parameters=("out_dir",))
    if not folder.parent.is_dir():
        raise ParameterError(f"out_dir {out_dir}: the folder {folder.parent} does not exist", parameters=("out_dir",))
    return folder


def _tasks(captures: Sequence[CaptureItem], plan: str | os.PathLike[str] | None, folder: Path,
           options: Mapping[str, Any], force: bool) -> list[CaptureTask]:
    """One task per capture; plans read (and so checked) here, stems checked unique, before any work."""
    tasks: list[CaptureTask] = []
    plan_digests: dict[str, str] = {}
    stems: dict[str, str] = {}
    if not captures:
        raise ParameterError("captures: none given", parameters=("captures",))
    for item in captures:
        capture, own_plan = item if isinstance(item, tuple) else (item, None)
        chosen = own_plan if own_plan is not None else plan
        if chosen is None:
            raise ParameterError(f"plan: none given for {os.fspath(capture)}; give plan, or write each "
                                 "capture's TOML after it in the manifest", parameters=("plan",))
        plan_path = os.path.abspath(chosen)
        if plan_path not in plan_digests:
            load_plan(plan_path)
            plan_digests[plan_path] = sha256_of_file(Path(plan_path))
        capture_path = os.path.abspath(capture)
        stem = capture_stem(capture_path)
        if stem in (BATCH_LOG, ACTIVITY_CSV) or stem.startswith("."):
            raise ParameterError(f"captures: {os.fspath(capture)}: its output folder would be called {stem!r}; "
                                 "rename the capture", parameters=("captures",))
        if stem in stems:
            raise ParameterError(f"captures: {stems[stem]} and {capture_path} would both write to {folder / stem}; "
                                 "outputs are named by the capture's file name, which must be unique in a batch",
                                 parameters=("captures",))
        stems[stem] = capture_path
        tasks.append(CaptureTask(capture_path, stem, plan_path, plan_digests[plan_path], str(folder),
                                 dict(options), force))
    return tasks


def _earlier_lines(folder: Path) -> dict[str, Mapping[str, Any]]:
    """The lines of an earlier run's ``batch.jsonl``, by capture path."""
    path = folder / BATCH_LOG
    if not path.is_file():
        return {}
    lines: dict[str, Mapping[str, Any]] = {}
    for number, text in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        if not text.strip():
            continue
        try:
            line = json.loads(text)
            lines[line["capture"]] = line
        except (ValueError, KeyError, TypeError):
            raise ParameterError(f"resume: {path}, line {number}, is not a batch line; cannot continue that batch",
                                 parameters=("resume",)) from None
    return lines


def _resumable(task: CaptureTask, line: Mapping[str, Any] | None, folder: Path) -> CaptureOutcome | None:
    """The earlier outcome of ``task`` when it is ok, made the same way, and its files are intact."""
    if line is None or line.get("status") != "ok" or line.get("stem") != task.stem:
        return None
    if (line.get("plan"), line.get("plan_sha256"), line.get("options")) != (
            task.plan, task.plan_sha256, to_jsonable(dict(task.options))):
        return None
    for output in line.get("outputs", ()):
        path = folder / output["path"]
        if not path.is_file() or sha256_of_file(path) != output["sha256"]:
            return None
    report_path = folder / task.stem / "report.json"
    listed = {o["path"] for o in line.get("outputs", ())}
    if not all(str(Path(task.stem) / name) in listed for name in _expected_outputs(task)):
        return None
    report = json.loads(report_path.read_text(encoding="utf-8"))
    return CaptureOutcome.from_line(line, activity_segments(report, task.stem))


def _expected_outputs(task: CaptureTask) -> list[str]:
    """Files a capture's folder must list for its options (those named the same whatever the plan)."""
    return ["report.json", *(["report.html"] if task.options.get("html") else []),
            *([annotation_name(task.stem)] if task.options.get("annotate") else [])]


def _check_outputs(folder: Path, tasks: Sequence[CaptureTask], *, force: bool, resume: bool) -> None:
    """Refuse, before any work, to replace what exists without ``force``."""
    if force:
        return
    for task in tasks:
        target = folder / task.stem
        if target.exists():
            raise OutputExistsError(f"{target}: exists; pass force to replace it"
                                    + ("" if resume else " (or resume to keep intact outputs)"),
                                    parameters=("force", "resume"))
    if not resume:
        for name in (BATCH_LOG, ACTIVITY_CSV):
            if (folder / name).exists():
                raise OutputExistsError(f"{folder / name}: exists; pass force to overwrite it, or resume to "
                                        "continue that batch", parameters=("force", "resume"))


def _remove_staging(folder: Path) -> None:
    """Remove staging folders left by tasks that died (their workers killed, the batch interrupted)."""
    if folder.is_dir():
        for leftover in folder.glob(f".*{STAGING_MARK}*"):
            shutil.rmtree(leftover, ignore_errors=True)


def _local_workers(count: int) -> int:
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return max(1, min(cores, count))


def _address(client: Client) -> str | None:
    return None if client.scheduler is None else str(client.scheduler.address)


@contextlib.contextmanager
def _connected(client: Client | None, workers: int | None, scheduler: str | None, scheduler_file: str | None,
               memory_limit: str | float | None, tasks: int) -> Iterator[tuple[Client, dict[str, Any]]]:
    """A client of the cluster asked for; one started here (and stopped on exit) by default."""
    import dask
    from distributed import Client, LocalCluster

    if client is not None:
        yield client, {"kind": "client", "address": _address(client)}
        return
    if scheduler is not None or scheduler_file is not None:
        name = "scheduler" if scheduler is not None else "scheduler_file"
        try:
            remote = Client(scheduler) if scheduler is not None else Client(scheduler_file=scheduler_file)
        except (OSError, TimeoutError, ValueError) as exc:
            raise ParameterError(f"{name}: cannot connect to {scheduler or scheduler_file}: {one_line(exc)}",
                                 parameters=(name,)) from None
        with remote:
            yield remote, {"kind": "address" if scheduler is not None else "scheduler_file",
                           "address": _address(remote)}
        return
    count = workers if workers is not None else _local_workers(tasks)
    # One thread per worker process: the extraction holds the GIL in numpy glue between FFTs, so
    # processes, not threads, give the parallelism; the dashboard (an extra dependency) stays off.
    # Dask starts workers with MALLOC_TRIM_THRESHOLD_=65536, which (glibc mallopt) also fixes the mmap
    # threshold, so every 16 MiB block is mapped and faulted in afresh: measured, an extraction streams
    # 55 % slower. Our tasks free their blocks as they go; the worker keeps glibc's own defaults.
    with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}), \
            LocalCluster(n_workers=count, threads_per_worker=1, processes=True, memory_limit=memory_limit,
                         host="127.0.0.1", dashboard_address=None) as cluster, Client(cluster) as local:
        yield local, {"kind": "local", "address": cluster.scheduler_address}


def _collected(future: Future, task: CaptureTask) -> CaptureOutcome:
    """The outcome of a finished task; a task Dask gave up on (retries spent, workers lost) fails."""
    if future.status == "finished":
        outcome: CaptureOutcome = future.result()
        return outcome
    exc = future.exception() if future.status == "error" else None
    return task.failed(one_line(exc) if exc is not None else f"task {future.status} by the Dask scheduler",
                       {"finished_utc": utc_now()})


def _run_on_cluster(tasks: Sequence[CaptureTask], connection: Mapping[str, Any], progress: Progress | None,
                    split_seconds: float | None = None) -> tuple[dict[str, CaptureOutcome], dict[str, Any]]:
    from distributed import as_completed

    outcomes: dict[str, CaptureOutcome] = {}
    with _connected(tasks=len(tasks), **connection) as (client, cluster):
        cluster["workers"] = len(client.nthreads())
        futures: dict[Future, tuple[CaptureTask, Mapping[str, Any] | None]] = {}
        pieces: list[Future] = []
        for task in tasks:
            tag = uuid.uuid4().hex[:8]
            if split_seconds is None:
                futures[client.submit(run_capture, task, retries=TASK_RETRIES, pure=False,
                                      key=f"iqsift-extract-{task.stem}-{tag}")] = (task, None)
                continue
            try:
                outcome, fronts, job = submit_capture(client, run_capture, task, split_seconds, TASK_RETRIES, tag)
            except (IqsiftError, OSError) as exc:
                outcomes[task.stem] = task.failed(one_line(exc), {"finished_utc": utc_now()})
                continue
            futures[outcome] = (task, {"seconds": split_seconds, "piece_samples": job.piece_samples,
                                       "pieces": job.pieces, "units": len(job.units)})
            pieces += fronts
        total = len(pieces) if split_seconds is not None else len(tasks)
        piece_keys = {f.key for f in pieces}
        waiting = as_completed([*futures, *pieces])
        pieces.clear()  # the client keeps no piece: each is released once its consumers ran
        for future in waiting:
            if future in futures:
                task, split = futures.pop(future)
                outcomes[task.stem] = replace(_collected(future, task), split=split)
            if progress is not None and (split_seconds is None or future.key in piece_keys):
                progress(1, total)
            future.release()
    return outcomes, cluster


def batch_files(
    captures: Sequence[CaptureItem],
    plan: str | os.PathLike[str] | None,
    out_dir: str | os.PathLike[str],
    *,
    client: Client | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    scheduler_file: str | os.PathLike[str] | None = None,
    memory_limit: str | float | None = "auto",
    spectra: bool = False,
    plot_format: str = "png",
    baseband: bool = False,
    allow_nonfinite: bool = False,
    force: bool = False,
    resume: bool = False,
    progress: Progress | None = None,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    ppm: float | None = None,
    split_seconds: float | None = None,
    iq_correct: bool = False,
    annotate: bool = False,
    html: bool = False,
) -> BatchResult:
    """Extract every capture with its plan, each into ``out_dir/<stem>/``, on Dask's distributed scheduler.

    Each capture's folder holds exactly what :func:`extract_file` (``iqsift extract``) writes, and
    appears complete or not at all. ``out_dir/batch.jsonl`` gets one line per capture and
    ``out_dir/activity.csv`` every channel's activity across captures, sorted by time. A capture that
    fails is recorded as failed and the others go on; everything the batch can check (plans, names,
    existing outputs, options) is checked before any work.

    Parameters
    ----------
    captures : sequence of path or (path, plan)
        The captures (see :func:`expand_captures`, :func:`read_manifest`); a pair gives a capture its own plan.
    plan : path or None
        The plan of every capture that has none of its own.
    out_dir : path
        The batch folder (created if needed; its parent must exist).
    client : distributed.Client, optional
        An existing client to run on (kept open).
    workers : int, optional
        Worker processes of the local cluster (default: one per core, at most one per capture).
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``).
    scheduler_file : path, optional
        The scheduler file of a running Dask scheduler (``dask scheduler --scheduler-file``).
    memory_limit : str or float or None
        Memory limit of each local worker process (Dask's ``memory_limit``: "auto" shares the
        machine's memory among them, "2GiB", bytes, or None for none).
    spectra, plot_format, baseband, allow_nonfinite, format, rate, center, strict, ppm, iq_correct, html
        As for :func:`extract_file`, for every capture (``html``: ``report.html`` and ``report_files/`` in
        each capture's folder; ``iq_correct``: each capture's own first pass estimates its correction).
    annotate : bool
        Also write ``<stem>.annotated.sigmf-meta`` in each capture's folder: the recording's SigMF metadata
        with one annotation per activity segment, as ``extract --annotate`` writes it, but metadata-only
        (``core:metadata_only``; SigMF's ``core:dataset`` may only name a file beside the metadata).
    force : bool
        Replace existing capture folders, ``batch.jsonl`` and ``activity.csv``.
    resume : bool
        Keep captures an earlier run of this batch finished whose listed outputs are intact (same
        SHA-256), with the same plan and options; run the rest.
    progress : callable, optional
        Called with ``(1, total)`` as each capture (with ``split_seconds``: each piece) finishes.
    split_seconds : float, optional
        Cut each capture into time pieces of about this length (s, rounded to the filter bank's hop) run
        in parallel, with outputs equal to a whole pass's (:mod:`iqsift.jobs.split`); with annotate, not
        with spectra, baseband, html or iq_correct.

    Raises
    ------
    ParameterError
        For conflicting cluster choices, a bad plan, names that collide, or a scheduler out of reach.
    OutputExistsError
        If outputs exist and neither ``force`` nor (for intact ones) ``resume`` is given.
    """
    started = time.perf_counter()
    check_plot_format(plot_format)
    chosen = [n for n, v in (("client", client), ("workers", workers), ("scheduler", scheduler),
                             ("scheduler_file", scheduler_file)) if v is not None]
    if len(chosen) > 1:
        raise ParameterError(f"{', '.join(chosen)}: give one way to reach a cluster, not several",
                             parameters=tuple(chosen))
    if workers is not None and workers < 1:
        raise ParameterError(f"workers: got {workers}; at least 1", parameters=("workers",))
    folder = _batch_folder(out_dir)
    options = {"spectra": spectra, "plot_format": plot_format, "baseband": baseband,
               "allow_nonfinite": allow_nonfinite, "format": format, "rate": rate, "center": center,
               "strict": strict}
    if ppm is not None:  # only when given: earlier batch logs without it still resume
        options["ppm"] = ppm
    for name, wanted in (("iq_correct", iq_correct), ("annotate", annotate), ("html", html)):
        if wanted:  # likewise only when asked for
            options[name] = True
    if split_seconds is not None:
        check_split(split_seconds, options)
    tasks = _tasks(captures, plan, folder, options, force)
    earlier = _earlier_lines(folder) if resume else {}
    outcomes: dict[str, CaptureOutcome] = {}
    for task in tasks:
        kept = _resumable(task, earlier.get(task.capture), folder)
        if kept is not None:
            outcomes[task.stem] = kept
    todo = [t for t in tasks if t.stem not in outcomes]
    _check_outputs(folder, todo, force=force, resume=resume)
    folder.mkdir(exist_ok=True)
    _remove_staging(folder)
    cluster: dict[str, Any] = {"kind": "none", "address": None, "workers": 0}
    try:
        if todo:
            connection = {"client": client, "workers": workers, "scheduler": scheduler,
                          "scheduler_file": None if scheduler_file is None else os.fspath(scheduler_file),
                          "memory_limit": memory_limit}
            ran, cluster = _run_on_cluster(todo, connection, progress, split_seconds)
            outcomes.update(ran)
    finally:
        _remove_staging(folder)
    ordered = tuple(outcomes[t.stem] for t in tasks)
    activity = tuple(sorted((s for c in ordered for s in c.activity), key=ActivitySegment.sort_key))
    write_atomically(folder / BATCH_LOG, lambda handle: handle.writelines(
        json.dumps(c.to_dict(), allow_nan=False) + "\n" for c in ordered), binary=False, force=True)
    write_atomically(folder / ACTIVITY_CSV, activity_csv_writer(activity), binary=False, force=True)
    return BatchResult(str(folder), cluster, ordered, activity, time.perf_counter() - started)
