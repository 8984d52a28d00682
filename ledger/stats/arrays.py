"""Argument checks shared by the pure statistics: one-dimensional float vectors, positive integers."""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["vector", "positive_int"]


def vector(x, name: str, func: str, *, allow_nan: bool = False) -> np.ndarray:
    """``x`` as a 1-D float array; an InputError naming ``func`` and ``name`` otherwise (NaN refused unless allowed)."""
    arr = np.asarray(x, dtype=float)
    if arr.ndim != 1:
        raise InputError(func, f"{name} must be one-dimensional, got shape {arr.shape}; pass one sequence")
    if not allow_nan and np.isnan(arr).any():
        at = int(np.flatnonzero(np.isnan(arr))[0])
        raise InputError(func, f"{name} holds NaN at position {at}; drop unscored cells first")
    return arr


def positive_int(value, name: str, func: str, *, minimum: int = 1) -> int:
    """``value`` as an int >= ``minimum``; an InputError naming ``func`` and ``name`` otherwise."""
    if int(value) != value or value < minimum:
        raise InputError(func, f"{name} = {value!r} must be an integer >= {minimum}")
    return int(value)
