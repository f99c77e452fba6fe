"""Sample arrays as the measurements take them: checked, one-dimensional, finite; power in dB.

Shared by every measurement module so that a bad record is refused in the same words everywhere.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import ParameterError

__all__ = ["TINY_POWER", "as_samples", "power_db"]

TINY_POWER = 1e-300
"""Floor for powers before a logarithm or a division (far below any float32 sample's square)."""


def as_samples(name: str, x: Any, dtype: Any, min_len: int = 1) -> np.ndarray:
    """``x`` as a one-dimensional finite array of ``dtype`` holding at least ``min_len`` samples.

    Raises :class:`~iqsift.errors.ParameterError` naming ``name`` for another shape, a complex
    array where ``dtype`` is real, too few samples, or NaN/infinite values.
    """
    arr = np.asarray(x)
    if arr.ndim != 1:
        raise ParameterError(f"{name}: array of shape {arr.shape} given; it must be one-dimensional")
    if np.iscomplexobj(arr) and not np.issubdtype(np.dtype(dtype), np.complexfloating):
        raise ParameterError(f"{name}: complex array given; it must be real-valued")
    if arr.size < min_len:
        raise ParameterError(f"{name}: {arr.size} samples given; at least {min_len} are needed")
    out = arr.astype(dtype, copy=False)
    if not np.all(np.isfinite(out)):
        raise ParameterError(f"{name}: contains NaN or infinite values; all samples must be finite")
    return out


def power_db(power: float) -> float:
    """10·log10 of a linear power, floored at :data:`TINY_POWER` (dB)."""
    return 10.0 * math.log10(max(float(power), TINY_POWER))
