"""The viewer's whole-trace re-solve, without Qt: the streaming half (worker thread) and the
receiving half (GUI thread), joined in the window by queued signals and in benchmarks by a queue.

The worker hands on only what the window keeps of each block (frames, columns, flags), so the
solver's per-row outputs are freed as soon as a block is solved, however far the GUI thread lags.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from resweep.core.check.stream import TraceReport, check_trace
from resweep.core.format.reader import open_trace
from resweep.core.solve.settings import SolverSettings

from resweep.app.viewer.flags import TraceFlags

#: Entity-frames per streamed block, at least and at most. Small blocks let the strip fill in
#: visibly; on long traces each block costs the solver a parallel start and a hand-over, so there
#: blocks grow to the headless check's size (with 32 blocks or more the strip still fills in).
MIN_BLOCK_ROWS, MAX_BLOCK_ROWS = 1 << 15, 1 << 17


def block_rows(entity_frames: int) -> int:
    """Entity-frames per streamed block for a trace of ``entity_frames`` (frames x entities)."""
    return min(MAX_BLOCK_ROWS, max(MIN_BLOCK_ROWS, int(entity_frames) // 32))


class FlagRows(NamedTuple):
    """Flags of one streamed segment. frame, column: int64 (M,); flags: int32 (M,) kind bits."""

    frame: np.ndarray
    column: np.ndarray
    flags: np.ndarray


def resolve_trace(path, settings: SolverSettings, on_rows, on_progress=None, should_stop=None,
                  rows_per_block: int | None = None) -> TraceReport:
    """Re-solve every frame of the trace at ``path`` (a trace handle of its own, so the GUI thread
    keeps reading frames from the session's) and call ``on_rows(FlagRows)`` per solved segment and
    ``on_progress(frames_done, frames_total)`` per block; ``should_stop()`` cancels.
    ``rows_per_block`` defaults to :func:`block_rows` of the trace."""
    with open_trace(path) as trace:
        rows_per_block = rows_per_block or block_rows(trace.frame_count * trace.entity_count)
        return check_trace(trace, settings, limit=0, progress=on_progress,
                           on_block=lambda b: on_rows(FlagRows(b.frame, b.column, b.rows.flags)),
                           should_stop=should_stop, rows_per_block=rows_per_block)


class ResolveFeed:
    """Receives a streaming re-solve into :class:`TraceFlags` (what the window does per signal)."""

    def __init__(self, flags: TraceFlags):
        self.flags = flags
        self._solved_upto = 0

    def restart(self):
        """A new re-solve starts: forget every result."""
        self.flags.reset()
        self._solved_upto = 0

    def rows(self, rows: FlagRows):
        self.flags.add_rows(rows.frame, rows.column, rows.flags)

    def progress(self, done: int, total: int):
        """Frames before ``done`` are solved (also those of a block whose rows were all inactive)."""
        if done > self._solved_upto:
            self.flags.mark_solved(np.arange(self._solved_upto, min(done, self.flags.frame_count)))
            self._solved_upto = done
