"""Streaming rendering of a scenario: :class:`Synthesizer` and the one-shot :func:`synthesize`.

Every channel is rendered from its truth record (:func:`iqsift.synth.build_truth`)
block by block in bounded memory, with all random-number, filter and oscillator
state carried between blocks, so the samples do not depend on the block size.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from typing import Any, Iterator, Mapping, Sequence

import numpy as np

from ..errors import ParameterError
from .scenario import Scenario, as_scenario
from .sources import Interpolator, band_fir, build_message, clarke_fading, filtered_noise_source, rng_for
from .truth import build_truth

__all__ = ["DEFAULT_BLOCK", "MAX_IN_MEMORY", "SynthResult", "Synthesizer", "synthesize"]

DEFAULT_BLOCK = 65536
"""Samples per generated block (the output does not depend on it)."""
MAX_IN_MEMORY = 1 << 23
"""Longest scenario :func:`synthesize` returns as one array by default (samples)."""


def _gate(bursts: Sequence[Mapping[str, Any]], edge: float, rate: float, total: int, n0: int, n1: int) -> np.ndarray:
    """On/off gate: 1 inside each burst, raised-cosine edges centred on start/end (0.5 there)."""
    t = np.arange(n0, n1, dtype=np.float64) / rate
    duration = total / rate
    gate = np.zeros(n1 - n0)

    def ramp(u: np.ndarray) -> np.ndarray:
        if edge <= 0:
            return (u >= 0.5).astype(np.float64)
        return 0.5 - 0.5 * np.cos(np.pi * np.clip(u, 0.0, 1.0))

    for b in bursts:
        s, e = b["start_s"], b["end_s"]
        if e + edge / 2 < t[0] or s - edge / 2 > t[-1]:
            continue
        scale = edge if edge > 0 else 1.0
        rise = np.ones_like(t) if s <= 0 else ramp((t - s) / scale + 0.5)
        fall = np.ones_like(t) if e >= duration else ramp((e - t) / scale + 0.5)
        gate += rise * fall
    return gate


class _ChannelGen:
    def __init__(self, rec: Mapping[str, Any], rate: float, total: int) -> None:
        self.rec = rec
        self.rate = rate
        self.total = total
        self.mode = rec["mode"]
        self.message = build_message(rec, rate)
        self.scale = rec["baseband_scale"]
        self.depth = rec["depth"]
        self.carrier = rec["carrier"]["offset_hz"]
        self.drift = rec["carrier"]["drift_hz_per_s"]
        self.phase = math.radians(rec["carrier"]["phase_deg"])
        self.fading = clarke_fading(rec["fading"], rate) if rec["fading"] else None
        self.noise = None
        if rec["noise"]:
            nrec = rec["noise"]
            lo, hi = nrec["band_hz"]
            h = band_fir(nrec["rate_hz"], lo, hi, nrec["transition_hz"], one_sided=True)
            sigma = math.sqrt(10 ** (nrec["density_dbfs_per_hz"] / 10) * nrec["rate_hz"])
            rng = rng_for(nrec["rng"]["entropy"], nrec["rng"]["spawn_key"])
            self.noise = Interpolator(filtered_noise_source(h, sigma, rng, complex_input=True), nrec["ratio"])

    def take(self, n0: int, n1: int) -> np.ndarray:
        if self.mode == "am":
            bb = self.scale * (1.0 + self.depth * self.message.real(n0, n1))
        elif self.mode == "dsb":
            bb = self.scale * self.message.real(n0, n1)
        elif self.mode == "usb":
            bb = self.scale * self.message.analytic(n0, n1)
        else:
            bb = self.scale * np.conj(self.message.analytic(n0, n1))
        if self.rec["bursts"]:
            bb = bb * _gate(self.rec["bursts"], self.rec["burst_edge_s"], self.rate, self.total, n0, n1)
        if self.fading is not None:
            bb = bb * self.fading.take(n0, n1)
        if self.noise is not None:
            bb = bb + self.noise.take(n0, n1)
        t = np.arange(n0, n1, dtype=np.float64) / self.rate
        cycles = self.carrier * t + 0.5 * self.drift * t * t
        cycles -= np.floor(cycles)
        return bb * np.exp(1j * (2 * np.pi * cycles + self.phase))


class Synthesizer:
    """Streaming renderer of a scenario: :meth:`read` the next samples, or iterate :meth:`blocks`.

    The output (complex64, full scale = magnitude 1) does not depend on how it
    is split into reads.

    Parameters
    ----------
    scenario : Scenario
    truth : dict, optional
        A truth document made by :func:`build_truth` for this scenario (made if absent).
    """

    def __init__(self, scenario: Scenario, truth: dict[str, Any] | None = None) -> None:
        self.scenario = scenario
        self.truth = truth if truth is not None else build_truth(scenario)
        self.rate = scenario.sample_rate_hz
        self.total = scenario.n_samples
        self._channels = [_ChannelGen(rec, self.rate, self.total) for rec in self.truth["channels"]]
        self._noise_sigma = None
        if self.truth["noise"] is not None:
            self._noise_sigma = math.sqrt(10 ** (self.truth["noise"]["density_dbfs_per_hz"] / 10) * self.rate / 2)
            self._noise_rng = rng_for(scenario.seed, (0,))
        self.position = 0

    @property
    def remaining(self) -> int:
        """Samples not yet read."""
        return self.total - self.position

    def read(self, n: int) -> np.ndarray:
        """The next ``min(n, remaining)`` samples as complex64."""
        n0 = self.position
        n1 = min(self.total, n0 + max(int(n), 0))
        out = np.zeros(n1 - n0, dtype=np.complex128)
        if n1 > n0:
            for ch in self._channels:
                out += ch.take(n0, n1)
            if self._noise_sigma is not None:
                out += self._noise_rng.standard_normal(2 * (n1 - n0)).view(np.complex128) * self._noise_sigma
        self.position = n1
        return out.astype(np.complex64)

    def blocks(self, block_size: int = DEFAULT_BLOCK) -> Iterator[np.ndarray]:
        """Yield the remaining samples in blocks of ``block_size`` (the last may be shorter)."""
        if int(block_size) < 1:
            raise ParameterError(f"block_size: must be >= 1, got {block_size!r}")
        while self.remaining:
            yield self.read(block_size)


@dataclass
class SynthResult:
    """What :func:`synthesize` returns.

    Attributes
    ----------
    truth : dict
        The truth document (``clipped_components`` is None: nothing was quantised).
    sample_rate_hz : float
    center_hz : float or None
    n_samples : int
    samples : ndarray of complex64 or None
        All samples, unless the scenario is long (then None: use ``blocks``).
    blocks : iterator of ndarray
        The samples block by block (single use; over ``samples`` when held in memory).
    """

    truth: dict[str, Any]
    sample_rate_hz: float
    center_hz: float | None
    n_samples: int
    samples: np.ndarray | None
    blocks: Iterator[np.ndarray] = field(repr=False)


def synthesize(scenario: Scenario | Mapping[str, Any] | str | os.PathLike, *, block_size: int = DEFAULT_BLOCK,
               in_memory: bool | None = None) -> SynthResult:
    """Render a scenario to complex64 samples.

    Parameters
    ----------
    scenario : Scenario, dict or path
        A parsed scenario, a dict (see :func:`parse_scenario`) or a TOML file path.
    block_size : int
        Samples generated per step (the output does not depend on it).
    in_memory : bool, optional
        Return all samples as one array (default: when the scenario has at
        most :data:`MAX_IN_MEMORY` samples); otherwise only a block generator.
    """
    scen = as_scenario(scenario)
    synth = Synthesizer(scen)
    keep = scen.n_samples <= MAX_IN_MEMORY if in_memory is None else bool(in_memory)
    if keep:
        samples = np.concatenate(list(synth.blocks(block_size)))

        def chunks() -> Iterator[np.ndarray]:
            for start in range(0, samples.shape[0], block_size):
                yield samples[start:start + block_size]

        blocks = chunks()
    else:
        samples = None
        blocks = synth.blocks(block_size)
    return SynthResult(truth=synth.truth, sample_rate_hz=scen.sample_rate_hz, center_hz=scen.center_hz,
                       n_samples=scen.n_samples, samples=samples, blocks=blocks)

