"""Pick the reader for a capture file from its name and open it."""

from __future__ import annotations

import errno
import os
from pathlib import Path

from ..errors import CaptureError, ParameterError
from ..units import parse_frequency, parse_positive_hz
from .audio import AUDIO_FORMATS, read_audio_capture
from .capture import Capture
from .raw import read_raw
from .sigmf import read_sigmf, read_sigmf_archive
from .stream import STDIN, open_stream

__all__ = ["open_capture", "capture_kind", "input_files"]


def capture_kind(path: str | os.PathLike) -> str:
    """``"sigmf"``, ``"sigmf-archive"``, ``"audio"`` or ``"raw"``, from the file name."""
    name = Path(path).name.lower()
    if name.endswith((".sigmf-meta", ".sigmf-data")):
        return "sigmf"
    if name.endswith(".sigmf"):
        return "sigmf-archive"
    if Path(name).suffix in AUDIO_FORMATS:
        return "audio"
    return "raw"


def input_files(path: str | os.PathLike) -> tuple[Path, ...]:
    """The files a capture path stands for (both files of a SigMF pair), without opening anything."""
    if str(path) == STDIN:
        return ()
    path = Path(path)
    if capture_kind(path) == "sigmf":
        from .sigmf import sigmf_paths

        return tuple(sigmf_paths(path))
    return (path,)


def open_capture(
    path: str | os.PathLike,
    *,
    format: str | None = None,
    rate: float | str | None = None,
    center: float | str | None = None,
    strict: bool = False,
    verify: bool = True,
) -> Capture:
    """Open a capture: SigMF, SigMF archive, WAV/FLAC, or raw interleaved samples.

    Parameters
    ----------
    path : path
        The capture. SigMF is recognised by ``.sigmf-meta``/``.sigmf-data``
        (either file of the pair), an archive by ``.sigmf``, audio by ``.wav``
        or ``.flac``; ``"-"`` is standard input (raw samples as they arrive, see
        :mod:`iqsift.captures.stream`); anything else is raw.
    format : str, optional
        SigMF datatype of a raw file (``cf32_le``, ``ci16_le``, ``cu8`` ...).
    rate : float or str, optional
        Sample rate (samples/s, SI suffix allowed). Required for raw files;
        overrides the recorded rate otherwise (with a warning).
    center : float or str, optional
        Centre frequency (Hz); overrides the recorded one.
    strict : bool
        Refuse a data size that is not a whole number of samples.
    verify : bool
        Check a SigMF recording's data against its ``core:sha512`` on every pass
        over the whole capture (see :attr:`Capture.verify`); other formats record
        no checksum.

    Raises
    ------
    CaptureError
        When the file is missing, is a directory, or cannot be read as described.
    ParameterError
        For invalid options.
    """
    rate_hz = None if rate is None else parse_positive_hz(rate, "rate")
    center_hz = None if center is None else parse_frequency(center, "center")
    if str(path) == STDIN:
        return open_stream(format=format, rate=rate_hz, center=center_hz)
    path = Path(path)
    kind = capture_kind(path)
    if kind == "sigmf":
        if format is not None:
            raise ParameterError(f"{path}: format applies to raw files only; a SigMF file states its own datatype",
                                 parameters=("format",))
        # a missing file of the pair is reported by the reader, naming the missing one
        if path.is_dir():
            raise CaptureError(f"{path}: is a directory, not a capture file")
        return read_sigmf(path, rate=rate_hz, center=center_hz, strict=strict, verify=verify)
    if not path.exists():
        if path.is_symlink():
            try:
                os.stat(path)
            except OSError as exc:
                if exc.errno == errno.ELOOP:
                    raise CaptureError(f"{path}: is a symbolic link that leads round in a loop") from None
            raise CaptureError(f"{path}: is a symbolic link to {os.readlink(path)}, which does not exist")
        raise CaptureError(f"{path}: no such file")
    if path.is_dir():
        raise CaptureError(f"{path}: is a directory, not a capture file")
    if kind == "sigmf-archive":
        if format is not None:
            raise ParameterError(f"{path}: format applies to raw files only; a SigMF archive states its own datatype",
                                 parameters=("format",))
        return read_sigmf_archive(path, rate=rate_hz, center=center_hz, strict=strict, verify=verify)
    if kind == "audio":
        if format is not None:
            raise ParameterError(f"{path}: format applies to raw files only; WAV/FLAC files state their own sample type",
                                 parameters=("format",))
        if path.stat().st_size == 0:
            raise CaptureError(f"{path}: the file is empty (0 samples)")
        return read_audio_capture(path, rate=rate_hz, center=center_hz)
    return read_raw(path, format=format, rate=rate_hz, center=center_hz, strict=strict)
