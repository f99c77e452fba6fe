"""Tests for iqsift.dsp.filters and the design table: filter lengths, low-pass designs, plans, resamplers.

Every check measures the designs independently of the library's own
measurement, with scipy.signal (freqz, firwin, kaiserord, upfirdn,
group_delay) as the reference.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal

from iqsift.cli.design_table import format_design
from iqsift.dsp.filters import (
    DecimationPlan,
    LowpassDesign,
    choose_decimation,
    design_lowpass,
    design_resampler,
    harris_length,
    kaiser_beta,
    kaiser_length,
    measure_lowpass,
    passband_deviation,
    plan_decimation,
    stopband_deviation,
)
from iqsift.errors import ParameterError

# Grid tolerance (dB) for the independent measurements below: the test's
# frequency grid (freqz, spacing rate/(2*worN) with worN >= 256 points per tap)
# may land a sidelobe peak slightly differently from the library's. A peak
# sampled half a grid step away reads low by at most 1 - cos(pi/512) ~ 2e-5
# (~2e-4 dB); 2e-3 dB leaves a factor 10.
GRID_TOL_DB = 1e-4

# 8.33 kHz aeronautical raster (ICAO Annex 10 Vol. V: 25/3 kHz spacing). A
# 6 kHz AM channel (passband +-3 kHz, ITU-R SM.1138: Bn = 2M, M = 3 kHz) next
# to another one 8.333 kHz away: the neighbour's near edge is at 25/3 - 3 kHz.
AM_HALF_WIDTH = 3000.0
NEIGHBOUR_833_EDGE = 25000.0 / 3.0 - AM_HALF_WIDTH  # 5333.33 Hz
NEIGHBOUR_25K_EDGE = 25000.0 - AM_HALF_WIDTH  # 22 kHz


def _freqz_mag(taps: np.ndarray, rate: float, freqs=None) -> tuple[np.ndarray, np.ndarray]:
    """|H| with scipy.signal.freqz: dense FFT grid (>= 256 points per tap), or at given freqs."""
    if freqs is not None:
        w, h = signal.freqz(taps, worN=np.asarray(freqs, dtype=float), fs=rate)
        return w, np.abs(h)
    worn = 1 << max(14, math.ceil(math.log2(256 * len(taps))))
    w, h = signal.freqz(taps, worN=worn, fs=rate)
    return w, np.abs(h)


def _independent_measure(taps, rate, fp, fs) -> tuple[float, float]:
    """Ripple (dB p-p over [0, fp]) and attenuation (dB re DC over [fs, rate/2]) via freqz."""
    w, mag = _freqz_mag(taps, rate)
    _, edge = _freqz_mag(taps, rate, [0.0, fp, fs])
    pb = np.concatenate([mag[w <= fp], edge[:2]])
    sb = np.concatenate([mag[w >= fs], edge[2:]])
    return 20 * np.log10(pb.max() / pb.min()), -20 * np.log10(sb.max() / edge[0])


# ----------------------------------------------------------------------------- length formulas


def test_kaiser_check_values_from_scipy_docs():
    # scipy.signal.kaiserord documentation (and REFERENCES.md): kaiserord(65, 24/500) = (167, 6.20426)
    # for 24 Hz transition at fs = 1000 Hz; kaiserord(60, 0.1) = (74, 5.65326).
    assert kaiser_length(65, 24, 1000) == 167
    assert kaiser_beta(65) == pytest.approx(6.20426, abs=5e-6)
    assert kaiser_length(60, 0.1, 2.0) == 74  # width 0.1 of Nyquist: 0.1 Hz at rate 2 Hz
    assert kaiser_beta(60) == pytest.approx(5.65326, abs=5e-6)
    assert (kaiser_length(65, 24, 1000), kaiser_beta(65)) == pytest.approx(signal.kaiserord(65, 24 / 500))


def test_kaiser_beta_piecewise_formula():
    # Kaiser 1974 / Oppenheim & Schafer eq. 7.62: three ranges of A.
    assert kaiser_beta(15) == 0.0
    assert kaiser_beta(30) == pytest.approx(0.5842 * 9**0.4 + 0.07886 * 9)
    assert kaiser_beta(80) == pytest.approx(0.1102 * (80 - 8.7))
    for a in (10, 21, 35, 50, 50.5, 80, 120):
        assert kaiser_beta(a) == pytest.approx(signal.kaiser_beta(a))  # scipy reference


@settings(max_examples=200, deadline=None)
@given(a=st.floats(8.0, 160.0), width=st.floats(1e-4, 1.0), rate=st.sampled_from([1.0, 2.0, 48000.0, 2.4e6]))
def test_kaiser_length_matches_kaiserord(a, width, rate):
    # scipy.signal.kaiserord implements Kaiser's formula N - 1 = (A - 7.95)/(2.285 dw), width in Nyquist units.
    transition = width * rate / 2
    n_ref, beta_ref = signal.kaiserord(a, width)
    assert kaiser_length(a, transition, rate) == n_ref
    assert kaiser_beta(a) == pytest.approx(beta_ref)


def test_harris_estimate_is_shorter_than_kaiser():
    # harris 2004 rule of thumb N ~ (fs/df)(A/22): 60 dB, df/fs = 0.05 -> 54.5 taps, vs Kaiser's 74 (REFERENCES.md).
    assert harris_length(60, 0.05, 1.0) == 55
    assert kaiser_length(60, 0.05, 1.0) == 74


def test_deviation_conversions():
    # Tolerance scheme, Oppenheim & Schafer sec. 7.2: gain in [1-dp, 1+dp] is 20log10((1+dp)/(1-dp)) dB p-p.
    dp = passband_deviation(0.1)
    assert 20 * math.log10((1 + dp) / (1 - dp)) == pytest.approx(0.1, rel=1e-12)
    assert dp == pytest.approx(0.005756, abs=1e-6)
    assert stopband_deviation(80) == pytest.approx(1e-4)


# ----------------------------------------------------------------------------- low-pass designs

DESIGN_CASES = [
    # rate, passband, stopband, ripple dB p-p, atten dB
    (2.4e6, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, 0.1, 80.0),  # one stage at the capture rate, 8.33 kHz neighbour
    (2.4e6, AM_HALF_WIDTH, NEIGHBOUR_25K_EDGE, 0.1, 80.0),  # 25 kHz raster
    (50000.0, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, 0.1, 80.0),
    (25000.0 / 3.0 * 4, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, 0.1, 80.0),
    (48000.0, 3000.0, 4000.0, 0.1, 80.0),
    (16000.0, 1350.0, 2000.0, 0.1, 80.0),  # USB 300-3000 Hz shifted to its centre: half width 1350 Hz
    (48000.0, 3000.0, 4000.0, 0.01, 100.0),
    (48000.0, 3000.0, 4000.0, 1.0, 40.0),
    (8000.0, 3000.0, 4000.0, 0.1, 80.0),  # stopband at Nyquist
    (2.4e6, AM_HALF_WIDTH, 300000.0 - NEIGHBOUR_833_EDGE, 0.05, 80.1),  # wide first stage of a chain
]


@pytest.mark.parametrize("method", ["auto", "kaiser"])
@pytest.mark.parametrize("case", DESIGN_CASES, ids=lambda c: "-".join(f"{v:g}" for v in c))
def test_design_meets_spec_measured_with_freqz(case, method):
    rate, fp, fs, ripple, atten = case
    d = design_lowpass(rate, fp, fs, ripple, atten, method=method)
    h = d.taps
    assert h.dtype == np.float64 and h.size % 2 == 1
    np.testing.assert_allclose(h, h[::-1], rtol=0, atol=1e-15)  # symmetric: linear phase
    assert h.sum() == pytest.approx(1.0, abs=1e-12)  # unity DC gain
    r, a = _independent_measure(h, rate, fp, fs)
    assert r <= ripple + GRID_TOL_DB
    assert a >= atten - GRID_TOL_DB
    # the library's reported figures are what the taps do
    assert d.measured_ripple_db == pytest.approx(r, abs=0.01)
    assert d.measured_atten_db == pytest.approx(a, abs=0.01)
    assert (d.rate_hz, d.passband_hz, d.stopband_hz, d.ripple_db, d.atten_db) == (rate, fp, fs, ripple, atten)


@settings(max_examples=25, deadline=None)
@given(
    fp=st.floats(0.01, 0.4),
    width=st.floats(0.01, 0.09),
    ripple=st.floats(0.01, 1.0),
    atten=st.floats(40.0, 100.0),
    method=st.sampled_from(["auto", "kaiser"]),
)
def test_random_designs_meet_spec(fp, width, ripple, atten, method):
    # Property: whatever the edges and specification, the taps meet it when measured with scipy.signal.freqz.
    fs = min(fp + width, 0.5)
    d = design_lowpass(1.0, fp, fs, ripple, atten, method=method)
    r, a = _independent_measure(d.taps, 1.0, fp, fs)
    assert r <= ripple + GRID_TOL_DB and a >= atten - GRID_TOL_DB


def test_equiripple_forced_meets_spec():
    rate, fp, fs = 48000.0, 3000.0, 4000.0
    d = design_lowpass(rate, fp, fs, method="equiripple")
    assert d.method == "equiripple"
    r, a = _independent_measure(d.taps, rate, fp, fs)
    assert r <= 0.1 + GRID_TOL_DB and a >= 80 - GRID_TOL_DB
    # shortest: two taps fewer (same parity) no longer meets the spec with the same weights
    dp, ds = passband_deviation(0.1), stopband_deviation(80)
    shorter = signal.remez(d.num_taps - 2, [0, fp, fs, rate / 2], [1, 0], weight=[1, dp / ds], fs=rate)
    r2, a2 = _independent_measure(shorter / shorter.sum(), rate, fp, fs)
    assert r2 > 0.1 or a2 < 80


def test_kaiser_taps_equal_scipy_firwin():
    # Kaiser window design, Oppenheim & Schafer sec. 7.5; scipy.signal.firwin with scale=True is the reference.
    rate, fp, fs = 48000.0, 3000.0, 4000.0
    d = design_lowpass(rate, fp, fs, 0.1, 80.0, method="kaiser")
    ref = signal.firwin(d.num_taps, (fp + fs) / 2, window=("kaiser", d.kaiser_beta), fs=rate)
    np.testing.assert_allclose(d.taps, ref, rtol=1e-9, atol=1e-15)
    # A = 80 dB (ds = 1e-4 < dp): beta from Kaiser's formula, length at least Kaiser's estimate
    assert d.kaiser_beta == pytest.approx(0.1102 * (80 - 8.7))
    assert d.num_taps >= kaiser_length(80, fs - fp, rate)


@pytest.mark.parametrize(
    "case",
    [(48000.0, 3000.0, 4000.0), (50000.0, 3000.0, NEIGHBOUR_833_EDGE), (2.4e6, 3000.0, NEIGHBOUR_833_EDGE),
     (8000.0, 3000.0, 4000.0), (2.4e6, 3000.0, 294666.0)],
)
def test_auto_picks_equiripple_only_when_shorter(case):
    rate, fp, fs = case
    auto = design_lowpass(rate, fp, fs)
    kaiser = design_lowpass(rate, fp, fs, method="kaiser")
    try:
        equi = design_lowpass(rate, fp, fs, method="equiripple")
    except ParameterError:
        equi = None
    if auto.method == "equiripple":
        assert equi is not None and auto.num_taps == equi.num_taps < kaiser.num_taps
    else:
        assert auto.num_taps == kaiser.num_taps
        assert equi is None or equi.num_taps >= kaiser.num_taps


def test_long_filter_falls_back_to_kaiser():
    # 2.4 MS/s with a 2.33 kHz transition needs ~5000 taps: beyond the Remez cap, Kaiser is used.
    d = design_lowpass(2.4e6, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE)
    assert d.method == "kaiser" and d.num_taps > 1500
    with pytest.raises(ParameterError, match="equiripple"):
        design_lowpass(2.4e6, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, method="equiripple")


def test_measure_lowpass_agrees_with_freqz_on_other_filters():
    # A firwin Hamming design not made by the library: both measurements must agree.
    rate, fp, fs = 10000.0, 1000.0, 1500.0
    h = signal.firwin(101, 1250.0, fs=rate)
    r, a = measure_lowpass(h, rate, fp, fs)
    r_ref, a_ref = _independent_measure(h, rate, fp, fs)
    assert r == pytest.approx(r_ref, abs=0.01)
    assert a == pytest.approx(a_ref, abs=0.01)
    assert 40 < a < 60  # Hamming window: ~53 dB first sidelobe (Oppenheim & Schafer table 7.2)


def test_group_delay_matches_scipy():
    d = design_lowpass(48000.0, 3000.0, 4000.0)
    assert d.group_delay_samples == (d.num_taps - 1) / 2
    w, gd = signal.group_delay((d.taps, [1.0]), w=[500.0, 1500.0], fs=48000.0)
    np.testing.assert_allclose(gd, d.group_delay_samples, atol=1e-6)
    assert d.group_delay_s == pytest.approx(d.group_delay_samples / 48000.0)


def test_lowpass_design_is_frozen_and_json_ready():
    d = design_lowpass(48000.0, 3000.0, 4000.0)
    assert isinstance(d, LowpassDesign)
    with pytest.raises(ValueError):
        d.taps[0] = 1.0  # read-only taps
    with pytest.raises(AttributeError):
        d.rate_hz = 1.0  # type: ignore[misc]
    plain = d.to_dict()
    assert "taps" not in plain and plain["num_taps"] == d.num_taps
    full = json.loads(json.dumps(d.to_dict(include_taps=True)))
    np.testing.assert_array_equal(np.array(full["taps"]), d.taps)


@pytest.mark.parametrize(
    "kwargs",
    [
        dict(rate_hz=48000, passband_hz=4000, stopband_hz=3000),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=3000),
        dict(rate_hz=48000, passband_hz=0, stopband_hz=3000),
        dict(rate_hz=48000, passband_hz=-100, stopband_hz=3000),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=24001),
        dict(rate_hz=0, passband_hz=3000, stopband_hz=4000),
        dict(rate_hz=48000, passband_hz=float("nan"), stopband_hz=4000),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=4000, ripple_db=0),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=4000, atten_db=-80),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=4000, method="parks"),
        dict(rate_hz=48000, passband_hz=3000, stopband_hz=3000.001),  # too narrow for MAX_TAPS
    ],
)
def test_design_lowpass_rejects_bad_values(kwargs):
    with pytest.raises(ParameterError) as info:
        design_lowpass(**kwargs)
    msg = str(info.value)
    assert "\n" not in msg and ("_hz" in msg or "_db" in msg or "method" in msg)


def test_kaiser_length_rejects_small_attenuation():
    # scipy.signal.kaiserord refuses A < 8 (formula not valid): so does kaiser_length.
    with pytest.raises(ValueError):
        signal.kaiserord(7, 0.1)
    with pytest.raises(ParameterError, match="atten_db"):
        kaiser_length(7, 0.1, 2.0)


# ----------------------------------------------------------------------------- multistage decimation


def _noble_equivalent(plan: DecimationPlan) -> np.ndarray:
    """Single-rate equivalent filter of the cascade (noble identity: stage k's taps zero-stuffed by P_k)."""
    h_eq, p = np.array([1.0]), 1
    for stage in plan.stages:
        up = np.zeros((stage.lowpass.num_taps - 1) * p + 1)
        up[::p] = stage.lowpass.taps
        h_eq = np.convolve(h_eq, up)
        p *= stage.down
    return h_eq


def _simulate_tone(plan: DecimationPlan, f_hz: float, n_out: int = 300) -> float:
    """Gain (linear) of a unit complex tone through the chain, simulated with scipy.signal.upfirdn."""
    d = plan.decimation
    skip = len(_noble_equivalent(plan))  # transient length, in input samples
    n_in = d * (n_out + 2 * (skip // d + 2))
    x = np.exp(2j * np.pi * f_hz / plan.rate_in_hz * np.arange(n_in))
    y = x
    for s in plan.stages:
        y = signal.upfirdn(s.lowpass.taps, y, up=1, down=s.down)
    start = skip // d + 2
    seg = y[start : start + n_out]
    f_out = (f_hz + plan.rate_out_hz / 2) % plan.rate_out_hz - plan.rate_out_hz / 2  # where it folds to
    n = np.arange(start, start + n_out)
    return float(np.abs(np.mean(seg * np.exp(-2j * np.pi * f_out / plan.rate_out_hz * n))))


def _check_cascade(plan: DecimationPlan) -> tuple[float, float, np.ndarray, np.ndarray]:
    h_eq = _noble_equivalent(plan)
    rate, fp, fst = plan.rate_in_hz, plan.passband_hz, plan.stopband_hz
    w, mag = _freqz_mag(h_eq, rate)
    _, edge = _freqz_mag(h_eq, rate, [0.0, fp, fst])
    dc = edge[0]
    assert dc == pytest.approx(1.0, abs=1e-9)  # each stage has unity DC gain
    pb = np.concatenate([mag[w <= fp], edge[:2]])
    sb = np.concatenate([mag[w >= fst], edge[2:]])
    return 20 * np.log10(pb.max() / pb.min()), -20 * np.log10(sb.max()), w, mag


def test_choose_decimation_for_833_and_25k_channels():
    # Rule: largest 7-smooth D with rate_in/D >= half_width + stopband.
    assert choose_decimation(2.4e6, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE) == 288  # 2.4e6/(25e3/3) = 288 = 2^5*3^2
    assert choose_decimation(2.4e6, AM_HALF_WIDTH, NEIGHBOUR_25K_EDGE) == 96  # 2.4e6/25e3 = 96
    # 1e6/(3000 + 71074.07) = 13.5 -> 13 is prime > 7 -> 12
    assert choose_decimation(1e6, 3000.0, 1e6 / 13.5 - 3000.0) == 12
    assert choose_decimation(1e6, 3000.0, 1e6 / 13.5 - 3000.0, max_prime=13) == 13
    assert choose_decimation(48000.0, 3000.0, 5000.0, min_oversampling=2.0) == 3


@settings(max_examples=100, deadline=None)
@given(rate=st.floats(1e4, 1e7), fp=st.floats(100.0, 5000.0), extra=st.floats(1.0, 20000.0))
def test_choose_decimation_rule_by_enumeration(rate, fp, extra):
    fst = fp + extra
    if fp + fst > rate:
        with pytest.raises(ParameterError):
            choose_decimation(rate, fp, fst)
        return
    d = choose_decimation(rate, fp, fst)

    def smooth(n):
        for p in (2, 3, 5, 7):
            while n % p == 0:
                n //= p
        return n == 1

    # brute force over every D (the rule in choose_decimation's docstring, with a 1e-9 relative guard)
    best = max(k for k in range(1, int(rate // (fp + fst)) + 2) if rate / k >= (fp + fst) * (1 - 1e-9) and smooth(k))
    assert d == best


@pytest.mark.parametrize(
    "rate, fst, ripple, atten",
    [
        (2.4e6, NEIGHBOUR_833_EDGE, 0.1, 80.0),  # the main case: 2.4 MS/s -> 6 kHz AM channel, 8.33 kHz neighbour
        (2.4e6, NEIGHBOUR_25K_EDGE, 0.1, 80.0),
        (1.024e6, NEIGHBOUR_833_EDGE, 0.5, 60.0),
        (250000.0, NEIGHBOUR_833_EDGE, 0.1, 90.0),
    ],
)
def test_plan_cascade_meets_spec(rate, fst, ripple, atten):
    decimation = choose_decimation(rate, AM_HALF_WIDTH, fst)
    plan = plan_decimation(rate, AM_HALF_WIDTH, fst, decimation, ripple, atten)
    assert math.prod(plan.factors) == decimation and 1 <= plan.num_stages <= 4
    assert plan.rate_out_hz == pytest.approx(rate / decimation)
    # stopband rule (Crochiere & Rabiner ch. 5): intermediate stages stop at R_k - fst, the last at fst
    for s in plan.stages[:-1]:
        assert s.lowpass.stopband_hz == pytest.approx(s.rate_out_hz - fst)
        assert s.lowpass.passband_hz == AM_HALF_WIDTH
    assert plan.stages[-1].lowpass.stopband_hz == pytest.approx(fst)
    # the cost formula: 2*taps/down per stage input sample, weighted by the stage's share of the input rate
    total = sum(2 * s.num_taps / s.down * s.rate_in_hz / rate for s in plan.stages)
    assert plan.macs_per_input_sample == pytest.approx(total)
    # multistage beats one stage at the input rate (Crochiere & Rabiner ch. 5)
    single = design_lowpass(rate, AM_HALF_WIDTH, fst, ripple, atten)
    assert plan.macs_per_input_sample < 2 * single.num_taps / decimation
    # independent cascade measurement with freqz on the noble-identity equivalent filter:
    # every input component at |f| >= fst is attenuated by >= atten_db at the output (this includes
    # everything that folds into [-fp, fp]); the passband ripple stays within ripple_db.
    r, a, w, mag = _check_cascade(plan)
    assert r <= ripple + GRID_TOL_DB
    assert a >= atten - GRID_TOL_DB
    assert plan.measured_ripple_db == pytest.approx(r, abs=0.01)
    assert plan.measured_atten_db == pytest.approx(a, abs=0.02)


def test_plan_tones_alias_rejected_simulated_with_upfirdn():
    # 2.4 MS/s capture, 6 kHz AM channel, 8.33 kHz neighbours: D = 288, output 8333.33 S/s.
    rate = 2.4e6
    plan = plan_decimation(rate, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, 288)
    r_out = plan.rate_out_hz
    h_eq = _noble_equivalent(plan)
    w, mag = _freqz_mag(h_eq, rate)
    # test tones that fold into [-fp, fp]: band edges and the worst point of each of a few alias bands
    tones = [r_out - AM_HALF_WIDTH, r_out + 1000.0, -2 * r_out + 2999.0, 10 * r_out, 143 * r_out - 2500.0]
    for m in (1, 2, 3, 36, 100):
        band = (w >= m * r_out - AM_HALF_WIDTH) & (w <= m * r_out + AM_HALF_WIDTH)
        tones.append(float(w[band][np.argmax(mag[band])]))
    for f in tones:
        gain = _simulate_tone(plan, f)
        f_out = (f + r_out / 2) % r_out - r_out / 2
        assert abs(f_out) <= AM_HALF_WIDTH + 1e-6  # it does land in the passband
        assert -20 * np.log10(gain) >= 80.0 - GRID_TOL_DB, f
        # the simulation agrees with the noble-identity response
        _, ref = _freqz_mag(h_eq, rate, [f])
        assert 20 * np.log10(gain) == pytest.approx(20 * np.log10(ref[0]), abs=0.01)
    # passband tones come through within the ripple
    gains = [_simulate_tone(plan, f) for f in (0.0, 700.0, -1500.0, 2500.0, -3000.0, 3000.0)]
    assert 20 * np.log10(max(gains) / min(gains)) <= 0.1


def test_plan_candidates_heuristic_finds_exhaustive_optimum():
    # Ranking factorisations by the length formulas, then designing the 4 cheapest, is a heuristic:
    # compare with designing every ordered factorisation (1-4 stages) of D = 48 and D = 96.
    for rate, fst, d in ((400000.0, NEIGHBOUR_833_EDGE, 48), (2.4e6, NEIGHBOUR_25K_EDGE, 96)):
        quick = plan_decimation(rate, AM_HALF_WIDTH, fst, d)
        full = plan_decimation(rate, AM_HALF_WIDTH, fst, d, candidates=10_000)
        assert quick.macs_per_input_sample <= 1.05 * full.macs_per_input_sample


def test_plan_single_stage_and_prime_decimation():
    plan = plan_decimation(96000.0, 3000.0, 5000.0, 1)
    assert plan.factors == (1,) and plan.rate_out_hz == 96000.0
    plan = plan_decimation(96000.0, 3000.0, 5000.0, 11)  # prime: one stage only
    assert plan.factors == (11,)
    r, a, _, _ = _check_cascade(plan)
    assert r <= 0.1 + GRID_TOL_DB and a >= 80 - GRID_TOL_DB


def test_plan_to_dict_and_table():
    plan = plan_decimation(2.4e6, AM_HALF_WIDTH, NEIGHBOUR_833_EDGE, 288)
    d = json.loads(json.dumps(plan.to_dict()))
    assert [s["down"] for s in d["stages"]] == list(plan.factors)
    assert all("taps" not in s["lowpass"] for s in d["stages"])
    text = format_design(d)
    lines = text.splitlines()
    assert lines[0].split()[:2] == ["stage", "kind"]
    for s in plan.stages:
        assert any(f" {s.num_taps} " in f" {line} " and f"/{s.down}" in line for line in lines)
    assert f"{plan.macs_per_input_sample:.3f}" in text
    # generic rows: an FFT stage dict with few keys shows "-" for what it lacks
    fft_row = {"name": "fft channelizer", "kind": "overlap_save", "rate_in_hz": 2.4e6, "rate_out_hz": 25000.0}
    table = format_design([fft_row, d["stages"][0]]).splitlines()
    assert table[2].startswith("fft channelizer") and table[2].split().count("-") >= 7
    assert len(table) == 4


@pytest.mark.parametrize(
    "args",
    [
        (2.4e6, 3000.0, NEIGHBOUR_833_EDGE, 289),  # output rate below fp + fst
        (2.4e6, 3000.0, 2000.0, 10),  # stopband below passband
        (2.4e6, 3000.0, NEIGHBOUR_833_EDGE, 0),
        (2.4e6, 3000.0, NEIGHBOUR_833_EDGE, 2.5),
        (-1.0, 3000.0, NEIGHBOUR_833_EDGE, 2),
    ],
)
def test_plan_rejects_bad_values(args):
    with pytest.raises(ParameterError):
        plan_decimation(*args)


# ----------------------------------------------------------------------------- resampler


def test_resampler_exact_integer_ratios():
    r = design_resampler(48000.0, 8000.0, 3000.0)
    assert (r.up, r.down) == (1, 6) and r.rate_out_hz == 8000.0 and r.exact
    r = design_resampler(44100.0, 48000.0, 20000.0)
    assert (r.up, r.down) == (160, 147) and r.rate_out_hz == 48000.0 and r.rate_error_hz == 0.0
    assert r.lowpass.rate_hz == 44100.0 * 160 and r.lowpass.stopband_hz == 22050.0
    np.testing.assert_allclose(r.taps.sum(), 160.0)


def test_resampler_reports_achieved_rate():
    rate_in = 2.4e6 / 288  # 8333.33 S/s channel rate, not exactly representable
    r = design_resampler(rate_in, 16000.0, 3000.0)
    assert (r.up, r.down) == (48, 25)
    assert r.rate_out_hz == float(Fraction(rate_in) * Fraction(48, 25))  # exact rational, rounded once
    assert abs(r.rate_error_hz) < 1e-9
    r = design_resampler(48000.0, 12345.678, 3000.0, max_denominator=100)
    assert r.down <= 100 and not r.exact
    assert r.rate_out_hz == float(Fraction(48000) * Fraction(r.up, r.down))
    # best rational approximation with down <= 100: |up/down - x| < 1/down^2 (continued fractions)
    assert abs(r.rate_out_hz - 12345.678) < 48000 / r.down**2
    assert r.rate_error_hz == r.rate_out_hz - 12345.678


def test_resampler_level_alias_and_length_with_upfirdn():
    # 48 kHz -> 8 kHz, 3 kHz audio band: tones in the passband keep their level; a 5 kHz tone would fold
    # to -3 kHz, an 11 kHz tone to 3 kHz: both must be >= 80 dB down. Output length as scipy.resample_poly.
    r = design_resampler(48000.0, 8000.0, 3000.0)
    n = 48000
    t = np.arange(n) / 48000.0

    def gain(f):
        y = signal.upfirdn(r.taps, np.exp(2j * np.pi * f * t), up=r.up, down=r.down)
        k = np.arange(len(y))[2000:6000]
        f_out = (f + 4000.0) % 8000.0 - 4000.0
        return abs(np.mean(y[2000:6000] * np.exp(-2j * np.pi * f_out / 8000.0 * k)))

    g = [gain(f) for f in (100.0, 1000.0, 2999.0)]
    assert 20 * np.log10(max(g) / min(g)) <= 0.1 and all(abs(20 * np.log10(x)) <= 0.1 for x in g)
    assert -20 * np.log10(gain(5000.0)) >= 80 - GRID_TOL_DB
    assert -20 * np.log10(gain(11000.0)) >= 80 - GRID_TOL_DB
    y = signal.resample_poly(np.ones(n), r.up, r.down, window=r.lowpass.taps)
    assert len(y) == math.ceil(n * r.up / r.down) == round(n * r.rate_out_hz / r.rate_in_hz)


@pytest.mark.parametrize(
    "kwargs",
    [
        dict(rate_in_hz=48000, rate_out_hz=8000, passband_hz=4000),  # at the output Nyquist
        dict(rate_in_hz=8000, rate_out_hz=48000, passband_hz=4500),  # above the input Nyquist
        dict(rate_in_hz=48000, rate_out_hz=0, passband_hz=3000),
        dict(rate_in_hz=48000, rate_out_hz=8000, passband_hz=3000, stopband_hz=5001),
        dict(rate_in_hz=48000, rate_out_hz=8000, passband_hz=3000, max_denominator=0),
    ],
)
def test_resampler_rejects_bad_values(kwargs):
    with pytest.raises(ParameterError):
        design_resampler(**kwargs)


def test_library_prints_nothing(capsys):
    design_lowpass(48000.0, 3000.0, 4100.0)
    plan_decimation(1.2e6, 3000.0, NEIGHBOUR_833_EDGE, 144)
    design_resampler(48000.0, 16000.0, 3000.0)
    out = capsys.readouterr()
    assert out.out == "" and out.err == ""
