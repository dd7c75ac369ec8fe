"""Isolated first open: validate an untrusted trace in a separate, limited process.

HDF5 is not built to read hostile files safely: a damaged heap can make the library loop
forever (holding the GIL) or allocate without bound, which no check in our own code can stop.
So before a trace is opened in the user's process, :func:`vet` runs the whole validation (the
reader's checks, every frame block) in a child process started afresh (``subprocess``, not a
fork of this one) with

- an address-space limit (``RLIMIT_AS``) and a CPU-time limit per file (``RLIMIT_CPU``, moved on
  before each file), plus a wall-clock timeout per file in case the child blocks without using CPU;
- HDF5 dynamic filter plugins disabled: ``HDF5_PLUGIN_PATH`` and ``HDF5_VOL_CONNECTOR`` removed
  from its environment, ``HDF5_PLUGIN_PRELOAD=::`` (HDF5's switch that turns plugin loading off)
  set, and h5py's plugin search path cleared as soon as h5py loads (``declared.NO_PLUGINS_ENV``;
  a child that reads only files of the h5py-free subset never loads h5py);
- a lean import set (h5py, numpy, ``resweep.core.format``; never numba or the viewer).

A child that dies by a signal or hits a limit becomes one :class:`TraceFormatError` naming the file
and the limit or signal. Results are cached by path, size, modification time, limits and a
version of the validator in a small JSON file in the user cache folder (written atomically), so
re-opening the same file does not pay twice.

:func:`vet_many` validates a batch in one child, file after file (a caller may keep that child
for its next batch): starting Python with numpy and h5py costs about 0.3 s, several times the
validation of a small trace. :class:`IsolatedChild` is the parent's side of any such child; a farm
worker keeps one that also checks each trace (``analysis.farm_child``).
"""
from __future__ import annotations

import json
import os
import queue
import signal
import subprocess
import sys
import tempfile
import threading
import time
from dataclasses import dataclass
from pathlib import Path

from resweep.core.errors import TraceFormatError, printable
from resweep.core.format.declared import NO_PLUGINS_ENV
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
#: Entries kept in the cache file (oldest dropped first): a night's soak folder fits.
CACHE_ENTRIES = 4096
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
    err = vet_many([path], use_cache)[str(path)]
    if err is not None:
        raise err


def vet_many(paths, use_cache: bool = True, keep: bool = False) -> dict:
    """Validate many files, in order, in as few isolated children as possible.

    One child validates the files one after the other, each with its own CPU-time and wall-time
    limits; a file that kills or hangs the child is refused with the reason, and the files after
    it go on in a new child. ``keep`` leaves the child running for the next call of this process
    (a caller validates batch after batch without starting a child per batch). Returns ``{str(path): None or TraceFormatError}`` (the error's
    :meth:`~TraceFormatError.one_line` names the file). With ``RESWEEP_ISOLATE=0`` every file is
    accepted unchecked.
    """
    paths = [str(p) for p in paths]
    out: dict = {p: None for p in paths}
    if os.environ.get(ISOLATE_ENV, "1") == "0":
        return out
    cache = _cache_load() if use_cache else {}
    todo, keys = [], {}
    for path in dict.fromkeys(paths):
        try:
            st = os.stat(path)
        except OSError as exc:
            out[path] = TraceFormatError(path, None, f"cannot open: {exc.strerror or exc}")
            continue
        if not os.path.isfile(path):
            out[path] = TraceFormatError(path, None, "is a directory, not a trace file" if os.path.isdir(path)
                                         else "is not a regular file")
            continue
        keys[path] = _cache_key(path, st)
        got = _as_verdict(cache.get(keys[path]))
        if got is None:
            todo.append(path)
        else:
            out[path] = _error(path, got)
    found = _run_children(todo, keep)
    for path, v in found.items():
        out[path] = _error(path, v)
    if use_cache and found:
        _cache_put({keys[p]: v for p, v in found.items()})
    return out


def _error(path: str, v: Verdict):
    return None if v.ok else TraceFormatError(path, v.dataset, v.reason)


