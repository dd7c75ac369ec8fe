"""Where farm tasks run: one in-process thread, a local Dask cluster, or a remote Dask scheduler.

Every engine takes :func:`farm_task.check_batch` calls and hands back futures that call their done
callbacks once; :meth:`outcome` turns a finished future into ``([PartResult, ...], None)`` or
``(None, one-line reason)`` (``(None, None)`` when it was cancelled); :meth:`prewarm` is called
once before the first task (a Dask engine starts every worker's isolated child then). Dask is
imported only when a Dask engine is made, so importing the core never loads it.

Dask runs each task on some worker; when a worker process dies mid-task, its scheduler hands the
task to another worker (up to ``distributed.scheduler.allowed-failures`` times, then the trace is
reported unreadable with a ``KilledWorker`` reason), so no trace is lost to one crash.
"""
from __future__ import annotations

import contextlib
import logging
import os
import signal
import threading
import time
import uuid
from concurrent.futures import CancelledError, ThreadPoolExecutor

from resweep.core.analysis.farm_task import check_batch, start_child, unpack
from resweep.core.errors import ClusterError


#: Seconds between two progress events of one task (a farm of 100 nodes sends its scheduler about
#: one message per worker and second).
PROGRESS_SECONDS = 1.0


class _Tallies:
    """Running tallies of unfinished tasks, ``task -> (traces, entity-frames)``, for live progress
    (shared between the thread that hears them and the one that reads them)."""

    def __init__(self):
        self._lock = threading.Lock()
        self._live: dict = {}
        self._gone: set = set()

    def hear(self, task, traces: int, rows: int) -> None:
        with self._lock:
            if task not in self._gone:
                self._live[task] = (int(traces), int(rows))

    def forget(self, task) -> None:
        """The task's result is in: its results count from now on, its tally no more."""
        with self._lock:
            self._gone.add(task)
            self._live.pop(task, None)

    def total(self) -> tuple[int, int]:
        with self._lock:
            return sum(t for t, _ in self._live.values()), sum(r for _, r in self._live.values())


class _LocalReport:
    """``report`` of a task in this process: straight into the tallies."""

    def __init__(self, tallies: _Tallies, task):
        self.tallies, self.task = tallies, task

    def __call__(self, traces, rows):
        self.tallies.hear(self.task, traces, rows)


class _EventReport:
    """``report`` of a task on a Dask worker: a worker event on ``topic``, at most once per
    :data:`PROGRESS_SECONDS` (picklable; each task gets its own copy)."""

    def __init__(self, topic: str, task):
        self.topic, self.task, self._last = topic, task, 0.0

    def __call__(self, traces, rows):
        now = time.monotonic()
        if now - self._last < PROGRESS_SECONDS:
            return
        self._last = now
        from distributed import get_worker
        try:
            get_worker().log_event(self.topic, (self.task, int(traces), int(rows)))
        except ValueError:  # not running on a worker (never in a farm): no live progress
            pass


class _TaskStop:
    """``should_stop`` of a task on a Dask worker (picklable): True once the scheduler cancelled
    the task (``Client.cancel``) or its worker is closing. The running job's isolated child is then
    killed at once (``farm_task``), so Ctrl-C and the cluster's close do not wait for the job to
    end, nor the nanny for its timeout."""

    def __call__(self) -> bool:
        from distributed import get_worker
        try:
            worker = get_worker()
        except ValueError:  # not on a worker (never in a farm)
            return False
        if worker.status.name in ("closing", "closed", "failed", "stopping", "stopped"):
            return True
        ts = worker.state.tasks.get(worker.get_current_task())
        return ts is None or ts.state in ("cancelled", "released", "forgotten")


