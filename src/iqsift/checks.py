"""Checks of numeric parameters shared by every module: one rule, one wording.

Each raises :class:`~iqsift.errors.ParameterError` naming the parameter, echoing the value and
stating the rule, and returns the value converted (float or int).
"""

from __future__ import annotations

import math
import operator
from typing import Any

from .errors import ParameterError

__all__ = ["finite", "positive", "nonnegative", "whole"]


def finite(name: str, value: Any) -> float:
    """``value`` as a finite float."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name}: expected a number, got {value!r}") from None
    if not math.isfinite(v):
        raise ParameterError(f"{name}: got {value!r}; it must be a finite number")
    return v


def positive(name: str, value: Any) -> float:
    """``value`` as a finite float > 0 (rates, bandwidths, durations ...)."""
    v = finite(name, value)
    if v <= 0.0:
        raise ParameterError(f"{name}: got {value!r}; it must be a finite number > 0")
    return v


def nonnegative(name: str, value: Any) -> float:
    """``value`` as a finite float >= 0."""
    v = finite(name, value)
    if v < 0.0:
        raise ParameterError(f"{name}: got {value!r}; it must be a finite number >= 0")
    return v


def whole(name: str, value: Any, minimum: int = 1) -> int:
    """``value`` as an integer >= ``minimum`` (bools and floats refused)."""
    try:
        v = operator.index(value)
    except TypeError:
        raise ParameterError(f"{name}: expected an integer >= {minimum}, got {value!r}") from None
    if isinstance(value, bool) or v < minimum:
        raise ParameterError(f"{name}: expected an integer >= {minimum}, got {value!r}")
    return int(v)
