"""Intelligibility against the transmitted message: STOI, extended STOI and segmental SNR.

A receiver test bench knows what it sent. Given that reference, the recovered audio is scored by

* **STOI**, short-time objective intelligibility (Taal, Hendriks, Heusdens & Jensen, "An algorithm
  for intelligibility prediction of time-frequency weighted noisy speech", IEEE Trans. Audio,
  Speech and Language Processing 19(7), 2011): the mean correlation of one-third-octave envelopes
  of 384 ms segments, 0..1;
* **ESTOI**, the extended measure (Jensen & Taal, "An algorithm for predicting the intelligibility
  of speech masked by modulated noise maskers", IEEE/ACM TASLP 24(11), 2016), which also holds for
  fluctuating noise;

both computed by the ``pystoi`` package (MIT licence) on the aligned signals, and

* **segmental SNR**: the mean over 20 ms frames of ``10·log10(Σ x² / Σ (x − y)²)``, each frame's value
  clamped to [−10, 35] dB (Quackenbush, Barnwell & Clements, *Objective Measures of Speech Quality*,
  1988; Loizou, *Speech Enhancement: Theory and Practice*, ch. 10), over the frames where the reference
  is within 40 dB of its loudest frame (pauses left out, as STOI does), after the recovered audio ``y``
  is scaled by the least-squares gain onto the reference ``x`` (the receiver's level is not the
  message's: common practice).

Alignment: the reference is resampled to the audio rate (polyphase, :func:`scipy.signal.resample_poly`),
then the lag of the largest magnitude of the cross-correlation (computed by FFT) is the delay of the
recovered audio behind the reference; a negative peak means the polarity is inverted, which is undone.
The confidence is the normalised correlation (Pearson) of the two over their overlap at that lag; a
reference whose correlation is below :data:`MIN_CORRELATION` is refused, as is one shorter than
:data:`MIN_REFERENCE_S` (STOI needs at least 30 segments of 384 ms of speech; Taal et al. 2011).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, ClassVar

import numpy as np

from ..errors import ParameterError
from .results import Reportable

__all__ = ["MIN_CORRELATION", "MIN_REFERENCE_S", "SEGMENT_S", "SEGMENT_CLAMP_DB", "Alignment", "ReferenceScore",
           "align_reference", "score_reference", "segmental_snr_db"]

MIN_REFERENCE_S = 3.0
"""Shortest reference accepted (s)."""

MIN_CORRELATION = 0.2
"""Smallest normalised correlation of an aligned reference: for unrelated band-limited signals of a few
seconds the largest correlation over all lags stays below about 0.1 (4 / sqrt(effective samples))."""

SEGMENT_S = 0.02
"""Frame length of the segmental SNR (s) (Quackenbush et al. 1988: 15-20 ms frames)."""

SEGMENT_CLAMP_DB = (-10.0, 35.0)
"""Limits each frame's SNR is clamped to (dB) (Quackenbush et al. 1988; Loizou, ch. 10)."""

SEGMENT_RANGE_DB = 40.0
"""Frames of the reference more than this far below its loudest frame are pauses and are left out of the segmental
SNR (dB): the speech dynamic range STOI uses for the same purpose (Taal et al. 2011)."""


@dataclass(frozen=True)
class Alignment:
    """A reference aligned with recovered audio.

    Attributes
    ----------
    reference, recovered : numpy.ndarray
        The overlapping parts, equal length, float64, at ``rate_hz`` (polarity of ``recovered`` corrected).
    rate_hz : float
        Their rate (the audio rate), samples/s.
    delay_s : float
        How far the recovered audio lags the reference (s); negative: it leads.
    correlation : float
        Normalised correlation of the aligned signals (0..1; the confidence of the delay).
    inverted : bool
        The recovered audio had the opposite polarity.
    """

    reference: np.ndarray
    recovered: np.ndarray
    rate_hz: float
    delay_s: float
    correlation: float
    inverted: bool


@dataclass(frozen=True)
class ReferenceScore(Reportable):
    """Intelligibility of recovered audio against the transmitted message (keys of the ``audio`` section).

    Attributes
    ----------
    stoi, estoi : float
        STOI and extended STOI (0..1; pystoi).
    segmental_snr_db : float
        Mean per-frame SNR (dB; 20 ms frames clamped to [-10, 35] dB).
    delay_s, correlation : float
        The alignment (see :class:`Alignment`).
    inverted : bool
    duration_s : float
        Length of the aligned overlap that was scored (s).
    """

    stoi: float
    estoi: float
    segmental_snr_db: float
    delay_s: float
    correlation: float
    inverted: bool
    duration_s: float

    SECTION: ClassVar[str] = "audio"
    REPORT_KEYS: ClassVar[tuple[str, ...]] = ("stoi", "estoi", "segmental_snr_db")

    def to_dict(self) -> dict[str, Any]:
        """``stoi``, ``estoi``, ``segmental_snr_db`` and the ``reference`` alignment object."""
        return {
            "stoi": self.stoi, "estoi": self.estoi, "segmental_snr_db": self.segmental_snr_db,
            "reference": {"delay_s": self.delay_s, "correlation": self.correlation, "inverted": self.inverted,
                          "duration_s": self.duration_s},
        }


def _resampled(x: np.ndarray, rate_hz: float, to_hz: float) -> np.ndarray:
    if rate_hz == to_hz:
        return x
    from scipy import signal

    ratio = Fraction(to_hz / rate_hz).limit_denominator(10000)
    return signal.resample_poly(x, ratio.numerator, ratio.denominator)


