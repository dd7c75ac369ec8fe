"""Run a farm: hand every trace (and every range of a big one) to an engine, gather the results.

Small traces go out in batches (one task checks several, see ``farm_plan.plan_batches``); a task
that finds its trace too big returns a plan and the trace's ranges go out as tasks of their own. Results are stored by trace and first frame, so a task run twice (Dask re-runs the
tasks of a worker that died) counts once, and the outcome does not depend on finishing order.
Ctrl-C (KeyboardInterrupt) cancels the outstanding work and returns what was finished.
"""
from __future__ import annotations

import os
import queue

from resweep.core.analysis.farm_plan import plan_batches
from resweep.core.analysis.farm_report import FarmResults, merge_ranges


def run_farm(traces, options, engine, progress=None, missing=()) -> FarmResults:
    """Check ``traces`` (TraceInputs) with ``options`` (FarmOptions) on ``engine``.

    Args:
        missing: farm_inputs.Missing entries, recorded as unreadable.
        progress: called as ``progress(traces_done, traces_total, entity_frames_done)`` after every
            finished task and, while tasks run, about four times a second with what the workers
            reported so far (``engine.tallies``: traces finished inside running tasks and
            entity-frames checked in them, the latter estimated as frames read times entities
            until the task's report gives the exact count).
    """
    res = FarmResults(list(traces), keys={t.path: t.key for t in traces})
    for m in missing:
        res.unreadable[m.input] = f"{m.input}: {m.reason}"
    run = _Run(res, options, engine, progress)
    engine.prewarm(options)
    for batch in plan_batches([_size(t.path) for t in res.traces], engine.workers):
        run.submit([(res.traces[i].path, None) for i in batch])
    try:
        run.drain()
    except KeyboardInterrupt:
        res.interrupted = True
        engine.cancel(list(run.live))
    return res


class _Run:
    """The bookkeeping of one farm run (futures in flight, ranges of split traces)."""

    def __init__(self, res: FarmResults, options, engine, progress):
        self.res, self.options, self.engine, self.progress = res, options, engine, progress
        self.done = queue.Queue()
        self.live = {}    # future -> [(path, frames), ...]
        self.plans = {}   # path -> [(f0, f1), ...]
        self.parts = {}   # path -> {f0: TraceReport}
        self.rows_done = 0
        self.finished = 0  # traces with a report or a reason
        self.tasks = 0
        self.ids = {}     # future -> task number (the key of its live tally)

    def submit(self, jobs):
        self.tasks += 1
        fut = self.engine.submit(jobs, self.options, self.tasks)
        self.live[fut] = jobs
        self.ids[fut] = self.tasks
        fut.add_done_callback(self.done.put)

    def drain(self):
        while self.live:
            try:
                fut = self.done.get(timeout=0.25)
            except queue.Empty:
                self.tell()
                continue
            if fut not in self.live:
                continue
            jobs = self.live.pop(fut)
            self.engine.tallies.forget(self.ids.pop(fut))
            parts, reason = self.engine.outcome(fut)
            if reason is not None and len(jobs) > 1:  # a batch failed: retry its traces one by one,
                for job in jobs:                        # so one bad trace cannot sink its batch-mates
                    self.submit([job])
            elif reason is not None:
                self.take(jobs[0][0], None, reason)
            for part in parts or ():
                self.take(part.path, part, None)
            self.tell()

    def tell(self):
        """Progress so far: finished tasks' results plus the running tasks' tallies."""
        if self.progress is not None:
            traces, rows = self.engine.tallies.total()
            self.progress(min(self.finished + traces, len(self.res.traces)), len(self.res.traces),
                          self.rows_done + rows)

    def take(self, path, part, reason):
        res = self.res
        if path in res.unreadable or path in res.reports:
            return  # a duplicate, or another range of a trace that already failed
        if part is not None:
            res.worker_seconds += part.seconds
        if reason is not None or (part is not None and part.error):
            res.unreadable[path] = _with_path(path, reason or part.error)
            self.parts.pop(path, None)
            self.finished += 1
        elif part is None or part.report is None and part.plan is None:
            return  # cancelled: not checked
        elif part.plan is not None:
            if path in self.plans:
                return  # the same plan again, from a task that ran twice
            self.plans[path] = [tuple(r) for r in part.plan]
            for r in self.plans[path]:
                self.submit([(path, r)])
        elif not part.report.cancelled:
            self.rows_done += part.report.entity_frames
            got = self.parts.setdefault(path, {})
            got[part.frames[0]] = part.report
            plan = self.plans.get(path, [(part.frames[0], part.frames[1])])
            if all(f0 in got for f0, _ in plan):
                res.reports[path] = merge_ranges([got[f0] for f0, _ in plan], self.options.limit)
                del self.parts[path]
                self.finished += 1


def _with_path(path: str, reason: str) -> str:
    """Reasons from the reader start with the path; an engine's reason gets it in front."""
    return reason if reason.startswith(str(path)) else f"{path}: {reason}"


def _size(path: str) -> int:
    try:
        return os.path.getsize(path)
    except OSError:
        return 0
