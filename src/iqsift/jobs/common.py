"""What every job shares: the capture and selection parts of a result, opening a capture, provenance.

A job takes a capture either as a path (it opens and closes it) or as an already opened
:class:`~iqsift.captures.Capture` (the caller keeps it open). Results carry a ``schema`` key naming
the JSON Schema they follow (``iqsift/schemas/<name>.json``) and the ``iqsift_version`` that made them.
"""

from __future__ import annotations

import contextlib
import os
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Iterator, Mapping, TypeAlias, Union

import numpy as np

from .. import __version__
from ..captures import Capture, OutputSet, SampleRange, SigMFWriter, open_capture
from ..errors import ParameterError
from ..jsonable import to_jsonable
from ..reference import MAX_PPM

__all__ = [
    "CaptureArg",
    "CaptureSummary",
    "Progress",
    "SelectionSummary",
    "audio_file_rate",
    "baseband_writer",
    "check_plot_format",
    "counted",
    "nonfinite_policy",
    "opened",
    "stamped",
    "with_iq_correction",
]

CaptureArg: TypeAlias = Union[str, "os.PathLike[str]", Capture]
"""A capture as jobs accept it: a path, or an opened :class:`~iqsift.captures.Capture`."""

Progress = Callable[[int, int], None]
"""Called after each block with the samples just processed and the total the job will process."""

PLOT_FORMATS = ("png", "svg")


def stamped(schema: str, body: Mapping[str, Any]) -> dict[str, Any]:
    """``body`` as JSON-ready data, headed by its ``schema`` name and the ``iqsift_version``."""
    return {"schema": schema, "iqsift_version": __version__, **to_jsonable(dict(body))}


@contextlib.contextmanager
def opened(
    capture: CaptureArg,
    *,
    format: str | None = None,
    rate: str | float | None = None,
    center: str | float | None = None,
    strict: bool = False,
    verify: bool = True,
    ppm: float | None = None,
    iq_correct: bool = False,
) -> Iterator[Capture]:
    """The capture, opened here (and closed on exit) when given as a path; as it is when already open.

    With ``verify`` false the capture's recorded checksum is not checked (see
    :attr:`~iqsift.captures.Capture.verify`); an already opened capture gets its own setting back on exit.
    With ``ppm`` the capture is read as made by a receiver whose reference ran ``ppm`` parts per million
    fast (:meth:`~iqsift.captures.Capture.correct_reference`): its rate and centre are the true ones;
    an already opened capture gets its own correction back on exit.
    With ``iq_correct`` the IQ gain and phase imbalance and the DC offset are estimated and removed
    from every block read (:func:`with_iq_correction`).

    Raises
    ------
    ParameterError
        If reading options (``format``, ``rate``, ``center``) come with an already opened capture:
        they belong to :func:`~iqsift.captures.open_capture`.
    """
    if not isinstance(capture, (str, os.PathLike)):  # an opened capture (or anything that reads like one)
        given = [name for name, value in (("format", format), ("rate", rate), ("center", center)) if value is not None]
        if given:
            raise ParameterError(f"{', '.join(given)}: only for a capture given by path; {capture.path} is already open")
        own_setting, own_ppm, own_correction = capture.verify, capture.reference_ppm, capture.correction
        capture.verify = own_setting and verify
        try:
            if ppm is not None:
                capture.correct_reference(ppm)
            if iq_correct:
                with_iq_correction(capture)
            yield capture
        finally:
            capture.stop_check_ahead()  # the job's check, if no pass of the job took it
            capture.verify, capture.correction = own_setting, own_correction
            if capture.reference_ppm != own_ppm:  # a job may correct it further (survey's estimate)
                capture.correct_reference(own_ppm)
        return
    with open_capture(capture, format=format, rate=rate, center=center, strict=strict,
                      verify=verify) as opened_capture:
        if ppm is not None:
            opened_capture.correct_reference(ppm)
        if iq_correct:
            with_iq_correction(opened_capture)
        yield opened_capture


def audio_file_rate(rate_hz: float) -> float:
    """The sample rate an audio file of audio made at ``rate_hz`` is labelled with (samples/s).

    Audio files need a whole rate. A capture corrected for its receiver's reference error
    (:mod:`iqsift.reference`) has a true rate that is not a round number (240 001.92 samples/s for
    240 kS/s at +8 ppm), and the audio resampler's small-integer ratio then gives, say, 16 000.128
    samples/s. Such a rate within :data:`~iqsift.reference.MAX_PPM` of a whole number is written as
    that number: the file plays on the receiver's own clock, off by the reference error (8 ppm: 0.03 s
    in an hour), while every time and frequency in the report is true. Other rates are returned as they
    are (and refused by the writer).
    """
    whole = round(rate_hz)
    return float(whole) if whole > 0 and abs(rate_hz / whole - 1.0) <= MAX_PPM * 1e-6 else rate_hz


def with_iq_correction(capture: Capture) -> Capture:
    """Make ``capture`` remove its IQ imbalance and DC offset from every block it hands out.

    A file gets a first pass over the whole capture (one fixed correction, so every block and
    every part selected later is corrected alike); standard input, which cannot be read twice, a
    running estimate (:mod:`iqsift.captures.iqcorrect`).

    Raises
    ------
    ParameterError
        For a real-valued capture (it has no Q path to be out of balance).
    """
    from ..captures.iqcorrect import RunningCorrection, estimate_correction
    from ..captures.stream import StreamCapture

    if not capture.is_complex:
        raise ParameterError(f"iq_correct: {capture.path} is real-valued (datatype {capture.datatype}); "
                             "IQ imbalance applies to complex captures only")
    capture.correction = None
    if isinstance(capture, StreamCapture):
        capture.correction = RunningCorrection()
    else:
        capture.correction = estimate_correction(capture.blocks(nonfinite="zero"), capture.clip_high)
    return capture


