"""Many channels in one pass ([5/6]): extract == demod per channel, refusal by name, CLI outputs."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from iqsift import Receiver, SigMFWriter, make_channel
from iqsift.extractor import Extractor

from .test_receiver import AUDIO, am, message, message_snr_db

FS = 480e3


def make_capture(n_seconds=1.0, seed=0):
    rng = np.random.default_rng(seed)
    n = int(n_seconds * FS)
    t = np.arange(n) / FS
    x = 1e-5 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    channels = []
    for i, (off, amp) in enumerate([(-150e3, 0.05), (-75e3 + 3.3, 0.02), (25e3, 0.1), (25e3 + 25000 / 3, 0.001),
                                    (120e3 - 7.1, 0.03)]):
        x = x + am(t, off, amp, 0.8, phase=i)
        channels.append(make_channel(offset=off, bandwidth="6k", name=f"ch{i}"))
    return x.astype(np.complex64), channels


def test_every_channel_recovered_including_weak_beside_strong():
    # [5/6]: every channel to the quality bars of [2/6] (>= 50 dB clean, >= 30 dB for the weak channel
    # 40 dB below its 8.33 kHz neighbour), and each channel's extract audio matches its demod audio.
    x, channels = make_capture()
    ex = Extractor(FS, channels, analyze=False)
    audio = [[] for _ in channels]
    for block in np.array_split(x, 7):
        for i, a in enumerate(ex.process(block)):
            audio[i].append(a)
    for i, a in enumerate(ex.flush()):
        audio[i].append(a)
    for i, ch in enumerate(channels):
        got = np.concatenate(audio[i])
        ref = message(np.arange(got.size) / AUDIO)
        snr = message_snr_db(got, ref)
        assert snr >= (30 if ch.name == "ch3" else 50), (ch.name, snr)
        alone = Receiver(FS, ch).run(samples=x).audio
        assert abs(message_snr_db(alone, ref) - snr) <= 0.5
        np.testing.assert_allclose(got, alone, atol=1e-5)


def test_channels_outside_the_band_are_refused_by_name_before_work():
    _, channels = make_capture(0.01)
    bad = channels + [make_channel(offset=238e3, bandwidth="6k", name="edge"),
                      make_channel(offset=-300e3, bandwidth="6k", name="outside")]
    with pytest.raises(ValueError) as info:
        Extractor(FS, bad)
    text = str(info.value)
    assert "'edge'" in text and "'outside'" in text and "2 channel(s) refused" in text


def test_extract_cli(tmp_path, run_cli):
    x, channels = make_capture(0.6)
    with SigMFWriter(tmp_path / "cap", FS, center_hz=130e6, datatype="ci16_le") as w:
        w.write(x * 4)
    plan = tmp_path / "plan.toml"
    plan.write_text(
        '[defaults]\nemission = "6K00A3E"\n'
        '[[channel]]\nname = "east/../gate"\nfreq = "129.85M"\n'
        '[[channel]]\nname = "west"\noffset = "25k"\nmode = "coherent"\n'
    )
    status, out, err = run_cli("extract", tmp_path / "cap.sigmf-meta", "--plan", plan, "--out-dir", tmp_path / "out",
                               "--baseband", "--json", "--quiet")
    assert status == 0, err
    result = json.loads(out)
    names = sorted(p.name for p in (tmp_path / "out").iterdir())
    assert "report.json" in names and "west.wav" in names and "west.sigmf-meta" in names
    assert not any("/" in n or n.startswith("..") for n in names)  # names sanitised
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    assert [c["channel"]["name"] for c in report["channels"]] == ["east/../gate", "west"]
    west = report["channels"][1]
    assert west["carrier"]["frequency_hz"] == pytest.approx(130.025e6, abs=1.0)
    assert west["design"]["engine"] == "fft"
    assert result["filter_bank"]["channels"] == 2
    # a second run without --force refuses and leaves everything as it was
    before = (tmp_path / "out" / "report.json").read_bytes()
    status, out, err = run_cli("extract", tmp_path / "cap.sigmf-meta", "--plan", plan, "--out-dir", tmp_path / "out",
                               "--quiet")
    assert status == 2 and "exists" in err and len(err.strip().splitlines()) == 1
    assert (tmp_path / "out" / "report.json").read_bytes() == before
    # the text summary gives the streaming time and the whole run's, plots included ([2/6] item 13)
    status, out, err = run_cli("extract", tmp_path / "cap.sigmf-meta", "--plan", plan, "--out-dir", tmp_path / "o2",
                               "--spectra", "--quiet")
    assert status == 0, err
    streaming, total = (float(v) for v in re.search(r"; ([\d.]+) s streaming the channels, ([\d.]+) s in all", out).groups())
    assert 0 < streaming < total


def test_extract_cli_refuses_bad_channel_without_output(tmp_path, run_cli):
    x, _ = make_capture(0.05)
    with SigMFWriter(tmp_path / "cap", FS, center_hz=130e6) as w:
        w.write(x)
    plan = tmp_path / "plan.toml"
    plan.write_text('[[channel]]\nname = "far"\nfreq = "131.0M"\nbandwidth = "6k"\n')
    status, out, err = run_cli("extract", tmp_path / "cap.sigmf-meta", "--plan", plan, "--out-dir", tmp_path / "o")
    assert status == 2 and "'far'" in err and "outside the capture band" in err
    assert not (tmp_path / "o").exists()
    plan.write_text('[[channel]]\nname = "x"\nfreq = "130M"\nbandwidth = "6q"\n')
    status, out, err = run_cli("extract", tmp_path / "cap.sigmf-meta", "--plan", plan, "--out-dir", tmp_path / "o")
    assert status == 2 and "plan.toml" in err and "bandwidth" in err and len(err.strip().splitlines()) == 1


def test_batched_and_single_channels_mix_in_one_extraction():
    # Envelope channels with identical chains run as one batch; others (coherent, another width) alone.
    # Every channel still equals its own demod.
    x, channels = make_capture(0.6)
    mixed = [channels[0], channels[1].with_(mode="coherent"), channels[2], channels[4].with_(bandwidth_hz=8000.0)]
    ex = Extractor(FS, mixed, analyze=False)
    assert [b.members for b in ex.batches] == [[0, 2]] and ex.singles == [1, 3]
    audio = [[] for _ in mixed]
    for block in np.array_split(x, 3):
        for i, a in enumerate(ex.process(block)):
            audio[i].append(a)
    for i, a in enumerate(ex.flush()):
        audio[i].append(a)
    for i, ch in enumerate(mixed):
        # the mixed bank has another FFT size than a lone channel's: single-precision round-off, not logic
        np.testing.assert_allclose(np.concatenate(audio[i]), Receiver(FS, ch).run(samples=x).audio, atol=2e-4)
