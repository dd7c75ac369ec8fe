"""Whole-trace divergence check: stream frames, re-solve, classify, count (kinds: ``kinds.py``)."""
from __future__ import annotations

from dataclasses import dataclass, field

import numba
import numpy as np

from resweep.core.check import nb_gather
from resweep.core.check import validity
from resweep.core.check.kinds import BY_NAME, DISCONTINUITY, INVALID, KINDS, SEVERITY, kind_mask, kinds_of
from resweep.core.check.rows import RowResults, flag_rows, solve_rows
from resweep.core.solve.settings import SolverSettings
from resweep.core.format.reader import Trace



@dataclass
class Divergence:
    """One kind found on one entity-frame.

    ``time`` in seconds; ``start``, ``motion`` and the ends in world units (None for a
    non-finite component); ``error`` in world units (None for ``invalid``); ``reason`` says what
    makes an ``invalid`` row invalid (``validity.reason``, e.g. "motion.x is NaN"), None for other
    kinds; ``passes`` lists the reference passes as dicts t / normal / voxel.
    """

    frame: int
    entity: int
    kind: str
    severity: str
    recorded_end: list
    reference_end: list
    error: float | None
    passes: list
    time: float = 0.0
    name: str = ""
    start: list = field(default_factory=list)
    motion: list = field(default_factory=list)
    reason: str | None = None
    step: dict | None = None

    def as_json(self) -> dict:
        doc = {"frame": self.frame, "time": self.time, "entity": self.entity, "name": self.name,
               "kind": self.kind, "severity": self.severity, "start": self.start, "motion": self.motion,
               "recorded_end": self.recorded_end, "reference_end": self.reference_end, "error": self.error,
               "reason": self.reason, "passes": self.passes}
        if self.step is not None:
            doc["step"] = self.step
        return doc


@dataclass
class TraceReport:
    """Result of checking one trace: exact counts per kind, the first ``limit`` divergences.

    ``ended_early``: :meth:`Trace.ended_early_info` of the trace as checked (frames read and the
    last flushed time of a recording its writer has not closed), else None.
    """

    path: str
    frames: int
    entities: int
    entity_frames: int
    counts: dict = field(default_factory=lambda: {k: 0 for k in KINDS})
    divergences: list = field(default_factory=list)
    cancelled: bool = False
    ended_early: dict | None = None

    def failing(self, kinds) -> int:
        return sum(self.counts[k] for k in kinds)

    def as_json(self) -> dict:
        return {"path": self.path, "frames": self.frames, "entities": self.entities,
                "entity_frames": self.entity_frames, "ended_early": self.ended_early, "counts": dict(self.counts),
                "divergences": [d.as_json() for d in self.divergences]}


@dataclass
class BlockResult:
    """Results of one streamed segment, handed to ``on_block`` listeners (e.g. the viewer).

    Attributes:
        frame, column: int64 (M,) frame index and entity column of each solved row.
        rows: RowResults of those rows, with the discontinuity bit merged into ``rows.flags``.
    """

    frame: np.ndarray
    column: np.ndarray
    rows: RowResults


def _finite_list(v) -> list:
    return [float(x) if np.isfinite(x) else None for x in np.asarray(v, np.float64)]


def pass_list(rows: RowResults, i: int) -> list:
    """Reference passes of row ``i`` as JSON-ready dicts."""
    out = []
    for k in range(int(rows.npass[i])):
        hit = rows.block[i, k] >= 0
        out.append({"t": float(rows.toi[i, k]), "normal": [int(x) for x in rows.normal[i, k]],
                    "voxel": [int(x) for x in rows.voxel[i, k]] if hit else None})
    return out


def step_info(rows: RowResults, i: int, voxel_size: float) -> dict:
    """Step-up outcome of row ``i``: which try the reference kept and the height climbed (voxels)."""
    return {"kept": "raised" if rows.raised[i] else "plain", "climbed": float(rows.climb[i]) / voxel_size}


