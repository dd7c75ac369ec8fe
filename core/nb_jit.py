"""``hot``: the decorator of the per-row kernels (compiled once, cached on disk, no refcounting).

Numba counts references to every array passed between compiled functions (an atomic update of
the array's shared header per call). The per-row kernels are called millions of times with the
world's arrays, and those updates cost more than the solve itself, from every thread on the same
cache lines. The kernels only read and write arrays their caller owns for the whole call and
never allocate, so they are compiled without the runtime's reference counting (numba's ``_nrt``
compile flag). Should a numba release drop the flag, the kernels still compile (slower).
"""
from __future__ import annotations

from numba import njit

try:
    from numba.core.options import TargetOptions
    _NO_REFCOUNT = {"_nrt": False} if hasattr(TargetOptions, "_nrt") else {}
except ImportError:  # pragma: no cover - depends on the numba release
    _NO_REFCOUNT = {}

#: Decorator for kernels that neither allocate nor keep arrays (allocation fails to compile).
hot = njit(cache=True, **_NO_REFCOUNT)
