"""One conversion of iqsift's values into what :func:`json.dumps` accepts with ``allow_nan=False``.

JSON has no NaN or infinity, no numpy types and no paths; reports and ``--json`` outputs are built from
all of these. :func:`to_jsonable` is the one place that decides how they are written: numpy scalars and
arrays as Python numbers and lists, non-finite floats as ``null``, paths as strings, and any object with a
``to_dict()`` method (the frozen results and designs) as that mapping.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

__all__ = ["to_jsonable", "dumps"]


def to_jsonable(obj: Any) -> Any:
    """``obj`` as plain JSON data: dict, list, str, int, float, bool or None.

    Parameters
    ----------
    obj : Any
        Mappings (keys become strings), lists and tuples (become lists), numpy arrays
        (become nested lists), numpy and Python scalars, paths (anything with
        ``__fspath__``), objects with a ``to_dict()`` method, or any mix of these.

    Returns
    -------
    Any
        The same data with finite floats as ``float``, NaN and ±inf as ``None``, integers
        as ``int``, booleans as ``bool`` and paths as ``str``. Other objects (strings,
        None) are returned unchanged.
    """
    if obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, (bool, np.bool_)):  # before the integers: bool is an int subclass
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, dict):
        return {str(key): to_jsonable(value) for key, value in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(value) for value in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if hasattr(obj, "__fspath__"):
        return str(obj)
    to_dict = getattr(obj, "to_dict", None)
    if callable(to_dict):
        return to_jsonable(to_dict())
    return obj


def dumps(obj: Any) -> str:
    """``obj`` as indented JSON text with a final newline (strict: no NaN or infinity)."""
    return json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n"
