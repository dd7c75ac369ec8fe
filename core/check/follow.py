"""Checking a trace while a recorder is still writing it: new frames are checked as they are committed.

Each round re-reads the commit record (:meth:`Trace.refresh`, HDF5 SWMR read), checks only the
frames committed since the last round with :func:`check_trace` on a window of the trace, and
adds the counts. It ends when the writer marks the file closed, or when ``should_stop`` says so.
A frame at the start of a round is not compared with the last frame of the previous round for
``discontinuity`` (each round starts without a previous frame).
"""
from __future__ import annotations

import time

from resweep.core.check.stream import TraceReport, check_trace
from resweep.core.format.reader import Trace
from resweep.core.solve.settings import SolverSettings


class _Window:
    """``trace`` seen as frames ``[f0, f1)`` by :func:`check_trace` (frame numbers stay absolute)."""

    def __init__(self, trace: Trace, f0: int, f1: int):
        self._trace, self.f0, self.frame_count = trace, f0, f1

    def __getattr__(self, name):
        return getattr(self._trace, name)

    def iter_frames(self, rows: int = 1 << 17, f0: int = 0, f1: int | None = None, prefetch: bool = False):
        return self._trace.iter_frames(rows, max(f0, self.f0), self.frame_count if f1 is None else f1, prefetch)


def follow_trace(trace: Trace, settings: SolverSettings = SolverSettings(), limit: int = 1000,
                 poll_seconds: float = 0.5, should_stop=None, on_round=None, sleep=time.sleep) -> TraceReport:
    """Check ``trace`` (opened with ``swmr=True``) until its writer closes it.

    ``on_round(report)`` is called after each round that checked new frames; ``should_stop()``
    returning True ends the loop (``report.cancelled`` set). Returns the summed report.
    """
    total = TraceReport(trace.path, 0, trace.entity_count, 0)
    done = 0
    while True:
        closed = not trace.ended_early
        F = trace.frame_count
        if F > done:
            part = check_trace(_Window(trace, done, F), settings, limit=max(0, limit - len(total.divergences)))
            for k, n in part.counts.items():
                total.counts[k] += n
            total.divergences += part.divergences
            total.entity_frames += part.entity_frames
            total.frames, total.entities = F, trace.entity_count
            done = F
            if on_round is not None:
                on_round(total)
        if closed:
            return total
        if should_stop is not None and should_stop():
            total.cancelled = True
            return total
        sleep(poll_seconds)
        trace.refresh()
