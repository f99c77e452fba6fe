"""A live capture: raw interleaved samples read from standard input as they arrive.

``-`` as the capture path stands for standard input. The stream has no metadata (format and
rate are required, the centre optional, as for a raw file), cannot seek and has no known length:
:attr:`Capture.samples` is :data:`UNKNOWN_LENGTH` until the input ends, then the number of
samples read. It is read once, block by block, each block holding what had arrived (at least
one sample, at most the block size), so audio can leave soon after its samples came in.

Stopping: the end of the input ends the capture; so does :func:`request_stop` (the command line
calls it on SIGINT while reading standard input: with a live stream that is how a user stops).
Called while a read waits, it ends that read at once (the samples already received are kept);
otherwise the next read finds the stream ended.
"""

from __future__ import annotations

import os
import select
import sys
import warnings
from pathlib import Path
from typing import BinaryIO, Iterator

import numpy as np

from ..errors import CaptureError, IqsiftWarning, ParameterError
from ..units import TimeSpec
from .capture import DEFAULT_BLOCK_SIZE, Capture, SampleRange, Segment
from .datatypes import DataType, parse_datatype

__all__ = ["STDIN", "UNKNOWN_LENGTH", "StreamCapture", "is_stdin", "open_stream", "request_stop"]

STDIN = "-"
"""The capture path that means standard input."""

UNKNOWN_LENGTH = 1 << 62
""":attr:`Capture.samples` of a stream still being read (samples): larger than any capture."""

GATHER_BYTES = 1 << 20
"""At most this many bytes are gathered from the pipe into one block (≈ 0.1 s at 10 MB/s)."""


class EndOfInput(Exception):
    """Raised by :func:`request_stop` inside a waiting read: the stream ends there."""


class _StopState:
    reading = False
    requested = False


_STATE = _StopState()


def request_stop() -> None:
    """End the stream being read: at once if a read is waiting (raises :class:`EndOfInput` there,
    to be called from a signal handler), else at the next read."""
    _STATE.requested = True
    if _STATE.reading:
        _STATE.reading = False
        raise EndOfInput()


def stop_requested() -> bool:
    """Whether :func:`request_stop` was called since the stream was opened."""
    return _STATE.requested


def is_stdin(path: object) -> bool:
    """Whether a capture argument stands for standard input."""
    return isinstance(path, str) and path == STDIN


class _NoSource:
    """The stream reads through :meth:`StreamCapture.blocks`; there is no random access."""

    def read(self, start: int, count: int) -> np.ndarray:
        raise CaptureError("standard input: a stream cannot be read at random")

    def close(self) -> None:
        return None


