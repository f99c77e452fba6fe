"""Levels and measurements leave the front end's warm-up out ([2/6] item 2).

A channel's level is the mean power of its baseband (DESIGN.md: 10·log10(mean |x|²)). The first output
samples of any FIR front end are computed partly from the zeros before the capture starts; a strong
neighbour switched on at t = 0 then rings through the channel filter for one filter length. Reference:
the steady-state mean power of the same baseband, measured here with numpy after the first 50 ms.
"""

from __future__ import annotations

import numpy as np
import pytest

from iqsift import Receiver, make_channel

FS = 240_000.0


def neighbour_capture(seconds: float, wanted_dbfs: float | None) -> np.ndarray:
    t = np.arange(int(FS * seconds)) / FS
    x = 10 ** (-10 / 20) * np.exp(2j * np.pi * (25e3 / 3) * t)  # a -10 dBFS carrier one 8.33 kHz channel away
    if wanted_dbfs is not None:
        x = x + 10 ** (wanted_dbfs / 20) * np.exp(2j * np.pi * 37.0 * t)
    return x.astype(np.complex64)


@pytest.mark.parametrize("engine", ["fft", "polyphase"])
@pytest.mark.parametrize("seconds", [0.3, 1.0])
def test_level_of_an_empty_channel_beside_a_strong_neighbour_is_its_steady_state(engine, seconds):
    rx = Receiver(FS, make_channel(offset=0, emission="6K00A3E"), engine=engine)
    baseband: list[np.ndarray] = []
    rx.on_baseband(baseband.append)
    level = rx.run(samples=neighbour_capture(seconds, None)).report.channel["level_dbfs"]
    b = np.concatenate(baseband)
    steady = 10 * np.log10(np.mean(np.abs(b[int(0.05 * rx.design.channel_rate_hz):]) ** 2))
    # before: -69.2 dBFS for a steady -96.4 (fft, 1 s): the start-up transient counted
    assert level == pytest.approx(steady, abs=0.3)


@pytest.mark.parametrize("engine", ["fft", "polyphase"])
def test_a_weak_channel_beside_a_strong_neighbour_reads_its_true_level(engine):
    rx = Receiver(FS, make_channel(offset=0, emission="6K00A3E"), engine=engine).analyze()
    report = rx.run(samples=neighbour_capture(1.0, -60.0)).report
    assert report.channel["level_dbfs"] == pytest.approx(-60.0, abs=0.02)  # before: 0.74 dB high
    assert report.analysis is not None and report.analysis.carrier is not None
    assert report.analysis.carrier.level_dbfs == pytest.approx(-60.0, abs=0.05)


def test_warm_up_is_the_span_of_the_front_end_filters():
    """ceil(L / D): L the input samples a channel-rate output depends on, D the decimation."""
    d = Receiver(FS, make_channel(offset=0, emission="6K00A3E"), engine="polyphase").design
    span = sum((s.lowpass.num_taps - 1) * int(np.prod([p.down for p in d.plan.stages[: s.index]]))
               for s in d.plan.stages)
    assert d.settle_samples == -(-span // d.decimation)
    f = Receiver(FS, make_channel(offset=0, emission="6K00A3E")).design
    assert f.settle_samples == -(-(f.fft_prototype.num_taps - 1) // f.decimation)


def test_one_level_convention_for_real_and_complex_captures(tmp_path):
    # Issue [2/6] item 4: for one carrier in a real IF WAV, info/survey said -13.0 dBFS and measure/demod -9.95.
    # Convention: a full-scale sine reads 0 dBFS (AES17-2015, its definition of "decibels, full scale"; IEC 61606),
    # i.e. a real signal is measured by its analytic signal x + jH{x}; a complex carrier of magnitude A reads 20 log A.
    import soundfile

    from iqsift.jobs import info_file, measure_file, survey_file

    rate, amp = 48_000, 0.5
    t = np.arange(2 * rate) / rate
    noise = 1e-4 * np.random.default_rng(4).standard_normal(t.size)
    real = amp * np.cos(2 * np.pi * 12_000 * t) + noise
    soundfile.write(tmp_path / "if.wav", real.astype(np.float32), rate, subtype="FLOAT")
    cplx = amp * np.exp(2j * np.pi * 12_000 * t) + noise
    np.stack([cplx.real, cplx.imag], 1).astype("<f4").tofile(tmp_path / "iq.raw")
    expected = 20 * np.log10(amp)  # -6.02 dBFS
    for path, opts in ((tmp_path / "if.wav", {}), (tmp_path / "iq.raw", {"format": "cf32_le", "rate": 48_000})):
        info = info_file(path, **opts).to_dict()
        survey = survey_file(path, **opts).to_dict()
        measured = measure_file(path, make_channel(offset=12_000, emission="6K00A3E"), **opts).to_dict()
        levels = {
            "info rms": info["stats"]["rms_dbfs"],
            "survey": survey["emissions"][0]["level_dbfs"],
            "measure channel": measured["channel"]["level_dbfs"],
            "measure carrier": measured["carrier"]["level_dbfs"],
        }
        for what, level in levels.items():
            assert level == pytest.approx(expected, abs=0.05), (path.name, what, levels)
