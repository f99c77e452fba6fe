"""The segment engine under the spectrum accumulators: windowed periodograms of a stream.

:class:`SegmentStream` cuts a stream into segments of ``nperseg`` samples every
``nperseg - noverlap`` samples (segments continue across blocks), multiplies each by
the window and returns the raw periodograms ``|FFT(w·seg)|²`` (unscaled, natural
FFT order; the one-sided rfft bins of a real stream), as scipy.signal.welch forms
them (P. D. Welch, IEEE Trans. Audio Electroacoust. AU-15(2), 1967). The
accumulators in :mod:`iqsift.spectra` average and scale them.

Precision follows the input. Single-precision samples (complex64, the project's
internal sample type, or float32) are windowed and transformed in single
precision: the samples themselves carry 24-bit mantissas, and a float32 transform
adds rounding noise of relative size about ``eps·sqrt(log2 N)`` of the segment's
whole power (eps = 2^-24; Higham, "Accuracy and Stability of Numerical Algorithms",
2nd ed., sec. 24.1): a bin 70 dB below the strongest line moves by about 1e-4 dB
(measured against scipy.signal.welch in double precision, tests/test_spectra.py),
a noise floor taken over many bins by far less. The periodograms are summed in
float64 by the accumulators.
Double-precision and integer input is windowed and transformed in float64.

Each segment is windowed straight from the stream into a preallocated buffer (one
pass, no strided copy followed by a multiply), transformed in place, and squared (``re² + im²`` in float64,
``hypot(re, im)²`` in float32); the samples a block leaves unfinished are kept and
only the few segments that straddle two blocks are framed from a joined copy.
"""

from __future__ import annotations

import math
import os
from typing import Any, Iterator

import numpy as np
import scipy.fft

from .. import checks
from ..errors import ParameterError

__all__ = ["SegmentStream", "check_count", "hann_periodic"]

# Samples framed at once per batch of periodograms (bounds the temporary memory of one feed).
_BATCH_SAMPLES = 1 << 21
_FFT_SAMPLES = 1 << 18
"""Samples transformed per FFT call inside a batch (bounds the transform buffer to 2-4 MiB) ..."""
_LINES_PER_THREAD = 4
"""... but at least this many segments per FFT thread: scipy's pocketfft transforms several lines at once
in SIMD registers (4 single-precision lines here; one line alone ran at half the speed, measured)."""


def _fft_workers() -> int:
    """Threads for the segment transforms: the CPUs this process may use, at most 4."""
    try:
        available = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not on Linux
        available = os.cpu_count() or 1
    return max(1, min(4, available))


