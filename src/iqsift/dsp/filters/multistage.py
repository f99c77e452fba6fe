"""Multistage polyphase FIR decimation: choosing the factors, placing each stage's edges, verifying the cascade.

A centred channel goes from the capture rate to the channel rate through a
chain of FIR decimators, each designed with :func:`.lowpass.design_lowpass`.
Conventions (edges, ripple, attenuation) are those of :mod:`.lowpass`.

Cost: MACs are real multiply-accumulates for **complex** samples through real
taps: one complex output sample of an N-tap filter costs ``2*N`` MACs. A
polyphase decimator by ``D`` computes only the kept outputs, so it costs
``2*N/D`` MACs per input sample. Tap symmetry is not exploited in the count.

References
----------
* R. E. Crochiere & L. R. Rabiner, *Multirate Digital Signal Processing*
  (1983), ch. 5: multistage decimation, stopband placement per stage.
* f. harris, *Multirate Signal Processing for Communication Systems* (2004):
  polyphase filters, length estimate ``N ~ (fs/df)*(A/22)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
from scipy import fft as sp_fft

from ... import checks
from ...errors import IqsiftError, ParameterError
from .lowpass import (
    DEFAULT_ATTEN_DB,
    DEFAULT_RIPPLE_DB,
    MAX_EQUIRIPPLE_TAPS,
    LowpassDesign,
    checked_spec,
    design_lowpass,
    dtft_magnitude,
    filter_summary,
    finite_or_none,
    harris_length,
    kaiser_length,
    passband_deviation,
    ripple_and_atten,
    stopband_deviation,
)

__all__ = ["StageDesign", "DecimationPlan", "plan_decimation", "choose_decimation"]

_CASCADE_GRID_POINTS_PER_TAP = 32
_CASCADE_MAX_GRID = 1 << 24


@dataclass(frozen=True, eq=False)
class StageDesign:
    """One FIR decimation stage of a :class:`DecimationPlan`.

    Attributes
    ----------
    index : int
        Position in the chain, 0 first.
    kind : str
        ``"fir_decimator"`` (polyphase FIR, keeps every ``down``-th output).
    rate_in_hz, rate_out_hz : float
        Rates at the stage's input and output (samples/s).
    down, up : int
        Decimation factor; ``up`` is 1.
    lowpass : LowpassDesign
        The stage's filter, running at ``rate_in_hz``.
    macs_per_input_sample : float
        Real MACs per complex sample entering **this stage**: ``2 * taps / down``.
    macs_per_chain_input_sample : float
        The same cost per sample entering the **chain** (what the plan total sums):
        ``macs_per_input_sample * rate_in_hz / chain rate_in_hz``.
    """

    index: int
    kind: str
    rate_in_hz: float
    rate_out_hz: float
    down: int
    up: int
    lowpass: LowpassDesign
    macs_per_input_sample: float
    macs_per_chain_input_sample: float

    @property
    def num_taps(self) -> int:
        return self.lowpass.num_taps

    @property
    def group_delay_s(self) -> float:
        """Group delay of the stage's filter (s)."""
        return self.lowpass.group_delay_s

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        """JSON-ready; the filter's main figures are repeated at top level for the ``iqsift design`` table."""
        lp = self.lowpass
        return {
            "name": f"FIR /{self.down}",
            "index": self.index,
            "kind": self.kind,
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "down": self.down,
            "up": self.up,
            **filter_summary(lp),
            "macs_per_input_sample": self.macs_per_input_sample,
            "macs_per_chain_input_sample": self.macs_per_chain_input_sample,
            "lowpass": lp.to_dict(include_taps=include_taps),
        }


