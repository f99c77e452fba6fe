"""The :class:`Capture`: a recording's metadata plus streaming access to its samples.

A capture is opened with :func:`iqsift.captures.open_capture`, which picks the
reader from the file name (SigMF, WAV/FLAC, raw). Samples come out as complex64
blocks of bounded size, whatever the stored format, scaled so that complex
magnitude 1.0 is full scale (0 dBFS). Real-valued captures (real IF) give
samples with a zero imaginary part and ``is_complex == False``.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Protocol

import numpy as np

from ..errors import CaptureError, ParameterError
from ..reference import check_ppm, reference_factor
from ..units import TimeSpec, parse_time
from .binary import BinarySource
from .integrity import ChecksumPass, RecordedChecksum
from .prefetch import prefetched, reader_thread_enabled

__all__ = ["Capture", "Segment", "Annotation", "SampleRange", "DEFAULT_BLOCK_SIZE"]

DEFAULT_BLOCK_SIZE = 1 << 21
"""Samples per block handed out by :meth:`Capture.blocks` (16 MiB of complex64): large enough that the
per-block Python overhead of a 64-channel extraction stays small, small enough for bounded memory."""


@dataclass(frozen=True)
class Segment:
    """A run of samples recorded with one set of parameters (a SigMF capture segment).

    Attributes
    ----------
    sample_start : int
        First sample of the segment (index into the capture).
    sample_count : int
        Samples in the segment.
    frequency_hz : float or None
        Centre frequency (Hz) of the segment, when known.
    datetime : str or None
        RFC 3339 time of the segment's first sample, when known.
    """

    sample_start: int
    sample_count: int
    frequency_hz: float | None = None
    datetime: str | None = None

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready view with stable keys."""
        return {
            "sample_start": self.sample_start,
            "sample_count": self.sample_count,
            "frequency_hz": self.frequency_hz,
            "datetime": self.datetime,
        }