def check_count(value: Any, name: str, minimum: int) -> int:
    """``value`` as an integer >= ``minimum`` (bools and floats refused), else :class:`ParameterError`."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ParameterError(f"{name}: must be an integer >= {minimum}, got {value!r}")
    if int(value) < minimum:
        raise ParameterError(f"{name}: must be an integer >= {minimum}, got {value!r}")
    return int(value)


def hann_periodic(nperseg: int) -> np.ndarray:
    """The periodic ("DFT-even") Hann window ``0.5 - 0.5·cos(2πn/N)``, n = 0 .. N-1 (harris 1978, eq. 27a).

    What ``scipy.signal.get_window("hann", N, fftbins=True)`` gives, computed here so that the
    common case does not load scipy.signal (a few hundred ms of start-up).
    """
    n = np.arange(nperseg, dtype=np.float64)
    return 0.5 - 0.5 * np.cos(2.0 * np.pi * n / nperseg)


def _window(window: Any, nperseg: int) -> tuple[np.ndarray, str]:
    """(weights, description) of a window given as scipy.signal.get_window takes it, or as an array."""
    if isinstance(window, str) and window in ("hann", "hanning"):
        return hann_periodic(nperseg), window
    if isinstance(window, str) or (isinstance(window, tuple) and window and isinstance(window[0], str)):
        try:
            import scipy.signal  # here only: the window design is its one use (start-up stays light)

            win = scipy.signal.get_window(window, nperseg, fftbins=True)
        except (ValueError, TypeError) as exc:
            raise ParameterError(f"window: scipy.signal.get_window refused {window!r} ({exc})") from None
        return np.asarray(win, dtype=np.float64), window if isinstance(window, str) else repr(window)
    win = np.asarray(window, dtype=np.float64)
    if win.shape != (nperseg,) or not np.all(np.isfinite(win)) or not np.any(win):
        raise ParameterError(
            f"window: an array window must be {nperseg} finite values, not all zero; got shape {win.shape}"
        )
    return win, "custom"


class SegmentStream:
    """Windowed, batched periodograms of a stream, segments continuing across blocks.

    Parameters are those of :class:`iqsift.spectra.WelchAccumulator` (validated here).
    :meth:`periodograms` yields raw ``|FFT(w·seg)|²`` rows (rows = segments; float32 for
    single-precision input, float64 otherwise; natural FFT order; one-sided rfft bins for a
    real stream); :meth:`finish` scales a mean of them.
    """

    def __init__(
        self,
        rate_hz: float,
        nperseg: int,
        overlap: float,
        window: Any,
        center_hz: float,
        detrend: Any,
        onesided: bool | None,
        noverlap: int | None,
    ) -> None:
        self._rate = checks.positive("rate_hz", rate_hz)
        self._nperseg = check_count(nperseg, "nperseg", 2)
        if noverlap is None:
            try:
                ov = float(overlap)
            except (TypeError, ValueError):
                raise ParameterError(f"overlap: must be a fraction in [0, 1), got {overlap!r}") from None
            if not (0.0 <= ov < 1.0):
                raise ParameterError(f"overlap: must be a fraction in [0, 1), got {overlap!r}")
            # floor, like scipy's default noverlap = nperseg // 2 for overlap 0.5
            nov = min(int(math.floor(ov * self._nperseg + 1e-9)), self._nperseg - 1)
        else:
            nov = check_count(noverlap, "noverlap", 0)
            if nov >= self._nperseg:
                raise ParameterError(f"noverlap: must be < nperseg={self._nperseg}, got {noverlap!r}")
        self._noverlap = nov
        self._step = self._nperseg - nov
        try:
            self._center = float(center_hz)
        except (TypeError, ValueError):
            raise ParameterError(f"center_hz: must be a frequency in Hz, got {center_hz!r}") from None
        if not math.isfinite(self._center):
            raise ParameterError(f"center_hz: must be finite, got {center_hz!r}")
        if detrend in (None, False, "none"):
            self._detrend = False
        elif detrend == "constant":
            self._detrend = True
        else:
            raise ParameterError(f"detrend: must be None/False/'none' or 'constant', got {detrend!r}")
        if onesided not in (None, True, False):
            raise ParameterError(f"onesided: must be None (from the input type), True or False, got {onesided!r}")
        self._onesided_request = onesided
        win, self.window_name = _window(window, self._nperseg)
        self._win = np.ascontiguousarray(win, dtype=np.float64)
        self._win32 = self._win.astype(np.float32)
        self._win_c64 = self._win32.astype(np.complex64)
        self._s1 = float(np.sum(self._win))
        self._s2 = float(np.sum(self._win**2))
        self.reset()

    def reset(self) -> None:
        """Forget the stream (settings kept)."""
        self._onesided: bool | None = self._onesided_request
        self._tail = np.zeros(0, dtype=np.complex128)
        self._samples = 0

    # -- properties
    @property
    def rate_hz(self) -> float:
        return self._rate

    @property
    def nperseg(self) -> int:
        return self._nperseg

    @property
    def noverlap(self) -> int:
        return self._noverlap

    @property
    def step(self) -> int:
        """Samples from one segment's start to the next one's."""
        return self._step

    @property
    def center_hz(self) -> float:
        return self._center

    @property
    def onesided(self) -> bool | None:
        """One-sided (real stream) or not; None until the first non-empty block decides it."""
        return self._onesided

    @property
    def window(self) -> np.ndarray:
        w = self._win.view()
        w.setflags(write=False)
        return w

    @property
    def enbw_hz(self) -> float:
        return self._rate * self._s2 / (self._s1 * self._s1)

    @property
    def samples_fed(self) -> int:
        return self._samples

    def count_unanalysed(self, samples: int) -> None:
        """Count ``samples`` as fed without analysing them (an accumulator past its segment limit)."""
        self._samples += int(samples)

    def _scale(self, scaling: str) -> float:
        if scaling == "density":
            return 1.0 / (self._rate * self._s2)
        return 1.0 / (self._s1 * self._s1)

    def _nbins(self) -> int:
        return self._nperseg // 2 + 1 if self._onesided else self._nperseg

    def _prepare(self, block: Any) -> np.ndarray | None:
        x = np.asarray(block)
        if x.ndim != 1:
            raise ParameterError(f"block: must be a 1-D array of samples, got shape {x.shape}")
        if x.dtype.kind not in "biufc":
            raise ParameterError(f"block: must hold numbers, got dtype {x.dtype}")
        if x.size == 0:
            return None
        is_complex = np.iscomplexobj(x)
        if self._onesided is None:
            self._onesided = not is_complex
        if self._onesided:
            if is_complex:
                if np.any(x.imag != 0):
                    raise ParameterError(
                        "block: complex samples with a non-zero imaginary part fed to a one-sided "
                        "(real-stream) spectrum; use onesided=False"
                    )
                x = x.real
            if x.dtype not in (np.float32, np.float64):
                x = x.astype(np.float64)
            if self._tail.dtype.kind == "c":
                self._tail = self._tail.real.astype(np.float64)
        elif x.dtype not in (np.complex64, np.complex128):
            x = x.astype(np.complex128)
        self._samples += x.size
        return x

    def periodograms(self, block: Any, limit: int | None = None) -> Iterator[np.ndarray]:
        """Raw periodogram rows of every segment completed by ``block`` (at most ``limit``).

        Segment k starts at ``k·step`` in the stream "unfinished tail, then ``block``"; the
        segments that start inside the tail are framed from a short joined copy, the rest
        straight from ``block``.
        """
        x = self._prepare(block)
        if x is None:
            return
        tail = self._tail
        held, nps, step = tail.size, self._nperseg, self._step
        n = held + x.size
        nseg = (n - nps) // step + 1 if n >= nps else 0
        if limit is not None:
            nseg = min(nseg, max(limit, 0))
        consumed = nseg * step
        if limit is not None and nseg >= limit:
            self._tail = x[:0].copy()  # the limit is reached: nothing more is analysed
        elif consumed >= held:
            self._tail = x[consumed - held :].copy()
        else:
            self._tail = np.concatenate([tail[consumed:], x])
        if nseg == 0:
            return
        # segments starting inside the tail: ceil(held / step) of them at most
        straddling = min(nseg, -(-held // step))
        if straddling:
            head = np.concatenate([tail, x[: (straddling - 1) * step + nps - held]])
            yield self._batch_power(np.lib.stride_tricks.sliding_window_view(head, nps)[::step])
        if nseg > straddling:
            first = straddling * step - held  # where the next segment starts in x
            frames = np.lib.stride_tricks.sliding_window_view(x[first:], nps)[::step][: nseg - straddling]
            batch = max(1, _BATCH_SAMPLES // nps)
            for start in range(0, frames.shape[0], batch):
                yield self._batch_power(frames[start : start + batch])

    def _batch_power(self, frames: np.ndarray) -> np.ndarray:
        """|FFT(window · segment)|² of each row of ``frames`` (rows = segments).

        The rows are independent transforms: they are done a few at a time through one
        preallocated buffer (a bounded temporary) and spread over threads, which gives the same
        numbers as one call over the whole batch.
        """
        rows, nps = frames.shape[0], self._nperseg
        single = frames.dtype in (np.float32, np.complex64)
        real_type = np.float32 if single else np.float64
        work_type = real_type if self._onesided else (np.complex64 if single else np.complex128)
        win: np.ndarray = self._win32 if single else self._win
        if single and not self._onesided:
            win = self._win_c64  # complex64 × complex64: no mixed-type casting loop
        workers = _fft_workers()
        per_call = min(rows, max(_LINES_PER_THREAD * workers, _FFT_SAMPLES // nps))
        buf = np.empty((per_call, nps), work_type)
        power = np.empty((rows, self._nbins()), real_type)
        for first in range(0, rows, per_call):
            seg = frames[first : first + per_call]
            m = seg.shape[0]
            b = buf[:m]
            if self._detrend:
                mean = seg.mean(axis=1, keepdims=True, dtype=np.float64 if self._onesided else np.complex128)
                np.subtract(seg, mean, out=b, casting="same_kind")
                b *= win
            else:
                np.multiply(seg, win, out=b)  # window straight from the strided frames into the buffer
            if self._onesided:
                spec = scipy.fft.rfft(b, axis=1, overwrite_x=True, workers=workers)
            else:
                spec = scipy.fft.fft(b, axis=1, overwrite_x=True, workers=workers)
            out = power[first : first + m]
            if single:
                # |X|² as hypot(re, im)², within 2 float32 roundings of re² + im², three times faster
                np.abs(spec, out=out)
                np.square(out, out=out)
            else:
                # |X|² = re² + im²: squared in place (contiguous), then the pairs added
                parts = spec.view(real_type).reshape(m, -1, 2)
                np.multiply(parts, parts, out=parts)
                np.add(parts[..., 0], parts[..., 1], out=out)
        return power

    def finish(self, mean_raw: np.ndarray, scaling: str) -> tuple[np.ndarray, np.ndarray]:
        """Scale a raw mean periodogram (last axis = bins); returns (freqs_hz, power) in float64.

        ``scaling`` is ``"density"`` (``1/(fs·Σw²)``) or ``"spectrum"`` (``1/(Σw)²``), as
        scipy.signal.welch; a one-sided spectrum doubles every bin but DC (and Nyquist).
        """
        p = np.asarray(mean_raw, dtype=np.float64) * self._scale(scaling)
        nps = self._nperseg
        if self._onesided:
            if nps % 2 == 0:
                p[..., 1:-1] *= 2.0
            else:
                p[..., 1:] *= 2.0
            freqs = scipy.fft.rfftfreq(nps, 1.0 / self._rate)
        else:
            p = scipy.fft.fftshift(p, axes=-1)
            freqs = scipy.fft.fftshift(scipy.fft.fftfreq(nps, 1.0 / self._rate))
        return freqs + self._center, p