@dataclass(frozen=True, eq=False)
class DecimationPlan:
    """A chain of FIR decimators taking a centred channel from ``rate_in_hz`` to ``rate_out_hz``.

    Attributes
    ----------
    stages : tuple of StageDesign
    rate_in_hz, rate_out_hz : float
        Chain input and output rates (samples/s), ``rate_out = rate_in / decimation``.
    decimation : int
        Total decimation, the product of the stages' ``down``.
    passband_hz, stopband_hz : float
        The channel's one-sided passband half width and the stopband edge (Hz).
    ripple_db, atten_db : float
        Specification for the whole chain (dB peak to peak; dB).
    macs_per_input_sample : float
        Real MACs per complex chain-input sample, summed over the stages.
    measured_ripple_db, measured_atten_db : float
        Ripple over ``[0, passband_hz]`` and worst attenuation over
        ``[stopband_hz, rate_in_hz/2]`` of the whole cascade, measured on its
        equivalent single-rate response (noble identity, see :func:`plan_decimation`).
    """

    stages: tuple[StageDesign, ...]
    rate_in_hz: float
    rate_out_hz: float
    decimation: int
    passband_hz: float
    stopband_hz: float
    ripple_db: float
    atten_db: float
    macs_per_input_sample: float
    measured_ripple_db: float
    measured_atten_db: float

    @property
    def factors(self) -> tuple[int, ...]:
        """Decimation factor of each stage, in order."""
        return tuple(s.down for s in self.stages)

    @property
    def num_stages(self) -> int:
        return len(self.stages)

    @property
    def total_taps(self) -> int:
        return sum(s.num_taps for s in self.stages)

    @property
    def group_delay_s(self) -> float:
        """Group delay of the chain (s): the stages' delays add."""
        return sum(s.group_delay_s for s in self.stages)

    @property
    def macs_per_output_sample(self) -> float:
        return self.macs_per_input_sample * self.decimation

    def to_dict(self, include_taps: bool = False) -> dict[str, Any]:
        """JSON-ready description of the chain (``stages`` is a list of stage dicts)."""
        return {
            "kind": "decimation_plan",
            "rate_in_hz": self.rate_in_hz,
            "rate_out_hz": self.rate_out_hz,
            "decimation": self.decimation,
            "factors": list(self.factors),
            "passband_hz": self.passband_hz,
            "stopband_hz": self.stopband_hz,
            "ripple_db": self.ripple_db,
            "atten_db": self.atten_db,
            "measured_ripple_db": finite_or_none(self.measured_ripple_db),
            "measured_atten_db": finite_or_none(self.measured_atten_db),
            "macs_per_input_sample": self.macs_per_input_sample,
            "macs_per_output_sample": self.macs_per_output_sample,
            "total_taps": self.total_taps,
            "group_delay_s": self.group_delay_s,
            "stages": [s.to_dict(include_taps=include_taps) for s in self.stages],
        }


def _prime_factors(n: int) -> list[int]:
    out, p = [], 2
    while p * p <= n:
        while n % p == 0:
            out.append(p)
            n //= p
        p += 1
    if n > 1:
        out.append(n)
    return out