def _run_children(paths: list, keep: bool = False) -> dict:
    """Verdicts of ``paths``, asked one by one of a child; a child that dies or hangs on a path is
    replaced for the next. ``keep``: leave the last child running for this process's next call
    (its stdin closing when this process ends makes it exit)."""
    global _kept
    out = {}
    with _kept_lock:
        child = _kept if keep and _kept is not None and _kept.fits() else None
        if _kept is not None and child is None:
            _kept.close()
        _kept = None
        try:
            for path in paths:
                if child is None:
                    child = _start()
                out[path] = child.ask(path)
                if not child.alive:
                    child = None
        finally:
            if child is not None:
                if keep:
                    _kept = child
                else:
                    child.close()
    return out


class IsolatedChild:
    """One isolated child that answers request after request on its stdin/stdout: the validator
    (``vet_child``, a path a line), or another ``module`` whose ``main`` serves with
    ``vet_child.serve`` (a farm's checking child). ``env`` adds to the child's environment;
    ``extra_mem`` adds to its address-space limit (bytes; a child that loads compiled kernels)."""

    def __init__(self, module: str = "resweep.core.format.vet_child", env: dict | None = None, extra_mem: int = 0):
        full = {k: v for k, v in os.environ.items() if k not in _DROP_ENV}
        full.update(HDF5_PLUGIN_PRELOAD="::", OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1",
                    PYTHONDONTWRITEBYTECODE="1")
        full[NO_PLUGINS_ENV] = "1"
        full.update(env or {})
        self.module, self.env, self.extra_mem = module, dict(env or {}), int(extra_mem)
        self.cpu, self.mem = int(os.environ.get(CPU_ENV, CPU_SECONDS)), address_space_limit() + self.extra_mem
        self.limits = os.environ.get(LIMITS_ENV, "")
        self.wall = self.cpu * 2 + 30
        cmd = [sys.executable, "-c", f"import sys; from {module} import main; sys.exit(main())",
               str(self.cpu), str(self.mem)]
        self.err = tempfile.TemporaryFile()
        self.alive = True
        self.proc = subprocess.Popen(cmd, env=full, stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=self.err)
        self.lines: queue.Queue = queue.Queue()
        threading.Thread(target=self._read, daemon=True, name="resweep-vet").start()

    def fits(self, module: str = "resweep.core.format.vet_child", env: dict | None = None, extra_mem: int = 0) -> bool:
        """Still running, and started as asked with the limits in force now."""
        return (self.proc.poll() is None and self.cpu == int(os.environ.get(CPU_ENV, CPU_SECONDS))
                and self.mem == address_space_limit() + int(extra_mem) and self.limits == os.environ.get(LIMITS_ENV, "")
                and (module, dict(env or {})) == (self.module, self.env))

    def _read(self):
        for line in self.proc.stdout:
            self.lines.put(line)
        self.lines.put(None)

    def ask(self, path: str) -> Verdict:
        """The verdict on ``path``; when the child dies or hangs on it (then ``alive`` is False),
        the refusal saying so."""
        got = self.exchange(json.dumps(path))
        return got if isinstance(got, Verdict) else _answer(got, self.mem)

    def exchange(self, request: str, heard=None, should_stop=None):
        """Send one request line; the answer's dict, or a refusal :class:`Verdict` when the child
        died, hung past its wall-time limit or answered something unreadable, or None when
        ``should_stop()`` became True first (the child is then killed; ``alive`` is False).
        Interim lines (``{"progress": ...}``) go to ``heard(doc)``."""
        self.send(request)
        return self.receive(heard, should_stop)

    def send(self, request: str) -> None:
        """Write one request line. The child answers requests in the order they were sent, so a
        caller may write the next one before reading an answer (the child then never waits for
        this process between requests); :meth:`receive` reads the answers, oldest first."""
        try:
            self.proc.stdin.write((request + "\n").encode())
            self.proc.stdin.flush()
        except OSError:  # it died before reading: its exit status says why
            pass

    def receive(self, heard=None, should_stop=None):
        """The answer to the oldest request not yet answered, as :meth:`exchange` returns it; the
        wall-time limit counts from this call (when the child is working on that request)."""
        deadline = time.monotonic() + self.wall
        while True:
            left = deadline - time.monotonic()
            try:
                line = self.lines.get(timeout=max(0.0, min(left, 0.1 if should_stop is not None else left)))
            except queue.Empty:
                if should_stop is not None and should_stop():
                    self.close(kill=True)
                    return None
                if time.monotonic() < deadline:
                    continue
                self.close(kill=True)
                return Verdict(False, reason=f"corrupt or hostile file: the isolated validator hit its wall-time "
                                             f"limit of {self.wall} s; refused")
            if line is None:  # the child ended before answering
                self.proc.wait()
                self.err.seek(0)
                tail = self.err.read()
                self.close()
                return _death(self.proc.returncode, tail, self.cpu, self.mem)
            try:
                doc = json.loads(line.decode("utf-8", "replace"))
                if not isinstance(doc, dict):
                    raise ValueError(line)
            except ValueError:
                return Verdict(False, reason="the isolated validator answered something unreadable; refused")
            if "progress" in doc:
                if heard is not None:
                    heard(doc)
                continue
            _note_peak(doc)
            return doc

    def close(self, kill: bool = False):
        """End the child: its stdin closed (it exits after the request it is on), or killed."""
        self.alive = False
        if kill:
            self.proc.kill()
        try:
            self.proc.stdin.close()
        except OSError:
            pass
        try:
            self.proc.wait(timeout=5)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        self.err.close()


