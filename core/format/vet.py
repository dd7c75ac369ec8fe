"""Isolated first open: validate an untrusted trace in a separate, limited process.

HDF5 is not built to read hostile files safely: a damaged heap can make the library loop
forever (holding the GIL) or allocate without bound, which no check in our own code can stop.
So before a trace is opened in the user's process, :func:`vet` runs the whole validation (the
reader's checks, every frame block) in a child process started afresh (``subprocess``, not a
fork of this one) with

- an address-space limit (``RLIMIT_AS``) and a CPU-time limit (``RLIMIT_CPU``), plus a wall-clock
  timeout in case the child blocks without using CPU;
- HDF5 dynamic filter plugins disabled: ``HDF5_PLUGIN_PATH`` and ``HDF5_VOL_CONNECTOR`` removed
  from its environment, ``HDF5_PLUGIN_PRELOAD=::`` (HDF5's switch that turns plugin loading off)
  set, and h5py's plugin search path cleared;
- a lean import set (h5py, numpy, ``resweep.core.format``; never numba or the viewer).

A child that dies by a signal or hits a limit becomes one :class:`TraceFormatError` naming the file
and the limit or signal. Results are cached by path, size, modification time, limits and a
version of the validator in a small JSON file in the user cache folder (written atomically), so
re-opening the same file does not pay twice.
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from resweep.core.errors import TraceFormatError, printable
from resweep.core.format.limits import ENV as LIMITS_ENV
from resweep.core.format.limits import current
from resweep.core.jit.folders import user_cache_root

#: Bump when the checks the child runs change, so cached verdicts of older checks are dropped.
VALIDATOR_VERSION = 1
#: CPU seconds the child may use (reading and checking every frame block of a large trace);
#: ``RESWEEP_VET_CPU`` overrides it (tests use a short one).
CPU_SECONDS = 60
CPU_ENV = "RESWEEP_VET_CPU"
#: Address space of the child: the interpreter, numpy and h5py (~0.5 GiB mapped) plus the world
#: at the voxel limit (read as stored, up to 2 bytes a voxel) and two frame blocks.
BASE_ADDRESS_SPACE = 1 << 30
#: Environment variable: "0" turns isolation off (tests of the in-process path; not for users).
ISOLATE_ENV = "RESWEEP_ISOLATE"
#: Entries kept in the cache file (oldest dropped first).
CACHE_ENTRIES = 256
_DROP_ENV = ("HDF5_PLUGIN_PATH", "HDF5_VOL_CONNECTOR", "HDF5_DRIVER", "HDF5_DRIVER_CONFIG", "PYTHONSTARTUP",
             "PYTHONINSPECT")


@dataclass(frozen=True)
class Verdict:
    """What the isolated validation found: ``ok``; else ``line``, one line naming the file."""

    ok: bool
    line: str = ""
    dataset: str | None = None
    reason: str = ""


def address_space_limit() -> int:
    """Bytes of address space the child may map."""
    return BASE_ADDRESS_SPACE + 4 * int(current().voxels)


def vet(path, use_cache: bool = True) -> None:
    """Validate ``path`` in an isolated child; raise :class:`TraceFormatError` if it is refused.

    A file the validator accepts is then opened normally by the caller. With ``RESWEEP_ISOLATE=0``
    nothing is done (the caller's own open still validates, without isolation).
    """
    if os.environ.get(ISOLATE_ENV, "1") == "0":
        return
    path = str(path)
    try:
        st = os.stat(path)
    except OSError as exc:
        raise TraceFormatError(path, None, f"cannot open: {exc.strerror or exc}") from None
    if not os.path.isfile(path):
        raise TraceFormatError(path, None, "is a directory, not a trace file" if os.path.isdir(path)
                               else "is not a regular file")
    key = _cache_key(path, st)
    got = _cache_get(key) if use_cache else None
    if got is None:
        got = _run_child(path)
        if use_cache:
            _cache_put(key, got)
    if not got.ok:
        raise TraceFormatError(path, got.dataset, got.reason)


def _run_child(path: str) -> Verdict:
    env = {k: v for k, v in os.environ.items() if k not in _DROP_ENV}
    env.update(HDF5_PLUGIN_PRELOAD="::", OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1", PYTHONDONTWRITEBYTECODE="1")
    cpu, mem = int(os.environ.get(CPU_ENV, CPU_SECONDS)), address_space_limit()
    cmd = [sys.executable, "-c", "import sys; from resweep.core.format.vet_child import main; sys.exit(main())",
           path, str(cpu), str(mem)]
    try:
        proc = subprocess.run(cmd, env=env, stdin=subprocess.DEVNULL, capture_output=True, timeout=cpu * 2 + 30)
    except subprocess.TimeoutExpired:
        return Verdict(False, reason=f"corrupt or hostile file: the isolated validator hit its wall-time limit "
                                     f"of {cpu * 2 + 30} s; refused")
    except OSError as exc:
        return Verdict(False, reason=f"cannot start the isolated validator: {exc}")
    return _verdict(proc, cpu, mem)


#: Largest peak resident set (bytes) a validator child of this process reported; None before any
#: did. Read by the fuzz runner, which bounds the children's memory as well as its own.
peak_child_rss: int | None = None


def _note_peak(doc: dict) -> None:
    global peak_child_rss
    got = doc.get("peak_rss")
    if isinstance(got, int) and (peak_child_rss is None or got > peak_child_rss):
        peak_child_rss = got


def _verdict(proc, cpu: int, mem: int) -> Verdict:
    rc = proc.returncode
    lines = proc.stdout.decode("utf-8", "replace").strip().splitlines()
    if rc < 0:
        sig = -rc
        name = signal.Signals(sig).name if sig in signal.valid_signals() else f"signal {sig}"
        why = {signal.SIGXCPU: f"hit the CPU-time limit of {cpu} s",
               signal.SIGKILL: f"was killed (SIGKILL; at the CPU-time limit of {cpu} s or out of memory)",
               signal.SIGSEGV: "crashed (SIGSEGV) inside the HDF5 library",
               signal.SIGABRT: f"aborted (SIGABRT; possibly at the address-space limit of {mem >> 20} MiB)",
               signal.SIGBUS: "crashed (SIGBUS) reading the file"}.get(sig, f"died by {name}")
        return Verdict(False, reason=f"corrupt or hostile file: the isolated validator {why}; refused")
    if lines:
        try:
            doc = json.loads(lines[-1])
            _note_peak(doc)
            if doc.get("ok"):
                return Verdict(True)
            if doc.get("memory"):
                return Verdict(False, reason=f"corrupt or hostile file: the isolated validator hit the "
                                             f"address-space limit of {mem >> 20} MiB; refused")
            return Verdict(False, doc.get("line", ""), doc.get("dataset"), str(doc.get("reason", "refused")))
        except (ValueError, AttributeError):
            pass
    err = proc.stderr.decode("utf-8", "replace").strip().splitlines()
    tail = printable(err[-1]) if err else "no output"
    return Verdict(False, reason=f"the isolated validator failed (exit status {rc}: {tail}); refused")


# -- cache ------------------------------------------------------------------------------------
#: Environment variable naming the verdict cache file (tests point it at a temporary folder).
CACHE_ENV = "RESWEEP_VET_CACHE"


def cache_path() -> Path:
    """The verdict cache: ``$RESWEEP_VET_CACHE``, else ``vetted.json`` in the user cache folder."""
    env = os.environ.get(CACHE_ENV)
    return Path(env) if env else user_cache_root() / "vetted.json"


def _cache_key(path: str, st) -> str:
    limits = os.environ.get(LIMITS_ENV, "")
    return json.dumps([os.path.realpath(path), st.st_size, st.st_mtime_ns, st.st_ino, limits, VALIDATOR_VERSION])


def _cache_load() -> dict:
    try:
        with open(cache_path(), encoding="utf-8") as fh:
            doc = json.load(fh)
        return doc if isinstance(doc, dict) else {}
    except (OSError, ValueError):
        return {}


def _cache_get(key: str) -> Verdict | None:
    got = _cache_load().get(key)
    if not isinstance(got, dict):
        return None
    try:
        return Verdict(bool(got["ok"]), str(got.get("line", "")), got.get("dataset"), str(got.get("reason", "")))
    except (KeyError, TypeError):
        return None


def _cache_put(key: str, v: Verdict) -> None:
    """Add one verdict; written to a temporary file then renamed over the cache (atomic)."""
    doc = _cache_load()
    doc[key] = {"ok": v.ok, "line": v.line, "dataset": v.dataset, "reason": v.reason, "at": time.time()}
    if len(doc) > CACHE_ENTRIES:
        for k in sorted(doc, key=lambda k: doc[k].get("at", 0) if isinstance(doc[k], dict) else 0)[:len(doc) - CACHE_ENTRIES]:
            del doc[k]
    target = cache_path()
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=".vetted-", dir=target.parent)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(doc, fh)
        os.replace(tmp, target)
    except OSError:
        pass  # a cache that cannot be written only costs a second validation next time
