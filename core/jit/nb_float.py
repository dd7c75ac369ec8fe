"""``fl(like, v)``: the constant ``v`` in the float type of ``like``, inside numba kernels;
``eps_of(like)``: the machine epsilon of that type.

Kernels are written once and compiled per float type from their array arguments. A bare float
literal would be float64 and silently promote float32 arithmetic, so every constant goes through
``fl``, which numba resolves at compile time (and which keeps the on-disk kernel cache valid).
"""
from __future__ import annotations

import numpy as np
from numba import types
from numba.extending import overload


def fl(like, v):
    """Pure-Python fallback: ``v`` as the numpy float type of ``like``."""
    return np.asarray(like).dtype.type(v)


@overload(fl, inline="always")
def _fl(like, v):
    if isinstance(like, types.Float) and like.bitwidth == 32:
        return lambda like, v: np.float32(v)
    return lambda like, v: np.float64(v)


def eps_of(like):
    """Pure-Python fallback: machine epsilon of the numpy float type of ``like``."""
    return np.finfo(np.asarray(like).dtype).eps


@overload(eps_of, inline="always")
def _eps_of(like):
    if isinstance(like, types.Float) and like.bitwidth == 32:
        e32 = np.float32(np.finfo(np.float32).eps)
        return lambda like: e32
    e64 = np.float64(np.finfo(np.float64).eps)
    return lambda like: e64