_Child = IsolatedChild


def _start() -> _Child:
    return _Child()


_kept: _Child | None = None
_kept_lock = threading.Lock()


#: Largest peak resident set (bytes) a validator child of this process reported; None before any
#: did. Read by the fuzz runner, which bounds the children's memory as well as its own.
peak_child_rss: int | None = None


def _note_peak(doc: dict) -> None:
    global peak_child_rss
    got = doc.get("peak_rss")
    if isinstance(got, int) and (peak_child_rss is None or got > peak_child_rss):
        peak_child_rss = got


def _answer(doc: dict, mem: int | None = None) -> Verdict:
    """The verdict of one answer of an isolated child (``mem``: its address-space limit, bytes)."""
    if doc.get("ok"):
        return Verdict(True)
    if doc.get("memory"):
        mem = address_space_limit() if mem is None else mem
        return Verdict(False, reason=f"corrupt or hostile file: the isolated validator hit the "
                                     f"address-space limit of {mem >> 20} MiB; refused")
    return Verdict(False, str(doc.get("line", "")), doc.get("dataset"), str(doc.get("reason", "refused")))


def _death(rc: int, stderr: bytes, cpu: int, mem: int) -> Verdict:
    """The refusal of the path a child was on when it ended (by a signal, or an error of its own)."""
    if rc is not None and rc < 0:
        sig = -rc
        name = signal.Signals(sig).name if sig in signal.valid_signals() else f"signal {sig}"
        why = {signal.SIGXCPU: f"hit the CPU-time limit of {cpu} s",
               signal.SIGKILL: f"was killed (SIGKILL; at the CPU-time limit of {cpu} s or out of memory)",
               signal.SIGSEGV: "crashed (SIGSEGV) inside the HDF5 library",
               signal.SIGABRT: f"aborted (SIGABRT; possibly at the address-space limit of {mem >> 20} MiB)",
               signal.SIGBUS: "crashed (SIGBUS) reading the file"}.get(sig, f"died by {name}")
        return Verdict(False, reason=f"corrupt or hostile file: the isolated validator {why}; refused")
    err = stderr.decode("utf-8", "replace").strip().splitlines()
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


def _as_verdict(got) -> Verdict | None:
    """A cached entry as a Verdict (None when absent or not understood)."""
    if not isinstance(got, dict):
        return None
    try:
        return Verdict(bool(got["ok"]), str(got.get("line", "")), got.get("dataset"), str(got.get("reason", "")))
    except (KeyError, TypeError):
        return None


def _cache_put(verdicts: dict) -> None:
    """Add verdicts (cache key -> Verdict); written to a temporary file then renamed over the
    cache (atomic; parallel writers may lose each other's entries, which only costs a re-check)."""
    doc = _cache_load()
    now = time.time()
    for key, v in verdicts.items():
        doc[key] = {"ok": v.ok, "line": v.line, "dataset": v.dataset, "reason": v.reason, "at": now}
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
