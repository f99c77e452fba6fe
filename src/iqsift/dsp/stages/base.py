"""The stage protocol: :class:`Stage`, its composition :class:`Chain`, and :func:`run_once`.

Every stage is an object built with its rates and taps fixed. It carries its
state (filter history, oscillator phase, decimation phase, partial frames)
from one block to the next, so that feeding a signal in blocks of any length
(including 0 and 1) gives the same output as feeding it in one piece::

    y = concatenate([stage.process(b) for b in blocks] + [stage.flush()])

Common interface (:class:`Stage`):

``process(block) -> ndarray``
    Consume a 1-D block of samples and return every output sample that is
    complete.
``flush() -> ndarray``
    Return what the stage still holds (possibly empty) and end the stream:
    the next ``process`` starts afresh, as after ``reset``. Causal
    FIR stages hold nothing: their output length is a pure function of the
    input length and ``flush`` returns an empty array.
``reset()``
    Forget all state (back to "nothing seen yet").
``rate_in``, ``rate_out``
    Sample rates in Hz (samples/s).
``delay``
    Group delay of the stage in *output* samples (float).

Sample types: complex input gives complex64 output; real input to a real stage
gives float32 output; arithmetic is done in float64 / complex128. A stage that
has seen complex input since its last reset keeps producing complex output
(its state is complex).

A one-shot function wraps each stage (:func:`mix`, :func:`fir_filter`,
:func:`fir_decimate`, :func:`resample`, :func:`dc_block`, :func:`agc`,
:func:`audio_bandpass`); :func:`run_once` does it for any stage.

Every streaming object of :mod:`iqsift.dsp` is a :class:`Stage`: the stages of
this package, the detectors (:mod:`iqsift.dsp.detectors`), the audio
post-processing (:mod:`iqsift.dsp.post`) and the row-wise
:class:`iqsift.dsp.batch.BatchFir`. So a receiver's whole chain can be one
:class:`Chain`.
"""

from __future__ import annotations

import abc
from typing import Callable, Iterable, Sequence

import numpy as np
from numpy.typing import ArrayLike

from ...errors import ParameterError

__all__ = ["Stage", "Chain", "TapPoint", "Scale", "run_once", "checked_taps"]


def checked_taps(name: str, taps: ArrayLike) -> np.ndarray:
    """FIR taps as a float64 (or complex128) 1-D array; refused unless non-empty, numeric and finite."""
    h = np.asarray(taps)
    if h.ndim != 1 or h.size == 0:
        raise ParameterError(f"{name}: expected a non-empty 1-D array of FIR taps, got shape {h.shape}")
    if h.dtype.kind not in "iufc":
        raise ParameterError(f"{name}: taps must be numeric, got dtype {h.dtype}")
    h = h.astype(np.complex128 if h.dtype.kind == "c" else np.float64)
    if not np.all(np.isfinite(h)):
        raise ParameterError(f"{name}: taps must be finite, got a NaN or infinity")
    return h


def _as_block(block: ArrayLike) -> np.ndarray:
    x = np.asarray(block)
    if x.ndim != 1:
        raise ParameterError(f"block: expected a 1-D array of samples, got shape {x.shape}")
    if x.dtype.kind not in "iufc":
        raise ParameterError(f"block: samples must be numeric, got dtype {x.dtype}")
    return x


class Stage(abc.ABC):
    """A streaming stage: ``process`` blocks, ``flush`` at the end, ``reset`` to restart.

    The protocol every streaming object of :mod:`iqsift.dsp` obeys:

    * ``process(block)`` consumes a block of any length (0 and 1 included)
      and returns the output samples that are complete;
    * ``flush()`` returns what the stage still holds and ends the stream (the
      next ``process`` starts a new one);
    * ``reset()`` forgets everything: the stage then behaves as when built;
    * read-only ``rate_in``, ``rate_out`` (samples/s) and ``delay`` (group
      delay in output samples) are fixed when the stage is built.

    Feeding a signal in pieces gives the output of feeding it at once:
    ``concatenate([process(b) for b in pieces] + [flush()])`` equals
    ``run_once(stage, concatenate(pieces))``.

    Subclasses set ``_rate_in``, ``_rate_out``, ``_delay`` and ``_complex_stage``
    (True when the stage always produces complex output) in ``__init__`` and
    implement :meth:`process` and :meth:`reset`. Stages that hold samples
    (partial frames) override :meth:`flush`. The helpers ``_prep``, ``_out``
    and ``_empty`` apply the sample-type rule of this module (complex in or
    complex state: complex64 out; else float32 out).
    """

    _rate_in: float
    _rate_out: float
    _delay: float
    _complex_stage: bool = False
    _complex_seen: bool = False

    @property
    def rate_in(self) -> float:
        """Input sample rate, Hz."""
        return self._rate_in

    @property
    def rate_out(self) -> float:
        """Output sample rate, Hz."""
        return self._rate_out

    @property
    def delay(self) -> float:
        """Group delay, in output samples."""
        return self._delay

    @abc.abstractmethod
    def process(self, block: ArrayLike) -> np.ndarray:
        """Consume a 1-D block, return the completed output samples."""

    @abc.abstractmethod
    def reset(self) -> None:
        """Forget all state."""

    def flush(self) -> np.ndarray:
        """Return whatever the stage still holds (empty here) and reset."""
        out = self._empty()
        self.reset()
        return out

    def signal_ends(self, samples_in: int) -> None:
        """Be told that input after the first ``samples_in`` samples of this stream is padding, not signal.

        A receiver pushes zeros in at the end to bring the delayed tail of its chain out; a stage
        that estimates something from its input (a carrier level) leaves that padding out. The
        default ignores the notice: most stages treat every sample alike.
        """

    def output_index(self, samples_in: int) -> int:
        """Where the effect of input sample ``samples_in`` appears in the output (delay included)."""
        return int(round(samples_in * self.rate_out / self.rate_in + self.delay))

    # helpers ---------------------------------------------------------------
    def _prep(self, block: ArrayLike) -> np.ndarray:
        x = _as_block(block)
        if x.dtype.kind == "c":
            self._complex_seen = True
        if self._is_complex():
            return x.astype(np.complex128, copy=False)
        return x.astype(np.float64, copy=False)

    def _is_complex(self) -> bool:
        return self._complex_stage or self._complex_seen

    def _out_dtype(self) -> type[np.complex64] | type[np.float32]:
        return np.complex64 if self._is_complex() else np.float32

    def _out(self, y: np.ndarray) -> np.ndarray:
        return np.asarray(y).astype(self._out_dtype(), copy=False)

    def _empty(self) -> np.ndarray:
        return np.zeros(0, dtype=self._out_dtype())

    def __repr__(self) -> str:
        return f"{type(self).__name__}(rate_in={self.rate_in:g}, rate_out={self.rate_out:g}, delay={self.delay:g})"


