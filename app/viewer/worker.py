"""Background work of the viewer: opening a trace and re-solving the whole trace, off the GUI thread.

The solver kernels release the GIL, so plain Python threads keep the window responsive. Each
piece of work is a numbered job; results travel to the GUI thread as queued Qt signals and are
dropped there if the job has been superseded (another trace opened, settings changed) or
cancelled, so a late block never lands on the wrong trace.
"""
from __future__ import annotations

import threading

from PyQt6.QtCore import QCoreApplication, QEventLoop, QObject, pyqtSignal, pyqtSlot

from resweep.core.errors import ResweepError, printable
from resweep.core.format.vet import vet
from resweep.core.solve.settings import SolverSettings

from resweep.app.viewer.resolve import resolve_trace


def error_line(exc: BaseException) -> str:
    """One line for the user: the core's own line for its typed errors, else type and message
    (escaped and cut: messages can quote text from the file)."""
    if isinstance(exc, ResweepError):
        return printable(str(exc), 1000)
    return f"{type(exc).__name__}: {printable(exc)}"


def off_thread(fn, cancelled, poll_ms: int = 15, quick_s: float = 0.03, on_slow=None):
    """Run ``fn()`` on a worker thread while the Qt event loop keeps running (the window stays
    responsive); returns ``(thread, value)``, or ``(thread, None)`` as soon as ``cancelled()``
    is true (the thread then finishes on its own; its result is dropped). Re-raises ``fn``'s error.

    A result within ``quick_s`` seconds (most single frames) is taken without running the event
    loop: running it there would paint the previous, already superseded frame first. ``on_slow()``
    is called once when it takes longer (e.g. to show a Cancel button).
    """
    box = {}

    def run():
        try:
            box["value"] = fn()
        except BaseException as exc:  # handed to the GUI thread below
            box["error"] = exc
    t = threading.Thread(target=run, daemon=True, name="resweep-frame")
    t.start()
    t.join(quick_s)
    if t.is_alive() and on_slow is not None:
        on_slow()
    while t.is_alive():
        if cancelled():
            return t, None
        QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, poll_ms)
        t.join(0.002)
    if "error" in box:
        raise box["error"]
    return t, box.get("value")


def wait_for(thread, cancelled, poll_ms: int = 15) -> bool:
    """Keep the event loop running until ``thread`` ends (True) or ``cancelled()`` (False)."""
    while thread is not None and thread.is_alive():
        if cancelled():
            return False
        QCoreApplication.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, poll_ms)
        thread.join(0.002)
    return True


class _Job:
    def __init__(self, number: int, kind: str):
        self.number = number
        self.kind = kind  # "load" | "solve"
        self.stop = threading.Event()
        self.thread: threading.Thread | None = None


