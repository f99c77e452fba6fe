"""Raw interleaved sample files: no metadata, the user states format, rate and centre."""

from __future__ import annotations

import os
import warnings
from pathlib import Path

from ..errors import CaptureError, IqsiftWarning, ParameterError
from .binary import BinarySource, ByteRun
from .capture import Capture, Segment
from .datatypes import parse_datatype

__all__ = ["read_raw"]


def read_raw(
    path: str | os.PathLike,
    *,
    format: str | None,
    rate: float | None,
    center: float | None = None,
    strict: bool = False,
) -> Capture:
    """Open a headerless file of interleaved samples.

    Parameters
    ----------
    path : path
        The file.
    format : str
        SigMF datatype name (``cf32_le``, ``ci16_le``, ``cu8`` ...); required.
    rate : float
        Sample rate (samples/s); required.
    center : float, optional
        Centre frequency (Hz). Without it, frequencies are offsets from the
        capture centre (complex) or from 0 Hz (real).
    strict : bool
        Refuse a size that is not a whole number of samples instead of
        dropping the partial tail with a warning.
    """
    path = Path(path)
    if format is None:
        raise ParameterError(
            f"{path}: not a SigMF, WAV or FLAC file; for a raw capture give format (e.g. cf32_le, ci16_le, cu8)", parameters=("format",)
        )
    datatype = parse_datatype(format, "format")
    if rate is None:
        raise ParameterError(f"{path}: a raw capture needs rate (samples/s)", parameters=("rate",))
    size = path.stat().st_size
    if size == 0:
        raise CaptureError(f"{path}: the file is empty (0 samples)")
    samples, tail = divmod(size, datatype.sample_bytes)
    if tail:
        message = (
            f"{path}: size {size} bytes is not a whole number of {datatype.name} samples "
            f"({datatype.sample_bytes} bytes each)"
        )
        if strict or samples == 0:
            raise CaptureError(message)
        warnings.warn(message + f"; the last {tail} bytes are ignored", IqsiftWarning)
    if center is None and not datatype.is_complex:
        center = 0.0
    return Capture(
        path,
        BinarySource(path, datatype, [ByteRun(0, samples, 0)]),
        format="raw",
        datatype=datatype.name,
        sample_rate_hz=rate,
        samples=samples,
        is_complex=datatype.is_complex,
        segments=(Segment(0, samples, center, None),),
        metadata={},
        clip_high=datatype.clip_high,
        can_hold_nonfinite=datatype.kind == "f",
    )
