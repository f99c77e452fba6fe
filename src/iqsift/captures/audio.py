"""WAV and FLAC files: read as captures (2 channels = I/Q, 1 = real IF) and write audio.

Reading and writing go through soundfile (libsndfile). Integer PCM is scaled by
1/2^(bits-1) on reading, as DESIGN.md's full-scale convention asks; soundfile
does exactly this for ``dtype="float32"``.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np
import soundfile

from ..errors import CaptureError, IqsiftWarning, ParameterError
from .atomic import OutputSet
from .capture import Capture, Segment

__all__ = ["read_audio_capture", "read_audio", "AudioWriter", "AUDIO_FORMATS"]

AUDIO_FORMATS = {".wav": "WAV", ".flac": "FLAC"}


class _SoundFileSource:
    def __init__(self, path: Path, channels: int) -> None:
        self.path = path
        self.channels = channels
        self._file: soundfile.SoundFile | None = None

    def read(self, start: int, count: int) -> np.ndarray:
        if self._file is None:
            self._file = soundfile.SoundFile(str(self.path))
        self._file.seek(start)
        frames = self._file.read(count, dtype="float32", always_2d=True)
        out = np.empty(frames.shape[0], np.complex64)
        out.real = frames[:, 0]
        out.imag = frames[:, 1] if self.channels == 2 else 0.0
        return out

    def close(self) -> None:
        if self._file is not None:
            self._file.close()
            self._file = None


def read_audio_capture(
    path: str | os.PathLike, *, rate: float | None = None, center: float | None = None
) -> Capture:
    """Open a WAV or FLAC file as a capture.

    Two channels are read as I (left) and Q (right); one channel as a real
    signal (real IF). The rate comes from the file; ``rate`` overrides it
    with a warning. ``center`` gives the centre frequency (Hz).
    """
    path = Path(path)
    try:
        info = soundfile.info(str(path))
    except (RuntimeError, ValueError) as exc:  # soundfile's errors are RuntimeErrors
        raise CaptureError(f"{path}: not a readable WAV/FLAC file: {exc}") from None
    if info.channels > 2:
        raise CaptureError(
            f"{path}: has {info.channels} channels; iqsift reads 1 channel (real IF) or 2 channels (I and Q)"
        )
    if info.frames <= 0:
        raise CaptureError(f"{path}: the file is empty (0 samples)")
    file_rate = float(info.samplerate)
    if rate is not None and rate != file_rate:
        warnings.warn(f"{path}: --rate {rate:g} overrides the file's rate {file_rate:g}", IqsiftWarning)
        file_rate = rate
    is_complex = info.channels == 2
    if center is None and not is_complex:
        center = 0.0
    subtype = info.subtype
    clip_high = 1.0
    if subtype.startswith("PCM_") and subtype[4:].isdigit():
        bits = int(subtype[4:])
        clip_high = (2 ** (bits - 1) - 1) / 2 ** (bits - 1)
    return Capture(
        path,
        _SoundFileSource(path, info.channels),
        format=info.format.lower(),
        datatype=f"{'c' if is_complex else 'r'}:{subtype}",
        sample_rate_hz=file_rate,
        samples=info.frames,
        is_complex=is_complex,
        segments=(Segment(0, info.frames, center, None),),
        metadata={"soundfile_format": info.format, "subtype": subtype, "channels": info.channels},
        clip_high=clip_high,
        can_hold_nonfinite=subtype in ("FLOAT", "DOUBLE"),
    )


def read_audio(path: str | os.PathLike, *, label: str = "reference") -> tuple[np.ndarray, float]:
    """Read a whole audio file (WAV, FLAC ...) as float64 frames ``(n, channels)`` and its rate (samples/s).

    Raises
    ------
    ParameterError
        One line naming the file, when it is missing or not readable as audio.
    """
    path = Path(path)
    if not path.is_file():
        raise ParameterError(f"{label}: {path}: no such file", parameters=(label,))
    try:
        data, rate = soundfile.read(str(path), dtype="float64", always_2d=True)
    except (RuntimeError, ValueError) as exc:  # soundfile's errors are RuntimeErrors
        raise ParameterError(f"{label}: {path}: cannot read as audio ({str(exc).splitlines()[0]})",
                             parameters=(label,)) from None
    return data, float(rate)


class AudioWriter:
    """Write recovered audio to WAV or FLAC (16-bit PCM), atomically.

    Samples are float with full scale ±1; values beyond are clipped and counted
    in :attr:`clipped_samples`.

    Parameters
    ----------
    path : path
        Output file; the extension (.wav or .flac) picks the format.
    rate_hz : int
        Audio sample rate (samples/s).
    channels : int
        Number of audio channels.
    subtype : str
        soundfile subtype (default ``PCM_16``).
    force : bool
        Overwrite an existing file.
    outputs : OutputSet, optional
        Commit through this set (with the job's other outputs) instead of on :meth:`close`.
    """

    def __init__(
        self,
        path: str | os.PathLike,
        rate_hz: float,
        *,
        channels: int = 1,
        subtype: str = "PCM_16",
        force: bool = False,
        outputs: OutputSet | None = None,
    ) -> None:
        self.path = Path(path)
        fmt = AUDIO_FORMATS.get(self.path.suffix.lower())
        if fmt is None and self.path.name.lower() in AUDIO_FORMATS:
            raise ParameterError(f"{self.path}: give the audio file a name before its extension, "
                                 f"e.g. {self.path.with_name('audio' + self.path.name)}")
        if fmt is None:
            raise ParameterError(f"{self.path}: audio output must end in .wav or .flac")
        if abs(rate_hz - round(rate_hz)) > 1e-6 or rate_hz < 1:
            raise ParameterError(f"{self.path}: audio rate must be a whole number of samples/s, got {rate_hz!r}")
        self.rate_hz = int(round(rate_hz))
        self._own_outputs = outputs is None
        self._outputs = outputs or OutputSet(force=force)
        self._tmp = self._outputs.reserve(self.path)
        self._file = soundfile.SoundFile(
            str(self._tmp), "w", samplerate=self.rate_hz, channels=channels, format=fmt, subtype=subtype
        )
        self.samples_written = 0
        self.clipped_samples = 0
        self._closed = False

    def write(self, block: np.ndarray) -> None:
        """Append audio samples (float, full scale ±1)."""
        block = np.asarray(block, dtype=np.float32)
        over = np.abs(block) > 1.0
        if over.any():
            self.clipped_samples += int(np.count_nonzero(over))
            block = np.clip(block, -1.0, 1.0)
        self._file.write(block)
        self.samples_written += block.shape[0]

    def close(self) -> None:
        """Finish the file and (without an OutputSet) rename it into place."""
        if self._closed:
            return
        self._closed = True
        self._file.close()
        if self.clipped_samples:  # said once the file exists
            self._outputs.after_commit(self._warn_clipped)
        if self._own_outputs:
            self._outputs.commit()

    def _warn_clipped(self) -> None:
        warnings.warn(f"{self.path}: {self.clipped_samples} audio samples clipped at full scale", IqsiftWarning)

    def abort(self) -> None:
        """Discard the file."""
        if not self._file.closed:
            self._file.close()
        self._closed = True
        self._outputs.abort()

    def __enter__(self) -> "AudioWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        if exc_type is None:
            self.close()
        else:
            self.abort()
