"""SigMF recordings: read (meta/data pair or ``.sigmf`` archive) and write.

Follows the SigMF specification (sigmf-spec, core namespace; the ``sigmf``
package used in the tests writes ``core:version`` 1.2.6): a UTF-8 JSON
``.sigmf-meta`` file with ``global``, ``captures`` and ``annotations`` beside a
``.sigmf-data`` file of interleaved samples, or both inside an uncompressed tar
archive ``.sigmf``.

iqsift's own metadata lives in the ``iqsift`` extension namespace
(``iqsift:source``, ``iqsift:channel``, ``iqsift:design``), declared in
``core:extensions`` as optional so any SigMF reader may ignore it.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
import os
import tarfile
import warnings
from pathlib import Path
from typing import Any, overload

import numpy as np

from .. import __version__
from ..errors import CaptureError, IqsiftWarning, ParameterError
from .atomic import OutputSet
from .binary import BinarySource, ByteRun
from .capture import Annotation, Capture, Segment, check_sample_rate
from .datatypes import parse_datatype
from .integrity import RecordedChecksum

__all__ = ["read_sigmf", "read_sigmf_archive", "SigMFWriter", "sigmf_paths", "SIGMF_VERSION"]

SIGMF_VERSION = "1.2.6"
"""The ``core:version`` iqsift writes (the SigMF release the reference package implements)."""

EXTENSION = {"name": "iqsift", "version": "0.1.0", "optional": True}


def sigmf_paths(path: str | os.PathLike) -> tuple[Path, Path]:
    """Return the (meta, data) pair for a path naming either file or their common stem."""
    path = Path(path)
    name = path.name
    for suffix in (".sigmf-meta", ".sigmf-data"):
        if name.endswith(suffix):
            stem = name[: -len(suffix)]
            return path.with_name(stem + ".sigmf-meta"), path.with_name(stem + ".sigmf-data")
    return path.with_name(name + ".sigmf-meta"), path.with_name(name + ".sigmf-data")


# ----------------------------------------------------------------------------------------------
# Reading
# ----------------------------------------------------------------------------------------------
def _load_meta_text(text: bytes, where: str) -> dict[str, Any]:
    if not text.strip():
        raise CaptureError(f"{where}: metadata file is empty")
    try:
        meta = json.loads(text.decode("utf-8"))
    except UnicodeDecodeError as exc:
        raise CaptureError(f"{where}: metadata is not UTF-8 text (byte {exc.start})") from None
    except json.JSONDecodeError as exc:
        raise CaptureError(
            f"{where}: malformed or truncated metadata JSON at line {exc.lineno} column {exc.colno}: {exc.msg}"
        ) from None
    if not isinstance(meta, dict) or not isinstance(meta.get("global"), dict):
        raise CaptureError(f"{where}: metadata has no 'global' object; is this a SigMF .sigmf-meta file?")
    return meta


def _finite_number(value: Any) -> bool:
    return not isinstance(value, bool) and isinstance(value, (int, float)) and math.isfinite(value)


@overload
def _int_field(obj: dict[str, Any], key: str, where: str, default: int) -> int: ...
@overload
def _int_field(obj: dict[str, Any], key: str, where: str, default: None = None) -> int | None: ...
def _int_field(obj: dict[str, Any], key: str, where: str, default: int | None = None) -> int | None:
    if key not in obj:
        return default
    value = obj[key]
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:  # a null given is not a number either
        raise CaptureError(f"{where}: {key} must be a whole number >= 0, got {json.dumps(value)[:40]}")
    return value


def _parse_meta(
    meta: dict[str, Any],
    where: str,
    data_bytes: int,
    *,
    rate: float | None,
    strict: bool,
) -> dict[str, Any]:
    """Check the metadata against the data size; return what the Capture needs."""
    glob = meta["global"]
    if "core:datatype" not in glob:
        raise CaptureError(f"{where}: global core:datatype is missing; the sample format is unknown")
    datatype = parse_datatype(glob["core:datatype"], where)
    channels = glob.get("core:num_channels", 1)
    if channels != 1:
        raise CaptureError(
            f"{where}: core:num_channels is {channels!r}; iqsift reads single-channel recordings only"
        )
    if rate is None:
        if "core:sample_rate" not in glob:
            raise CaptureError(f"{where}: global core:sample_rate is missing; pass it as rate", parameters=("rate",))
        try:
            rate = check_sample_rate(glob["core:sample_rate"], where)
        except CaptureError as exc:
            raise CaptureError(f"{exc}; pass the sample rate as rate", parameters=("rate",)) from None
    elif "core:sample_rate" in glob and glob["core:sample_rate"] != rate:
        warnings.warn(
            f"{where}: --rate {rate:g} overrides core:sample_rate {glob['core:sample_rate']!r}", IqsiftWarning
        )

    captures = meta.get("captures", [])
    if not isinstance(captures, list) or not all(isinstance(c, dict) for c in captures):
        raise CaptureError(f"{where}: 'captures' must be a list of objects")
    starts: list[int] = []
    headers: list[int] = []
    for i, cap in enumerate(captures):
        start = _int_field(cap, "core:sample_start", f"{where}: captures[{i}]", 0)
        if starts and start <= starts[-1]:
            raise CaptureError(
                f"{where}: captures[{i}] core:sample_start {start} is not after the previous segment's "
                f"{starts[-1]}; SigMF requires captures sorted by sample_start"
            )
        starts.append(start)
        headers.append(_int_field(cap, "core:header_bytes", f"{where}: captures[{i}]", 0))
        freq = cap.get("core:frequency")
        if freq is not None and not _finite_number(freq):
            raise CaptureError(f"{where}: captures[{i}] core:frequency must be a finite number (Hz), got {freq!r}")
        stamp = cap.get("core:datetime")
        if stamp is not None and not isinstance(stamp, str):
            raise CaptureError(f"{where}: captures[{i}] core:datetime must be ISO 8601 text, got {json.dumps(stamp)[:40]}")
    trailing = _int_field(glob, "core:trailing_bytes", where, 0) or 0

    payload = data_bytes - trailing - sum(headers)
    if payload < 0:
        raise CaptureError(
            f"{where}: metadata disagrees with data file size: header and trailing bytes "
            f"({sum(headers) + trailing}) exceed the {data_bytes}-byte data file"
        )
    if payload == 0:
        raise CaptureError(f"{where}: the data file is empty (0 samples)")
    samples, tail = divmod(payload, datatype.sample_bytes)
    if tail:
        message = (
            f"{where}: data size {payload} bytes is not a whole number of {datatype.name} samples "
            f"({datatype.sample_bytes} bytes each)"
        )
        if strict or samples == 0:
            raise CaptureError(message + ("" if samples else "; no whole sample"))
        if len(captures) > 1 and any(headers[1:]):
            raise CaptureError(message + " and segments carry header bytes; cannot tell where the tail is")
        warnings.warn(message + f"; the last {tail} bytes are ignored", IqsiftWarning)

    captures, starts, headers = _drop_segments_past_end(captures, starts, headers, samples, where)
    if not captures:
        captures, starts, headers = [{}], [0], [0]
    elif starts[0] > 0:
        # samples before the first capture segment: a segment of their own, with nothing known about them
        captures, starts, headers = [{}] + list(captures), [0] + starts, [0] + headers
    segments, runs = [], []
    byte = 0
    for i, (cap, start) in enumerate(zip(captures, starts)):
        stop = starts[i + 1] if i + 1 < len(starts) else samples
        byte += headers[i]
        count = stop - start
        runs.append(ByteRun(start, count, byte))
        byte += count * datatype.sample_bytes
        freq = cap.get("core:frequency")
        if freq is None and not datatype.is_complex:
            freq = 0.0
        segments.append(
            Segment(start, count, None if freq is None else float(freq), cap.get("core:datetime"))
        )

    annotations = []
    raw_annotations = meta.get("annotations", [])
    if not isinstance(raw_annotations, list):
        raise CaptureError(f"{where}: 'annotations' must be a list of objects")
    for i, ann in enumerate(raw_annotations):
        if not isinstance(ann, dict):
            raise CaptureError(f"{where}: annotations[{i}] must be an object")
        ann_start = _int_field(ann, "core:sample_start", f"{where}: annotations[{i}]")
        if ann_start is None:
            raise CaptureError(f"{where}: annotations[{i}] has no core:sample_start")
        ann_count = _int_field(ann, "core:sample_count", f"{where}: annotations[{i}]")
        for key in ("core:freq_lower_edge", "core:freq_upper_edge"):
            if key in ann and not _finite_number(ann[key]):
                raise CaptureError(f"{where}: annotations[{i}] {key} must be a finite number (Hz), got {ann[key]!r}")
        for key in ("core:label", "core:comment", "core:generator"):
            if key in ann and not isinstance(ann[key], str):
                raise CaptureError(f"{where}: annotations[{i}] {key} must be text, got {ann[key]!r}")
        end = ann_start + (ann_count or 0)
        if ann_start > samples or end > samples:
            raise CaptureError(
                f"{where}: metadata disagrees with data file size: annotations[{i}] covers samples "
                f"{ann_start}..{end} but the data file holds {samples} samples"
            )
        annotations.append(
            Annotation(
                ann_start,
                ann_count,
                ann.get("core:freq_lower_edge"),
                ann.get("core:freq_upper_edge"),
                ann.get("core:label"),
                ann.get("core:comment"),
                ann.get("core:generator"),
                {k: v for k, v in ann.items() if not k.startswith("core:")},
            )
        )
    return {
        "datatype": datatype,
        "rate": rate,
        "samples": samples,
        "segments": tuple(segments),
        "annotations": tuple(annotations),
        "runs": runs,
        "global": glob,
    }


def _drop_segments_past_end(
    captures: list[dict[str, Any]], starts: list[int], headers: list[int], samples: int, where: str
) -> tuple[list[dict[str, Any]], list[int], list[int]]:
    """The capture segments without those starting past the last sample, each dropped with a warning.

    SigMF: a segment whose ``core:sample_start`` lies beyond the end of the dataset holds no samples
    and is ignored. One that also claims header bytes makes the data's layout unknowable: refused.
    """
    kept = sum(1 for start in starts if start < samples)  # starts ascend: the ones past the end come last
    for i in range(kept, len(starts)):
        if headers[i]:
            raise CaptureError(
                f"{where}: captures[{i}] core:sample_start {starts[i]} lies past the end of the data "
                f"({samples} samples) yet has core:header_bytes {headers[i]}; cannot tell where the samples are"
            )
        warnings.warn(
            f"{where}: captures[{i}] core:sample_start {starts[i]} lies past the end of the data "
            f"({samples} samples); the segment is ignored", IqsiftWarning
        )
    return captures[:kept], starts[:kept], headers[:kept]


def _apply_center(segments: tuple[Segment, ...], center: float | None, where: str) -> tuple[Segment, ...]:
    if center is None:
        return segments
    known = {s.frequency_hz for s in segments if s.frequency_hz is not None}
    if known and known != {center}:
        warnings.warn(f"{where}: --center {center:g} Hz overrides the recorded core:frequency", IqsiftWarning)
    return tuple(Segment(s.sample_start, s.sample_count, center, s.datetime) for s in segments)


def read_sigmf(
    path: str | os.PathLike,
    *,
    rate: float | None = None,
    center: float | None = None,
    strict: bool = False,
    verify: bool = True,
) -> Capture:
    """Open a SigMF recording given its ``.sigmf-meta`` or ``.sigmf-data`` file.

    Parameters
    ----------
    path : path
        Either file of the pair.
    rate : float, optional
        Sample rate (samples/s) overriding or supplying ``core:sample_rate``.
    center : float, optional
        Centre frequency (Hz) overriding ``core:frequency`` in every segment.
    strict : bool
        Refuse a data file that is not a whole number of samples (default:
        warn and ignore the partial tail).
    verify : bool
        Check the data against ``core:sha512`` on every pass over the whole
        recording (see :attr:`Capture.verify`).

    Raises
    ------
    CaptureError
        For any disagreement with the SigMF specification or between metadata
        and data; the message names the file.
    """
    meta_path, data_path = sigmf_paths(path)
    if not meta_path.exists():
        raise CaptureError(f"{meta_path}: SigMF metadata file not found (needed beside {data_path.name})")
    try:
        meta = _load_meta_text(meta_path.read_bytes(), str(meta_path))
    except IsADirectoryError:
        raise CaptureError(f"{meta_path}: is a directory, not a file") from None
    glob = meta["global"]
    if glob.get("core:metadata_only"):
        raise CaptureError(f"{meta_path}: core:metadata_only is set; this recording has no samples")
    dataset = glob.get("core:dataset")
    if dataset:
        if not isinstance(dataset, str) or "/" in dataset or "\\" in dataset or dataset in ("", ".", ".."):
            raise CaptureError(f"{meta_path}: core:dataset must be a file name beside the metadata, got {dataset!r}")
        data_path = meta_path.with_name(dataset)
    if not data_path.exists():
        raise CaptureError(f"{data_path}: SigMF data file not found (named by {meta_path.name})")
    if data_path.is_dir():
        raise CaptureError(f"{data_path}: is a directory, not a data file")
    data_bytes = data_path.stat().st_size
    parsed = _parse_meta(meta, str(meta_path), data_bytes, rate=rate, strict=strict)
    dt = parsed["datatype"]
    checksum = None
    if "core:sha512" in glob:
        checksum = RecordedChecksum(glob["core:sha512"], data_path, str(meta_path), 0, data_bytes)
    return Capture(
        meta_path,
        BinarySource(data_path, dt, parsed["runs"], checksum),
        format="sigmf",
        datatype=dt.name,
        sample_rate_hz=parsed["rate"],
        samples=parsed["samples"],
        is_complex=dt.is_complex,
        segments=_apply_center(parsed["segments"], center, str(meta_path)),
        annotations=parsed["annotations"],
        metadata=parsed["global"],
        clip_high=dt.clip_high,
        can_hold_nonfinite=dt.kind == "f",
        verify=verify,
    )


def read_sigmf_archive(
    path: str | os.PathLike,
    *,
    rate: float | None = None,
    center: float | None = None,
    strict: bool = False,
    verify: bool = True,
) -> Capture:
    """Open a ``.sigmf`` archive (uncompressed tar holding one recording).

    The samples are read in place from the tar file (no extraction); the options are those of
    :func:`read_sigmf`.
    """
    path = Path(path)
    try:
        with tarfile.open(path, "r:") as tar:
            members = [m for m in tar.getmembers() if m.isfile()]
            metas = [m for m in members if m.name.endswith(".sigmf-meta")]
            if len(metas) != 1:
                raise CaptureError(
                    f"{path}: archive holds {len(metas)} .sigmf-meta files; iqsift reads archives with exactly one"
                )
            meta_member = metas[0]
            meta_file = tar.extractfile(meta_member)
            if meta_file is None:  # pragma: no cover - a regular member always has contents
                raise CaptureError(f"{path}: cannot read {meta_member.name} in the archive")
            meta = _load_meta_text(meta_file.read(), f"{path}:{meta_member.name}")
            data_name = meta_member.name[: -len(".sigmf-meta")] + ".sigmf-data"
            data = [m for m in members if m.name == data_name]
            if not data:
                raise CaptureError(f"{path}: archive has no {data_name} beside {meta_member.name}")
            data_member = data[0]
    except tarfile.TarError as exc:
        raise CaptureError(f"{path}: not a readable SigMF archive (uncompressed tar): {exc}") from None
    where = f"{path}:{meta_member.name}"
    parsed = _parse_meta(meta, where, data_member.size, rate=rate, strict=strict)
    dt = parsed["datatype"]
    runs = [ByteRun(r.sample_start, r.sample_count, r.byte_offset + data_member.offset_data) for r in parsed["runs"]]
    checksum = None
    if "core:sha512" in meta["global"]:
        begin = data_member.offset_data
        checksum = RecordedChecksum(meta["global"]["core:sha512"], path, where, begin, begin + data_member.size)
    return Capture(
        path,
        BinarySource(path, dt, runs, checksum),
        format="sigmf-archive",
        datatype=dt.name,
        sample_rate_hz=parsed["rate"],
        samples=parsed["samples"],
        is_complex=dt.is_complex,
        segments=_apply_center(parsed["segments"], center, where),
        annotations=parsed["annotations"],
        metadata=parsed["global"],
        clip_high=dt.clip_high,
        can_hold_nonfinite=dt.kind == "f",
        verify=verify,
    )


# ----------------------------------------------------------------------------------------------
# Writing
# ----------------------------------------------------------------------------------------------
class SigMFWriter:
    """Stream samples into a new SigMF recording (``.sigmf-meta`` + ``.sigmf-data``).

    Both files are written to temporary names and renamed into place by
    :meth:`close` (or by the :class:`OutputSet` given as ``outputs``, which
    then commits them together with the job's other outputs). The data file's
    SHA-512 is computed while streaming and stored in ``core:sha512``.

    Parameters
    ----------
    path : path
        The ``.sigmf-meta`` or ``.sigmf-data`` path, or their common stem.
    sample_rate_hz : float
        Sample rate (samples/s).
    center_hz : float, optional
        Centre frequency (Hz) recorded in the capture segment's ``core:frequency``.
    datatype : {"cf32_le", "ci16_le", ...}
        Stored format; any of the 28 SigMF datatypes.
    description : str, optional
        ``core:description``.
    extra : dict, optional
        More global keys, e.g. ``{"iqsift:source": ..., "iqsift:channel": ...}``.
        Keys in the ``iqsift`` namespace declare the extension automatically.
    annotations : list of dict, optional
        SigMF annotation objects (``core:sample_start`` ...).
    datetime : str, optional
        RFC 3339 time of the first sample.
    force : bool
        Overwrite existing files.
    outputs : OutputSet, optional
        Commit through this set instead of renaming on :meth:`close`.
    """

    def __init__(
        self,
        path: str | os.PathLike,
        sample_rate_hz: float,
        *,
        center_hz: float | None = None,
        datatype: str = "cf32_le",
        description: str | None = None,
        extra: dict[str, Any] | None = None,
        annotations: list[dict[str, Any]] | None = None,
        datetime: str | None = None,
        force: bool = False,
        outputs: OutputSet | None = None,
    ) -> None:
        self.meta_path, self.data_path = sigmf_paths(path)
        self.datatype = parse_datatype(datatype, "datatype")
        if not (np.isfinite(sample_rate_hz) and sample_rate_hz > 0):
            raise ParameterError(f"sample_rate_hz: must be > 0, got {sample_rate_hz!r}")
        self.sample_rate_hz = float(sample_rate_hz)
        self.center_hz = center_hz
        self.description = description
        self.extra = dict(extra or {})
        self.annotations = list(annotations or [])
        self.datetime = datetime
        self._own_outputs = outputs is None
        self._outputs = outputs or OutputSet(force=force)
        self._tmp_data = self._outputs.reserve(self.data_path)
        self._tmp_meta = self._outputs.reserve(self.meta_path)
        self._file = open(self._tmp_data, "wb")  # noqa: SIM115 - closed in close()
        self._sha = hashlib.sha512()
        self.samples_written = 0
        self.clipped_components = 0
        self._closed = False

    def write(self, block: np.ndarray) -> None:
        """Append samples (complex, full scale = magnitude 1)."""
        raw, clipped = self.datatype.from_complex(np.asarray(block))
        data = raw.tobytes()
        self._file.write(data)
        self._sha.update(data)
        self.samples_written += raw.shape[0] // self.datatype.components
        self.clipped_components += clipped

    def metadata(self) -> dict[str, Any]:
        """The metadata document as it will be written."""
        glob: dict[str, Any] = {
            "core:datatype": self.datatype.name,
            "core:sample_rate": self.sample_rate_hz,
            "core:version": SIGMF_VERSION,
            "core:num_channels": 1,
            "core:recorder": f"iqsift {__version__}",
            "core:sha512": self._sha.hexdigest(),
        }
        if self.description:
            glob["core:description"] = self.description
        if any(k.startswith("iqsift:") for k in self.extra):
            glob["core:extensions"] = [dict(EXTENSION)]
        glob.update(self.extra)
        capture: dict[str, Any] = {"core:sample_start": 0}
        if self.center_hz is not None:
            capture["core:frequency"] = float(self.center_hz)
        if self.datetime:
            capture["core:datetime"] = self.datetime
        return {"global": glob, "captures": [capture], "annotations": self.annotations}

    def close(self) -> None:
        """Finish the data file, write the metadata, and (without an OutputSet) rename both into place."""
        if self._closed:
            return
        self._closed = True
        self._file.close()
        if self.samples_written == 0:
            self.abort()
            raise ParameterError(f"{self.data_path}: no samples were written; refusing to create an empty recording")
        with open(self._tmp_meta, "w", encoding="utf-8") as handle:
            json.dump(self.metadata(), handle, indent=2, allow_nan=False)
            handle.write("\n")
        if self._own_outputs:
            self._outputs.commit()

    def abort(self) -> None:
        """Discard everything written so far."""
        if not self._file.closed:
            self._file.close()
        self._closed = True
        self._outputs.abort()

    def __enter__(self) -> "SigMFWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.close()
        else:
            self.abort()


def utc_now_rfc3339() -> str:
    """The current UTC time as an RFC 3339 string with a ``Z`` suffix."""
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
