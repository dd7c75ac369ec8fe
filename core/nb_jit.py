"""``hot``: the decorator of the per-row kernels (compiled once, cached on disk, no refcounting).

Numba counts references to every array passed between compiled functions (an atomic update of
the array's shared header per call). The per-row kernels are called millions of times with the
world's arrays, and those updates cost more than the solve itself, from every thread on the same
cache lines. The kernels only read and write arrays their caller owns for the whole call and
never allocate, so they are compiled without the runtime's reference counting (numba's ``_nrt``
compile flag). Should a numba release drop the flag, the kernels still compile (slower).

Parallel kernels run on numba's OpenMP layer. OpenMP's default of spinning idle threads makes
every kernel launch wait a scheduler time slice (measured: ~8 ms per launch instead of ~10 us)
whenever another process keeps one of two cores busy, so the idle threads are asked to sleep
instead (``OMP_WAIT_POLICY=passive``) unless the user has chosen a policy. This must happen
before the OpenMP runtime loads, i.e. before the first parallel kernel runs.
"""
from __future__ import annotations

import os

os.environ.setdefault("OMP_WAIT_POLICY", "passive")

from numba import njit  # noqa: E402  (after the OpenMP setting)

try:
    from numba.core.options import TargetOptions
    _NO_REFCOUNT = {"_nrt": False} if hasattr(TargetOptions, "_nrt") else {}
except ImportError:  # pragma: no cover - depends on the numba release
    _NO_REFCOUNT = {}

#: Decorator for kernels that neither allocate nor keep arrays (allocation fails to compile).
hot = njit(cache=True, **_NO_REFCOUNT)
