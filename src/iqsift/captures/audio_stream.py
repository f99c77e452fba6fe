"""Audio written to a stream (standard output) as it is made: a WAV stream of unknown length, or raw s16.

A WAV file states its data size in its header (RIFF chunk and ``data`` chunk sizes, Microsoft/IBM
"Multimedia Programming Interface and Data Specifications 1.0", 1991). A stream cannot go back to
fill them in, so they are written as 0xFFFFFFFF, the largest size: the usual convention for WAV of
unknown length on pipes (common practice; readers take the data to run to the end of the stream).
The samples are 16-bit signed little-endian PCM, converted exactly as the file writer (libsndfile,
through soundfile) converts float audio: round(x · 2^31) clipped to 32 bits, then the top 16 bits,
so the stream holds the same samples as a file written from the same audio.
"""

from __future__ import annotations

import struct
import sys
from typing import BinaryIO

import numpy as np

from ..errors import ParameterError

__all__ = ["AUDIO_STREAM_FORMATS", "StreamAudioWriter", "to_pcm16"]

AUDIO_STREAM_FORMATS = ("wav", "s16")
"""``wav``: a WAV header of unknown length, then samples; ``s16``: samples only (16-bit little-endian)."""

UNKNOWN_SIZE = 0xFFFFFFFF


def to_pcm16(audio: np.ndarray) -> np.ndarray:
    """Float audio (full scale ±1) as little-endian int16, rounded and clipped as libsndfile does."""
    wide = np.rint(np.asarray(audio, np.float64) * 2.0 ** 31)
    wide = np.clip(wide, -(2.0 ** 31), 2.0 ** 31 - 1).astype(np.int64)
    return (wide >> 16).astype("<i2")


def wav_stream_header(rate_hz: int, channels: int = 1) -> bytes:
    """A 44-byte PCM WAV header with the RIFF and data sizes unknown (0xFFFFFFFF)."""
    block_align = 2 * channels
    return (b"RIFF" + struct.pack("<I", UNKNOWN_SIZE) + b"WAVE"
            + b"fmt " + struct.pack("<IHHIIHH", 16, 1, channels, rate_hz, rate_hz * block_align, block_align, 16)
            + b"data" + struct.pack("<I", UNKNOWN_SIZE))


class StreamAudioWriter:
    """Write mono audio to a stream block by block, flushing each block so it leaves at once.

    Parameters
    ----------
    rate_hz : float
        Audio rate (samples/s, a whole number).
    audio_format : {"wav", "s16"}
    stream : binary file, optional
        Default ``sys.stdout.buffer``.

    The interface matches :class:`~iqsift.captures.AudioWriter` (``write``, ``close``, ``abort``,
    ``samples_written``, ``clipped_samples``); ``path`` is ``"-"``.
    """

    def __init__(self, rate_hz: float, audio_format: str = "wav", stream: BinaryIO | None = None) -> None:
        if audio_format not in AUDIO_STREAM_FORMATS:
            raise ParameterError(f"audio_format: got {audio_format!r}; use wav or s16")
        if abs(rate_hz - round(rate_hz)) > 1e-6 or rate_hz < 1:
            raise ParameterError(f"audio_rate: must be a whole number of samples/s, got {rate_hz!r}")
        self.path = "-"
        self.rate_hz = int(round(rate_hz))
        self.audio_format = audio_format
        self._stream = stream if stream is not None else sys.stdout.buffer
        self.samples_written = 0
        self.clipped_samples = 0
        self._started = False

    def _start(self) -> None:
        if not self._started:
            self._started = True
            if self.audio_format == "wav":
                self._stream.write(wav_stream_header(self.rate_hz))

    def write(self, block: np.ndarray) -> None:
        """Append audio samples (float, full scale ±1) and flush them out."""
        self._start()
        block = np.asarray(block, dtype=np.float32)
        self.clipped_samples += int(np.count_nonzero(np.abs(block) > 1.0))
        if block.shape[0]:
            self._stream.write(to_pcm16(block).tobytes())
            self.samples_written += block.shape[0]
        self._stream.flush()

    def close(self) -> None:
        """Finish the stream (a WAV header is written even for no samples)."""
        self._start()
        self._stream.flush()

    def abort(self) -> None:
        """Nothing to take back: what was sent has left."""