def _reason(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return f"{type(exc).__name__}: {text}"[:400]


class ThreadEngine:
    """Tasks run one at a time on a thread of this process (``--workers 1``: nothing to start, the
    solver keeps all its threads); cancelling stops the running check at its next frame block."""

    workers = 1
    name = "this process"

    def __init__(self):
        self._pool = ThreadPoolExecutor(1, thread_name_prefix="resweep-farm")
        self._stop = threading.Event()
        self.tallies = _Tallies()

    def prewarm(self, options) -> None:
        """Nothing to do: this process's one child starts with the first job, and no worker
        waits meanwhile."""

    def submit(self, jobs, options, task=None):
        return self._pool.submit(check_batch, jobs, options, self._stop.is_set, _LocalReport(self.tallies, task))

    def outcome(self, fut):
        try:
            return [unpack(p) for p in fut.result()], None
        except CancelledError:
            return None, None
        except Exception as exc:  # a bug while checking this trace: the batch goes on
            return None, f"internal error: {_reason(exc)}"

    def cancel(self, futures):
        self._stop.set()
        for f in futures:
            f.cancel()

    def close(self):
        self._pool.shutdown(wait=True, cancel_futures=True)


class DaskEngine:
    """Tasks on a Dask cluster: ``address`` of a running scheduler, or a LocalCluster of
    ``workers`` processes with one task thread each (started here, closed by :meth:`close`)."""

    def __init__(self, address: str | None = None, workers: int | None = None, timeout: float = 20.0):
        try:
            from distributed import Client, LocalCluster
        except ImportError as exc:  # pragma: no cover - a dependency
            raise ClusterError(address or "local", f"dask.distributed is not installed ({exc})") from None
        self._cluster = None
        self._warm: list = []  # futures of the prewarm tasks (kept so that they are not released early)
        try:
            if address:
                self.client = Client(address, timeout=timeout)
            else:
                import dask
                # Dask's sampling profiler wakes every worker 100 times a second; on a busy machine
                # that costs the solver a noticeable share of its core.
                with dask.config.set({"distributed.worker.profile.enabled": False}), _workers_ignore_ctrl_c():
                    self._cluster = LocalCluster(n_workers=workers or os.cpu_count() or 1, threads_per_worker=1,
                                                 processes=True, dashboard_address=":0",
                                                 silence_logs=logging.CRITICAL)  # reasons reach the summary
                self.client = Client(self._cluster)
                from resweep.core.analysis.farm_quick_exit import QuickExit
                self.client.register_plugin(QuickExit(), name="resweep-quick-exit")
        except (OSError, TimeoutError, ValueError, RuntimeError) as exc:
            self.close()
            raise ClusterError(address or "local", f"cannot start or reach the cluster: {_reason(exc)}") from None
        self.name = address or f"local cluster, {workers} worker processes"
        self.workers = max(1, len(self.client.scheduler_info().get("workers", {})))
        self.tallies = _Tallies()
        self._topic = f"resweep-progress-{uuid.uuid4().hex}"
        self.client.subscribe_topic(self._topic, self._heard)

    def _heard(self, event):
        _, (task, traces, rows) = event
        self.tallies.hear(task, traces, rows)

    def prewarm(self, options) -> None:
        """Ask every worker to start its isolated child now (``farm_task.start_child``: returns at
        once, the child imports on its own), so no worker starts one only when its first job
        comes, e.g. while it waited for a big trace's plan. Best effort: a worker that fails or
        leaves just starts its child with its first job, as without this."""
        try:
            workers = list(self.client.scheduler_info().get("workers", {}))
            self._warm = [self.client.submit(start_child, options, workers=[w], allow_other_workers=False,
                                             pure=False) for w in workers]
        except (OSError, TimeoutError, ValueError, RuntimeError):
            self._warm = []

    def submit(self, jobs, options, task=None):
        return self.client.submit(check_batch, jobs, options, _TaskStop(), _EventReport(self._topic, task),
                                  pure=False)

    def outcome(self, fut):
        if fut.status == "cancelled":
            return None, None
        try:
            return [unpack(p) for p in fut.result()], None
        except CancelledError:
            return None, None
        except Exception as exc:  # KilledWorker after repeated worker deaths, or a bug in the task
            return None, f"worker failed: {_reason(exc)}"

    def cancel(self, futures):
        if futures:
            self.client.cancel(list(futures), force=True)

    def close(self):
        client = getattr(self, "client", None)
        self._warm = []  # released with the client
        if client is not None:
            client.close()
        if self._cluster is not None:
            self._cluster.close()


@contextlib.contextmanager
def _workers_ignore_ctrl_c():
    """Start worker processes with SIGINT ignored (an ignored signal stays ignored in a child), so
    Ctrl-C in a terminal, which reaches the whole process group, interrupts only this process: it
    cancels the work and closes the cluster, instead of every worker dying with a traceback."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, old)