def _ordered_factorizations(n: int, max_parts: int) -> list[tuple[int, ...]]:
    """All ordered tuples of integers >= 2 with product n and at most max_parts entries."""
    if n == 1:
        return [()]
    result: list[tuple[int, ...]] = []

    def rec(rest: int, prefix: tuple[int, ...]) -> None:
        if len(prefix) == max_parts - 1:
            result.append(prefix + (rest,))
            return
        result.append(prefix + (rest,))
        for d in range(2, rest):
            if rest % d == 0:
                rec(rest // d, prefix + (d,))

    rec(n, ())
    return result


def _stage_edges(rate_in: float, factors: Sequence[int], fp: float, fst: float) -> list[tuple[float, float, float]]:
    """(stage input rate, passband, stopband) per stage (Crochiere & Rabiner ch. 5)."""
    out, rate = [], rate_in
    for k, d in enumerate(factors):
        rate_out = rate / d
        stop = fst if k == len(factors) - 1 else rate_out - fst
        out.append((rate, fp, stop))
        rate = rate_out
    return out


def _estimate_taps(rate: float, fp: float, fs: float, ripple: float, atten: float, max_eq: int) -> int:
    delta = min(passband_deviation(ripple), stopband_deviation(atten))
    nk = kaiser_length(-20 * math.log10(delta), fs - fp, rate)
    nh = harris_length(atten, fs - fp, rate)
    return min(nk, nh) if nh <= max_eq else nk


def _cascade_mag(stages: Sequence[tuple[np.ndarray, int]], rate_in: float,
                 extra_freqs: Sequence[float] = ()) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Magnitude of the cascade's equivalent response at the input rate (noble identity).

    ``stages`` holds (taps, down) in chain order. Stage k runs at
    ``rate_in / P_k`` (``P_k`` the product of the earlier factors); seen from
    the input, its response is periodic with that rate: the equivalent filter
    is ``prod_k H_k(f)``. Evaluated on an ``M``-point grid over [0, rate_in/2]
    with ``M`` a multiple of every ``P_k`` (each stage's response is then an
    ``M/P_k``-point FFT, indexed modulo its length), and exactly at ``extra_freqs``.
    """
    prods, p = [], 1
    for _, d in stages:
        prods.append(p)
        p *= d
    p_last = prods[-1]
    need = max(_CASCADE_GRID_POINTS_PER_TAP * taps.size * pk for (taps, _), pk in zip(stages, prods))
    base = 1 << max(12, math.ceil(math.log2(need / p_last)))
    while p_last * base > _CASCADE_MAX_GRID and base > 4096:
        base //= 2
    m = p_last * base
    idx = np.arange(m // 2 + 1)
    mag = np.ones(idx.size)
    for (taps, _), pk in zip(stages, prods):
        size = m // pk
        hk = np.abs(sp_fft.rfft(taps, size))
        j = idx % size
        j = np.minimum(j, size - j)  # |H(-f)| = |H(f)| for real taps
        mag *= hk[j]
    freqs = idx * (rate_in / m)
    extra = np.ones(len(extra_freqs))
    for (taps, _), pk in zip(stages, prods):
        extra *= dtft_magnitude(taps, extra_freqs, rate_in / pk)
    return freqs, mag, extra


def _measure_cascade(stages: Sequence[tuple[np.ndarray, int]], rate_in: float, fp: float,
                     fst: float) -> tuple[float, float]:
    freqs, mag, extra = _cascade_mag(stages, rate_in, [0.0, fp, fst])
    rates, p = [], 1
    for _, d in stages:
        rates.append(rate_in / p)
        p *= d

    def evaluate(f: np.ndarray) -> np.ndarray:
        out = np.ones(len(f))
        for (taps, _), r in zip(stages, rates):
            out *= dtft_magnitude(taps, f, r)
        return out

    spacing = freqs[1] - freqs[0]
    return ripple_and_atten(mag, spacing, fp, fst, rate_in / 2, extra, evaluate)


def _build_plan(rate_in: float, factors: Sequence[int], fp: float, fst: float, ripple: float,
                atten: float, stage_ripple: float, stage_atten: float, method: str,
                max_eq: int) -> DecimationPlan:
    stages: list[StageDesign] = []
    total = 0.0
    rate = rate_in
    for k, (r_in, pb, sb) in enumerate(_stage_edges(rate_in, factors, fp, fst)):
        d = factors[k]
        lp = design_lowpass(r_in, pb, sb, stage_ripple, stage_atten, method, max_eq)
        macs = 2.0 * lp.num_taps / d
        chain = macs * r_in / rate_in
        total += chain
        stages.append(StageDesign(index=k, kind="fir_decimator", rate_in_hz=r_in, rate_out_hz=r_in / d,
                                  down=d, up=1, lowpass=lp, macs_per_input_sample=macs,
                                  macs_per_chain_input_sample=chain))
        rate = r_in / d
    r_meas, a_meas = _measure_cascade([(s.lowpass.taps, s.down) for s in stages], rate_in, fp, fst)
    return DecimationPlan(stages=tuple(stages), rate_in_hz=rate_in, rate_out_hz=rate,
                          decimation=int(np.prod(factors)) if factors else 1, passband_hz=fp,
                          stopband_hz=fst, ripple_db=ripple, atten_db=atten, macs_per_input_sample=total,
                          measured_ripple_db=r_meas, measured_atten_db=a_meas)


def plan_decimation(
    rate_in_hz: float,
    passband_hz: float,
    stopband_hz: float,
    decimation: int,
    ripple_db: float = DEFAULT_RIPPLE_DB,
    atten_db: float = DEFAULT_ATTEN_DB,
    max_stages: int = 4,
    method: str = "auto",
    candidates: int = 4,
) -> DecimationPlan:
    """Plan a multistage polyphase FIR decimation chain for a centred channel.

    The rule (Crochiere & Rabiner 1983, ch. 5). Let ``fp = passband_hz`` (the
    channel's one-sided half width), ``fst = stopband_hz`` and stage k take
    rate ``R_{k-1}`` to ``R_k = R_{k-1}/D_k``. Every stage has passband ``fp``;
    an intermediate stage has stopband ``R_k - fst`` (everything that would
    fold into ``[-fst, fst]`` at ``R_k`` is removed; what folds elsewhere is
    removed by a later stage), the last stage has stopband ``fst`` and carries
    the sharp transition. By induction every input frequency ``|f| >= fst``
    (up to ``rate_in/2``) lies in the stopband of some stage, so

        every input component at ``|f| >= stopband_hz`` reaches the output
        attenuated by at least ``atten_db``; in particular nothing aliases
        into ``[-passband_hz, passband_hz]`` with less attenuation;

    and the cascade's passband ripple is at most the sum of the stages'
    ripples. The output rate must satisfy ``rate_out >= fp + fst`` (the
    stopband edge folds no closer than the passband edge; ``fst`` may exceed
    ``rate_out/2``: the final transition band then folds onto itself).

    Budget: each stage gets ``ripple_db / K`` (K stages) and ``atten_db`` plus
    the other stages' ripple (their passband gain may reach that much above 1).
    The whole cascade is then measured on its equivalent single-rate response
    (noble identity: stage k's response is periodic at its own input rate, the
    cascade response is their product); if it misses the specification the
    budgets are tightened and the chain redesigned (bounded).

    Factorisations: every ordered factorisation of ``decimation`` into 1 to
    ``max_stages`` factors >= 2 is costed from the length formulas; the
    ``candidates`` cheapest are designed and the one with the fewest measured
    MACs per input sample is kept (ties: fewer stages).

    Parameters
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    passband_hz : float
        One-sided passband half width of the centred channel (Hz).
    stopband_hz : float
        Stopband edge (Hz) at the final rate; ``passband_hz < stopband_hz``.
    decimation : int
        Total decimation (>= 1; 1 gives a single filtering stage).
    ripple_db, atten_db : float
        Chain specification (dB peak to peak; dB).
    max_stages : int
        1 to 4 (more only for very large factors).
    method : {"auto", "kaiser", "equiripple"}
        Passed to :func:`design_lowpass` for each stage.
    candidates : int
        How many estimated-cheapest factorisations are designed in full.

    Returns
    -------
    DecimationPlan

    Raises
    ------
    ParameterError
        Bad values, or ``rate_in/decimation < passband_hz + stopband_hz``.
    """
    rate = checks.positive("rate_in_hz", rate_in_hz)
    fp = checks.positive("passband_hz", passband_hz)
    fst = checks.positive("stopband_hz", stopband_hz)
    ripple, atten = checked_spec(ripple_db, atten_db)
    if isinstance(decimation, bool) or not isinstance(decimation, (int, np.integer)) or decimation < 1:
        raise ParameterError(f"decimation: must be an integer >= 1, got {decimation!r}")
    decimation = int(decimation)
    if isinstance(max_stages, bool) or not isinstance(max_stages, (int, np.integer)) or not 1 <= max_stages <= 8:
        raise ParameterError(f"max_stages: must be an integer from 1 to 8, got {max_stages!r}")
    if not isinstance(candidates, (int, np.integer)) or candidates < 1:
        raise ParameterError(f"candidates: must be an integer >= 1, got {candidates!r}")
    if method not in ("auto", "kaiser", "equiripple"):
        raise ParameterError(f"method: must be 'auto', 'kaiser' or 'equiripple', got {method!r}")
    if not fp < fst:
        raise ParameterError(
            f"passband_hz={passband_hz!r}, stopband_hz={stopband_hz!r}: need passband_hz < stopband_hz"
        )
    if fst > rate / 2:
        raise ParameterError(
            f"stopband_hz={stopband_hz!r}: must be <= rate_in_hz/2 ({rate / 2:g} Hz)"
        )
    rate_out = rate / decimation
    if rate_out < (fp + fst) * (1 - 1e-9):
        raise ParameterError(
            f"decimation={decimation}: output rate {rate_out:g} Hz < passband_hz + stopband_hz = "
            f"{fp + fst:g} Hz, so the stopband edge would alias into the passband"
        )
    if decimation == 1:
        factor_sets: list[tuple[int, ...]] = [(1,)]
    else:
        factor_sets = _ordered_factorizations(decimation, max_stages)

    def estimate(factors: tuple[int, ...]) -> float:
        k = len(factors)
        sr = ripple / k
        sa = atten + ripple - sr
        total, p = 0.0, 1
        for (r_in, pb, sb), d in zip(_stage_edges(rate, factors, fp, fst), factors):
            total += 2.0 * _estimate_taps(r_in, pb, sb, sr, sa, MAX_EQUIRIPPLE_TAPS) / d / p
            p *= d
        return total

    ranked = sorted(factor_sets, key=lambda f: (estimate(f), len(f), tuple(-x for x in f)))
    best: DecimationPlan | None = None
    for factors in ranked[: int(candidates)]:
        k = len(factors)
        sr = ripple / k
        sa = atten + ripple - sr
        plan = None
        for _ in range(4):
            plan = _build_plan(rate, factors, fp, fst, ripple, atten, sr, sa, method, MAX_EQUIRIPPLE_TAPS)
            if plan.measured_ripple_db <= ripple and plan.measured_atten_db >= atten:
                break
            sa += max(0.0, atten - plan.measured_atten_db) + 0.1
            if plan.measured_ripple_db > ripple:
                sr *= 0.8
            plan = None
        if plan is None:
            continue
        if best is None or (plan.macs_per_input_sample, plan.num_stages) < (
            best.macs_per_input_sample, best.num_stages
        ):
            best = plan
    if best is None:
        raise IqsiftError(
            f"plan_decimation: no stage factorisation of {decimation} met ripple_db={ripple:g}/atten_db={atten:g}"
        )
    return best


def choose_decimation(
    rate_in_hz: float,
    channel_half_width_hz: float,
    stopband_hz: float,
    min_oversampling: float = 1.0,
    max_prime: int = 7,
) -> int:
    """Choose the channel decimation for a centred channel.

    Rule: ``D`` is the largest integer with

        ``rate_in / D >= min_oversampling * (channel_half_width_hz + stopband_hz)``

    (at the output rate the stopband edge folds to ``rate_out - stopband_hz``,
    which must not lie inside the passband; see :func:`plan_decimation`)
    **and** no prime factor above ``max_prime`` (default 7: factors 2, 3, 5, 7
    make short polyphase stages and fast FFT sizes; common practice). ``D = 1``
    always qualifies. The channel rate is then ``rate_in / D``.

    Parameters
    ----------
    rate_in_hz : float
        Input rate (samples/s).
    channel_half_width_hz : float
        One-sided passband half width (Hz).
    stopband_hz : float
        Stopband edge (Hz), greater than the half width.
    min_oversampling : float
        Extra margin factor >= 1 on ``half_width + stopband``.
    max_prime : int
        Largest prime factor allowed in D (>= 2).

    Returns
    -------
    int
        The decimation D >= 1.
    """
    rate = checks.positive("rate_in_hz", rate_in_hz)
    fp = checks.positive("channel_half_width_hz", channel_half_width_hz)
    fst = checks.positive("stopband_hz", stopband_hz)
    over = checks.positive("min_oversampling", min_oversampling)
    if over < 1:
        raise ParameterError(f"min_oversampling: must be >= 1, got {min_oversampling!r}")
    if isinstance(max_prime, bool) or not isinstance(max_prime, (int, np.integer)) or max_prime < 2:
        raise ParameterError(f"max_prime: must be an integer >= 2, got {max_prime!r}")
    if not fp < fst:
        raise ParameterError(
            f"channel_half_width_hz={channel_half_width_hz!r}, stopband_hz={stopband_hz!r}: "
            "need channel_half_width_hz < stopband_hz"
        )
    need = over * (fp + fst)
    if need > rate * (1 + 1e-9):
        raise ParameterError(
            f"rate_in_hz={rate_in_hz!r}: must be >= min_oversampling*(channel_half_width_hz + stopband_hz) "
            f"= {need:g} Hz"
        )
    d_max = max(1, int(math.floor(rate / need * (1 + 1e-9))))
    for d in range(d_max, 0, -1):
        if max(_prime_factors(d), default=1) <= max_prime:
            return d
    return 1  # not reached: 1 qualifies
