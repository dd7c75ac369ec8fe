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

numba invalidates a cached kernel only when the kernel's own source file changes, but our
kernels inline code from the sibling ``nb_*`` modules: after an edit of ``nb_sweep.py`` the
cached ``check_rows`` would still run the old narrow phase. :func:`drop_stale_caches` stamps the
in-tree cache with a digest of all kernel sources and empties it when they change.
"""
from __future__ import annotations

import hashlib
import os
from pathlib import Path

os.environ.setdefault("OMP_WAIT_POLICY", "passive")

from numba import njit  # noqa: E402  (after the OpenMP setting)

_HERE = Path(__file__).resolve().parent


def drop_stale_caches(folder: Path = _HERE) -> bool:
    """Remove numba's cached kernels of ``folder/nb_*.py`` when any of those sources changed.

    Looks only at the in-tree cache (``__pycache__`` beside the sources, numba's default where
    writable); installed copies do not change. Returns True when files were removed.
    """
    cache = folder / "__pycache__"
    digest = hashlib.sha256()
    for src in sorted(folder.glob("nb_*.py")):
        digest.update(src.name.encode())
        digest.update(src.read_bytes())
    stamp = cache / "resweep-kernels.stamp"
    try:
        if stamp.read_text() == digest.hexdigest():
            return False
    except OSError:
        pass
    removed = False
    try:
        for f in list(cache.glob("nb_*.nbi")) + list(cache.glob("nb_*.nbc")):
            f.unlink(missing_ok=True)
            removed = True
        stamp.write_text(digest.hexdigest())
    except OSError:  # read-only install or no cache folder yet: nothing stale to drop
        pass
    return removed


drop_stale_caches()

try:
    from numba.core.options import TargetOptions
    _NO_REFCOUNT = {"_nrt": False} if hasattr(TargetOptions, "_nrt") else {}
except ImportError:  # pragma: no cover - depends on the numba release
    _NO_REFCOUNT = {}

#: Decorator for kernels that neither allocate nor keep arrays (allocation fails to compile).
hot = njit(cache=True, **_NO_REFCOUNT)
