"""Checking a SigMF dataset against the SHA-512 its metadata records (``core:sha512``) while it streams.

The SigMF specification defines ``core:sha512`` as the SHA-512 (FIPS 180-4) of the whole dataset
file. A :class:`ChecksumPass` hashes the dataset's bytes (all of them: ``core:header_bytes`` of capture
segments, ``core:trailing_bytes`` and a partial last sample included) on a thread of its own while
the samples stream, so the check costs no time after the pass and runs beside the processing.
"""

from __future__ import annotations

import hashlib
import re
import threading
from dataclasses import dataclass
from pathlib import Path

from ..errors import CaptureError

__all__ = ["ChecksumError", "ChecksumPass", "RecordedChecksum", "sha256_of_file"]

_SHA512_HEX = re.compile(r"[0-9a-fA-F]{128}")
_CHUNK_BYTES = 1 << 20
_THREAD_CHUNK_BYTES = 1 << 22


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
    """The SHA-512 of a dataset's bytes, computed on a thread of its own while the samples stream.

    The thread reads the dataset ``[begin, end)`` through a file handle of its own, in 4 MiB pieces
    into one reused buffer (bounded memory), and hashes them; :mod:`hashlib` releases the GIL while
    hashing, so the check runs on a second core beside the reading, decoding and processing of the
    samples instead of after each block on the reader's path. The second read of the file is served
    by the page cache (or brings the pages in for the sample reader when it runs ahead). SHA-512 is
    sequential (FIPS 180-4), so one thread is all one file's check can use.

    Parameters
    ----------
    recorded : RecordedChecksum
        The value to check and the bytes it covers.
    """

    def __init__(self, recorded: RecordedChecksum) -> None:
        self.recorded = recorded
        self._stop = threading.Event()
        self._actual: str | None = None
        self._failure: BaseException | None = None
        self._thread = threading.Thread(target=self._run, name="iqsift-checksum", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        rec = self.recorded
        try:
            sha = hashlib.sha512()
            buffer = bytearray(min(_THREAD_CHUNK_BYTES, max(rec.end - rec.begin, 1)))
            view = memoryview(buffer)
            position = rec.begin
            with open(rec.data_path, "rb", buffering=0) as handle:
                handle.seek(position)
                while position < rec.end and not self._stop.is_set():
                    want = min(len(buffer), rec.end - position)
                    got = handle.readinto(view[:want])
                    if not got:
                        raise CaptureError(
                            f"{rec.data_path}: the file ended at byte {position}, before byte {rec.end}; "
                            "was it truncated while reading?"
                        )
                    sha.update(view[:got])
                    position += got
            if position >= rec.end:
                self._actual = sha.hexdigest()
        except OSError as exc:
            self._failure = CaptureError(f"{rec.data_path}: cannot read the data to check it: {exc.strerror or exc}")
        except BaseException as exc:  # handed to the thread that asks for the verdict
            self._failure = exc

    def finish(self) -> None:
        """Wait for the hash and compare it with the recorded value.

        Raises
        ------
        ChecksumError
            If the data's SHA-512 differs from the recorded one.
        CaptureError
            If the file could not be read to its end.
        """
        self._thread.join()
        if self._failure is not None:
            raise self._failure
        actual = self._actual
        expected = str(self.recorded.sha512).lower()
        if actual is None:  # stopped by close() before the end: nothing to vouch for
            return
        if actual != expected:
            raise ChecksumError(
                f"{self.recorded.data_path}: the data does not match its checksum (SHA-512 {actual[:16]}..., "
                f"core:sha512 in {self.recorded.where} {expected[:16]}...): the file is damaged or was changed "
                "after recording; pass verify=False to read it anyway", parameters=("verify",)
            )

    def close(self) -> None:
        """Stop the hashing thread (it finishes the piece it is on) and wait for it."""
        self._stop.set()
        self._thread.join()


def sha256_of_file(path: str | Path) -> str:
    """SHA-256 (FIPS 180-4) of a file's bytes, hex, read in 1 MiB pieces (bounded memory)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(_CHUNK_BYTES), b""):
            digest.update(chunk)
    return digest.hexdigest()