def check_trace(trace: Trace, settings: SolverSettings = SolverSettings(), limit: int = 1000,
                progress=None, on_block=None, should_stop=None, rows_per_block: int = 1 << 17,
                frames: tuple[int, int] | None = None, prefetch: bool | None = None) -> TraceReport:
    """Re-solve every active entity-frame of ``trace`` and classify the recorded run.

    Frames stream in blocks of about ``rows_per_block`` entity-frames (the next block is read
    while this one is solved); only counts and the first ``limit`` divergences are kept, so
    memory does not grow with the trace. ``progress(frames_done, frames_total)`` is called per
    block, ``on_block(BlockResult)`` per solved segment, and ``should_stop()`` may return True to
    cancel (the report then has ``cancelled`` set). World edits are applied as the stream passes
    their frame (:meth:`VoxelWorld.advance_to`), never by rebuilding the world.

    ``frames=(f0, f1)`` checks only frames ``[f0, f1)`` (a farm splits big traces so): the world
    starts at frame ``f0`` with every earlier edit applied, and the gap of frame ``f0`` is measured
    from the recorded end of frame ``f0 - 1``, exactly as a whole-trace check measures it, so the
    counts of consecutive ranges add up to the whole trace's and their divergence lists, joined in
    range order, are its list.

    ``prefetch``: read the next block on a background thread while this one is solved. None (the
    default) prefetches only when the kernels may use more than one thread
    (``numba.get_num_threads()``): with one solver thread the check stays on one thread, so
    ``--threads 1`` and a farm worker with one thread use one core, not one and a third (reading
    and decompressing a 6 M entity-frame trace is about a quarter of its CPU time).
    """
    report = TraceReport(trace.path, trace.frame_count, trace.entity_count, 0, ended_early=trace.ended_early_info())
    trace.decode_with_kernels()  # the solver loads numba anyway: decode frames on its threads too
    world = trace.world()
    tol = settings.tolerance * trace.voxel_size
    dt = settings.dtype
    edit_frames = world.edit_frames()
    N = trace.entity_count
    f0, f1 = (0, trace.frame_count) if frames is None else frames
    prev_end = np.zeros((N, 3))  # float64 recorded end of the frame before the block
    prev_active = np.zeros(N, bool)
    has_prev = False
    if f0 > 0:  # a range: the frame before it closes the first gap
        before = trace.frames(f0 - 1, f0)
        prev_end, prev_active, has_prev = np.asarray(before.end[-1], np.float64), before.active[-1].copy(), True
    buf = _Buffers(dt, settings.passes, keep_rows=on_block is None)
    if prefetch is None:
        prefetch = numba.get_num_threads() > 1
    for blk in trace.iter_frames(rows_per_block, f0, f1, prefetch=prefetch):
        if should_stop is not None and should_stop():
            report.cancelled = True
            break
        # Split the block where world edits apply, so each segment sees one world.
        cuts = edit_frames[(edit_frames > blk.f0) & (edit_frames < blk.f1)]
        bounds = [blk.f0, *cuts.tolist(), blk.f1]
        for a, b in zip(bounds[:-1], bounds[1:]):
            world.advance_to(a)
            fr, col = (np.ascontiguousarray(x) for x in np.nonzero(blk.active[a - blk.f0:b - blk.f0]))  # one kernel layout
            fr = fr + (a - blk.f0)
            if not len(fr):
                continue
            M = len(fr)
            start, motion, end, gap, disc = buf.rows_in(M)
            nb_gather.gather_rows(blk.start, blk.motion, blk.end, blk.active, prev_end, prev_active, has_prev,
                                 fr, col, tol, start, motion, end, gap, disc)
            half = blk.half[0][col] if blk.half.strides[0] == 0 else blk.half[fr, col]
            ground = None if blk.grounded is None else blk.grounded[fr, col]
            flags, rows, kept = _solve_segment(world, settings, buf, (start, motion, end, half), ground, gap, disc,
                                               trace.up_axis, every_row=on_block is not None,
                                               details=max(0, limit - len(report.divergences)))
            report.entity_frames += M
            _count(report, flags)
            _collect(report, trace, rows, blk, fr[kept], col[kept], limit, dt, settings.step_height > 0)
            if on_block is not None:
                on_block(BlockResult(fr + blk.f0, col, rows))
        prev_end = np.asarray(blk.end[-1], np.float64)
        prev_active = np.ascontiguousarray(blk.active[-1])
        has_prev = True
        if progress is not None:
            progress(blk.f1, trace.frame_count)
    return report


