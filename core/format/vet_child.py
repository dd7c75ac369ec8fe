"""The child side of the isolated first open (see ``vet.py``): limits itself, then validates.

Run as ``python -c "...vet_child import main..." CPU_SECONDS ADDRESS_SPACE_BYTES``. It reads paths
on standard input, one JSON string a line, and answers each with one JSON line, flushed, before
reading the next: ``{"ok": true}`` or ``{"ok": false, "dataset": ..., "reason": ...}``
(``"memory": true`` when the address-space limit stopped it), each with ``"peak_rss"``, the
child's own peak resident bytes so far; it ends when its input closes. Each
path gets ``CPU_SECONDS`` of CPU time of its own (the soft limit is moved on before each one),
so the parent knows which path a child that died was on. Worlds stored identically are decoded
once (a soak folder's traces share one). Imports only numpy and resweep.core.format (h5py too,
for a file outside the h5py-free subset, with HDF5's plugin search path cleared: see vet.py).
"""
from __future__ import annotations

import json
import resource
import sys


def _limit_self(mem: int) -> None:
    resource.setrlimit(resource.RLIMIT_AS, (mem, mem))
    resource.setrlimit(resource.RLIMIT_CORE, (0, 0))


def _cpu_for_next(cpu: int) -> None:
    """Give the next path ``cpu`` seconds of CPU time from now: SIGXCPU ends the child past it
    (the parent's wall-time limit backs this up)."""
    used = resource.getrusage(resource.RUSAGE_SELF)
    now = int(used.ru_utime + used.ru_stime) + 1
    _, hard = resource.getrlimit(resource.RLIMIT_CPU)
    soft = now + cpu if hard == resource.RLIM_INFINITY else min(now + cpu, hard)
    resource.setrlimit(resource.RLIMIT_CPU, (soft, hard))


def validate(path: str, worlds=None) -> dict:
    from resweep.core.errors import TraceFormatError
    from resweep.core.format.reader import open_trace
    try:
        with open_trace(path, worlds=worlds) as trace:
            for _ in trace.iter_frames():
                pass
    except TraceFormatError as exc:
        return {"ok": False, "dataset": exc.dataset, "reason": exc.reason, "line": exc.one_line()}
    return {"ok": True}


def peak_rss() -> int | None:
    """This process's own peak resident set in bytes (``VmHWM``), or None where /proc has none.

    Not ``getrusage``: on Linux its ``ru_maxrss`` survives ``exec`` and so also counts the parent
    the child was forked from; ``VmHWM`` belongs to the address space made at ``exec``."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    return None


def main(argv=None) -> int:
    return serve(argv, _Validator())


class _Validator:
    """The validator's answer to one request line (a path as a JSON string)."""

    def __init__(self):
        self.reset()

    def reset(self):
        """Drop what is kept between files (after a MemoryError)."""
        from resweep.core.world.world_cache import WorldCache
        self.worlds = WorldCache(max_bytes=_mem // 4)

    def __call__(self, line: str, say) -> dict:
        return validate(str(json.loads(line)), self.worlds)


_mem = 0


def serve(argv, answer) -> int:
    """The child's loop: limit this process (``argv``: CPU seconds per request, address-space
    bytes), then answer request after request of standard input, one line each, with one JSON
    line (plus ``peak_rss``), flushed before the next is read. ``answer(line, say)`` returns the
    answer's dict; ``say(doc)`` may write interim lines first (the parent reads on to the answer).
    ``answer.reset()`` is called after a request ran out of memory."""
    global _mem
    argv = sys.argv[1:] if argv is None else argv
    cpu, _mem = int(argv[0]), int(argv[1])
    _limit_self(_mem)
    answer.reset()
    for line in iter(sys.stdin.readline, ""):
        if not line.strip():
            continue
        _cpu_for_next(cpu)
        try:
            doc = answer(line, _say)
        except MemoryError:
            doc = {"ok": False, "memory": True}
            answer.reset()
        doc["peak_rss"] = peak_rss()
        _say(doc)
    return 0


def _say(doc: dict) -> None:
    sys.stdout.write(json.dumps(doc) + "\n")
    sys.stdout.flush()
