"""Truth of a synthetic capture: the scenario resolved to the exact numbers the generator uses.

:func:`build_truth` states every parameter of every channel as resolved numbers
(absolute and relative frequencies, levels, noise densities, message and fading
records with their rates, filter designs and random-stream keys). The
:class:`~iqsift.synth.Synthesizer` renders from this document, not from the
scenario, so the truth file cannot drift from the samples.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import scipy

from .. import __version__
from ..errors import ParameterError
from .scenario import ChannelSpec, Scenario, noise_transition_hz, signal_band
from .sources import (
    FILE_INTERP_HALF,
    FIR_ATTEN_DB,
    FRAC_PHASES,
    INTERP_ATTEN_DB,
    INTERP_HALF,
    PASS_FRACTION,
    band_fir,
    file_filtered,
    message_transition_hz,
    noise_filter,
    noise_gain,
    rate_ratio,
    rng_for,
)

__all__ = ["build_truth"]


def _message_record(spec: ChannelSpec, rate: float, entropy: int) -> dict[str, Any]:
    msg = spec.message
    analytic = spec.mode in ("usb", "lsb")
    if msg.kind in ("tone", "tones"):
        amps = list(msg.amplitudes)
        return {
            "kind": msg.kind,
            "frequencies_hz": list(msg.freqs_hz),
            "amplitudes": amps,
            "phases_deg": list(msg.phases_deg),
            "normalisation": "amplitudes scaled so that sum(|amplitudes|) = 1: peak 1 (at t = 0 with all phases 0)",
            "rms": math.sqrt(sum(a * a for a in amps) / 2),
            "peak": 1.0,
            "formula": "msg(n) = sum_i a_i cos(2 pi f_i n / rate + phase_i)",
        }
    transition = message_transition_hz(msg.low_hz, msg.high_hz)
    ratio = rate_ratio(rate, (msg.high_hz + transition / 2) / PASS_FRACTION)
    rec: dict[str, Any] = {
        "kind": msg.kind,
        "low_hz": msg.low_hz,
        "high_hz": msg.high_hz,
        "transition_hz": transition,
        "rate_hz": rate / ratio,
        "ratio": ratio,
        "interpolation": f"Kaiser-windowed sinc, {2 * INTERP_HALF} taps, {INTERP_ATTEN_DB:g} dB design, "
                         f"from rate_hz up by {ratio}",
    }
    if msg.kind == "noise":
        h = noise_filter(rec, analytic)
        rec.update({
            "rms": msg.rms,
            "normalisation": "Gaussian, scaled to the stated rms; not clipped",
            "filter": {"taps": int(h.shape[0]), "design": f"Kaiser window, {FIR_ATTEN_DB:g} dB, "
                       + ("one-sided complex band-pass (analytic)" if analytic else "real band-pass")},
            "white_sigma": msg.rms / math.sqrt(noise_gain(h, analytic)),
            "warm_up_samples": int(h.shape[0] - 1),
            "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 0]},
        })
        return rec
    assert msg.resolved_path is not None  # the parser resolves the path of every file message
    from ..captures.integrity import sha256_of_file

    sha = sha256_of_file(msg.resolved_path)
    rec.update({"path": msg.path, "resolved_path": msg.resolved_path, "sha256": sha, "loop": msg.loop})
    y, first, file_rate, frames = file_filtered(msg.resolved_path, sha, msg.low_hz, msg.high_hz, transition,
                                                analytic, msg.loop)
    real = y.real if analytic else y
    peak = float(np.max(np.abs(real)))
    if not peak > 0:
        raise ParameterError(f"{msg.path}: the audio file is silent in {msg.low_hz:g}..{msg.high_hz:g} Hz")
    span = real[-first:-first + frames]
    taps = band_fir(file_rate, msg.low_hz, msg.high_hz, transition, one_sided=analytic).shape[0]
    rec.update({
        "file_rate_hz": file_rate,
        "file_samples": frames,
        "scale": 1.0 / peak,
        "peak": 1.0,
        "rms": float(np.sqrt(np.mean((span / peak) ** 2))),
        "filter": {"taps": int(taps), "design": f"Kaiser window, {FIR_ATTEN_DB:g} dB, "
                   + ("one-sided complex band-pass (analytic)" if analytic else
                      "real band-pass" if msg.low_hz > 0 else "low-pass") + ", at the file's rate, delay removed"
                   + (", applied circularly (seamless loop)" if msg.loop else ", full output kept (no truncation)")},
        "resampling": f"Kaiser-windowed sinc, {2 * FILE_INTERP_HALF} taps, {INTERP_ATTEN_DB:g} dB design, "
                      f"{FRAC_PHASES}-phase table with linear interpolation, file_rate_hz -> rate_hz",
        "normalisation": "mono mix, band-limited, scaled so the peak of the band-limited samples at the file's rate "
                         "is 1 (values between samples may exceed it slightly); rms over the file's span",
    })
    return rec


def _fading_record(spec: ChannelSpec, entropy: int, rate: float) -> dict[str, Any] | None:
    fad = spec.fading
    if fad is None:
        return None
    ratio = rate_ratio(rate, fad.doppler_hz / PASS_FRACTION)
    rng = rng_for(entropy, (spec.index + 1, 1))
    theta = float(rng.uniform(-np.pi, np.pi))
    phases = rng.uniform(-np.pi, np.pi, fad.paths)
    return {
        "kind": fad.kind,
        "doppler_hz": fad.doppler_hz,
        "k_db": fad.k_db,
        "paths": fad.paths,
        "model": "Clarke sum of equal-power plane waves: g(t) = paths^-1/2 sum_n exp(j(2 pi doppler cos(a_n) t + "
                 "p_n)), a_n = (2 pi n + theta)/paths"
                 + ("; Rician: sqrt(K/(K+1)) + sqrt(1/(K+1)) g(t), steady line-of-sight, phase 0" if fad.kind ==
                    "rician" else ""),
        "theta_rad": theta,
        "phases_rad": [float(p) for p in phases],
        "mean_power": 1.0,
        "rate_hz": rate / ratio,
        "ratio": ratio,
        "evaluation": "sum evaluated at rate_hz, interpolated up by ratio (Kaiser-windowed sinc, 32 taps, "
                      f"{INTERP_ATTEN_DB:g} dB design)",
        "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 1]},
    }


def _level_scale(spec: ChannelSpec, msg_rms: float) -> tuple[float, float]:
    """(baseband scale A, expected average power while on) for a channel."""
    power = 10 ** (spec.level_dbfs / 10)
    if spec.mode == "am":
        assert spec.depth is not None  # the parser gives every am channel a depth (default 0.5)
        return math.sqrt(power), power * (1 + spec.depth ** 2 * msg_rms ** 2)
    if spec.mode == "dsb":
        return math.sqrt(power) / msg_rms, power
    return math.sqrt(power) / (math.sqrt(2) * msg_rms), power


def _channel_record(spec: ChannelSpec, scen: Scenario) -> dict[str, Any]:
    rate = scen.sample_rate_hz
    center = scen.center_hz
    entropy = scen.seed
    message = _message_record(spec, rate, entropy)
    scale, expected = _level_scale(spec, message["rms"])
    carrier_rel = spec.offset_hz + spec.carrier_offset_hz
    lo, hi = signal_band(spec.mode, spec.bandwidth_hz)
    drift = spec.drift_hz_per_s * scen.duration_s
    band_lo = carrier_rel + lo + min(0.0, drift)
    band_hi = carrier_rel + hi + max(0.0, drift)

    def absolute(rel: float) -> float | None:
        return None if center is None else center + rel

    noise = None
    if spec.channel_noise is not None:
        cnr_db, noise_bandwidth = spec.channel_noise
        power = 10 ** (spec.level_dbfs / 10)
        density = power / (10 ** (cnr_db / 10) * noise_bandwidth)
        nlo, nhi = signal_band(spec.mode, noise_bandwidth)
        transition = noise_transition_hz(noise_bandwidth)
        ratio = rate_ratio(rate, (max(abs(nlo), abs(nhi)) + transition / 2) / PASS_FRACTION)
        noise_rate = rate / ratio
        taps = band_fir(noise_rate, nlo, nhi, transition, one_sided=True).shape[0]
        noise = {
            "cnr_db": cnr_db,
            "bandwidth_hz": noise_bandwidth,
            "band_hz": [nlo, nhi],
            "band_meaning": "relative to the (drifting) carrier; flat density inside, Kaiser transitions "
                            "transition_hz wide centred on the edges",
            "density_dbfs_per_hz": 10 * math.log10(density),
            "power_dbfs": 10 * math.log10(density * noise_bandwidth),
            "reference": "cnr_db = 10 log10(C / (N0 B)), C = carrier power (am) or average signal power",
            "rate_hz": noise_rate,
            "ratio": ratio,
            "transition_hz": transition,
            "taps": int(taps),
            "gated_or_faded": False,
            "rng": {"entropy": entropy, "spawn_key": [spec.index + 1, 2]},
        }
    bursts = [
        {"start_s": s, "end_s": e, "start_sample": int(round(s * rate)),
         "end_sample": min(int(round(e * rate)), scen.n_samples)}
        for s, e in spec.bursts
    ]
    return {
        "index": spec.index,
        "name": spec.name,
        "mode": spec.mode,
        "emission": spec.emission,
        "frequency_hz": absolute(spec.offset_hz),
        "offset_hz": spec.offset_hz,
        "carrier": {
            "frequency_hz": absolute(carrier_rel),
            "offset_hz": carrier_rel,
            "error_hz": spec.carrier_offset_hz,
            "drift_hz_per_s": spec.drift_hz_per_s,
            "phase_deg": spec.phase_deg,
            "formula": "phase(n) = 2 pi (offset_hz n/rate + drift_hz_per_s (n/rate)^2 / 2) + phase_deg",
            "suppressed": spec.mode != "am",
        },
        "level_dbfs": spec.level_dbfs,
        "level_meaning": "carrier power" if spec.mode == "am" else "average signal power",
        "depth": spec.depth,
        "bandwidth_hz": spec.bandwidth_hz,
        "band": {"lower_hz": absolute(band_lo), "upper_hz": absolute(band_hi),
                 "lower_offset_hz": band_lo, "upper_offset_hz": band_hi},
        "baseband_scale": scale,
        "baseband": {"am": "A (1 + depth msg)", "dsb": "A msg", "usb": "A (msg + j H{msg})",
                     "lsb": "A (msg - j H{msg})"}[spec.mode],
        "expected_power_dbfs": 10 * math.log10(expected),
        "message": message,
        "fading": _fading_record(spec, entropy, rate),
        "bursts": bursts,
        "burst_edge_s": spec.burst_edge_s if spec.bursts else None,
        "noise": noise,
    }


def build_truth(scenario: Scenario) -> dict[str, Any]:
    """The truth document of a scenario (``clipped_components`` and ``output`` stay None until written)."""
    rate = scenario.sample_rate_hz
    noise = None
    if scenario.noise_floor_dbfs_per_hz is not None:
        noise = {
            "density_dbfs_per_hz": scenario.noise_floor_dbfs_per_hz,
            "power_dbfs": scenario.noise_floor_dbfs_per_hz + 10 * math.log10(rate),
            "kind": "complex white Gaussian over the whole band, I and Q independent, equal power",
            "rng": {"entropy": scenario.seed, "spawn_key": [0]},
        }
    return {
        "generator": "iqsift.synth",
        "iqsift_version": __version__,
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "scenario": Path(scenario.source).name,
        "description": scenario.description,
        "sample_rate_hz": rate,
        "center_hz": scenario.center_hz,
        "duration_s": scenario.duration_s,
        "samples": scenario.n_samples,
        "seed": scenario.seed,
        "datatype": scenario.datatype,
        "full_scale": "complex magnitude 1.0 = 0 dBFS; power dBFS = 10 log10(mean |x|^2)",
        "noise": noise,
        "channels": [_channel_record(ch, scenario) for ch in scenario.channels],
        "clipped_components": None,
        "output": None,
    }

