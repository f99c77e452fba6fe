"""Buffered random access to interleaved binary samples (SigMF data files, raw captures).

Reads use ``numpy.fromfile`` on an open file handle, one block at a time, so
memory stays bounded by the block size. Memory mapping was rejected: a
sequential pass over a mapped multi-gigabyte file leaves its pages resident and
inflates the process's resident set size.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import CaptureError
from .datatypes import DataType

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
    """

    def __init__(self, path: Path, datatype: DataType, runs: list[ByteRun]) -> None:
        self.path = Path(path)
        self.datatype = datatype
        self.runs = list(runs)
        self._file = None

    def _handle(self):
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
        handle.seek(run.byte_offset + (first - run.sample_start) * dt.sample_bytes)
        try:
            raw = np.fromfile(handle, dtype=dt.component_dtype, count=count * dt.components)
        except OSError as exc:  # pragma: no cover - I/O failure
            raise CaptureError(f"{self.path}: read error: {exc}") from None
        if raw.shape[0] != count * dt.components:
            raise CaptureError(
                f"{self.path}: expected {count} samples at sample {first}, the file ended after "
                f"{raw.shape[0] // dt.components}; was it truncated?"
            )
        return dt.to_complex64(raw)

    def close(self) -> None:
        """Close the file handle (reopened on the next read)."""
        if self._file is not None:
            self._file.close()
            self._file = None