def check_plot_format(plot_format: str) -> str:
    """``plot_format`` if it is one iqsift writes (png or svg)."""
    if plot_format not in PLOT_FORMATS:
        raise ParameterError(f"plot_format: got {plot_format!r}; use png or svg")
    return plot_format


def nonfinite_policy(allow_nonfinite: bool) -> str:
    """How capture reading treats NaN/Inf samples: replaced by 0 when allowed, else refused."""
    return "zero" if allow_nonfinite else "error"


def counted(blocks: Iterable[np.ndarray], total: int, progress: Progress | None) -> Iterator[np.ndarray]:
    """Pass blocks through, telling ``progress`` how many samples each held (of ``total``)."""
    for block in blocks:
        yield block
        if progress is not None:
            progress(block.shape[0], total)


@dataclass(frozen=True)
class CaptureSummary:
    """What a capture holds, as every job reports it (no samples read).

    Attributes
    ----------
    path : str
        The file named (for SigMF, the ``.sigmf-meta`` file).
    format, datatype : str
        Container and stored sample format (SigMF datatype name).
    is_complex : bool
        IQ (True) or real IF (False).
    sample_rate_hz : float
        Sample rate (samples/s).
    center_hz : float or None
        Centre frequency (Hz) of the first segment; None when unknown.
    samples : int
        Length in samples.
    duration_s : float
        Length in seconds.
    segments, annotations : tuple of dict
        SigMF capture segments and annotations.
    reference_ppm : float
        Receiver reference error corrected for (ppm; 0: none). ``sample_rate_hz``, ``center_hz`` and the
        segments' and annotations' frequencies are the corrected (true) ones.
    nominal_sample_rate_hz : float
        The sample rate the file states.
    iq_correction : dict or None
        The IQ imbalance and DC correction applied (``iq_correct``), None when none was.
    """

    path: str
    format: str
    datatype: str
    is_complex: bool
    sample_rate_hz: float
    center_hz: float | None
    samples: int
    duration_s: float
    segments: tuple[Mapping[str, Any], ...]
    annotations: tuple[Mapping[str, Any], ...]
    reference_ppm: float = 0.0
    nominal_sample_rate_hz: float | None = None
    iq_correction: Mapping[str, Any] | None = None

    @classmethod
    def of(cls, capture: Capture) -> "CaptureSummary":
        """The summary of an opened capture."""
        return cls(
            path=str(capture.path),
            format=capture.format,
            datatype=capture.datatype,
            is_complex=capture.is_complex,
            sample_rate_hz=capture.sample_rate_hz,
            center_hz=capture.center_hz,
            samples=capture.samples,
            duration_s=capture.duration_s,
            segments=tuple(s.as_dict() for s in capture.segments),
            annotations=tuple(a.as_dict() for a in capture.annotations),
            reference_ppm=capture.reference_ppm,
            nominal_sample_rate_hz=capture.nominal_sample_rate_hz,
            iq_correction=None if capture.correction is None else capture.correction.to_dict(),
        )

    def to_dict(self) -> dict[str, Any]:
        """Stable JSON keys."""
        return {
            "path": self.path,
            "format": self.format,
            "datatype": self.datatype,
            "is_complex": self.is_complex,
            "sample_rate_hz": self.sample_rate_hz,
            "center_hz": self.center_hz,
            "samples": self.samples,
            "duration_s": self.duration_s,
            "segments": [dict(s) for s in self.segments],
            "annotations": [dict(a) for a in self.annotations],
            "frequency_reference": {
                "correction_ppm": self.reference_ppm,
                "nominal_sample_rate_hz": (self.sample_rate_hz if self.nominal_sample_rate_hz is None
                                           else self.nominal_sample_rate_hz),
            },
            "iq_correction": None if self.iq_correction is None else dict(self.iq_correction),
        }


@dataclass(frozen=True)
class SelectionSummary:
    """The part of a capture a job processed: from ``start_s`` for ``duration_s`` (s), in samples too."""

    start_s: float
    duration_s: float
    sample_start: int
    sample_count: int

    @classmethod
    def of(cls, capture: Capture, selection: SampleRange) -> "SelectionSummary":
        rate = capture.sample_rate_hz
        count = min(selection.count, capture.samples - selection.start)  # a stream's length is known at its end
        return cls(selection.start / rate, count / rate, selection.start, count)

    def to_dict(self) -> dict[str, Any]:
        return {"start_s": self.start_s, "duration_s": self.duration_s,
                "sample_start": self.sample_start, "sample_count": self.sample_count}


def baseband_writer(
    path: str | os.PathLike[str],
    *,
    capture: Capture,
    selection: SampleRange,
    rate_hz: float,
    center_hz: float | None,
    channel: Mapping[str, Any],
    design: Mapping[str, Any],
    outputs: OutputSet,
) -> SigMFWriter:
    """A SigMF writer for one channel's baseband, with its provenance in the ``iqsift`` extension.

    The metadata records the source capture and the selection read from it, the channel and its
    designed chain, so the recording can be traced back and processed again.
    """
    return SigMFWriter(
        path,
        rate_hz,
        center_hz=center_hz,
        datatype="cf32_le",
        description=f"iqsift channel baseband of {capture.path.name}",
        extra={
            "iqsift:source": {"path": str(capture.path), "sample_start": selection.start,
                              "sample_count": selection.count, "reference_ppm": capture.reference_ppm},
            "iqsift:channel": to_jsonable(channel),
            "iqsift:design": to_jsonable(design),
        },
        outputs=outputs,
    )
