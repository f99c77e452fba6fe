"""Checking a SigMF dataset against the SHA-512 its metadata records (``core:sha512``) while it streams.

The SigMF specification defines ``core:sha512`` as the SHA-512 (FIPS 180-4) of the whole dataset
file. A :class:`ChecksumPass` hashes the bytes a sequential read of the samples sees, as it reads
them, plus the few bytes that read skips (``core:header_bytes`` of capture segments,
``core:trailing_bytes``, a partial last sample), so checking costs no second pass over the file.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from ..errors import CaptureError

__all__ = ["ChecksumError", "ChecksumPass", "RecordedChecksum", "sha256_of_file"]

_SHA512_HEX = re.compile(r"[0-9a-fA-F]{128}")
_CHUNK_BYTES = 1 << 20


class ChecksumError(CaptureError):
    """A capture's data does not match the checksum its metadata records."""


@dataclass(frozen=True)
class RecordedChecksum:
    """The SHA-512 a recording's metadata states for the bytes ``[begin, end)`` of a file.

    Attributes
    ----------
    sha512 : object
        The value of ``core:sha512`` as read (checked when a pass starts).
    data_path : Path
        The file holding the dataset (a ``.sigmf-data`` file, or a ``.sigmf`` archive).
    where : str
        The metadata that records it, for messages.
    begin, end : int
        The dataset's bytes in ``data_path`` (the whole file, or an archive member).
    """

    sha512: object
    data_path: Path
    where: str
    begin: int
    end: int

    def start(self) -> "ChecksumPass":
        """A new pass from the first byte of the dataset.

        Raises
        ------
        CaptureError
            If the recorded value is not 128 hexadecimal digits.
        """
        if not isinstance(self.sha512, str) or not _SHA512_HEX.fullmatch(self.sha512):
            raise CaptureError(
                f"{self.where}: core:sha512 must be 128 hexadecimal digits (a SHA-512), got {self.sha512!r}; "
                "pass verify=False to read the capture without checking it", parameters=("verify",)
            )
        return ChecksumPass(self)


class ChecksumPass:
    """The SHA-512 of one sequential read of a dataset, checked against the recorded value at the end.

    The reader hands over each run of bytes it reads with :meth:`update`; bytes it skipped since the
    previous run are read here (from a file handle of this pass's own) and hashed in order.
    """

    def __init__(self, recorded: RecordedChecksum) -> None:
        self.recorded = recorded
        self.position = recorded.begin
        self._sha = hashlib.sha512()
        self._handle: BinaryIO | None = None
        self.in_order = True

    def update(self, offset: int, data: memoryview | bytes) -> None:
        """Hash ``data``, read from byte ``offset`` of the file, after the bytes skipped before it."""
        if offset < self.position:  # read out of order: this pass cannot vouch for the file
            self.in_order = False
        if not self.in_order:
            return
        self._hash_file_bytes(offset)
        self._sha.update(data)
        self.position = offset + len(data)

    def finish(self) -> None:
        """Hash the bytes after the last run and compare with the recorded value.

        Raises
        ------
        ChecksumError
            If the data's SHA-512 differs from the recorded one.
        """
        try:
            if not self.in_order:
                return
            self._hash_file_bytes(self.recorded.end)
            actual = self._sha.hexdigest()
            expected = str(self.recorded.sha512).lower()
            if actual != expected:
                raise ChecksumError(
                    f"{self.recorded.data_path}: the data does not match its checksum (SHA-512 {actual[:16]}..., "
                    f"core:sha512 in {self.recorded.where} {expected[:16]}...): the file is damaged or was changed "
                    "after recording; pass verify=False to read it anyway", parameters=("verify",)
                )
        finally:
            self.close()

    def close(self) -> None:
        """Release the file handle (if skipped bytes were read)."""
        if self._handle is not None:
            self._handle.close()
            self._handle = None

    def _hash_file_bytes(self, stop: int) -> None:
        """Read and hash the file's bytes from the current position up to ``stop``."""
        if stop <= self.position:
            return
        if self._handle is None:
            self._handle = open(self.recorded.data_path, "rb")  # noqa: SIM115 - closed by close()
        self._handle.seek(self.position)
        while self.position < stop:
            chunk = self._handle.read(min(_CHUNK_BYTES, stop - self.position))
            if not chunk:
                raise CaptureError(
                    f"{self.recorded.data_path}: the file ended at byte {self.position}, before byte {stop}; "
                    "was it truncated while reading?"
                )
            self._sha.update(chunk)
            self.position += len(chunk)


def sha256_of_file(path: str | Path) -> str:
    """SHA-256 (FIPS 180-4) of a file's bytes, hex, read in 1 MiB pieces (bounded memory)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(_CHUNK_BYTES), b""):
            digest.update(chunk)
    return digest.hexdigest()
