"""The child side of the isolated first open (see ``vet.py``): limits itself, then validates.

Run as ``python -c "...vet_child import main..." PATH CPU_SECONDS ADDRESS_SPACE_BYTES``. Prints one
JSON line: ``{"ok": true}`` or ``{"ok": false, "dataset": ..., "reason": ...}`` (``"memory": true``
when the address-space limit stopped it), with ``"peak_rss"``: the child's own peak resident bytes. Imports only numpy, h5py and resweep.core.format.
"""
from __future__ import annotations

import json
import sys


def _limit_self(cpu: int, mem: int) -> None:
    import resource
    resource.setrlimit(resource.RLIMIT_CPU, (cpu, cpu + 5))  # SIGXCPU at cpu, SIGKILL at the hard limit
    resource.setrlimit(resource.RLIMIT_AS, (mem, mem))
    resource.setrlimit(resource.RLIMIT_CORE, (0, 0))


def _no_plugins() -> None:
    """Clear HDF5's plugin search path (the parent also set ``HDF5_PLUGIN_PRELOAD=::``, HDF5's
    documented switch that disables dynamic plugin loading, before the library loaded)."""
    import h5py
    h5pl = h5py.h5pl
    for _ in range(h5pl.size()):
        h5pl.remove(0)


def validate(path: str) -> dict:
    from resweep.core.errors import TraceFormatError
    from resweep.core.format.reader import open_trace
    try:
        with open_trace(path) as trace:
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
    argv = sys.argv[1:] if argv is None else argv
    path, cpu, mem = argv[0], int(argv[1]), int(argv[2])
    _limit_self(cpu, mem)
    try:
        _no_plugins()
        doc = validate(path)
    except MemoryError:
        doc = {"ok": False, "memory": True}
    doc["peak_rss"] = peak_rss()
    sys.stdout.write(json.dumps(doc) + "\n")
    sys.stdout.flush()
    return 0
