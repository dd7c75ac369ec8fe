"""Kernel decorators (``kernel``, ``hot``) and the on-disk cache they compile into.

Cache folder. Compiled kernels go to a per-user cache folder (``$RESWEEP_CACHE_DIR`` when set,
else the platform's user cache folder, ``~/.cache/resweep/kernels`` on Linux), never into the
installed package: a package folder that gains files at run time outlives ``pip uninstall`` and
can shadow a later install. Inside it each build of the kernels gets its own subfolder named by a
digest of the kernel sources (and the constants they read), numba, numpy and the interpreter. numba invalidates a cached
kernel only when that kernel's own file changes, but ours inline code from sibling ``nb_*``
modules; a digest over all of them makes any edit start a fresh folder, so nothing stale loads.
The folder is chosen while each kernel is decorated (numba fixes a kernel's cache location then)
and numba's global setting is put back afterwards, so other numba code in the process keeps its
own cache. :func:`compile_lock` serialises compilation between processes (Dask workers, parallel
CI jobs) that share the folder.

No reference counting. Numba counts references to every array passed between compiled
functions (an atomic update of the array's shared header per call). The per-row kernels are
called millions of times with the world's arrays, and those updates cost more than the solve
itself. The kernels only read and write arrays their caller owns for the whole call and never
allocate, so they are compiled without the runtime's reference counting (numba's ``_nrt`` flag).

OpenMP. Parallel kernels run on numba's OpenMP layer, whose default of spinning idle threads makes
every kernel launch wait a scheduler time slice (measured: ~8 ms per launch instead of ~10 us)
whenever another process keeps one of two cores busy, so idle threads are asked to sleep
(``OMP_WAIT_POLICY=passive``) unless the user chose a policy; this must happen before the OpenMP
runtime loads.
"""
from __future__ import annotations

import contextlib
import hashlib
import os
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("OMP_WAIT_POLICY", "passive")

import numba  # noqa: E402  (after the OpenMP setting)
import numpy as np  # noqa: E402
from numba import njit  # noqa: E402

#: Environment variable naming the kernel cache folder (a shared or per-node folder on a cluster).
CACHE_ENV = "RESWEEP_CACHE_DIR"
_CORE = Path(__file__).resolve().parents[1]


#: Subpackages whose modules kernels read (kernels, and the constants they compile in).
KERNEL_PACKAGES = ("jit", "world", "solve", "check")


def kernel_digest() -> str:
    """Digest of the sources kernels are built from plus numba, numpy and Python versions."""
    d = hashlib.sha256()
    for src in sorted(p for pkg in KERNEL_PACKAGES for p in (_CORE / pkg).glob("*.py")):
        d.update(src.relative_to(_CORE).as_posix().encode())
        d.update(src.read_bytes())
    d.update(f"{numba.__version__}|{np.__version__}|{sys.version}|{sys.platform}".encode())
    return d.hexdigest()[:16]


def cache_root() -> Path:
    """The folder that holds one subfolder per kernel build (see the module docstring)."""
    env = os.environ.get(CACHE_ENV)
    if env:
        return Path(env).expanduser()
    from resweep.core.jit.folders import user_cache_root
    return user_cache_root() / "kernels"


def _usable_cache_dir() -> Path:
    """This build's cache folder, created; a private temporary folder when the user's is not writable."""
    folder = cache_root() / kernel_digest()
    try:
        folder.mkdir(parents=True, exist_ok=True)
        probe = folder / f".probe-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink()
        return folder
    except OSError:
        uid = os.getuid() if hasattr(os, "getuid") else "user"
        folder = Path(tempfile.gettempdir()) / f"resweep-kernels-{uid}" / kernel_digest()
        folder.mkdir(parents=True, exist_ok=True)
        return folder


CACHE_DIR = _usable_cache_dir()


@contextlib.contextmanager
def compile_lock():
    """Exclusive lock on this build's cache folder while kernels compile or load, so concurrent
    processes compile each kernel once and never read a half-written cache entry."""
    path = CACHE_DIR / ".lock"
    with open(path, "a+b") as fh:
        try:
            import fcntl
        except ImportError:  # pragma: no cover - Windows: numba's own atomic renames still apply
            yield
            return
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fh.fileno(), fcntl.LOCK_UN)


def _cached(decorate):
    """Apply ``decorate`` (an njit decorator with cache=True) with numba's cache folder pointed at
    :data:`CACHE_DIR`, then restore numba's setting."""
    def apply(fn):
        saved = numba.config.CACHE_DIR
        numba.config.CACHE_DIR = str(CACHE_DIR)
        try:
            return decorate(fn)
        finally:
            numba.config.CACHE_DIR = saved
    return apply


def kernel(**options):
    """``@kernel(...)``: ``numba.njit(cache=True, **options)`` caching into :data:`CACHE_DIR`."""
    return _cached(njit(cache=True, **options))


try:
    from numba.core.options import TargetOptions
    _NO_REFCOUNT = {"_nrt": False} if hasattr(TargetOptions, "_nrt") else {}
except ImportError:  # pragma: no cover - depends on the numba release
    _NO_REFCOUNT = {}

#: Decorator for kernels that neither allocate nor keep arrays (allocation fails to compile).
hot = kernel(**_NO_REFCOUNT)