def align_reference(audio: np.ndarray, rate_hz: float, reference: np.ndarray, reference_rate_hz: float, *,
                    name: str = "reference") -> Alignment:
    """Resample ``reference`` to ``rate_hz`` and align it with ``audio`` by cross-correlation.

    Parameters
    ----------
    audio : numpy.ndarray
        Recovered audio, 1-D.
    rate_hz : float
        Its rate (samples/s).
    reference : numpy.ndarray
        The transmitted message, 1-D.
    reference_rate_hz : float
        Its rate (samples/s).
    name : str
        How errors name the reference (its file).

    Raises
    ------
    ParameterError
        A reference shorter than :data:`MIN_REFERENCE_S`, or one that does not correlate with the audio.
    """
    from scipy import signal

    ref_s = reference.shape[0] / reference_rate_hz
    if ref_s < MIN_REFERENCE_S:
        raise ParameterError(f"{name}: {ref_s:.2f} s long; a reference must be at least {MIN_REFERENCE_S:g} s "
                             "(STOI needs 30 segments of 384 ms)", parameters=("reference",))
    x = _resampled(np.asarray(reference, np.float64), reference_rate_hz, rate_hz)
    y = np.asarray(audio, np.float64)
    if not (np.any(x) and np.any(y)):
        silent = "reference" if not np.any(x) else "audio"
        raise ParameterError(f"{name}: does not correlate with the recovered audio (the {silent} is silent)",
                             parameters=("reference",))
    corr = signal.correlate(y, x, mode="full", method="fft")
    k = int(np.argmax(np.abs(corr)))
    lag = k - (x.size - 1)  # y[n + lag] ~ x[n]
    inverted = bool(corr[k] < 0)
    x0, y0 = max(0, -lag), max(0, lag)
    n = min(x.size - x0, y.size - y0)
    xa, ya = x[x0:x0 + n], y[y0:y0 + n] * (-1.0 if inverted else 1.0)
    denom = math.sqrt(float(np.dot(xa, xa)) * float(np.dot(ya, ya))) if n > 0 else 0.0
    rho = float(np.dot(xa, ya)) / denom if denom > 0 else 0.0
    if rho >= MIN_CORRELATION and n / rate_hz < MIN_REFERENCE_S:
        raise ParameterError(f"{name}: overlaps the recovered audio for only {n / rate_hz:.2f} s at delay "
                             f"{lag / rate_hz:+.4f} s; at least {MIN_REFERENCE_S:g} s are needed",
                             parameters=("reference",))
    if rho < MIN_CORRELATION:
        raise ParameterError(f"{name}: does not correlate with the recovered audio (best normalised correlation "
                             f"{rho:.3f}, at delay {lag / rate_hz:+.4f} s; it must be at least {MIN_CORRELATION:g})",
                             parameters=("reference",))
    return Alignment(xa, ya, float(rate_hz), lag / rate_hz, rho, inverted)


def segmental_snr_db(reference: np.ndarray, recovered: np.ndarray, rate_hz: float, *,
                     frame_s: float = SEGMENT_S, clamp_db: tuple[float, float] = SEGMENT_CLAMP_DB) -> float:
    """Segmental SNR (dB) of ``recovered`` against ``reference`` (aligned, equal length).

    ``recovered`` is first scaled by the least-squares gain ``<x, y> / <y, y>``; then each
    non-overlapping frame of ``frame_s`` gives ``10·log10(Σ x² / Σ (x − y)²)``, clamped to ``clamp_db``,
    and the values of the frames within :data:`SEGMENT_RANGE_DB` of the reference's loudest frame are
    averaged (Quackenbush, Barnwell & Clements 1988; pauses left out as in Taal et al. 2011).
    """
    x = np.asarray(reference, np.float64)
    y = np.asarray(recovered, np.float64)
    yy = float(np.dot(y, y))
    y = y * (float(np.dot(x, y)) / yy if yy > 0 else 0.0)
    frame = max(1, int(round(frame_s * rate_hz)))
    m = x.size // frame
    if m == 0:
        raise ParameterError(f"reference: shorter than one {frame_s * 1e3:g} ms frame", parameters=("reference",))
    xs = x[: m * frame].reshape(m, frame)
    es = xs - y[: m * frame].reshape(m, frame)
    sig = np.sum(xs**2, axis=1)
    err = np.sum(es**2, axis=1)
    speech = sig > sig.max() * 10 ** (-SEGMENT_RANGE_DB / 10)
    if not speech.any():
        raise ParameterError("reference: is silent", parameters=("reference",))
    with np.errstate(divide="ignore"):
        per = 10.0 * np.log10(sig[speech] / err[speech])  # err = 0: +inf, clamped to the top
    return float(np.mean(np.clip(per, clamp_db[0], clamp_db[1])))


def score_reference(alignment: Alignment) -> ReferenceScore:
    """STOI, ESTOI (pystoi) and segmental SNR of an :class:`Alignment`."""
    from pystoi import stoi  # lazy: only a reference needs it

    x, y, fs = alignment.reference, alignment.recovered, alignment.rate_hz
    rate = int(round(fs))  # pystoi's resampler takes whole rates (audio rates are whole: Channel)
    return ReferenceScore(
        stoi=float(stoi(x, y, rate, extended=False)),
        estoi=float(stoi(x, y, rate, extended=True)),
        segmental_snr_db=segmental_snr_db(x, y, fs),
        delay_s=alignment.delay_s,
        correlation=alignment.correlation,
        inverted=alignment.inverted,
        duration_s=x.size / fs,
    )
