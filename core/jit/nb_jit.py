"""Kernel decorators (``kernel``, ``hot``) and the on-disk cache they compile into.

Cache folder. Compiled kernels go to a per-user cache folder (``$RESWEEP_CACHE_DIR`` when set,
else the platform's user cache folder, ``~/.cache/resweep/kernels`` on Linux), never into the
installed package at run time: a package folder that gains files at run time outlives ``pip
uninstall`` and can shadow a later install. Inside it each build of the kernels gets its own
subfolder named by a digest of the kernel sources (and the constants they read), numba, numpy and
the interpreter. numba would invalidate a cached kernel only when that kernel's own file changes,
but ours inline code from sibling modules; keyed by the digest, any edit starts a fresh folder.

Relocatable entries. numba's own locators key an entry by the source file's path and time; ours
(:class:`KernelLocator`, registered through numba's ``CACHE_LOCATOR_CLASSES`` setting while our
kernels are decorated) keys it by the digest alone, so entries compiled anywhere from the same
sources are valid everywhere on the same machine. That is what makes ahead-of-time kernels work:
building the package (``pip install .``) compiles the kernels once into ``prebuilt/<digest>`` of
the package (see setup.py), and the first run copies them into the user folder instead of
compiling (:func:`seed_from_prebuilt`). Entries of another machine's CPU are simply not used.
:func:`compile_lock` serialises compilation between processes (Dask workers, parallel CI jobs)
that share the folder.

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
import shutil
import sys
import tempfile
from pathlib import Path

os.environ.setdefault("OMP_WAIT_POLICY", "passive")

import numba  # noqa: E402  (after the OpenMP setting)
import numpy as np  # noqa: E402
from numba import njit  # noqa: E402
from numba.core import caching  # noqa: E402

from resweep.core.jit.cache_env import CACHE_ENV  # noqa: E402,F401  (re-exported)
_CORE = Path(__file__).resolve().parents[1]


#: Subpackages whose modules kernels read (kernels, and the constants they compile in).
KERNEL_PACKAGES = ("jit", "codec", "world", "solve", "check")


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


KERNEL_DIGEST = kernel_digest()
#: Kernels compiled when the package was built (absent in a source tree or an editable install).
PREBUILT_DIR = Path(__file__).resolve().parent / "prebuilt" / KERNEL_DIGEST


def _usable_cache_dir() -> Path:
    """This build's cache folder, created; a private temporary folder when the user's is not writable."""
    folder = cache_root() / KERNEL_DIGEST
    try:
        folder.mkdir(parents=True, exist_ok=True)
        probe = folder / f".probe-{os.getpid()}"
        probe.write_bytes(b"")
        probe.unlink()
        return folder
    except OSError:
        uid = os.getuid() if hasattr(os, "getuid") else "user"
        folder = Path(tempfile.gettempdir()) / f"resweep-kernels-{uid}" / KERNEL_DIGEST
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


def seed_from_prebuilt() -> int:
    """Copy the package's ahead-of-time kernels into :data:`CACHE_DIR` where it lacks them.

    Each file is copied to a temporary name and renamed, under :func:`compile_lock`, so a reader
    never sees half a file. Returns the number of files copied (0 without prebuilt kernels).
    """
    if not PREBUILT_DIR.is_dir():
        return 0
    copied = 0
    with compile_lock():
        for src in PREBUILT_DIR.iterdir():
            dst = CACHE_DIR / src.name
            if src.suffix not in (".nbi", ".nbc") or dst.exists():
                continue
            tmp = dst.with_name(f".{dst.name}.{os.getpid()}.tmp")
            try:
                shutil.copyfile(src, tmp)
                os.replace(tmp, dst)
                copied += 1
            except OSError:
                tmp.unlink(missing_ok=True)
    return copied


class KernelLocator(caching._CacheLocator):
    """numba cache locator for resweep's kernels: entries live in :data:`CACHE_DIR` and are fresh
    while the sources' digest is unchanged (no file paths or times, so entries are relocatable)."""

    def __init__(self, py_func, py_file):
        self._lineno = py_func.__code__.co_firstlineno

    def get_cache_path(self):
        return str(CACHE_DIR)

    def get_source_stamp(self):
        return KERNEL_DIGEST

    def get_disambiguator(self):
        return str(self._lineno)

    @classmethod
    def from_function(cls, py_func, py_file):
        try:
            ours = Path(py_file).resolve().is_relative_to(_CORE)
        except (OSError, ValueError):
            return None
        if not ours:
            return None
        self = cls(py_func, py_file)
        try:
            self.ensure_cache_path()
        except OSError:
            return None
        return self


#: numba setting that lists cache locators by import path (absent in old numba releases, which
#: then fall back to the path-keyed locator pointed at CACHE_DIR).
_IMPL = getattr(caching, "CacheImpl", None) or getattr(caching, "_CacheImpl", None)
_LOCATORS = (f"{__name__}.KernelLocator, " + ", ".join(c.__name__ for c in _IMPL._locator_classes)
             if hasattr(numba.config, "CACHE_LOCATOR_CLASSES") and _IMPL is not None else None)


def _cached(decorate):
    """Apply ``decorate`` (an njit decorator with cache=True) with numba's cache settings pointed
    at our locator and :data:`CACHE_DIR`, then restore numba's settings (other numba code in the
    process keeps its own cache)."""
    def apply(fn):
        saved = numba.config.CACHE_DIR, getattr(numba.config, "CACHE_LOCATOR_CLASSES", None)
        numba.config.CACHE_DIR = str(CACHE_DIR)
        if _LOCATORS:
            numba.config.CACHE_LOCATOR_CLASSES = _LOCATORS
        try:
            return decorate(fn)
        finally:
            numba.config.CACHE_DIR = saved[0]
            if _LOCATORS:
                numba.config.CACHE_LOCATOR_CLASSES = saved[1]
    return apply


def kernel(**options):
    """``@kernel(...)``: ``numba.njit(cache=True, **options)`` caching into :data:`CACHE_DIR`.

    Kernels use numpy's error model: numba's default ("python") tests every division for a zero
    divisor to raise ``ZeroDivisionError``, a compare and branch per division in the innermost
    loops. Every division in the kernels has a divisor that cannot be zero (guarded motion
    components, positive voxel and chunk sizes), so results are the same bits either way."""
    return _cached(njit(cache=True, **{"error_model": "numpy", **options}))


def _no_refcount_option() -> dict:
    """numba's option that compiles a function without reference counting, where this numba
    release has it (the CPU target's options declare ``_nrt``; older releases declared it on the
    generic ``TargetOptions``)."""
    for module, name in (("numba.core.cpu", "CPUTargetOptions"), ("numba.core.options", "TargetOptions")):
        try:
            options = getattr(__import__(module, fromlist=[name]), name)
        except (ImportError, AttributeError):  # pragma: no cover - depends on the numba release
            continue
        if hasattr(options, "_nrt"):
            return {"_nrt": False}
    return {}  # pragma: no cover - a release without the option: counted, only slower


_NO_REFCOUNT = _no_refcount_option()

#: Decorator for kernels that neither allocate nor keep arrays (allocation fails to compile).
hot = kernel(**_NO_REFCOUNT)

seed_from_prebuilt()
