"""The records of a batch: each capture's ``batch.jsonl`` line, the batch's result, and every channel's
activity in absolute time (``activity.csv``).

Plain data only: :mod:`iqsift.jobs.batch_capture` makes a :class:`CaptureOutcome` per capture on a
worker, :mod:`iqsift.jobs.batch` collects them into a :class:`BatchResult` and writes the files.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone
from pathlib import Path
from typing import Any, Literal, Mapping, Sequence

from ..jsonable import to_jsonable
from .common import stamped

__all__ = ["ACTIVITY_CSV", "BATCH_LOG", "ActivitySegment", "BatchResult", "CaptureOutcome", "OutputFile",
           "activity_csv_writer", "activity_segments", "parse_utc", "utc_at"]

BATCH_LOG = "batch.jsonl"
ACTIVITY_CSV = "activity.csv"
ACTIVITY_COLUMNS = ("start_utc", "end_utc", "capture", "channel", "frequency_hz", "start_s", "end_s",
                    "duration_s", "level_dbfs")


# -- typed results --------------------------------------------------------------------------------
@dataclass(frozen=True)
class OutputFile:
    """One file a capture's task wrote: ``path`` relative to the batch folder, and its SHA-256 (hex)."""

    path: str
    sha256: str

    def to_dict(self) -> dict[str, Any]:
        return {"path": self.path, "sha256": self.sha256}


@dataclass(frozen=True)
class ActivitySegment:
    """One stretch of activity of one channel: ``capture`` (the capture's stem), ``channel`` (its plan
    name), ``frequency_hz`` (nominal carrier, Hz; None without a centre frequency), ``start_s``/``end_s``
    (from the capture's start, s), ``level_dbfs``, and ``start_utc``/``end_utc`` (RFC 3339, UTC, to the
    microsecond; None unless the capture segment states ``core:datetime``)."""

    capture: str
    channel: str
    frequency_hz: float | None
    start_s: float
    end_s: float
    level_dbfs: float | None
    start_utc: str | None
    end_utc: str | None

    def to_dict(self) -> dict[str, Any]:
        return {"start_utc": self.start_utc, "end_utc": self.end_utc, "capture": self.capture,
                "channel": self.channel, "frequency_hz": self.frequency_hz, "start_s": self.start_s,
                "end_s": self.end_s, "duration_s": self.end_s - self.start_s, "level_dbfs": self.level_dbfs}

    def sort_key(self) -> tuple[Any, ...]:
        """UTC first (fixed-width strings sort in time order), then capture time."""
        return (self.start_utc is None, self.start_utc or "", self.capture, self.start_s, self.channel)


