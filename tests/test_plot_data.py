"""Tests of iqsift.plot_data: the JSON text is the standard library's.

External reference: Python's :func:`json.dumps` with ``indent=1, allow_nan=False`` (the
``json`` module of the standard library, RFC 8259 text) on the same data written as plain
lists, numbers and ``None``.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from iqsift.errors import ParameterError
from iqsift.plot_data import plot_data_json, save_plot_data
from iqsift.spectra import SpectrogramAccumulator, WelchAccumulator


def _plain(values):
    """Nested lists of Python numbers with NaN and ±inf as None: what json.dumps is given."""
    if isinstance(values, list):
        return [_plain(v) for v in values]
    if isinstance(values, float) and not np.isfinite(values):
        return None
    return values


def test_numbers_and_nesting_match_json_dumps():
    rng = np.random.default_rng(3)
    x = rng.standard_normal(50) * 10.0 ** rng.integers(-30, 30, 50)
    x[[3, 7, 11]] = [np.nan, np.inf, -np.inf]
    grid = np.round(rng.standard_normal((4, 6)), 1)
    data = {
        "floats": x, "float32": x.astype(np.float32), "ints": np.arange(-3, 9), "uint8": np.arange(5, dtype=np.uint8),
        "bools": np.array([True, False]), "grid": grid, "empty": np.zeros(0), "empty2": np.zeros((0, 3)),
        "rows_empty": np.zeros((2, 0)), "scalar0d": np.array(2.5), "np_scalars": [np.float32(0.1), np.int64(7),
        np.bool_(True), np.float64(np.nan)], "text": "quotes \" and é", "none": None, "nested": {"a": [], "b": {}},
        "tuple": (1, 2.0, "x"), 5: Path("/tmp/x"), "strings": np.array(["a", "b"]),
    }
    # stdlib json: the same data as plain Python values
    plain = {
        "floats": _plain(x.tolist()), "float32": _plain(x.astype(np.float32).tolist()), "ints": list(range(-3, 9)),
        "uint8": list(range(5)), "bools": [True, False], "grid": grid.tolist(), "empty": [],
        "empty2": [], "rows_empty": [[], []], "scalar0d": 2.5, "np_scalars": [float(np.float32(0.1)), 7, True, None],
        "text": "quotes \" and é", "none": None, "nested": {"a": [], "b": {}}, "tuple": [1, 2.0, "x"], "5": "/tmp/x",
        "strings": ["a", "b"],
    }
    assert plot_data_json(data) == json.dumps(plain, indent=1, allow_nan=False)


def test_spectrum_and_spectrogram_match_json_dumps(tmp_path):
    rng = np.random.default_rng(4)
    x = rng.standard_normal(4096) + 1j * rng.standard_normal(4096)
    s = WelchAccumulator(48_000.0, nperseg=256, center_hz=1e6, name="input").feed(x).density()
    gram = SpectrogramAccumulator(48_000.0, nperseg=128, max_columns=8).feed(x).result()
    assert plot_data_json(s) == json.dumps(s.to_dict(), indent=1, allow_nan=False)
    expected = {"times_s": gram.times_s.tolist(), "freqs_hz": gram.freqs_hz.tolist(),
                "power_db": gram.power_db.tolist(), "units": gram.units}
    assert plot_data_json(gram) == json.dumps(expected, indent=1, allow_nan=False)
    p = save_plot_data({"stages": [s]}, tmp_path / "d.json")
    assert p.read_text() == json.dumps({"stages": [s.to_dict()]}, indent=1, allow_nan=False) + "\n"


def test_unwritable_values_refused():
    with pytest.raises(ParameterError, match="complex"):
        plot_data_json({"z": np.array([1j])})
    with pytest.raises(ParameterError, match="object"):
        plot_data_json([object()])