def run_once(stage: Stage, x: ArrayLike) -> np.ndarray:
    """One-shot use of a stage: ``concatenate(stage.process(x), stage.flush())``.

    The stage is not reset first (so a :meth:`Mixer.advance` seek is kept);
    it ends reset.
    """
    a = stage.process(x)
    b = stage.flush()
    return np.concatenate([a, b])


class Chain(Stage):
    """Stages composed in series.

    ``process`` feeds each stage's output to the next. ``flush`` cascades:
    stage k's held samples go through stages k+1.. before those are flushed.
    ``rate_in``/``rate_out`` come from the ends; ``delay`` is the sum of the
    stage delays, each converted to output samples
    (delay_k * rate_out / rate_out_k).

    Parameters
    ----------
    stages : sequence of Stage
        At least one; each stage's ``rate_in`` must equal the previous
        stage's ``rate_out`` (relative tolerance 1e-9).
    """

    def __init__(self, stages: Sequence[Stage] | Iterable[Stage]):
        st = tuple(stages)
        if not st:
            raise ParameterError("stages: a Chain needs at least one stage, got none")
        for i, s in enumerate(st):
            if not isinstance(s, Stage):
                raise ParameterError(f"stages[{i}]: expected a Stage, got {type(s).__name__}")
        for i in range(1, len(st)):
            a, b = st[i - 1].rate_out, st[i].rate_in
            if abs(a - b) > 1e-9 * max(abs(a), abs(b)):
                raise ParameterError(
                    f"stages[{i}].rate_in: must equal the previous stage's rate_out {a:g} Hz, got {b:g} Hz"
                )
        self._stages = st

    @property
    def stages(self) -> tuple[Stage, ...]:
        return self._stages

    @property
    def rate_in(self) -> float:
        return self._stages[0].rate_in

    @property
    def rate_out(self) -> float:
        return self._stages[-1].rate_out

    @property
    def delay(self) -> float:
        out = self.rate_out
        return float(sum(s.delay * out / s.rate_out for s in self._stages))

    def process(self, block: ArrayLike) -> np.ndarray:
        y = _as_block(block)
        for s in self._stages:
            y = s.process(y)
        return y

    def flush(self) -> np.ndarray:
        carry = self._stages[0].flush()
        for s in self._stages[1:]:
            # what stage k still held goes through every later stage before that stage is flushed
            carry = np.concatenate([s.process(carry), s.flush()])
        return carry

    def reset(self) -> None:
        for s in self._stages:
            s.reset()

    def signal_ends(self, samples_in: int) -> None:
        """Tell every stage where the signal ends in its own input (see :meth:`Stage.signal_ends`)."""
        for s in self._stages:
            s.signal_ends(samples_in)
            samples_in = s.output_index(samples_in)


class TapPoint(Stage):
    """A point in a chain where observers see the signal: passes blocks through unchanged.

    Each observer is called with every non-empty block (the array itself: observers must not
    modify it). Spectrum accumulators, writers and analyzers attach here.

    Parameters
    ----------
    rate_hz : float
        Sample rate at this point (samples/s).
    """

    def __init__(self, rate_hz: float) -> None:
        self._rate_in = self._rate_out = float(rate_hz)
        self._delay = 0.0
        self._observers: list[Callable[[np.ndarray], object]] = []

    def attach(self, observer: Callable[[np.ndarray], object]) -> None:
        """Call ``observer(block)`` with every block that passes from now on."""
        self._observers.append(observer)

    @property
    def observed(self) -> bool:
        """True once something watches this point."""
        return bool(self._observers)

    def process(self, block: ArrayLike) -> np.ndarray:
        x = np.asarray(block)
        if x.size:
            for observer in self._observers:
                observer(x)
        return x

    def reset(self) -> None:
        """Nothing to forget (observers stay attached)."""

    def flush(self) -> np.ndarray:
        return np.zeros(0, np.float32)


class Scale(Stage):
    """Multiply a real signal by a constant gain (float32 out, nothing held).

    Parameters
    ----------
    gain : float
        The factor.
    rate_hz : float
        Sample rate (samples/s).
    """

    def __init__(self, gain: float, rate_hz: float) -> None:
        self.gain = np.float32(gain)
        self._rate_in = self._rate_out = float(rate_hz)
        self._delay = 0.0

    def process(self, block: ArrayLike) -> np.ndarray:
        return np.asarray(block, dtype=np.float32) * self.gain

    def reset(self) -> None:
        """Stateless."""
