"""One capture of a batch: the task a Dask worker runs.

Each capture is :func:`~iqsift.jobs.extract_file` into a hidden staging folder beside its final place
(``<batch>/.<stem>.batch-partial-<random>``), then one rename of the whole folder, so
``<batch>/<stem>/`` is either complete or absent. The outcome (:class:`~iqsift.jobs.batch_records.CaptureOutcome`)
lists every file of the folder with its SHA-256.
"""

from __future__ import annotations

import os
import platform
import shutil
import sys
import time
import uuid
import warnings
from dataclasses import dataclass, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable, Mapping

from .. import __version__
from ..captures.integrity import sha256_of_file
from ..errors import IqsiftError, OutputExistsError
from ..jsonable import dumps
from .batch_records import CaptureOutcome, OutputFile, activity_segments
from .extract import ChannelResult, ExtractResult, extract_file

__all__ = ["STAGING_MARK", "CaptureTask", "one_line", "run_capture", "utc_now"]

STAGING_MARK = ".batch-partial-"
"""Hidden staging folders are ``.<stem>.batch-partial-<random>`` in the batch folder."""


@dataclass(frozen=True)
class CaptureTask:
    """Everything a worker needs for one capture (plain data: it travels to the worker pickled)."""

    capture: str
    stem: str
    plan: str
    plan_sha256: str
    folder: str
    options: Mapping[str, Any]
    force: bool

    def failed(self, error: str, timings: Mapping[str, Any], worker: str | None = None,
               versions: Mapping[str, str] | None = None) -> CaptureOutcome:
        return CaptureOutcome(self.capture, self.stem, self.plan, "failed", error, (), 0, (), (), self.options,
                              self.plan_sha256, timings, worker, versions or {})


def utc_now() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def one_line(exc: BaseException) -> str:
    """An error as one line: iqsift's own in its words, anything else headed by its type."""
    text = str(exc) if isinstance(exc, IqsiftError) else f"{type(exc).__name__}: {exc}"
    return " ".join(text.split())


def _versions() -> dict[str, str]:
    import numpy
    import scipy

    return {"iqsift": __version__, "numpy": numpy.__version__, "scipy": scipy.__version__,
            "python": platform.python_version()}


def _worker_address() -> str | None:
    try:
        from distributed import get_worker

        return str(get_worker().address)
    except (ImportError, ValueError):  # run outside a Dask worker
        return None


def _peak_rss_mb() -> float | None:
    """This process's peak resident memory so far (MB): a worker's high-water mark, for sizing workers."""
    try:
        import resource
    except ImportError:  # not on Windows
        return None
    kib_or_bytes = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux, bytes on macOS
    return float(kib_or_bytes) * (1.0 if sys.platform == "darwin" else 1024.0) / 1e6


def _moved(result: ExtractResult, old: Path, new: Path) -> ExtractResult:
    """``result`` with the paths it names moved from folder ``old`` to ``new``."""
    def move(value: Any) -> Any:
        if isinstance(value, str) and (value == str(old) or value.startswith(str(old) + os.sep)):
            return str(new) + value[len(str(old)):]
        if isinstance(value, list):
            return [move(v) for v in value]
        return value

    channels = tuple(ChannelResult(c.report, {k: move(v) for k, v in c.outputs.items()}) for c in result.channels)
    return replace(result, folder=str(new), channels=channels)


def _commit_folder(staging: Path, final: Path, force: bool) -> None:
    """Rename the finished staging folder into place (replacing an old one only with ``force``)."""
    if not (final.exists() or final.is_symlink()):
        os.rename(staging, final)
        return
    if not force:
        raise OutputExistsError(f"{final}: appeared while the batch ran; pass force to replace it",
                                parameters=("force",))
    old = final.with_name(f".{final.name}{STAGING_MARK}{uuid.uuid4().hex[:8]}-old")
    os.rename(final, old)
    os.rename(staging, final)
    if old.is_dir() and not old.is_symlink():
        shutil.rmtree(old)
    else:
        old.unlink()


def run_capture(task: CaptureTask, produce: Callable[[Path], ExtractResult] | None = None) -> CaptureOutcome:
    """Extract one capture into ``<folder>/<stem>/`` through a staging folder (the task a worker runs).

    A capture iqsift refuses (unreadable, plan outside its band ...) gives a failed outcome, not an
    exception: running it again would fail the same way. Any other exception is raised for Dask to
    retry. Either way the staging folder is removed. ``produce(staging)`` replaces the extraction (a
    capture run in time pieces, :mod:`iqsift.jobs.split`).
    """
    started, t0 = utc_now(), time.perf_counter()
    folder = Path(task.folder)
    final = folder / task.stem
    staging = folder / f".{task.stem}{STAGING_MARK}{uuid.uuid4().hex[:12]}"
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            made = (extract_file(task.capture, task.plan, staging, force=False, **task.options) if produce is None
                    else produce(staging))
            result = _moved(made, staging, final)
        (staging / "report.json").write_text(dumps(result.to_dict()), encoding="utf-8")
        report = result.to_dict()
        outputs = tuple(OutputFile(str(Path(task.stem) / p.relative_to(staging)), sha256_of_file(p))
                        for p in sorted(staging.rglob("*")) if p.is_file())
        _commit_folder(staging, final, task.force)
    except IqsiftError as exc:
        shutil.rmtree(staging, ignore_errors=True)
        return task.failed(one_line(exc), {"started_utc": started, "finished_utc": utc_now(),
                                            "elapsed_s": time.perf_counter() - t0},
                           _worker_address(), _versions())
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    said = tuple(" ".join(str(w.message).replace(str(staging), str(final)).split()) for w in caught)
    timings = {"started_utc": started, "finished_utc": utc_now(), "elapsed_s": time.perf_counter() - t0,
               "processing_s": result.processing_s, "capture_s": result.selection.duration_s}
    return CaptureOutcome(task.capture, task.stem, task.plan, "ok", None, outputs, len(result.channels),
                          activity_segments(report, task.stem), said, task.options, task.plan_sha256, timings,
                          _worker_address(), _versions(), worker_peak_rss_mb=_peak_rss_mb())