@dataclass(frozen=True)
class Annotation:
    """A SigMF annotation: a labelled span of samples and, optionally, of frequency.

    Attributes
    ----------
    sample_start, sample_count : int, int or None
        Span in samples; ``sample_count`` None means "to the end".
    freq_lower_hz, freq_upper_hz : float or None
        Frequency edges (Hz), both or neither.
    label, comment, generator : str or None
        Free text from the metadata.
    """

    sample_start: int
    sample_count: int | None = None
    freq_lower_hz: float | None = None
    freq_upper_hz: float | None = None
    label: str | None = None
    comment: str | None = None
    generator: str | None = None
    extra: dict[str, Any] = field(default_factory=dict, compare=False)

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready view with stable keys."""
        return {
            "sample_start": self.sample_start,
            "sample_count": self.sample_count,
            "freq_lower_hz": self.freq_lower_hz,
            "freq_upper_hz": self.freq_upper_hz,
            "label": self.label,
            "comment": self.comment,
            "generator": self.generator,
        }


@dataclass(frozen=True)
class SampleRange:
    """A contiguous selection of samples, ``[start, start + count)``."""

    start: int
    count: int

    @property
    def stop(self) -> int:
        """One past the last selected sample."""
        return self.start + self.count


class SampleSource(Protocol):
    """What a reader provides: random access to scaled samples."""

    def read(self, start: int, count: int) -> np.ndarray:
        """Return ``count`` complex64 samples from sample index ``start``."""

    def close(self) -> None:
        """Release the file."""


class BlockCorrection(Protocol):
    """A correction applied to every block read (:mod:`iqsift.captures.iqcorrect`)."""

    def apply(self, block: np.ndarray) -> np.ndarray:
        """``block`` corrected."""

    def to_dict(self) -> dict[str, Any]:
        """What was corrected, for reports."""


class Capture:
    """An opened capture file.

    Use :func:`iqsift.captures.open_capture` to make one. The object holds the
    metadata and reads samples on demand; nothing is loaded up front, so a
    capture of any size opens instantly and streams in bounded memory.

    Attributes
    ----------
    path : Path
        The file the user named (for SigMF, the ``.sigmf-meta`` file).
    format : str
        ``"sigmf"``, ``"sigmf-archive"``, ``"raw"``, ``"wav"`` or ``"flac"``.
    datatype : str
        The stored sample format: a SigMF datatype name, or for WAV/FLAC the
        soundfile subtype prefixed by ``c`` (two channels, I/Q) or ``r`` (one).
    sample_rate_hz : float
        Sample rate (samples/s).
    is_complex : bool
        True for I/Q, False for a real-valued capture (real IF).
    segments : tuple of Segment
        Capture segments (at least one).
    annotations : tuple of Annotation
        Annotations from the metadata.
    metadata : dict
        The global metadata as read (SigMF ``global`` object, or a summary).
    verify : bool
        Check the data against the checksum its metadata records (SigMF ``core:sha512``) on every
        pass of :meth:`blocks` over the whole capture. A capture without one is never checked.
    reference_ppm : float
        The receiver reference error corrected for (ppm, :meth:`correct_reference`); 0 as opened.
    nominal_sample_rate_hz : float
        The sample rate the file states (before any correction).
    correction : BlockCorrection or None
        Applied to every block :meth:`blocks` hands out (IQ imbalance and DC removal, set by
        ``iq_correct`` in the jobs); None: samples as stored.
    """

    def __init__(
        self,
        path: Path,
        source: SampleSource,
        *,
        format: str,
        datatype: str,
        sample_rate_hz: float,
        samples: int,
        is_complex: bool,
        segments: tuple[Segment, ...],
        annotations: tuple[Annotation, ...] = (),
        metadata: dict[str, Any] | None = None,
        clip_high: float = 1.0,
        can_hold_nonfinite: bool = True,
        verify: bool = True,
    ) -> None:
        self.path = Path(path)
        self._source = source
        self.format = format
        self.datatype = datatype
        self.sample_rate_hz = float(sample_rate_hz)
        self.samples = int(samples)
        self.is_complex = bool(is_complex)
        self.segments = tuple(segments)
        self.annotations = tuple(annotations)
        self.metadata = dict(metadata or {})
        self.clip_high = float(clip_high)
        self.can_hold_nonfinite = bool(can_hold_nonfinite)
        self.verify = bool(verify)
        self.reference_ppm = 0.0
        self.nominal_sample_rate_hz = self.sample_rate_hz
        self._nominal = (self.segments, self.annotations)
        self.correction: BlockCorrection | None = None
        self._check_started: ChecksumPass | None = None

    def correct_reference(self, ppm: float) -> "Capture":
        """Read the capture as made by a receiver whose reference ran ``ppm`` parts per million fast.

        The sample rate, the segments' centre frequencies and the annotations' frequency edges
        become the true ones, ``k = 1 + ppm·1e-6`` times the file's (see :mod:`iqsift.reference`
        for the derivation); everything computed from them afterwards (tuning, measured
        frequencies, durations) is then true. Samples are untouched. A later call replaces the
        earlier correction (it is always relative to the file's values); ``ppm = 0`` undoes it.

        Returns the capture itself.
        """
        ppm = check_ppm("ppm", ppm)
        k = reference_factor(ppm)
        segments, annotations = self._nominal
        self.reference_ppm = ppm
        self.sample_rate_hz = self.nominal_sample_rate_hz * k
        self.segments = tuple(
            seg if seg.frequency_hz is None else dataclasses.replace(seg, frequency_hz=seg.frequency_hz * k)
            for seg in segments)
        self.annotations = tuple(
            a if a.freq_lower_hz is None or a.freq_upper_hz is None else
            dataclasses.replace(a, freq_lower_hz=a.freq_lower_hz * k, freq_upper_hz=a.freq_upper_hz * k)
            for a in annotations)
        return self

    # -- metadata -------------------------------------------------------
    @property
    def files(self) -> tuple[Path, ...]:
        """Every file this capture reads (metadata and data), for refusing them as outputs."""
        files = [self.path]
        source_path = getattr(self._source, "path", None)
        if source_path is not None and Path(source_path) != self.path:
            files.append(Path(source_path))
        return tuple(files)

    @property
    def duration_s(self) -> float:
        """Length of the capture in seconds."""
        return self.samples / self.sample_rate_hz

    @property
    def center_hz(self) -> float | None:
        """Centre frequency (Hz) of the first segment that states one; None when unknown.

        For a real-valued capture this is the RF frequency that sample
        frequency 0 Hz stands for (0 when not given), so absolute frequencies
        are ``center_hz + offset`` for both kinds of capture.
        """
        return next((seg.frequency_hz for seg in self.segments if seg.frequency_hz is not None), None)

    def __repr__(self) -> str:
        return (
            f"Capture({str(self.path)!r}, format={self.format!r}, datatype={self.datatype!r}, "
            f"sample_rate_hz={self.sample_rate_hz:g}, samples={self.samples}, center_hz={self.center_hz!r})"
        )

    def __enter__(self) -> "Capture":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Close the underlying file (and stop a checksum check started ahead that no pass took)."""
        self.stop_check_ahead()
        self._source.close()

    def check_ahead(self, start: int = 0, count: int | None = None) -> None:
        """Start checking the recorded checksum now, for the coming pass over ``[start, start + count)``.

        The check of a pass over the whole capture (see :meth:`blocks`) hashes the data file on a
        thread of its own; started here, right after opening, it runs while the caller designs
        filters and imports what it needs, instead of from the first block on. The next pass of
        :meth:`blocks` over the whole capture takes it over; nothing happens when that range is not
        the whole capture, when :attr:`verify` is off or the capture records no checksum. The
        check started ahead is stopped by :meth:`close` if no pass took it.
        """
        count = self.samples - start if count is None else count
        recorded = self._recorded_checksum(start, count)
        if self._check_started is None and recorded is not None:
            self._check_started = recorded.start()

    def stop_check_ahead(self) -> None:
        """Stop a check started by :meth:`check_ahead` that no pass has taken over (else nothing)."""
        if self._check_started is not None:
            self._check_started.close()
            self._check_started = None

    # -- selection ------------------------------------------------------
    def select(
        self,
        start: str | float | TimeSpec | None = None,
        duration: str | float | TimeSpec | None = None,
    ) -> SampleRange:
        """Turn a start time and duration into a range of samples.

        Parameters
        ----------
        start, duration : float (seconds), str or TimeSpec, optional
            Seconds (``1.5``, ``"250ms"``) or samples (``"48000sa"``,
            ``TimeSpec(samples=48000)``). Default: from the first sample, to the end.

        Raises
        ------
        ParameterError
            If the start lies at or beyond the end, or the range runs past it.
        """
        first = 0 if start is None else parse_time(start, "start").to_samples(self.sample_rate_hz)
        if first >= self.samples:
            raise ParameterError(
                f"{self.path}: start {_describe(start)} is at or beyond the end of the capture "
                f"({self.duration_s:.6g} s, {self.samples} samples)"
            )
        if duration is None:
            count = self.samples - first
        else:
            count = parse_time(duration, "duration").to_samples(self.sample_rate_hz)
            if count <= 0:
                raise ParameterError(f"{self.path}: duration {_describe(duration)} selects no samples")
            if first + count > self.samples:
                raise ParameterError(
                    f"{self.path}: start {_describe(start)} + duration {_describe(duration)} runs past the end "
                    f"of the capture ({self.duration_s:.6g} s, {self.samples} samples)"
                )
        return SampleRange(first, count)

    def segments_in(self, selection: SampleRange) -> tuple[Segment, ...]:
        """The segments that overlap ``selection``."""
        return tuple(
            seg
            for seg in self.segments
            if seg.sample_start < selection.stop and seg.sample_start + seg.sample_count > selection.start
        )

    def center_for(self, selection: SampleRange | None = None) -> float | None:
        """The single centre frequency (Hz) valid over ``selection``.

        Raises
        ------
        CaptureError
            If the selection spans segments recorded at different centre
            frequencies: an operation that tunes by absolute frequency needs
            one centre.
        """
        selection = selection or SampleRange(0, self.samples)
        segs = self.segments_in(selection)
        freqs = {seg.frequency_hz for seg in segs}
        if len(freqs) > 1:
            listing = ", ".join(
                f"samples {s.sample_start}-{s.sample_start + s.sample_count - 1} at "
                f"{'unknown' if s.frequency_hz is None else f'{s.frequency_hz:.6g} Hz'}"
                for s in segs
            )
            raise CaptureError(
                f"{self.path}: the selected samples span capture segments with different centre frequencies "
                f"({listing}); pick one segment with start and duration", parameters=("start", "duration")
            )
        return freqs.pop() if freqs else None

    # -- samples --------------------------------------------------------
    def read(self, start: int = 0, count: int | None = None, *, nonfinite: str = "error") -> np.ndarray:
        """Read a range of samples at once (complex64). See :meth:`blocks`."""
        count = self.samples - start if count is None else count
        parts = list(self.blocks(start=start, count=count, block_size=max(count, 1), nonfinite=nonfinite))
        return np.concatenate(parts) if parts else np.zeros(0, np.complex64)

    def blocks(
        self,
        block_size: int = DEFAULT_BLOCK_SIZE,
        start: int = 0,
        count: int | None = None,
        *,
        nonfinite: str = "error",
    ) -> Iterator[np.ndarray]:
        """Yield the samples in complex64 blocks of at most ``block_size`` samples.

        Memory stays bounded by one block whatever the capture's length.

        Parameters
        ----------
        block_size : int
            Maximum samples per block.
        start, count : int
            First sample and number of samples (default: all from ``start``).
        nonfinite : {"error", "zero", "keep"}
            What to do with NaN or infinite samples (possible in float
            datatypes): raise a :class:`CaptureError` naming the first one,
            replace them by 0, or pass them through.

        When the blocks cover the whole capture and :attr:`verify` is set, the data's
        SHA-512 is computed from the bytes as they are read and compared with the one the
        metadata records once the last block has been handed out: a mismatch raises
        instead of ending the iteration, so a job stops before committing what it made.

        Raises
        ------
        ParameterError
            For an invalid range or option.
        CaptureError
            For non-finite samples under ``nonfinite="error"``, or a read error.
        ChecksumError
            After the last block, if the data does not match its recorded checksum.
        """
        if block_size < 1:
            raise ParameterError(f"block_size: must be >= 1, got {block_size}")
        if nonfinite not in ("error", "zero", "keep"):
            raise ParameterError(f"nonfinite: must be 'error', 'zero' or 'keep', got {nonfinite!r}")
        count = self.samples - start if count is None else count
        if start < 0 or count < 0 or start + count > self.samples:
            raise ParameterError(
                f"{self.path}: samples {start}..{start + count} are outside the capture (0..{self.samples})"
            )
        check = nonfinite != "keep" and self.can_hold_nonfinite
        plain = self._checked_blocks(block_size, start, count, nonfinite, check)
        if count > block_size and reader_thread_enabled():
            # read, hash and decode on a second core while the caller works on the previous block
            yield from prefetched(plain)
        else:
            yield from plain

    def _checked_blocks(self, block_size: int, start: int, count: int, nonfinite: str,
                        check: bool) -> Iterator[np.ndarray]:
        """The blocks as read, then the checksum check (see :meth:`blocks`)."""
        checksum = self._checksum_pass(start, count)
        try:
            yield from self._read_blocks(self._source.read, block_size, start, count, nonfinite, check)
            if checksum is not None:
                checksum.finish()
        finally:
            if checksum is not None:
                checksum.close()

    def _recorded_checksum(self, start: int, count: int) -> RecordedChecksum | None:
        """The checksum a pass over ``[start, start + count)`` is checked against, or None: only a pass
        over the whole capture is checked (a part of the data says nothing about the checksum of the
        whole), and only with :attr:`verify` set and a checksum recorded."""
        source = self._source
        if self.verify and isinstance(source, BinarySource) and start == 0 and count == self.samples:
            return source.checksum
        return None

    def _checksum_pass(self, start: int, count: int) -> ChecksumPass | None:
        """The check of a pass: the one :meth:`check_ahead` started, else a new one started now on its
        own thread; None when this pass is not checked."""
        recorded = self._recorded_checksum(start, count)
        if recorded is None:
            return None
        if self._check_started is not None:
            started, self._check_started = self._check_started, None
            return started
        return recorded.start()

    def _read_blocks(self, read: Callable[[int, int], np.ndarray], block_size: int, start: int, count: int,
                     nonfinite: str, check: bool) -> Iterator[np.ndarray]:
        position = start
        stop = start + count
        while position < stop:
            n = min(block_size, stop - position)
            block = read(position, n)
            if block.shape[0] != n:
                raise CaptureError(
                    f"{self.path}: expected {n} samples at sample {position}, read {block.shape[0]}; "
                    "was the file truncated while reading?"
                )
            # a sum is finite when every sample is (or, rarely, overflows): the full check only then
            if check and not np.isfinite(block.sum()):
                finite = np.isfinite(block)
                if not finite.all():
                    if nonfinite == "error":
                        first_bad = position + int(np.argmin(finite))
                        raise CaptureError(
                            f"{self.path}: sample {first_bad} is NaN or infinite; "
                            "pass allow_nonfinite to replace such samples with 0", parameters=("allow_nonfinite",)
                        )
                    block = np.where(finite, block, np.complex64(0))
            if self.correction is not None:
                block = self.correction.apply(block)
            yield block
            position += n


def _describe(value: object) -> str:
    if isinstance(value, TimeSpec):
        return f"{value.samples} samples" if value.samples is not None else f"{value.seconds:g} s"
    if isinstance(value, (int, float)):
        return f"{value:g} s"
    return repr(value)


def check_sample_rate(value: Any, where: str) -> float:
    """Validate a sample rate read from a file or given by the user (samples/s)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise CaptureError(f"{where}: sample rate must be a number, got {value!r}")
    if not math.isfinite(value) or value <= 0:
        raise CaptureError(f"{where}: sample rate must be greater than 0, got {value!r}")
    return float(value)