class StreamCapture(Capture):
    """Raw samples from a pipe (see the module docstring).

    Parameters
    ----------
    stream : binary file
        Where the bytes come from (default ``sys.stdin.buffer``).
    datatype : DataType
    rate_hz : float
    center_hz : float or None
    """

    def __init__(self, stream: BinaryIO, datatype: DataType, rate_hz: float, center_hz: float | None) -> None:
        if center_hz is None and not datatype.is_complex:
            center_hz = 0.0
        super().__init__(Path(STDIN), _NoSource(), format="raw", datatype=datatype.name, sample_rate_hz=rate_hz,
                         samples=UNKNOWN_LENGTH, is_complex=datatype.is_complex,
                         segments=(Segment(0, UNKNOWN_LENGTH, center_hz, None),), metadata={},
                         clip_high=datatype.clip_high, can_hold_nonfinite=datatype.kind == "f")
        self._stream = stream
        self._dt = datatype
        self._started = False
        self.ended = False

    @property
    def files(self) -> tuple[Path, ...]:
        """No file to protect from being overwritten."""
        return ()

    def select(self, start: str | float | TimeSpec | None = None,
               duration: str | float | TimeSpec | None = None) -> SampleRange:
        """All of the stream (a part cannot be chosen on standard input)."""
        if start is not None or duration is not None:
            raise ParameterError("start, duration: not available when reading standard input",
                                 parameters=("start", "duration"))
        return SampleRange(0, UNKNOWN_LENGTH)

    def center_for(self, selection: SampleRange | None = None) -> float | None:
        return self.segments[0].frequency_hz

    def blocks(self, block_size: int = DEFAULT_BLOCK_SIZE, start: int = 0, count: int | None = None, *,
               nonfinite: str = "error") -> Iterator[np.ndarray]:
        """Yield blocks as they arrive until the input ends; the stream can be read only once."""
        if self._started:
            raise CaptureError("standard input: already read; a stream can be read only once")
        if nonfinite not in ("error", "zero", "keep"):
            raise ParameterError(f"nonfinite: must be 'error', 'zero' or 'keep', got {nonfinite!r}")
        self._started = True
        _STATE.requested = False
        dt = self._dt
        pending = b""
        position = 0
        max_bytes = max(1, min(block_size * dt.sample_bytes, GATHER_BYTES))
        while True:
            data = self._read_some(max_bytes - len(pending))
            if data is None:
                break
            pending += data
            whole = len(pending) // dt.sample_bytes * dt.sample_bytes
            if not whole:
                continue
            raw = np.frombuffer(pending[:whole], dtype=dt.component_dtype)
            pending = pending[whole:]
            block = dt.to_complex64(raw)
            block = self._checked(block, position, nonfinite)
            position += block.shape[0]
            if self.correction is not None:
                block = self.correction.apply(block)
            yield block
        self.ended = True
        self.samples = position
        self.segments = (Segment(0, position, self.segments[0].frequency_hz, None),)
        if pending:
            warnings.warn(f"standard input: ended inside a sample; the last {len(pending)} bytes are ignored",
                          IqsiftWarning)

    def _read_some(self, limit: int) -> bytes | None:
        """Bytes that have arrived (waiting for at least one), at most ``limit``; None at the end."""
        if _STATE.requested:
            return None
        fd = self._stream.fileno()
        try:
            _STATE.reading = True
            data = os.read(fd, limit)
            _STATE.reading = False
            if not data:
                return None
            # gather what else is already waiting, without waiting for more
            while len(data) < limit and select.select([fd], [], [], 0)[0]:
                more = os.read(fd, limit - len(data))
                if not more:
                    break
                data += more
            return data
        except EndOfInput:
            return None
        except OSError as exc:
            raise CaptureError(f"standard input: read error: {exc.strerror or exc}") from None
        finally:
            _STATE.reading = False

    def _checked(self, block: np.ndarray, position: int, nonfinite: str) -> np.ndarray:
        if nonfinite == "keep" or not self.can_hold_nonfinite or np.isfinite(block.sum()):
            return block
        finite = np.isfinite(block)
        if nonfinite == "error":
            raise CaptureError(f"standard input: sample {position + int(np.argmin(finite))} is NaN or infinite; "
                               "pass allow_nonfinite to replace such samples with 0", parameters=("allow_nonfinite",))
        return np.where(finite, block, np.complex64(0))

    def close(self) -> None:
        """Nothing to close (standard input belongs to the process)."""


def open_stream(*, format: str | None, rate: float | None, center: float | None = None,
                stream: BinaryIO | None = None) -> StreamCapture:
    """Standard input (or ``stream``) as a live capture of raw interleaved samples.

    Raises
    ------
    ParameterError
        Without ``format`` or ``rate``.
    """
    if format is None:
        raise ParameterError("standard input: a stream of raw samples needs format (e.g. cf32_le, ci16_le, cu8)",
                             parameters=("format",))
    if rate is None:
        raise ParameterError("standard input: a stream of raw samples needs rate (samples/s)", parameters=("rate",))
    datatype = parse_datatype(format, "format")
    return StreamCapture(stream if stream is not None else sys.stdin.buffer, datatype, rate, center)

