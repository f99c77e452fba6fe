"""Streaming spectrum accumulators for the receiver's tap points.

A :class:`WelchAccumulator` sits on a tap point (capture input, after the mixer,
after each decimation stage, after the detector, after audio post ...) and
averages the power spectrum over the *whole run*, block by block, with bounded
memory. The estimate is Welch's method of averaged modified periodograms
(P. D. Welch, "The use of fast Fourier transform for the estimation of power
spectra", IEEE Trans. Audio Electroacoust. AU-15(2), 1967) with the conventions
of :func:`scipy.signal.welch` (periodic window from
:func:`scipy.signal.get_window`, ``nfft = nperseg``, segments start every
``nperseg - noverlap`` samples, an incomplete trailing segment is not used,
``average="mean"``):

* ``scaling="density"``: ``|FFT(w·x)|² / (fs · Σw²)``, in dBFS/Hz;
* ``scaling="spectrum"``: ``|FFT(w·x)|² / (Σw)²``, in dBFS per bin, so a tone's
  peak bin reads the tone's power (exactly when it sits on a bin centre; with the
  flat-top window within about 0.01 dB anywhere, harris 1978).

Segments continue across block boundaries (the unfinished tail of a block is kept
and joined to the next one), so feeding a signal in any split gives the same
result as feeding it at once, and the same result as ``scipy.signal.welch`` on the
concatenated samples (with ``detrend=False``).

Complex input gives the two-sided spectrum, ``fftshift``-ed, frequencies from
``-fs/2`` to ``fs/2 - fs/nperseg`` plus ``center_hz``. Real input gives the
one-sided spectrum (``return_onesided=True`` in scipy: every bin except DC and,
for even ``nperseg``, Nyquist is doubled), frequencies ``0 .. fs/2`` plus
``center_hz``. ``center_hz`` is the caller's business: the capture's RF centre
before the mixer, 0 (baseband) after it.

Detrending is off by default: a DC offset in the stream shows as a spike at the
centre bin, which is what one wants to see when debugging a receiver chain (a
DC offset left by a mixer or an envelope detector is a finding, not a nuisance).
``detrend="constant"`` removes each segment's mean, as scipy's default does.

Full scale follows the project convention: complex magnitude 1.0 is 0 dBFS and a
power in dBFS is ``10·log10(mean |x|²)``; a complex tone ``a·exp(j ω n)`` reads
``20·log10(a)`` dBFS and a real tone ``A·cos(ω n)`` reads ``20·log10(A) - 3.01``
dBFS in the ``"spectrum"`` scaling.

A :class:`SpectrogramAccumulator` keeps a time-frequency picture of an
arbitrarily long input in bounded memory: at most ``max_columns`` columns; when
full, adjacent columns are merged in pairs (power averaged) and every column
thereafter averages twice as many segments.

Single-precision input (complex64, float32) is windowed and transformed in float32
and summed in float64; double-precision input in float64 throughout (the engine and
its accuracy: :mod:`iqsift.spectra.segments`).

Asking for a result before one whole segment has been seen raises
:class:`~iqsift.errors.ParameterError` (the fix is more samples or a smaller
``nperseg``); check :attr:`WelchAccumulator.ready` first when that can happen.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, NamedTuple

import numpy as np

from ..errors import ParameterError
from .segments import SegmentStream, check_count

__all__ = [
    "Spectrum",
    "WelchAccumulator",
    "SpectrogramAccumulator",
    "SpectrogramResult",
    "DB_FLOOR",
]

DB_FLOOR = -300.0
"""Lowest level reported (dB): exact zeros (digital silence) read this instead of -inf,
so every value stays finite and JSON-ready."""

_POWER_FLOOR = 10.0 ** (DB_FLOOR / 10.0)

_UNITS = {"density": "dBFS/Hz", "spectrum": "dBFS"}


# ----------------------------------------------------------------------------- helpers


def _to_db(power: np.ndarray) -> np.ndarray:
    """10·log10 of a power array, floored at :data:`DB_FLOOR`."""
    return 10.0 * np.log10(np.maximum(power, _POWER_FLOOR))


def _atomic_write(path: str | os.PathLike, write: Callable[[Any], None], *, binary: bool, force: bool = True) -> Path:
    """Write a file atomically (see :func:`iqsift.captures.atomic.write_atomically`)."""
    from ..captures.atomic import write_atomically

    return write_atomically(path, write, binary=binary, force=force)


def _check_scaling(scaling: str) -> str:
    if scaling not in _UNITS:
        raise ParameterError(f"scaling: must be 'density' or 'spectrum', got {scaling!r}")
    return scaling


# ----------------------------------------------------------------------------- result


@dataclass(frozen=True, eq=False)
class Spectrum:
    """An averaged power spectrum read from an accumulator.

    Attributes
    ----------
    name : str
        Tap point / stage name (e.g. ``"mixer"``, ``"decim 2"``).
    freqs_hz : numpy.ndarray
        Bin frequencies (Hz), ascending, ``center_hz`` included (absolute RF before
        the mixer, baseband after).
    values_db : numpy.ndarray
        Levels in ``units``, floored at :data:`DB_FLOOR`.
    units : str
        ``"dBFS/Hz"`` (density scaling) or ``"dBFS"`` (power per bin, spectrum scaling).
    rate_hz : float
        Sample rate (samples/s) at the tap point.
    center_hz : float
        Frequency (Hz) of the 0 Hz bin of the stream.
    segments_averaged : int
        Number of periodograms averaged.
    enbw_hz : float
        Equivalent noise bandwidth of one bin, ``fs·Σw²/(Σw)²`` (harris 1978):
        ``density + 10·log10(enbw_hz) = spectrum``.
    onesided : bool
        True for the one-sided spectrum of a real stream.
    scaling : str
        ``"density"`` or ``"spectrum"`` (scipy.signal.welch's names).
    nperseg : int
        Segment (and FFT) length, samples.
    window : str
        Window description.
    """

    name: str
    freqs_hz: np.ndarray
    values_db: np.ndarray
    units: str
    rate_hz: float
    center_hz: float
    segments_averaged: int
    enbw_hz: float
    onesided: bool = False
    scaling: str = "density"
    nperseg: int = 0
    window: str = ""

    def __post_init__(self) -> None:
        for attr in ("freqs_hz", "values_db"):
            arr = np.array(getattr(self, attr), dtype=np.float64)
            arr.setflags(write=False)
            object.__setattr__(self, attr, arr)
        if self.freqs_hz.shape != self.values_db.shape or self.freqs_hz.ndim != 1:
            raise ParameterError(
                f"Spectrum {self.name!r}: freqs_hz and values_db must be 1-D of equal length, "
                f"got {self.freqs_hz.shape} and {self.values_db.shape}"
            )

    @property
    def bin_width_hz(self) -> float:
        """Bin spacing ``fs / nperseg`` (Hz)."""
        return self.rate_hz / self.nperseg if self.nperseg else float("nan")

    @property
    def relative_freqs_hz(self) -> np.ndarray:
        """Bin frequencies relative to ``center_hz`` (Hz)."""
        return self.freqs_hz - self.center_hz

    @property
    def values_linear(self) -> np.ndarray:
        """Levels as linear power (FS²/Hz or FS² per bin)."""
        return 10.0 ** (self.values_db / 10.0)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready view (plain floats and lists)."""
        return {
            "name": self.name,
            "units": self.units,
            "scaling": self.scaling,
            "rate_hz": float(self.rate_hz),
            "center_hz": float(self.center_hz),
            "segments_averaged": int(self.segments_averaged),
            "enbw_hz": float(self.enbw_hz),
            "bin_width_hz": float(self.bin_width_hz),
            "onesided": bool(self.onesided),
            "nperseg": int(self.nperseg),
            "window": self.window,
            "freqs_hz": self.freqs_hz.tolist(),
            "values_db": self.values_db.tolist(),
        }

    as_dict = to_dict

    def to_csv(self, path: str | os.PathLike, *, force: bool = True) -> Path:
        """Write ``freq_hz,<level>`` rows to ``path`` (atomically); returns the path.

        The level column is ``level_dbfs_per_hz`` (density) or ``level_dbfs``.
        """
        column = "level_dbfs_per_hz" if self.units == "dBFS/Hz" else "level_dbfs"

        def write(fh: Any) -> None:
            fh.write(f"freq_hz,{column}\n")
            for f, v in zip(self.freqs_hz.tolist(), self.values_db.tolist()):
                fh.write(f"{f:.15g},{v:.6f}\n")

        return _atomic_write(path, write, binary=False, force=force)


class SpectrogramResult(NamedTuple):
    """Time-frequency picture from :meth:`SpectrogramAccumulator.result`.

    ``power_db`` has shape ``(len(freqs_hz), len(times_s))`` (as
    :func:`scipy.signal.spectrogram`); ``times_s`` are column centres in seconds
    from the first sample fed.
    """

    times_s: np.ndarray
    freqs_hz: np.ndarray
    power_db: np.ndarray
    units: str


# ----------------------------------------------------------------------------- Welch


class WelchAccumulator:
    """Streaming Welch power spectral density over a whole run.

    Parameters
    ----------
    rate_hz : float
        Sample rate at the tap point (samples/s).
    nperseg : int, default 4096
        Segment and FFT length (samples); bin spacing is ``rate_hz / nperseg`` Hz.
    overlap : float, default 0.5
        Segment overlap as a fraction of ``nperseg``; ``noverlap = floor(overlap·nperseg)``
        (0.5 gives scipy's default ``nperseg // 2``).
    window : str, tuple or array_like, default "hann"
        Anything :func:`scipy.signal.get_window` takes (periodic form, as
        scipy.signal.welch uses), or an array of ``nperseg`` weights. Use
        ``"flattop"`` to read tone levels without scalloping loss.
    center_hz : float, default 0.0
        Added to every bin frequency (Hz): the capture's RF centre before the mixer,
        0 after it.
    name : str
        Tap point name, carried into :class:`Spectrum`.
    max_segments : int or None
        Stop averaging after this many segments (None: average the whole run).
        Later samples are counted in :attr:`samples_fed` but not analysed.
    detrend : None, False, "none" or "constant", default None
        None: no detrending, so DC shows as a spike at the centre bin (wanted when
        debugging). "constant": subtract each segment's mean (scipy's default).
    onesided : bool or None, default None
        None: one-sided for real input, two-sided for complex input (decided by the
        first non-empty block). True: one-sided; complex blocks must have a zero
        imaginary part (a real IF capture delivered as complex64). False: two-sided
        even for real input.
    noverlap : int or None
        Overlap in samples; overrides ``overlap`` when given.

    Notes
    -----
    Welch (1967); scaling as :func:`scipy.signal.welch` (``detrend=False``,
    ``average="mean"``). The unfinished tail (fewer than ``nperseg`` samples after
    the last complete segment) is not analysed, as in scipy (``padded=False``).
    Memory is one segment plus the spectrum sum, whatever the run length.
    """

    def __init__(
        self,
        rate_hz: float,
        nperseg: int = 4096,
        overlap: float = 0.5,
        window: Any = "hann",
        center_hz: float = 0.0,
        name: str = "",
        max_segments: int | None = None,
        *,
        detrend: Any = None,
        onesided: bool | None = None,
        noverlap: int | None = None,
    ) -> None:
        self._stream = SegmentStream(rate_hz, nperseg, overlap, window, center_hz, detrend, onesided, noverlap)
        self.name = str(name)
        self._max_segments = None if max_segments is None else check_count(max_segments, "max_segments", 1)
        self.reset()

    def reset(self) -> None:
        """Forget everything fed so far (settings are kept)."""
        self._stream.reset()
        self._sum: np.ndarray | None = None
        self._count = 0

    # -- properties
    rate_hz = property(lambda self: self._stream.rate_hz, doc="Sample rate (samples/s).")
    nperseg = property(lambda self: self._stream.nperseg, doc="Segment length (samples).")
    noverlap = property(lambda self: self._stream.noverlap, doc="Overlap between segments (samples).")
    center_hz = property(lambda self: self._stream.center_hz, doc="Frequency of the 0 Hz bin (Hz).")
    enbw_hz = property(lambda self: self._stream.enbw_hz, doc="Equivalent noise bandwidth of a bin (Hz).")
    window = property(lambda self: self._stream.window, doc="The window weights (read-only).")
    samples_fed = property(lambda self: self._stream.samples_fed, doc="Samples fed since the last reset.")

    @property
    def segments_averaged(self) -> int:
        """Number of segments in the average so far."""
        return self._count

    @property
    def ready(self) -> bool:
        """True once at least one segment has been averaged (a result can be read)."""
        return self._count > 0

    @property
    def onesided(self) -> bool | None:
        """One-sided (real stream) or not; None until the first non-empty block."""
        return self._stream.onesided

    def feed(self, block: Any) -> "WelchAccumulator":
        """Add a block of samples (any length, including 0); returns self.

        Complex blocks give a two-sided spectrum, real blocks a one-sided one
        (see ``onesided``); all blocks of a run must agree.
        """
        limit: int | None = None
        if self._max_segments is not None:
            limit = self._max_segments - self._count
            if limit <= 0:
                x = np.asarray(block)
                if x.ndim != 1:
                    raise ParameterError(f"block: must be a 1-D array of samples, got shape {x.shape}")
                self._stream.count_unanalysed(x.size)
                return self
        for rows in self._stream.periodograms(block, limit):
            part = np.add.reduce(rows, axis=0, dtype=np.float64)  # float32 rows summed in float64
            if self._sum is None:
                self._sum = part
            else:
                self._sum += part
            self._count += rows.shape[0]
        return self

    __call__ = feed

    def result(self, scaling: str = "density") -> Spectrum:
        """The average so far as a :class:`Spectrum`.

        Parameters
        ----------
        scaling : {"density", "spectrum"}
            "density": PSD in dBFS/Hz; "spectrum": power per bin in dBFS.

        Raises
        ------
        ParameterError
            If no complete segment has been fed yet.
        """
        scaling = _check_scaling(scaling)
        if self._sum is None or self._count == 0:
            raise ParameterError(
                f"spectrum {self.name or '(unnamed)'}: no complete segment yet ({self.samples_fed} samples fed, "
                f"nperseg={self.nperseg}); feed at least nperseg samples or lower nperseg"
            )
        freqs, power = self._stream.finish(self._sum / self._count, scaling)
        return Spectrum(
            name=self.name,
            freqs_hz=freqs,
            values_db=_to_db(power),
            units=_UNITS[scaling],
            rate_hz=self.rate_hz,
            center_hz=self.center_hz,
            segments_averaged=self._count,
            enbw_hz=self.enbw_hz,
            onesided=bool(self._stream.onesided),
            scaling=scaling,
            nperseg=self.nperseg,
            window=self._stream.window_name,
        )

    def density(self) -> Spectrum:
        """Power spectral density in dBFS/Hz (``result("density")``)."""
        return self.result("density")

    def power_spectrum(self) -> Spectrum:
        """Power per bin in dBFS (``result("spectrum")``); a tone's peak reads its power."""
        return self.result("spectrum")


# ----------------------------------------------------------------------------- spectrogram


class SpectrogramAccumulator:
    """Bounded-memory spectrogram of an arbitrarily long stream.

    Each column is the mean of ``segments_per_column`` consecutive periodograms
    (window, overlap and scaling as :class:`WelchAccumulator`). At most
    ``max_columns`` columns are kept: when the store is full, adjacent columns are
    merged in pairs (their powers averaged, which equals the mean over the union of
    their segments, since both hold the same number) and ``segments_per_column``
    doubles. A ten-hour capture at any rate fits in ``max_columns × nperseg``
    float64 values.

    Parameters
    ----------
    rate_hz : float
        Sample rate (samples/s).
    nperseg : int
        Segment / FFT length (samples).
    max_columns : int, default 800
        Most columns kept (>= 2).
    center_hz : float, default 0.0
        Added to the bin frequencies (Hz).
    window, overlap, detrend, onesided, noverlap, scaling
        As :class:`WelchAccumulator`; ``scaling`` sets the result's units
        ("density" → dBFS/Hz, "spectrum" → dBFS per bin).
    """

    def __init__(
        self,
        rate_hz: float,
        nperseg: int,
        max_columns: int = 800,
        center_hz: float = 0.0,
        *,
        window: Any = "hann",
        overlap: float = 0.5,
        detrend: Any = None,
        onesided: bool | None = None,
        noverlap: int | None = None,
        scaling: str = "density",
    ) -> None:
        self._stream = SegmentStream(rate_hz, nperseg, overlap, window, center_hz, detrend, onesided, noverlap)
        self._max_columns = check_count(max_columns, "max_columns", 2)
        self._scaling = _check_scaling(scaling)
        self.reset()

    def reset(self) -> None:
        """Forget everything fed so far (settings are kept)."""
        self._stream.reset()
        self._cols: np.ndarray | None = None  # (max_columns, nbins) raw mean periodograms
        self._ncols = 0
        self._per_col = 1
        self._pending: np.ndarray | None = None  # raw sum of the unfinished column
        self._pending_count = 0
        self._merges = 0

    rate_hz = property(lambda self: self._stream.rate_hz, doc="Sample rate (samples/s).")
    nperseg = property(lambda self: self._stream.nperseg, doc="Segment length (samples).")
    noverlap = property(lambda self: self._stream.noverlap, doc="Overlap between segments (samples).")
    center_hz = property(lambda self: self._stream.center_hz, doc="Frequency of the 0 Hz bin (Hz).")
    max_columns = property(lambda self: self._max_columns, doc="Most columns kept.")
    samples_fed = property(lambda self: self._stream.samples_fed, doc="Samples fed since the last reset.")

    @property
    def segments_per_column(self) -> int:
        """Segments averaged in each complete column (a power of two)."""
        return self._per_col

    @property
    def columns(self) -> int:
        """Columns a result would have now (complete ones plus an unfinished one)."""
        return self._ncols + (1 if self._pending_count else 0)

    @property
    def segments_seen(self) -> int:
        """Segments analysed so far."""
        return self._ncols * self._per_col + self._pending_count

    @property
    def storage_shape(self) -> tuple[int, int] | None:
        """Shape of the column store (fixed once allocated): ``(max_columns, bins)``."""
        return None if self._cols is None else self._cols.shape

    def _merge(self) -> None:
        m = self._ncols // 2
        c = self._cols
        assert c is not None
        merged = 0.5 * (c[0 : 2 * m : 2] + c[1 : 2 * m : 2])
        leftover = c[2 * m].copy() if self._ncols % 2 else None
        c[:m] = merged
        self._ncols = m
        self._per_col *= 2
        self._merges += 1
        if leftover is not None:
            # an odd column out holds half a (new) column: it becomes the pending one
            if self._pending is None:
                self._pending = np.zeros(c.shape[1])
            self._pending[:] = leftover * (self._per_col // 2)
            self._pending_count = self._per_col // 2

    def feed(self, block: Any) -> "SpectrogramAccumulator":
        """Add a block of samples (any length, including 0); returns self."""
        for rows in self._stream.periodograms(block):
            if self._cols is None:
                self._cols = np.zeros((self._max_columns, rows.shape[1]))
                self._pending = np.zeros(rows.shape[1])
            i, n = 0, rows.shape[0]
            while i < n:
                k = self._per_col
                if self._pending_count or n - i < k:
                    take = min(k - self._pending_count, n - i)
                    self._pending += np.add.reduce(rows[i : i + take], axis=0, dtype=np.float64)
                    self._pending_count += take
                    i += take
                    if self._pending_count == k:
                        self._cols[self._ncols] = self._pending / k
                        self._ncols += 1
                        self._pending[:] = 0.0
                        self._pending_count = 0
                else:
                    room = self._max_columns - self._ncols
                    full = min((n - i) // k, room)
                    if full:
                        chunk = rows[i : i + full * k].reshape(full, k, -1)
                        self._cols[self._ncols : self._ncols + full] = chunk.mean(axis=1, dtype=np.float64)
                        self._ncols += full
                        i += full * k
                if self._ncols == self._max_columns:
                    self._merge()
        return self

    __call__ = feed

    def result(self) -> SpectrogramResult:
        """Columns so far (the unfinished last column included, averaged over what it holds).

        Raises
        ------
        ParameterError
            If no complete segment has been fed yet.
        """
        if self._cols is None or self.columns == 0:
            raise ParameterError(
                f"spectrogram: no complete segment yet ({self.samples_fed} samples fed, "
                f"nperseg={self.nperseg}); feed at least nperseg samples or lower nperseg"
            )
        raw = self._cols[: self._ncols]
        counts = [self._per_col] * self._ncols
        if self._pending_count:
            assert self._pending is not None  # allocated together with the columns
            raw = np.vstack([raw, self._pending[None, :] / self._pending_count])
            counts.append(self._pending_count)
        freqs, power = self._stream.finish(raw, self._scaling)
        step, nps, fs = self._stream.step, self.nperseg, self.rate_hz
        first = np.concatenate([[0], np.cumsum(counts)[:-1]])  # first segment index of each column
        last = first + np.asarray(counts) - 1
        times = ((first * step) + (last * step + nps)) / 2.0 / fs
        return SpectrogramResult(
            times_s=times,
            freqs_hz=freqs,
            power_db=_to_db(power).T.copy(),
            units=_UNITS[self._scaling],
        )
