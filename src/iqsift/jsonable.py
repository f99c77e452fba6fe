"""One JSON sanitiser for every report iqsift writes or prints.

Reports hold numpy scalars and arrays, paths, typed results and sometimes non-finite floats (a level of
an empty channel is -inf). JSON has no NaN or infinity, so those become ``null`` ("measured, nothing
there"); everything else becomes its plain JSON counterpart.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

__all__ = ["to_jsonable", "dumps"]


def to_jsonable(obj: Any) -> Any:
    """``obj`` with numpy values, paths, typed results (``to_dict()``) and non-finite floats (→ None) made JSON-ready."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if hasattr(obj, "__fspath__"):
        return str(obj)
    to_dict = getattr(obj, "to_dict", None)
    if callable(to_dict):
        return to_jsonable(to_dict())
    return obj


def dumps(obj: Any) -> str:
    """``obj`` as indented JSON text with a final newline (strict: no NaN or infinity)."""
    return json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n"
