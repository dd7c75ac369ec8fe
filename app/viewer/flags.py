"""Whole-trace divergence flags for the viewer, filled block by block as the re-solve streams.

Severity codes (int8): 0 none, 1 info, 2 warning, 3 error (``core.check.SEVERITY_RANK``), and
-1 "not solved yet" where a frame has had no results. Nothing here imports Qt.

Every summary the window reads while the re-solve streams (per-frame OR of the flags, counts per
entity and kind, frames solved) is kept up to date block by block, so the work per block is
proportional to the block, never to the trace: a long trace re-solves in time linear in its length.
"""
from __future__ import annotations

import numpy as np

from resweep.core.check.kinds import KINDS, kind_mask, severity_mask
from resweep.core.check.stream import BlockResult

UNSOLVED = -1
_KIND_MASKS = np.array([kind_mask(k) for k in KINDS], np.int32)


def severity_of(flags: np.ndarray) -> np.ndarray:
    """Worst severity rank of each flags value: int32 (...) -> int8 (...) in 0..3."""
    flags = np.asarray(flags)
    out = np.zeros(flags.shape, np.int8)
    for rank in (1, 2, 3):  # ascending, so the worst rank present wins
        out[(flags & severity_mask(rank)) != 0] = rank
    return out


def pixels_of_frames(lo: int, hi: int, n: int, pixels: int) -> tuple[int, int]:
    """Pixels ``[i0, i1)`` of a ``pixels``-wide strip over ``n`` frames that show any of frames
    ``[lo, hi)`` (binning as in :func:`bin_worst`)."""
    if hi <= lo or n <= 0 or pixels <= 0:
        return 0, 0
    if pixels <= n:  # frame f lands in bin floor(f * p / n)
        return lo * pixels // n, (hi - 1) * pixels // n + 1
    # pixel i shows frame floor(i * n / p): the pixels of frame f are ceil(f p / n) .. ceil((f+1) p / n) - 1
    return -(-lo * pixels // n), min(pixels, -(-hi * pixels // n))


def bin_pixels(values_of, n: int, pixels: int, i0: int = 0, i1: int | None = None) -> np.ndarray:
    """Pixels ``[i0, i1)`` of :func:`bin_worst` over ``n`` values, reading only the values those
    pixels cover: ``values_of(a, b)`` returns int8 (b - a,) values ``[a, b)``. Returns int8 (i1 - i0,)."""
    pixels = int(pixels)
    i1 = pixels if i1 is None else i1
    if i1 <= i0:
        return np.zeros(0, np.int8)
    if n == 0:
        return np.full(i1 - i0, UNSOLVED, np.int8)
    if pixels >= n:
        at = (np.arange(i0, i1) * n) // pixels
        return np.asarray(values_of(int(at[0]), int(at[-1]) + 1), np.int8)[at - at[0]]
    edges = (np.arange(i0, i1 + 1) * n + pixels - 1) // pixels  # ceil(i*n/p): strictly increasing, p <= n
    vals = np.asarray(values_of(int(edges[0]), int(edges[-1])), np.int8)
    return np.maximum.reduceat(vals, edges[:-1] - edges[0]).astype(np.int8)


def bin_worst(values: np.ndarray, pixels: int) -> np.ndarray:
    """Split ``values`` (int8 (n,)) into ``pixels`` consecutive bins and keep each bin's maximum.

    Value ``f`` lands in bin ``floor(f * p / n)`` (the pixel where its slot starts), exactly one
    bin each, so one error frame among thousands still marks its pixel. With more pixels than
    values, pixel ``i`` shows value ``floor(i * n / p)``. Returns int8 (pixels,).
    """
    values = np.asarray(values, np.int8)
    if int(pixels) <= 0:
        return np.zeros(0, np.int8)
    return bin_pixels(lambda a, b: values[a:b], len(values), pixels)


def kind_counts(columns: np.ndarray, flags: np.ndarray, entity_count: int) -> np.ndarray:
    """Entity-frames per (column, kind) among rows ``columns`` (int (M,)) with ``flags`` (int32 (M,)):
    int64 (entity_count, len(KINDS))."""
    out = np.zeros((entity_count, len(KINDS)), np.int64)
    nz = np.flatnonzero(flags)
    if len(nz):
        cols, fl = columns[nz], flags[nz]
        for k, mask in enumerate(_KIND_MASKS):
            out[:, k] = np.bincount(cols[(fl & mask) != 0], minlength=entity_count)
    return out


class TraceFlags:
    """Divergence flags of every (frame, entity), as far as the background re-solve has come.

    Attributes:
        flags: int32 (F, N), bit k set when ``KINDS[k]`` applies to that entity-frame.
        solved: bool (F,) frames whose results have arrived (inactive rows count as solved, clear).
        version: int, bumps on every change (widgets redraw when it moves).

    Listeners registered with :meth:`subscribe` hear ``(lo, hi)``, the frames ``[lo, hi)`` whose
    flags or solved state just changed, so they too can redo only that part.
    """

    def __init__(self, frame_count: int, entity_count: int):
        self.flags = np.zeros((frame_count, entity_count), np.int32)
        self.solved = np.zeros(frame_count, bool)
        self.version = 0
        self._any = np.zeros(frame_count, np.int32)  # OR over every column, per frame
        self._subset: tuple[tuple[int, ...], np.ndarray] | None = None  # (columns, OR over them per frame)
        self._counts = np.zeros((entity_count, len(KINDS)), np.int64)
        self._solved_count = 0
        self._diverging = 0  # entity-frames with any flag
        self._listeners: list = []

    @property
    def frame_count(self) -> int:
        return self.flags.shape[0]

    @property
    def entity_count(self) -> int:
        return self.flags.shape[1]

    def subscribe(self, listener):
        """Call ``listener(lo, hi)`` whenever frames ``[lo, hi)`` change (``(0, F)`` on reset)."""
        self._listeners.append(listener)

    def _changed(self, lo: int, hi: int):
        self.version += 1
        for fn in list(self._listeners):
            fn(lo, hi)

    def reset(self):
        """Forget every result (settings changed; a new re-solve is starting)."""
        self.flags[...] = 0
        self.solved[...] = False
        self._any[...] = 0
        self._subset = None
        self._counts[...] = 0
        self._solved_count = 0
        self._diverging = 0
        self._changed(0, self.frame_count)

    def add_block(self, block: BlockResult):
        """Store one streamed segment of ``check_trace`` results (``on_block``)."""
        self.add_rows(block.frame, block.column, block.rows.flags)

    def add_rows(self, frame, column, flags):
        """Store the flags (int32 (M,)) of rows at ``frame``, ``column`` (int (M,) each)."""
        fr = np.asarray(frame, np.int64)
        col = np.asarray(column, np.int64)
        vals = np.asarray(flags, np.int32)
        # a trace still being recorded may have grown since these flags were sized: keep what fits
        keep = (fr < self.frame_count) & (col < self.entity_count)
        if not keep.all():
            fr, col, vals = fr[keep], col[keep], vals[keep]
        self._write(fr, col, vals)
        self.mark_solved(fr)

    def _write(self, fr: np.ndarray, col: np.ndarray, vals: np.ndarray):
        """Overwrite rows (fr, col) with ``vals`` and bring every summary up to date for their frames."""
        if not len(fr):
            return
        flat = self.flags.reshape(-1)  # a view: flat indices gather and scatter faster than pairs
        at = fr * self.entity_count + col
        old = flat[at]
        if old.any():  # rows solved before (a single frame re-solved); a fresh re-solve overwrites zeros
            self._counts -= kind_counts(col, old, self.entity_count)
            self._diverging -= int(np.count_nonzero(old))
        self._counts += kind_counts(col, vals, self.entity_count)
        self._diverging += int(np.count_nonzero(vals))
        flat[at] = vals
        lo, hi = int(fr.min()), int(fr.max()) + 1
        rows = self.flags[lo:hi]
        self._any[lo:hi] = np.bitwise_or.reduce(rows, axis=1)
        if self._subset is not None:
            cols, acc = self._subset
            acc[lo:hi] = np.bitwise_or.reduce(rows[:, list(cols)], axis=1)

    def mark_solved(self, frames):
        """Mark frames done, e.g. a ``progress`` range whose rows were all inactive."""
        frames = np.asarray(frames, np.int64)
        frames = frames[(frames >= 0) & (frames < self.frame_count)]
        if not len(frames):
            return
        lo, hi = int(frames.min()), int(frames.max()) + 1
        before = int(np.count_nonzero(self.solved[lo:hi]))  # frames repeat (one per row): count the range
        self.solved[frames] = True
        self._solved_count += int(np.count_nonzero(self.solved[lo:hi])) - before
        self._changed(lo, hi)

    def set_frame(self, frame: int, flags: np.ndarray, active: np.ndarray):
        """Store the flags of one freshly solved frame (int32 (N,), inactive rows cleared)."""
        cols = np.arange(self.entity_count)
        self._write(np.full(self.entity_count, frame, np.int64), cols,
                    np.where(active, flags, 0).astype(np.int32))
        self.mark_solved([frame])

    @property
    def complete(self) -> bool:
        return self._solved_count == self.frame_count

    @property
    def solved_count(self) -> int:
        """Frames solved so far."""
        return self._solved_count

    # -- summaries -------------------------------------------------------------------------
    def _or_over(self, columns) -> np.ndarray:
        """int32 (F,): OR of the flags of entity ``columns`` (None = all) per frame; the OR over a
        subset is built once per subset and then kept up to date block by block."""
        if columns is None:
            return self._any
        cols = tuple(sorted({int(c) for c in columns}))
        if len(cols) == self.entity_count:
            return self._any
        if not cols:
            return np.zeros(self.frame_count, np.int32)
        if len(cols) == 1:  # one entity (a focused jump): its own column, no cached OR to evict
            return self.flags[:, cols[0]]
        if self._subset is None or self._subset[0] != cols:
            self._subset = (cols, np.bitwise_or.reduce(self.flags[:, list(cols)], axis=1))
        return self._subset[1]

    def _selected(self, columns, kind, f0: int = 0, f1: int | None = None) -> np.ndarray:
        """int32 (f1 - f0,): OR of the selected columns' flags over frames [f0, f1), masked to ``kind``."""
        return self._or_over(columns)[f0:f1] & np.int32(kind_mask(kind))

    def frame_severity(self, columns=None, kind: str | None = None, f0: int = 0,
                       f1: int | None = None) -> np.ndarray:
        """Worst severity per frame of ``[f0, f1)`` over entity ``columns`` (None = all): int8
        (f1 - f0,), -1 unsolved."""
        sev = severity_of(self._selected(columns, kind, f0, f1))
        sev[~self.solved[f0:f1]] = UNSOLVED
        return sev

    def strip(self, pixels: int, f0: int = 0, f1: int | None = None, columns=None,
              kind: str | None = None, i0: int = 0, i1: int | None = None) -> np.ndarray:
        """Worst severity of frames ``[f0, f1)`` binned into ``pixels`` bins: int8 (pixels,), or only
        bins ``[i0, i1)`` of them (reading only the frames they cover).

        A bin shows -1 only when none of its frames has been solved yet.
        """
        f1 = self.frame_count if f1 is None else f1
        if int(pixels) <= 0:
            return np.zeros(0, np.int8)
        return bin_pixels(lambda a, b: self.frame_severity(columns, kind, f0 + a, f0 + b),
                          f1 - f0, pixels, i0, i1)

    def counts(self, column: int) -> dict[str, int]:
        """Entity-frames of entity ``column`` flagged with each kind (so far)."""
        return {k: int(n) for k, n in zip(KINDS, self._counts[column])}

    @property
    def diverging_count(self) -> int:
        """Entity-frames with at least one divergence so far."""
        return self._diverging

    def count_table(self) -> np.ndarray:
        """int64 (N, len(KINDS)): entity-frames flagged with each kind per entity (so far); a view."""
        return self._counts

    def diverging_columns(self) -> np.ndarray:
        """bool (N,): entities with at least one divergence so far."""
        return self._counts.any(axis=1)

    def next_divergence(self, frame: int, columns=None, kind: str | None = None) -> int | None:
        """First frame after ``frame`` where a selected entity diverges (of ``kind``), or None."""
        hit = np.flatnonzero(self._selected(columns, kind, frame + 1))
        return int(frame + 1 + hit[0]) if len(hit) else None

    def previous_divergence(self, frame: int, columns=None, kind: str | None = None) -> int | None:
        """Last frame before ``frame`` where a selected entity diverges (of ``kind``), or None."""
        hit = np.flatnonzero(self._selected(columns, kind, 0, max(0, frame)))
        return int(hit[-1]) if len(hit) else None
