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

__all__ = ["STAGING_MARK", "CaptureTask", "annotation_name", "one_line", "run_capture", "utc_now"]

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
    return replace(result, folder=str(new), channels=channels, html=move(result.html),
                   annotations=move(result.annotations))


def annotation_name(stem: str) -> str:
    """The annotated metadata's name in a capture's folder: ``<stem>.annotated.sigmf-meta``."""
    return f"{stem}.annotated.sigmf-meta"


def check_annotatable(task: "CaptureTask") -> None:
    """Refuse, before the extraction, a capture whose recording annotations cannot describe (WAV, FLAC,
    ``.sigmf`` archives: their data are no SigMF dataset file)."""
    from ..captures import check_annotation_path
    from .common import opened

    get = task.options.get
    with opened(task.capture, format=get("format"), rate=get("rate"), center=get("center"), strict=bool(get("strict")),
                verify=False) as cap:
        check_annotation_path(cap, cap.files[-1].with_name(annotation_name(task.stem)) if cap.files
                              else Path(annotation_name(task.stem)))


def write_annotations(task: "CaptureTask", result: ExtractResult, staging: Path, final: Path) -> None:
    """``<stem>.annotated.sigmf-meta`` in the capture's folder: the recording's SigMF metadata with one
    annotation per activity segment, as ``extract --annotate`` writes it, but metadata-only.

    SigMF's ``core:dataset`` may name only a file beside the metadata (SigMF 1.2, "Global Object"), so
    metadata kept away from the data file states ``core:metadata_only`` instead; the annotations and
    every other field are those ``extract --annotate`` writes beside the data.
    """
    from ..captures import annotated_metadata
    from .annotations import activity_annotations
    from .common import opened

    get = task.options.get
    with opened(task.capture, format=get("format"), rate=get("rate"), center=get("center"), strict=bool(get("strict")),
                verify=False, ppm=result.capture.reference_ppm) as cap:
        reports = [c.report.to_dict() for c in result.channels]
        notes = [a for r in reports for a in activity_annotations(cap, r["channel"], r.get("activity") or [])]
        doc = annotated_metadata(cap, cap.files[-1].with_name(annotation_name(task.stem)), notes)
    doc["global"].pop("core:dataset", None)
    doc["global"]["core:metadata_only"] = True
    path = staging / annotation_name(task.stem)
    if path.exists():
        raise OutputExistsError(f"{final / path.name}: a channel's output has the annotations' name; rename the "
                                "channel", parameters=("annotate",))
    path.write_text(dumps(doc), encoding="utf-8")


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
            extract_options = {k: v for k, v in task.options.items() if k != "annotate"}
            if task.options.get("annotate"):
                check_annotatable(task)
            made = (extract_file(task.capture, task.plan, staging, force=False, **extract_options) if produce is None
                    else produce(staging))
            if task.options.get("annotate"):
                write_annotations(task, made, staging, final)
                made = replace(made, annotations=str(staging / annotation_name(task.stem)))
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