def _solve_segment(world, settings, buf, rows_in, ground, gap, disc, up, every_row: bool, details: int):
    """Solve and classify the M rows of one segment: (flags int32 (M,) with the discontinuity bit,
    RowResults of the kept rows, int64 indices of the kept rows). ``rows_in``: start, motion,
    recorded end, half float (M, 3); ``gap`` float64 and ``disc`` bool (M,) from the gather.

    With ``every_row`` every row is kept with all its results (a block listener reads them);
    otherwise the kernel writes only the flags, and the first ``details`` rows that diverge are
    solved again with every output for their details (counts need only the flags; each diverging
    row gives the report at least one divergence, so ``details`` rows fill the room left under
    the report's limit, and the rows after them would be dropped by ``_collect`` anyway)."""
    M = len(disc)
    if every_row:
        rows = solve_rows(world, *rows_in, settings, out=buf.rows_out(M), up=up, grounded=ground)
        kept = np.arange(M)
    else:
        flags = flag_rows(world, *rows_in, settings, buf.flags_out(M), up=up, grounded=ground)
        kept = np.flatnonzero(flags | disc)[:details]
        if not len(kept):  # nothing to detail: no second kernel call (a summary-only farm's traces)
            return flags | (disc.astype(np.int32) << DISCONTINUITY), None, kept
        rows = solve_rows(world, *(a[kept] for a in rows_in), settings, out=buf.rows_out(len(kept)), up=up,
                          grounded=None if ground is None else ground[kept])
    d = disc[kept]
    rows.flags |= d.astype(np.int32) << DISCONTINUITY
    rows.error[d, DISCONTINUITY] = gap[kept][d]
    if every_row:
        return rows.flags, rows, kept
    return flags | (disc.astype(np.int32) << DISCONTINUITY), rows, kept


class _Buffers:
    """Row arrays reused from segment to segment (fresh memory per block costs page faults, about
    a fifth of a big check). Results are reused only when no listener may keep them."""

    def __init__(self, dtype, passes: int, keep_rows: bool):
        self.dtype, self.passes, self.keep_rows = dtype, passes, keep_rows
        self.cap = 0

    def _grow(self, m: int):
        if m > self.cap:
            self.cap = m
            dt = self.dtype
            self.inputs = (np.empty((m, 3), dt), np.empty((m, 3), dt), np.empty((m, 3), dt), np.empty(m),
                           np.empty(m, bool))
            self.flags = np.empty(m, np.int32)
            self.rows = RowResults.alloc(m, self.passes, dt) if self.keep_rows else None

    def rows_in(self, m: int):
        """start, motion, recorded end float (m, 3); gap float64 (m,); disc bool (m,)."""
        self._grow(m)
        return tuple(a[:m] for a in self.inputs)

    def flags_out(self, m: int) -> np.ndarray:
        """int32 (m,) flags of every row of a segment."""
        self._grow(m)
        return self.flags[:m]

    def rows_out(self, m: int):
        self._grow(m)
        return self.rows


def _count(report: TraceReport, flags: np.ndarray):
    nz = flags[flags != 0]
    if not len(nz):
        return
    for kind in KINDS:
        report.counts[kind] += int(np.count_nonzero(nz & kind_mask(kind)))


def _collect(report: TraceReport, trace: Trace, rows: RowResults, blk, fr, cols, limit: int, dtype,
             stepping: bool = False):
    """Append the divergences of solved rows (frames ``blk.f0 + fr``, columns ``cols``) up to
    ``limit``; inputs are read from the block (file dtype) only for the rows kept. ``dtype``: the
    solve's float type (an invalid row's reason is judged in it, as the kernel judged the row);
    ``stepping``: step-up is on, so records say which try was kept."""
    if len(report.divergences) >= limit or rows is None:
        return
    for i in np.flatnonzero(rows.flags):
        r, c = fr[i], cols[i]
        row = (blk.start[r, c], blk.motion[r, c], blk.end[r, c], blk.half[r, c])
        for kind in kinds_of(rows.flags[i]):
            if len(report.divergences) >= limit:
                return
            err = float(rows.error[i, BY_NAME[kind].bit])
            report.divergences.append(Divergence(
                int(blk.f0 + r), int(trace.ids[c]), kind, SEVERITY[kind],
                _finite_list(row[2]), _finite_list(rows.ref_end[i]),
                err if np.isfinite(err) else None, pass_list(rows, i),
                time=float(trace.time[blk.f0 + r]), name=str(trace.names[c]),
                start=_finite_list(row[0]), motion=_finite_list(row[1]),
                reason=validity.reason(*row, dtype=dtype) if BY_NAME[kind].bit == INVALID else None,
                step=step_info(rows, i, trace.voxel_size) if stepping else None))