class TraceWorker(QObject):
    """Runs at most one load and one whole-trace solve at a time; newer jobs cancel older ones.

    Signals (only ever for the current job):
        loaded(session, path): a session object built by ``session_factory(path, settings)``.
        load_failed(path, message): the one-line reason the trace could not be opened.
        progress(done, total): frames solved so far of the current whole-trace solve.
        block(FlagRows): the flags of one streamed segment of results.
        solved(TraceReport): the whole trace has been re-solved (not emitted when cancelled).
        solve_failed(message): the background solve stopped on an error.
        busy(bool): whether any job is running.
    """

    loaded = pyqtSignal(object, str)
    load_failed = pyqtSignal(str, str)
    progress = pyqtSignal(int, int)
    block = pyqtSignal(object)
    solved = pyqtSignal(object)
    solve_failed = pyqtSignal(str)
    busy = pyqtSignal(bool)

    # Internal, emitted from worker threads; queued to the GUI thread where stale jobs are dropped.
    _t_loaded = pyqtSignal(int, object, str)
    _t_load_failed = pyqtSignal(int, str, str)
    _t_progress = pyqtSignal(int, int, int)
    _t_block = pyqtSignal(int, object)
    _t_solved = pyqtSignal(int, object)
    _t_solve_failed = pyqtSignal(int, str)
    _t_done = pyqtSignal(int)

    def __init__(self, session_factory, parent=None):
        super().__init__(parent)
        self._factory = session_factory
        self._counter = 0
        self._load: _Job | None = None
        self._solve: _Job | None = None
        self._t_loaded.connect(self._on_loaded)
        self._t_load_failed.connect(self._on_load_failed)
        self._t_progress.connect(self._on_progress)
        self._t_block.connect(self._on_block)
        self._t_solved.connect(self._on_solved)
        self._t_solve_failed.connect(self._on_solve_failed)
        self._t_done.connect(self._on_done)

    # -- starting and stopping ---------------------------------------------------------------
    def _new_job(self, kind: str) -> _Job:
        self._counter += 1
        return _Job(self._counter, kind)

    def _start(self, job: _Job, target, *args):
        job.thread = threading.Thread(target=target, args=(job, *args), daemon=True,
                                      name=f"resweep-{job.kind}-{job.number}")
        was_busy = self.is_busy()
        if job.kind == "load":
            self._load = job
        else:
            self._solve = job
        job.thread.start()
        if not was_busy:
            self.busy.emit(True)

    def load(self, path: str, settings: SolverSettings, frame: int = 0) -> int:
        """Open ``path`` in the background (isolated validation first, then the trace, then the
        solve of ``frame``, clamped to the trace); cancels a load in progress. A running solve goes
        on (the current trace stays on screen if the new one fails to open)."""
        self._cancel_job(self._load)
        self._load = None
        job = self._new_job("load")
        self._start(job, self._run_load, str(path), settings, int(frame or 0))
        return job.number

    def solve(self, path: str, settings: SolverSettings) -> int:
        """Re-solve every frame of ``path`` in the background; cancels the previous solve."""
        self._cancel_job(self._solve)
        self._solve = None
        job = self._new_job("solve")
        self._start(job, self._run_solve, str(path), settings)
        return job.number

    def _cancel_job(self, job: _Job | None):
        if job is not None:
            job.stop.set()

    def cancel(self):
        """Stop every job; their late signals are dropped."""
        self._cancel_job(self._load)
        self._cancel_job(self._solve)
        had = self.is_busy()
        self._load = self._solve = None
        if had:
            self.busy.emit(False)

    def shutdown(self, timeout: float = 5.0) -> bool:
        """Cancel and wait for the threads (window closing); True when all of them ended."""
        jobs = [j for j in (self._load, self._solve) if j is not None]
        self.cancel()
        ok = True
        for j in jobs:
            if j.thread is not None:
                j.thread.join(timeout)
                ok = ok and not j.thread.is_alive()
        return ok

    def is_busy(self) -> bool:
        return self._load is not None or self._solve is not None

    def solving(self) -> bool:
        return self._solve is not None

    def loading(self) -> bool:
        return self._load is not None

    # -- thread bodies (no Qt objects touched here except emitting signals) --------------------
    def _run_load(self, job: _Job, path: str, settings: SolverSettings, frame: int = 0):
        session = None
        try:
            vet(path)  # isolated first open: a file that hangs or crashes HDF5 stops here
            if not job.stop.is_set():
                session = self._factory(path, settings)
            if session is not None and not job.stop.is_set() and hasattr(session, "frame_state") \
                    and session.trace.frame_count:
                session.frame_state(min(frame, session.trace.frame_count - 1))  # cached for the window
        except Exception as exc:  # the GUI boundary: every failure becomes one line in a dialog
            if session is not None:
                session.close()
            self._t_load_failed.emit(job.number, path, error_line(exc))
        else:
            if session is None:
                pass
            elif job.stop.is_set():
                session.close()
            else:
                self._t_loaded.emit(job.number, session, path)
        self._t_done.emit(job.number)

    def _run_solve(self, job: _Job, path: str, settings: SolverSettings):
        try:
            # resolve_trace opens a Trace of its own (the GUI thread reads frames from the session's);
            # both share the process's one handle of the file (core/format/h5safe.py).
            report = resolve_trace(path, settings, lambda rows: self._t_block.emit(job.number, rows),
                                   lambda done, total: self._t_progress.emit(job.number, done, total),
                                   should_stop=job.stop.is_set)
            if not report.cancelled:
                self._t_solved.emit(job.number, report)
        except Exception as exc:
            self._t_solve_failed.emit(job.number, error_line(exc))
        self._t_done.emit(job.number)

    # -- GUI-thread relays ----------------------------------------------------------------------
    def _current(self, number: int, kind: str) -> bool:
        job = self._load if kind == "load" else self._solve
        return job is not None and job.number == number and not job.stop.is_set()

    @pyqtSlot(int, object, str)
    def _on_loaded(self, number, session, path):
        if self._current(number, "load"):
            self.loaded.emit(session, path)
        else:
            session.close()

    @pyqtSlot(int, str, str)
    def _on_load_failed(self, number, path, message):
        if self._current(number, "load"):
            self.load_failed.emit(path, message)

    @pyqtSlot(int, int, int)
    def _on_progress(self, number, done, total):
        if self._current(number, "solve"):
            self.progress.emit(done, total)

    @pyqtSlot(int, object)
    def _on_block(self, number, blk):
        if self._current(number, "solve"):
            self.block.emit(blk)

    @pyqtSlot(int, object)
    def _on_solved(self, number, report):
        if self._current(number, "solve"):
            self.solved.emit(report)

    @pyqtSlot(int, str)
    def _on_solve_failed(self, number, message):
        if self._current(number, "solve"):
            self.solve_failed.emit(message)

    @pyqtSlot(int)
    def _on_done(self, number):
        was_busy = self.is_busy()
        if self._load is not None and self._load.number == number:
            self._load = None
        if self._solve is not None and self._solve.number == number:
            self._solve = None
        if was_busy and not self.is_busy():
            self.busy.emit(False)
