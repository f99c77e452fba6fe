"""The data behind a plot, written as JSON or CSV (:func:`save_plot_data`).

The JSON text is exactly what ``json.dumps(data, indent=1, allow_nan=False)`` writes
for the same data with numpy arrays as lists, numpy scalars as Python numbers and
non-finite floats as ``null``; it is produced without the standard library's
pure-Python indenting encoder (``json`` uses its C encoder only without ``indent``),
which visits every number of a spectrum one call at a time. Each numeric array is
instead converted in one pass (:meth:`numpy.ndarray.tolist`, a finiteness mask) and
its numbers joined as ``repr`` text, the form :mod:`json` itself writes.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from .captures.atomic import write_atomically
from .errors import ParameterError
from .spectra import SpectrogramResult, Spectrum

__all__ = ["plot_data_json", "save_plot_data"]


def _joined(items: Any, level: int, out: list[str]) -> None:
    """A non-empty JSON array of ready-made item texts, laid out as ``json.dumps(indent=1)`` does."""
    inner = "\n" + " " * (level + 1)
    out.append("[" + inner)
    out.append(("," + inner).join(items))
    out.append("\n" + " " * level + "]")


def _array(arr: np.ndarray, level: int, out: list[str]) -> None:
    if arr.ndim == 0:
        _value(arr.item(), level, out)
    elif arr.size == 0 and arr.ndim == 1:
        out.append("[]")
    elif arr.ndim > 1:
        if arr.shape[0] == 0:
            out.append("[]")
            return
        inner = "\n" + " " * (level + 1)
        out.append("[" + inner)
        for i in range(arr.shape[0]):
            if i:
                out.append("," + inner)
            _array(arr[i], level + 1, out)
        out.append("\n" + " " * level + "]")
    elif arr.dtype.kind == "f":
        values = arr.astype(np.float64).tolist()  # float32 as json would see it after tolist(): the same doubles
        if bool(np.isfinite(arr).all()):
            _joined(map(float.__repr__, values), level, out)
        else:
            _joined((float.__repr__(v) if math.isfinite(v) else "null" for v in values), level, out)
    elif arr.dtype.kind in "iu":
        _joined(map(int.__repr__, arr.tolist()), level, out)
    elif arr.dtype.kind == "b":
        _joined(("true" if v else "false" for v in arr.tolist()), level, out)
    else:  # strings, objects: one element at a time
        _value(arr.tolist(), level, out)


def _value(obj: Any, level: int, out: list[str]) -> None:
    if isinstance(obj, Spectrum):
        data = obj.to_dict()
        data["freqs_hz"], data["values_db"] = obj.freqs_hz, obj.values_db  # the same numbers, as arrays
        _value(data, level, out)
    elif isinstance(obj, SpectrogramResult):  # before the tuples: a NamedTuple is one
        _value({"times_s": obj.times_s, "freqs_hz": obj.freqs_hz, "power_db": obj.power_db, "units": obj.units},
               level, out)
    elif isinstance(obj, np.ndarray):
        _array(obj, level, out)
    elif obj is None:
        out.append("null")
    elif isinstance(obj, str):
        out.append(json.dumps(obj))
    elif isinstance(obj, (bool, np.bool_)):
        out.append("true" if obj else "false")
    elif isinstance(obj, (int, np.integer)):
        out.append(int.__repr__(int(obj)))
    elif isinstance(obj, (float, np.floating)):
        f = float(obj)
        out.append(float.__repr__(f) if math.isfinite(f) else "null")
    elif isinstance(obj, Mapping):
        if not obj:
            out.append("{}")
            return
        inner = "\n" + " " * (level + 1)
        out.append("{" + inner)
        for i, (key, value) in enumerate(obj.items()):
            out.append(("," + inner if i else "") + json.dumps(str(key)) + ": ")
            _value(value, level + 1, out)
        out.append("\n" + " " * level + "}")
    elif isinstance(obj, (list, tuple)):
        if not obj:
            out.append("[]")
            return
        inner = "\n" + " " * (level + 1)
        out.append("[" + inner)
        for i, value in enumerate(obj):
            if i:
                out.append("," + inner)
            _value(value, level + 1, out)
        out.append("\n" + " " * level + "]")
    elif isinstance(obj, Path):
        out.append(json.dumps(str(obj)))
    else:
        raise ParameterError(f"save_plot_data: cannot write a {type(obj).__name__} as JSON")


def plot_data_json(obj: Any) -> str:
    """``obj`` as JSON text, one value per line with one space of indent per level.

    The same text as ``json.dumps(data, indent=1, allow_nan=False)`` for ``data`` = ``obj``
    with :class:`~iqsift.spectra.Spectrum` as its ``to_dict()``, a
    :class:`~iqsift.spectra.SpectrogramResult` as a mapping of its fields, arrays as
    (nested) lists, numpy scalars as Python numbers, paths as strings, and NaN and ±inf
    as ``null``.

    Raises
    ------
    ParameterError
        For anything else (naming its type).
    """
    out: list[str] = []
    _value(obj, 0, out)
    return "".join(out)


def save_plot_data(obj: Any, path: str | os.PathLike, *, force: bool = True) -> Path:
    """Write the data behind a plot, atomically, as JSON or CSV (by the file suffix).

    ``.json``: a :class:`~iqsift.spectra.Spectrum`, a
    :class:`~iqsift.spectra.SpectrogramResult`, or any mapping/sequence of numbers,
    strings and arrays (e.g. ``{"stages": [s.to_dict() for s in spectra]}``);
    non-finite floats become ``null`` (see :func:`plot_data_json`).
    ``.csv``: a Spectrum (``freq_hz,level...`` rows) or a mapping of equal-length 1-D
    columns (header = keys).
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".json":
        text = plot_data_json(obj)

        def write(fh: Any) -> None:
            fh.write(text)
            fh.write("\n")

        return write_atomically(path, write, binary=False, force=force)
    if suffix == ".csv":
        if isinstance(obj, Spectrum):
            return obj.to_csv(path, force=force)
        if not isinstance(obj, Mapping) or not obj:
            raise ParameterError(f"{path}: CSV needs a Spectrum or a mapping of equal-length columns, got {type(obj).__name__}")
        cols = {str(k): np.asarray(v).ravel() for k, v in obj.items()}
        lengths = {c.size for c in cols.values()}
        if len(lengths) != 1:
            raise ParameterError(f"{path}: CSV columns must have equal lengths, got {sorted(lengths)}")
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(cols.keys())
        for row in zip(*(c.tolist() for c in cols.values())):
            w.writerow([f"{v:.15g}" if isinstance(v, float) else v for v in row])
        text = buf.getvalue()
        return write_atomically(path, lambda fh: fh.write(text), binary=False, force=force)
    raise ParameterError(f"{path}: plot data is written as .json or .csv, got suffix {suffix or '(none)'!r}")