@dataclass(frozen=True)
class CaptureOutcome:
    """What became of one capture of a batch; :meth:`to_dict` is its ``batch.jsonl`` line.

    ``capture`` and ``plan`` are absolute paths; ``stem`` names the capture's folder; ``status`` is
    ``"ok"`` or ``"failed"`` with ``error`` (one line) when failed; ``outputs`` lists every file of the
    folder with its SHA-256; ``activity`` (for ``activity.csv``, not in the line) the channels' activity;
    ``warnings`` what the extraction warned of; ``options`` and ``plan_sha256`` how it was made (a
    resumed capture must match them); ``timings`` ``started_utc``, ``finished_utc``, ``elapsed_s`` (the
    task) and ``processing_s`` (streaming); ``worker`` the Dask worker's address, ``versions`` its
    iqsift, numpy, scipy and Python and ``worker_peak_rss_mb`` its memory high-water mark after the
    task (MB); ``resumed`` whether it was taken over from an earlier run.
    """

    capture: str
    stem: str
    plan: str
    status: Literal["ok", "failed"]
    error: str | None
    outputs: tuple[OutputFile, ...]
    channels: int
    activity: tuple[ActivitySegment, ...]
    warnings: tuple[str, ...]
    options: Mapping[str, Any]
    plan_sha256: str | None
    timings: Mapping[str, Any]
    worker: str | None
    versions: Mapping[str, str]
    resumed: bool = False
    worker_peak_rss_mb: float | None = None
    split: Mapping[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """The capture's ``batch.jsonl`` line."""
        line: dict[str, Any] = {"capture": self.capture, "stem": self.stem, "status": self.status}
        if self.error is not None:
            line["error"] = self.error
        line.update({
            "plan": self.plan, "plan_sha256": self.plan_sha256,
            "folder": self.stem if self.status == "ok" else None,
            "outputs": [o.to_dict() for o in self.outputs], "channels": self.channels,
            "activity_segments": len(self.activity), "warnings": list(self.warnings),
            "options": dict(self.options), "timings": dict(self.timings), "worker": self.worker,
            "worker_peak_rss_mb": self.worker_peak_rss_mb, "versions": dict(self.versions), "resumed": self.resumed,
            "split": None if self.split is None else dict(self.split),
        })
        return to_jsonable(line)

    @classmethod
    def from_line(cls, line: Mapping[str, Any], activity: tuple[ActivitySegment, ...]) -> "CaptureOutcome":
        """An earlier run's line taken over by a resumed batch."""
        return cls(
            capture=line["capture"], stem=line["stem"], plan=line["plan"], status=line["status"],
            error=line.get("error"), outputs=tuple(OutputFile(o["path"], o["sha256"]) for o in line["outputs"]),
            channels=line["channels"], activity=activity, warnings=tuple(line.get("warnings", ())),
            options=line["options"], plan_sha256=line.get("plan_sha256"), timings=line.get("timings", {}),
            worker=line.get("worker"), versions=line.get("versions", {}), resumed=True,
            worker_peak_rss_mb=line.get("worker_peak_rss_mb"), split=line.get("split"),
        )


@dataclass(frozen=True)
class BatchResult:
    """A finished batch: its ``folder`` (absolute), the ``cluster`` it ran on (``kind``: local, address,
    scheduler_file, client or none; ``address``; ``workers``), the ``captures`` in the order given, every
    channel's ``activity`` sorted by time (``activity.csv``), and ``elapsed_s`` (s)."""

    folder: str
    cluster: Mapping[str, Any]
    captures: tuple[CaptureOutcome, ...]
    activity: tuple[ActivitySegment, ...]
    elapsed_s: float

    schema = "batch-v1"

    @property
    def failed(self) -> tuple[CaptureOutcome, ...]:
        return tuple(c for c in self.captures if c.status == "failed")

    @property
    def batch_log(self) -> str:
        return str(Path(self.folder) / BATCH_LOG)

    @property
    def activity_csv(self) -> str:
        return str(Path(self.folder) / ACTIVITY_CSV)

    def to_dict(self) -> dict[str, Any]:
        """The JSON ``iqsift batch --json`` prints."""
        return stamped(self.schema, {
            "folder": self.folder,
            "cluster": dict(self.cluster),
            "counts": {"captures": len(self.captures), "ok": len(self.captures) - len(self.failed),
                       "failed": len(self.failed), "resumed": sum(c.resumed for c in self.captures)},
            "captures": [c.to_dict() for c in self.captures],
            "activity_segments": len(self.activity),
            "outputs": {"batch_log": self.batch_log, "activity_csv": self.activity_csv},
            "elapsed_s": self.elapsed_s,
        })


# -- activity in absolute time --------------------------------------------------------------------
_RFC3339 = re.compile(r"^(\d{4}-\d{2}-\d{2})[Tt ](\d{2}:\d{2}:\d{2})(?:\.(\d+))?([Zz]|[+-]\d{2}:\d{2})$")


def parse_utc(text: str | None) -> datetime | None:
    """An RFC 3339 time (SigMF ``core:datetime``) as an aware UTC datetime (to the microsecond); None
    when absent or unreadable (fractions beyond microseconds are cut: Python's datetime holds no more)."""
    match = _RFC3339.match(text or "")
    if match is None:
        return None
    date, clock, fraction, zone = match.groups()
    try:
        stamp = datetime.strptime(f"{date}T{clock}", "%Y-%m-%dT%H:%M:%S")
    except ValueError:
        return None
    stamp = stamp.replace(microsecond=int((fraction or "0")[:6].ljust(6, "0")))
    if zone in ("Z", "z"):
        return stamp.replace(tzinfo=timezone.utc)
    sign = 1 if zone[0] == "+" else -1
    offset = timedelta(hours=int(zone[1:3]), minutes=int(zone[4:6]))
    return (stamp - sign * offset).replace(tzinfo=timezone.utc)


def utc_at(segments: Sequence[Mapping[str, Any]], rate_hz: float, time_s: float) -> str | None:
    """The UTC time of capture time ``time_s``, from the capture segment holding it (None without a
    ``datetime`` there): the segment's datetime plus the samples since its start over the rate."""
    sample = time_s * rate_hz
    holding = [s for s in segments if s["sample_start"] <= sample]
    start = parse_utc(holding[-1].get("datetime")) if holding else None
    if start is None:
        return None
    when = start + timedelta(seconds=(sample - holding[-1]["sample_start"]) / rate_hz)
    return when.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def activity_segments(report: Mapping[str, Any], capture: str) -> tuple[ActivitySegment, ...]:
    """Every channel's activity in an extract report (``report.json``), with UTC times where known.

    Parameters
    ----------
    report : Mapping
        An ``extract-v1`` document.
    capture : str
        The name to file the segments under (the capture's stem).
    """
    rate_hz = report["capture"]["sample_rate_hz"]
    segments = sorted(report["capture"]["segments"], key=lambda s: s["sample_start"])
    found = []
    for channel in report["channels"]:
        for seg in channel.get("activity") or ():
            found.append(ActivitySegment(
                capture, channel["channel"]["name"], channel["channel"].get("frequency_hz"), seg["start_s"],
                seg["end_s"], seg.get("level_dbfs"), utc_at(segments, rate_hz, seg["start_s"]),
                utc_at(segments, rate_hz, seg["end_s"])))
    return tuple(found)


def activity_csv_writer(segments: Sequence[ActivitySegment]) -> Any:
    """A writer of ``activity.csv`` for :func:`write_atomically`."""
    def number(value: float | None, digits: int) -> str:
        return "" if value is None else f"{value:.{digits}f}"

    def write(handle: Any) -> None:
        out = csv.writer(handle, lineterminator="\n")
        out.writerow(ACTIVITY_COLUMNS)
        for s in segments:
            out.writerow([s.start_utc or "", s.end_utc or "", s.capture, s.channel, number(s.frequency_hz, 3),
                          number(s.start_s, 6), number(s.end_s, 6), number(s.end_s - s.start_s, 6),
                          number(s.level_dbfs, 2)])
    return write
