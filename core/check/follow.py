"""Checking a trace while a recorder is still writing it: new frames are checked as they are committed.

Each round re-reads the commit record (:meth:`Trace.refresh`, HDF5 SWMR read), checks only the
frames committed since the last round as a frame range of :func:`check_trace`, and adds the
counts. A range starts from the world with every earlier edit applied and measures the gap of its
first frame from the recorded end of the frame before it, so the first frame of a round is checked
for ``discontinuity`` against the last frame of the previous round, and the summed counts and
divergence list equal those of one check of the finished trace. It ends when the writer marks the
file closed, or when ``should_stop`` says so.
"""
from __future__ import annotations

import time

from resweep.core.check.stream import TraceReport, check_trace
from resweep.core.format.reader import Trace
from resweep.core.solve.settings import SolverSettings


def follow_trace(trace: Trace, settings: SolverSettings = SolverSettings(), limit: int = 1000,
                 poll_seconds: float = 0.5, should_stop=None, on_round=None, sleep=time.sleep) -> TraceReport:
    """Check ``trace`` (opened with ``swmr=True``) until its writer closes it.

    ``on_round(report)`` is called after each round that checked new frames; ``should_stop()``
    returning True ends the loop (``report.cancelled`` set, ``report.ended_early`` says how far
    the recording had been committed). Returns the summed report.
    """
    total = TraceReport(trace.path, 0, trace.entity_count, 0)
    done = 0
    while True:
        closed = not trace.ended_early
        F = trace.frame_count
        total.ended_early = trace.ended_early_info()
        if F > done:
            part = check_trace(trace, settings, limit=max(0, limit - len(total.divergences)), frames=(done, F))
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
