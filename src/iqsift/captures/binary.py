"""Buffered random access to interleaved binary samples (SigMF data files, raw captures).

Reads go straight into a numpy array (``readinto`` on an open file handle), one
block at a time, so memory stays bounded by the block size. Memory mapping was
rejected: a sequential pass over a mapped multi-gigabyte file leaves its pages
resident and inflates the process's resident set size. ``numpy.fromfile`` on the
handle was dropped: it turns an exception raised meanwhile by a signal handler
(an interrupt) into a ``TypeError``.
"""

from __future__ import annotations

from dataclasses import dataclass
from io import BufferedReader
from pathlib import Path

import numpy as np

from ..errors import CaptureError
from .datatypes import DataType
from .integrity import RecordedChecksum

__all__ = ["ByteRun", "BinarySource"]


@dataclass(frozen=True)
class ByteRun:
    """Samples ``[sample_start, sample_start + sample_count)`` stored from byte ``byte_offset``."""

    sample_start: int
    sample_count: int
    byte_offset: int


class BinarySource:
    """Random access to samples stored as interleaved components.

    Parameters
    ----------
    path : Path
        The file holding the samples (a ``.sigmf-data`` file, a ``.sigmf``
        archive, or a raw file).
    datatype : DataType
        How the samples are stored.
    runs : sequence of ByteRun
        Where each run of samples lives in the file; several runs arise from
        SigMF capture segments with ``core:header_bytes`` or from archives.
    checksum : RecordedChecksum, optional
        The SHA-512 the metadata records for the dataset (SigMF ``core:sha512``).
    """

    def __init__(self, path: Path, datatype: DataType, runs: list[ByteRun],
                 checksum: RecordedChecksum | None = None) -> None:
        self.path = Path(path)
        self.datatype = datatype
        self.runs = list(runs)
        self.checksum = checksum
        self._file: BufferedReader | None = None

    def _handle(self) -> BufferedReader:
        if self._file is None:
            try:
                self._file = open(self.path, "rb")  # noqa: SIM115 - closed by close()
            except OSError as exc:
                raise CaptureError(f"{self.path}: cannot open data file: {exc.strerror or exc}") from None
        return self._file

    def read(self, start: int, count: int) -> np.ndarray:
        """Return ``count`` complex64 samples from sample ``start``."""
        parts = []
        position, stop = start, start + count
        for run in self.runs:
            run_stop = run.sample_start + run.sample_count
            if run_stop <= position or run.sample_start >= stop:
                continue
            first = max(position, run.sample_start)
            last = min(stop, run_stop)
            parts.append(self._read_run(run, first, last - first))
            position = last
        if not parts:
            return np.zeros(0, np.complex64)
        return parts[0] if len(parts) == 1 else np.concatenate(parts)

    def _read_run(self, run: ByteRun, first: int, count: int) -> np.ndarray:
        dt = self.datatype
        handle = self._handle()
        offset = run.byte_offset + (first - run.sample_start) * dt.sample_bytes
        handle.seek(offset)
        raw = np.empty(count * dt.components, dtype=dt.component_dtype)
        buffer = raw.view(np.uint8).data
        filled = 0
        try:
            while filled < len(buffer):
                got = handle.readinto(buffer[filled:])
                if not got:
                    break
                filled += got
        except OSError as exc:  # pragma: no cover - I/O failure
            raise CaptureError(f"{self.path}: read error: {exc}") from None
        if filled != len(buffer):
            raise CaptureError(
                f"{self.path}: expected {count} samples at sample {first}, the file ended after "
                f"{filled // dt.sample_bytes}; was it truncated?"
            )
        return dt.to_complex64(raw)

    def close(self) -> None:
        """Close the file handle (reopened on the next read)."""
        if self._file is not None:
            self._file.close()
            self._file = None
