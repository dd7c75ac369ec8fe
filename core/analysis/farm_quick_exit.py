"""Worker plugin of the local Dask cluster: a worker process ends as soon as its worker closed.

A process that loaded the solver's kernels spends 0.7 s (measured on one plain process) to 2 s
(a local worker on a loaded machine) in the interpreter's final clean-up, freeing compiled code
module by module, and the nanny waits for that before the cluster counts as closed. Nothing is
left to save by then (the worker has closed its connections and has no task), so the last exit
handler registered flushes the standard streams and leaves with ``os._exit``. Only clusters this
process starts get the plugin: worker processes of someone else's cluster are left as they are.
Imported only when a local cluster starts (it imports ``distributed``).
"""
from __future__ import annotations

import atexit
import os
import sys

from distributed import WorkerPlugin


class QuickExit(WorkerPlugin):
    """Registers :func:`exit_now` in every worker process, including ones the nanny restarts."""

    def setup(self, worker):
        atexit.register(exit_now)  # registered after dask's own handlers, so it runs first


def exit_now():
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError, AttributeError):
            pass
    os._exit(0)
