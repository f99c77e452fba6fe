"""Tests of iqsift.plots: files written (format signatures), lazy import, dB ranges, panels.

External references:
- PNG signature: the 8 bytes 89 50 4E 47 0D 0A 1A 0A (ISO/IEC 15948 / W3C PNG spec, §5.2).
- SVG: the document root is an ``svg`` element in the namespace http://www.w3.org/2000/svg
  (W3C SVG 1.1, §5.1).
- A full-scale sine has mean square 1/2 → −3.01 dBFS with power = 10·log10(mean x²)
  (project full-scale convention; Parseval).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from iqsift import plots
from iqsift.errors import OutputExistsError, ParameterError
from iqsift.spectra import SpectrogramAccumulator, Spectrum, WelchAccumulator, _atomic_write

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
TITLE = "synthetic capture test-07 · channel ALPHA 5.000 kHz offset AM"


def _stage_spectra():
    """Three tap points of an invented chain: complex input (with RF centre), baseband, real audio."""
    rng = np.random.default_rng(1)
    fs = 96_000.0
    n = 1 << 15
    t = np.arange(n) / fs
    x = 0.3 * np.exp(2j * np.pi * 5e3 * t) + 1e-3 * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    s_in = WelchAccumulator(fs, nperseg=1024, center_hz=7.1e6, name="input").feed(x).density()
    bb = x * np.exp(-2j * np.pi * 5e3 * t)
    s_bb = WelchAccumulator(fs, nperseg=1024, name="mixer").feed(bb).density()
    audio = 0.5 * np.sin(2 * np.pi * 1e3 * t[: n // 2]) + 1e-4 * rng.standard_normal(n // 2)
    s_au = WelchAccumulator(fs / 2, nperseg=512, name="audio").feed(audio).density()
    return [s_in, s_bb, s_au]


def _check_file(path, fmt):
    data = open(path, "rb").read()
    assert len(data) > 1000
    if fmt == "png":
        assert data[:8] == PNG_MAGIC
    else:
        root = ET.fromstring(data)
        assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert [p for p in os.listdir(os.path.dirname(path)) if p.endswith(".part")] == []


def test_import_does_not_import_matplotlib():
    code = "import sys, iqsift.plots; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


@pytest.mark.parametrize("fmt", ["png", "svg"])
def test_writers_produce_valid_files(tmp_path, fmt):
    spectra = _stage_spectra()
    overlay = {"passband_hz": 3e3, "stopband_hz": 6e3,
               "response": (np.linspace(-48e3, 48e3, 501), -80 * (np.abs(np.linspace(-1, 1, 501)) > 0.1))}
    p1 = plots.plot_stage_spectrum(spectra[1], tmp_path / f"stage.{fmt}", title=TITLE, filter_overlay=overlay,
                                   channel_band=(-3e3, 3e3), fmt=fmt)
    p2 = plots.plot_overview(spectra, tmp_path / f"overview.{fmt}", title=TITLE,
                             overlays={"mixer": overlay}, channel_band={"input": (2e3, 8e3), "mixer": (-3e3, 3e3)}, fmt=fmt)
    acc = SpectrogramAccumulator(48_000.0, 256, max_columns=40)
    acc.feed(np.random.default_rng(2).standard_normal(48_000))
    r = acc.result()
    p3 = plots.plot_spectrogram(r.times_s, r.freqs_hz, r.power_db, tmp_path / f"sg.{fmt}", title=TITLE, fmt=fmt)
    audio = np.sin(2 * np.pi * 440 * np.arange(100_000) / 16_000)
    p4 = plots.plot_waveform(audio, 16_000, tmp_path / f"wave.{fmt}", title=TITLE, fmt=fmt)
    for p in (p1, p2, p3, p4):
        _check_file(p, fmt)


def test_db_range_floor_and_peak():
    # Synthetic spectrum: noise floor at −100 dB (±1 dB ripple), one tone at −20 dB.
    rng = np.random.default_rng(3)
    v = -100 + rng.uniform(-1, 1, 2048)
    v[1000:1003] = [-30, -20, -30]
    lo, hi = plots.db_range(v)  # defaults: 10th percentile floor − 10 dB, peak + 6 dB, rounded to 10 dB
    floor = np.percentile(v, 10)
    assert floor - 20 < lo <= floor - 10
    assert -20 + 6 <= hi < -20 + 16
    assert lo % 10 == 0 and hi % 10 == 0
    assert (lo, hi) == (-120.0, -10.0)


def test_db_range_span_limits():
    # digital silence (−300 dB) must not squash the picture: span capped
    v = np.concatenate([np.full(900, -300.0), np.full(100, -40.0)])
    lo, hi = plots.db_range(v, max_span_db=140)
    assert hi == -30 and hi - lo == 140
    # a flat spectrum still gets a readable span
    lo, hi = plots.db_range(np.full(64, -90.0), min_span_db=30)
    assert hi - lo == 30 and lo <= -90 <= hi
    with pytest.raises(ParameterError, match="finite"):
        plots.db_range([np.nan, -np.inf])


def test_overview_has_one_panel_per_spectrum_and_no_empty_panel():
    spectra = _stage_spectra()
    resp = (np.linspace(-48e3, 48e3, 101), np.zeros(101))
    fig, panels = plots._build_overview_figure(
        spectra, title=TITLE, overlays=[None, {"passband_hz": 3e3, "response": resp}, None]
    )
    assert len(panels) == len(spectra)
    assert len(fig.axes) == len(spectra) + 1  # plus the one filter-response axis
    for ax in fig.axes:
        lines = [ln for ln in ax.get_lines() if np.size(ln.get_xdata()) > 2]
        assert lines, f"empty panel {ax.get_title(loc='left')!r}"
    # same dB span on every panel, each topped at its own peak
    spans = {round(ax.get_ylim()[1] - ax.get_ylim()[0], 6) for ax in panels}
    assert len(spans) == 1
    for ax, s in zip(panels, spectra):
        assert ax.get_ylim()[1] >= np.max(s.values_db)
        assert ax.get_title(loc="left") == s.name
    # input panel: axis relative to the RF centre, named in the label; the tone sits at +5 kHz
    x = panels[0].get_lines()[0].get_xdata()
    assert "7.100000 MHz" in panels[0].get_xlabel() and "[kHz]" in panels[0].get_xlabel()
    assert x[np.argmax(spectra[0].values_db)] == pytest.approx(5.0, abs=0.2)
    assert panels[2].get_ylabel() == "Level [dBFS/Hz]"


def test_overlay_edges_and_shading():
    # Two-sided: a scalar passband gives edges at ±f; one-sided (real audio): only +f, nothing at DC.
    spectra = _stage_spectra()
    fig, panels = plots._build_overview_figure(
        [spectra[1], spectra[2]], title=TITLE, overlays={"passband_hz": 3e3, "stopband_hz": 6e3}
    )
    def edges(ax):
        return sorted(float(ln.get_xdata()[0]) for ln in ax.get_lines() if ln.get_linestyle() == "--")
    assert edges(panels[0]) == [-3.0, 3.0]
    assert edges(panels[1]) == [3.0]
    shaded = [p for p in panels[1].patches]
    assert len(shaded) == 1  # one-sided: stopband only above +6 kHz
    legend_texts = [t.get_text() for t in fig.legends[0].get_texts()]
    assert legend_texts == ["measured", "passband edge", "stopband"]


def test_waveform_level_trace_and_minmax():
    # Full-scale sine → RMS level −3.01 dBFS (mean square 1/2); long audio uses min/max per column.
    fs = 8000.0
    audio = np.sin(2 * np.pi * 250 * np.arange(int(30 * fs)) / fs)
    fig = plots._build_waveform_figure(audio, fs, title=TITLE)
    ax, axl = fig.axes
    level = axl.get_lines()[0].get_ydata()
    assert np.all(np.abs(np.asarray(level)[5:-5] + 3.0103) < 0.05)
    assert ax.collections, "long audio should be drawn as a min/max band"
    mn, mx, sums, counts, _ = plots._columns(np.arange(10.0), 3)
    np.testing.assert_array_equal(mn, [0, 4, 8])
    np.testing.assert_array_equal(mx, [3, 7, 9])
    np.testing.assert_array_equal(counts, [4, 4, 2])
    np.testing.assert_array_equal(sums, [14, 126, 145])


def test_single_column_spectrogram_and_shape_check(tmp_path):
    acc = SpectrogramAccumulator(8000.0, 64).feed(np.ones(64, np.complex64))
    r = acc.result()
    assert r.power_db.shape == (64, 1)
    _check_file(plots.plot_spectrogram(*r[:3], tmp_path / "one.png", title=TITLE), "png")
    with pytest.raises(ParameterError, match="shape"):
        plots.plot_spectrogram(r.times_s, r.freqs_hz, r.power_db.T, tmp_path / "bad.png", title=TITLE)


def test_argument_checks(tmp_path):
    s = _stage_spectra()[1]
    with pytest.raises(ParameterError, match="fmt"):
        plots.plot_stage_spectrum(s, tmp_path / "a.png", title=TITLE, fmt="jpg")
    with pytest.raises(ParameterError, match="svg"):
        plots.plot_stage_spectrum(s, tmp_path / "a.png", title=TITLE, fmt="svg")
    with pytest.raises(ParameterError, match="title"):
        plots.plot_stage_spectrum(s, tmp_path / "a.png", title=" ")
    with pytest.raises(ParameterError, match="nothing to plot"):
        plots.plot_overview([], tmp_path / "o.png", title=TITLE)
    with pytest.raises(ParameterError, match="match no spectrum"):
        plots.plot_overview([s], tmp_path / "o.png", title=TITLE, overlays={"nosuch": {"passband_hz": 1}})
    with pytest.raises(ParameterError, match="unknown keys"):
        plots.plot_stage_spectrum(s, tmp_path / "a.png", title=TITLE, filter_overlay={"pass": 1})
    with pytest.raises(ParameterError, match="audio"):
        plots.plot_waveform(np.zeros((2, 10)), 8000, tmp_path / "w.png", title=TITLE)
    with pytest.raises(ParameterError, match="rate_hz"):
        plots.plot_waveform(np.zeros(10), 0, tmp_path / "w.png", title=TITLE)
    assert os.listdir(tmp_path) == []


def test_atomic_writes_and_force(tmp_path):
    s = _stage_spectra()[2]
    p = plots.plot_stage_spectrum(s, tmp_path / "a.png", title=TITLE)
    before = open(p, "rb").read()
    with pytest.raises(OutputExistsError):
        plots.plot_stage_spectrum(s, p, title=TITLE, force=False)
    assert open(p, "rb").read() == before

    def boom(fh):
        fh.write(b"partial")
        raise RuntimeError("disk full")

    with pytest.raises(RuntimeError):
        _atomic_write(tmp_path / "b.png", boom, binary=True)
    assert sorted(os.listdir(tmp_path)) == ["a.png"]  # nothing half-written, no temp left


def test_save_plot_data_json_and_csv(tmp_path):
    spectra = _stage_spectra()
    p = plots.save_plot_data({"title": TITLE, "stages": spectra, "gain_db": np.float32(-np.inf)}, tmp_path / "d.json")
    back = json.load(open(p))
    assert back["gain_db"] is None and back["title"] == TITLE
    assert [st["name"] for st in back["stages"]] == ["input", "mixer", "audio"]
    np.testing.assert_allclose(back["stages"][1]["values_db"], spectra[1].values_db)
    q = plots.save_plot_data(spectra[2], tmp_path / "a.csv")
    arr = np.loadtxt(q, delimiter=",", skiprows=1)
    np.testing.assert_allclose(arr[:, 0], spectra[2].freqs_hz)
    r = plots.save_plot_data({"t_s": np.arange(3) / 10, "level_dbfs": [-1.5, -2.0, -3.25]}, tmp_path / "l.csv")
    assert open(r).read().splitlines() == ["t_s,level_dbfs", "0,-1.5", "0.1,-2", "0.2,-3.25"]
    with pytest.raises(ParameterError, match="equal lengths"):
        plots.save_plot_data({"a": [1, 2], "b": [1]}, tmp_path / "x.csv")
    with pytest.raises(ParameterError, match="suffix"):
        plots.save_plot_data({"a": 1}, tmp_path / "x.txt")
    assert isinstance(spectra[0], Spectrum)
