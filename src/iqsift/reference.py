"""The receiver's reference error (ppm): what it does to a capture and how iqsift takes it out.

A receiver derives its local oscillator (LO) and its sample clock from one reference
oscillator. When that reference runs fast by ``P`` parts per million, both run fast by the
same factor ``k = 1 + P·1e-6``.

Derivation
    Let the capture say it was tuned to ``fc`` and sampled at ``fs`` (the nominal values the
    receiver was asked for). Really the LO sat at ``k·fc`` and the samples came ``k·fs`` times
    a second. A transmitter at true frequency ``f`` is mixed to ``f − k·fc`` (Hz of true time)
    and sampled at ``k·fs``, so it lands at the digital frequency
    ``ν = (f − k·fc) / (k·fs)`` cycles per sample. Software that believes the labels reads
    that as ``fc + ν·fs = fc + (f − k·fc)/k = f / k``: every transmitter appears at
    ``f / (1 + P·1e-6)``, shifted in proportion to its own frequency. Reading the same samples
    with the *true* rate ``k·fs`` and the *true* centre ``k·fc`` gives
    ``k·fc + ν·k·fs = f``: the true frequency, for every transmitter at once, and durations
    ``n / (k·fs)`` in true seconds. That is the whole correction, applied once where a capture
    is opened (:meth:`iqsift.captures.Capture.correct_reference`).

Worked number
    ``P = +8`` ppm, ``fs = 2.4 MS/s``, ``fc = 127.5 MHz``: ``k = 1.000008``; the true rate is
    2 400 019.2 samples/s and the true centre 127 501 020 Hz. A transmitter at 127.35 MHz
    appears at 127 348 981.2 Hz (1 018.8 Hz low: -151 018.8 Hz from the label's centre instead
    of -150 000 Hz); with the true rate and centre, -151 018.8 Hz × k + 127 501 020 Hz =
    127 350 000 Hz again.

Sign convention
    Positive ``P``: the reference runs fast, transmitters appear low. The same convention
    for ``--ppm``, a plan's ``[defaults] ppm`` and the survey's ``frequency_reference.error_ppm``.
"""

from __future__ import annotations

from .checks import finite
from .errors import ParameterError

__all__ = ["MAX_PPM", "check_ppm", "reference_factor", "compose_ppm", "apparent_frequency"]

#: Largest reference error accepted (ppm). Inexpensive receivers are off by 1-50 ppm; beyond
#: 1000 ppm (0.1 %) the "receiver" is not a radio receiver one can correct this way.
MAX_PPM = 1000.0


def check_ppm(name: str, value: object) -> float:
    """``value`` as a reference error in ppm: finite, at most :data:`MAX_PPM` in size."""
    ppm = finite(name, value)
    if abs(ppm) > MAX_PPM:
        # the unit written out: "ppm" would read as the flag --ppm once the CLI names its parameters
        raise ParameterError(f"{name}: got {value!r}; a reference error must lie within ±{MAX_PPM:g} parts per million")
    return ppm


def reference_factor(ppm: float) -> float:
    """``k = 1 + ppm·1e-6``: true rate = k × nominal rate, true frequency = k × apparent frequency."""
    return 1.0 + float(ppm) * 1e-6


def compose_ppm(first_ppm: float, then_ppm: float) -> float:
    """The total error of a correction by ``first_ppm`` followed by ``then_ppm`` (factors multiply)."""
    return (reference_factor(first_ppm) * reference_factor(then_ppm) - 1.0) * 1e6


def apparent_frequency(true_hz: float, ppm: float) -> float:
    """Where a transmitter at ``true_hz`` appears in a capture from a receiver ``ppm`` fast (Hz)."""
    return float(true_hz) / reference_factor(ppm)
