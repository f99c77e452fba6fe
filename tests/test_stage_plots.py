"""Per-stage spectra of a receiver run ([3/6]): arrays for test benches, files for people."""

from __future__ import annotations

import json

import numpy as np
import pytest

from iqsift import Receiver, SigMFWriter, make_channel

FS = 240e3


def am_capture(n_seconds=0.5):
    n = int(n_seconds * FS)
    t = np.arange(n) / FS
    x = 0.1 * (1 + 0.5 * np.cos(2 * np.pi * 1000 * t)) * np.exp(2j * np.pi * 30e3 * t)
    x += 1e-5 * (np.random.default_rng(0).standard_normal(n) + 1j * np.random.default_rng(1).standard_normal(n))
    return x.astype(np.complex64)


def test_receiver_exposes_stage_spectra_as_arrays():
    rx = Receiver(FS, make_channel(offset=30e3, bandwidth="6k"), center_hz=118e6, spectra=True)
    result = rx.run(samples=am_capture())
    assert list(result.spectra) == ["input", "channel", "detector", "audio"]
    inp, ch = result.spectra["input"], result.spectra["channel"]
    assert inp.units == "dBFS/Hz" and inp.name == "input"
    # input axis is absolute RF: the carrier peak sits at 118.03 MHz; after the front end it sits at 0 Hz
    assert inp.freqs_hz[np.argmax(inp.values_db)] == pytest.approx(118.03e6, abs=2 * (inp.freqs_hz[1] - inp.freqs_hz[0]))
    assert ch.freqs_hz[np.argmax(ch.values_db)] == pytest.approx(0.0, abs=2 * (ch.freqs_hz[1] - ch.freqs_hz[0]))
    # the carrier's power (-20 dBFS: amplitude 0.1) reads the same in the power-spectrum scaling of the channel
    # tap, summed over the window's main lobe (Welch 1967; Hann main lobe +-2 bins)
    spec = rx.spectra("spectrum")["channel"]
    k = int(np.argmax(spec.values_db))
    lobe = 10 * np.log10(np.sum(10 ** (spec.values_db[k - 3:k + 4] / 10)) / 1.5)  # Hann ENBW 1.5 bins
    assert lobe == pytest.approx(-20.0, abs=0.2)
    grams = rx.spectrogram_results()
    assert set(grams) == {"channel", "audio"}


def test_demod_spectra_folder(tmp_path, run_cli):
    with SigMFWriter(tmp_path / "c", FS, center_hz=118e6) as w:
        w.write(am_capture())
    status, out, err = run_cli("demod", tmp_path / "c.sigmf-meta", "--offset", "30k", "-o", tmp_path / "a.flac",
                               "--spectra", tmp_path / "sp", "--plot-format", "svg", "--quiet", "--json")
    assert status == 0, err
    files = sorted(p.name for p in (tmp_path / "sp").iterdir())
    for name in ("overview.svg", "1_input.svg", "2_channel.svg", "3_detector.svg", "4_audio.svg", "waveform.svg",
                 "spectrogram_channel.svg", "spectrogram_audio.svg", "2_channel.json", "spectrogram_audio.json"):
        assert name in files, name
    assert not any(f.endswith(".part") or ".part." in f for f in files)
    data = json.loads((tmp_path / "sp" / "2_channel.json").read_text())
    assert data["units"] == "dBFS/Hz" and len(data["freqs_hz"]) == len(data["values_db"])
    assert (tmp_path / "sp" / "overview.svg").read_text().lstrip().startswith(("<?xml", "<svg"))


def test_bad_plot_format(run_cli, tmp_path):
    status, out, err = run_cli("demod", tmp_path / "x.sigmf-meta", "--offset", "0", "-o", tmp_path / "a.wav",
                               "--plot-format", "gif")
    assert status == 2 and "--plot-format" in err


def test_polyphase_engine_has_a_tap_after_each_decimation_stage():
    # [3/6]: a spectrum after each decimation stage (the time-domain engine has separate stages).
    rx = Receiver(FS, make_channel(offset=30e3, bandwidth="6k"), engine="polyphase", spectra=True)
    result = rx.run(samples=am_capture())
    stages = [name for name in result.spectra if name.startswith("stage")]
    assert len(stages) == len(rx.design.polyphase_plan.stages) >= 1
    last = result.spectra[stages[-1]]
    assert last.rate_hz == rx.design.channel_rate_hz
    # after the first stage the passband centre sits at 0 Hz: the carrier line is the strongest bin
    first = result.spectra[stages[0]]
    assert abs(first.freqs_hz[np.argmax(first.values_db)]) < 3 * (first.freqs_hz[1] - first.freqs_hz[0])
