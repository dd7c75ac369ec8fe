"""Whole-trace divergence flags for the viewer, filled block by block as the re-solve streams.

Severity codes (int8): 0 none, 1 info, 2 warning, 3 error (``core.check.SEVERITY_RANK``), and
-1 "not solved yet" where a frame has had no results. Nothing here imports Qt.
"""
from __future__ import annotations

import numpy as np

from resweep.core.check.kinds import KINDS, kind_mask, severity_mask
from resweep.core.check.stream import BlockResult

UNSOLVED = -1


def severity_of(flags: np.ndarray) -> np.ndarray:
    """Worst severity rank of each flags value: int32 (...) -> int8 (...) in 0..3."""
    flags = np.asarray(flags)
    out = np.zeros(flags.shape, np.int8)
    for rank in (1, 2, 3):  # ascending, so the worst rank present wins
        out[(flags & severity_mask(rank)) != 0] = rank
    return out


def bin_worst(values: np.ndarray, pixels: int) -> np.ndarray:
    """Split ``values`` (int8 (n,)) into ``pixels`` consecutive bins and keep each bin's maximum.

    Value ``f`` lands in bin ``floor(f * p / n)`` (the pixel where its slot starts), exactly one
    bin each, so one error frame among thousands still marks its pixel. With more pixels than
    values, pixel ``i`` shows value ``floor(i * n / p)``. Returns int8 (pixels,).
    """
    values = np.asarray(values, np.int8)
    n = len(values)
    pixels = int(pixels)
    if pixels <= 0:
        return np.zeros(0, np.int8)
    if n == 0:
        return np.full(pixels, UNSOLVED, np.int8)
    if pixels >= n:
        return values[(np.arange(pixels) * n) // pixels]
    edges = (np.arange(pixels) * n + pixels - 1) // pixels  # ceil(i*n/p): strictly increasing, p <= n
    return np.maximum.reduceat(values, edges).astype(np.int8)


class TraceFlags:
    """Divergence flags of every (frame, entity), as far as the background re-solve has come.

    Attributes:
        flags: int32 (F, N), bit k set when ``KINDS[k]`` applies to that entity-frame.
        solved: bool (F,) frames whose results have arrived (inactive rows count as solved, clear).
        version: int, bumps on every change (widgets redraw when it moves).
    """

    def __init__(self, frame_count: int, entity_count: int):
        self.flags = np.zeros((frame_count, entity_count), np.int32)
        self.solved = np.zeros(frame_count, bool)
        self.version = 0
        self._cache_key = None
        self._cache = None

    @property
    def frame_count(self) -> int:
        return self.flags.shape[0]

    @property
    def entity_count(self) -> int:
        return self.flags.shape[1]

    def reset(self):
        """Forget every result (settings changed; a new re-solve is starting)."""
        self.flags[...] = 0
        self.solved[...] = False
        self.version += 1

    def add_block(self, block: BlockResult):
        """Store one streamed segment of ``check_trace`` results (``on_block``)."""
        fr = np.asarray(block.frame, np.int64)
        col = np.asarray(block.column, np.int64)
        self.flags[fr, col] = block.rows.flags
        self.mark_solved(fr)

    def mark_solved(self, frames):
        """Mark frames done, e.g. a ``progress`` range whose rows were all inactive."""
        self.solved[np.asarray(frames, np.int64)] = True
        self.version += 1

    def set_frame(self, frame: int, flags: np.ndarray, active: np.ndarray):
        """Store the flags of one freshly solved frame (int32 (N,), inactive rows cleared)."""
        self.flags[frame] = np.where(active, flags, 0)
        self.solved[frame] = True
        self.version += 1

    @property
    def complete(self) -> bool:
        return bool(self.solved.all())

    # -- summaries -------------------------------------------------------------------------
    def _selected(self, columns, kind) -> np.ndarray:
        """int32 (F,): OR of the selected columns' flags, masked to ``kind`` (cached per version)."""
        cols = tuple(range(self.entity_count)) if columns is None else tuple(int(c) for c in columns)
        key = (self.version, cols, kind)
        if key != self._cache_key:
            if cols:
                sub = self.flags[:, list(cols)] & kind_mask(kind)
                self._cache = np.bitwise_or.reduce(sub, axis=1)
            else:
                self._cache = np.zeros(self.frame_count, np.int32)
            self._cache_key = key
        return self._cache

    def frame_severity(self, columns=None, kind: str | None = None) -> np.ndarray:
        """Worst severity per frame over entity ``columns`` (None = all): int8 (F,), -1 unsolved."""
        sev = severity_of(self._selected(columns, kind))
        sev[~self.solved] = UNSOLVED
        return sev

    def strip(self, pixels: int, f0: int = 0, f1: int | None = None, columns=None,
              kind: str | None = None) -> np.ndarray:
        """Worst severity of frames ``[f0, f1)`` binned into ``pixels`` bins: int8 (pixels,).

        A bin shows -1 only when none of its frames has been solved yet.
        """
        f1 = self.frame_count if f1 is None else f1
        sev = self.frame_severity(columns, kind)[f0:f1]
        return bin_worst(sev, pixels)

    def counts(self, column: int) -> dict[str, int]:
        """Entity-frames of entity ``column`` flagged with each kind (so far)."""
        f = self.flags[:, column]
        return {k: int(np.count_nonzero(f & kind_mask(k))) for k in KINDS}

    def diverging_columns(self) -> np.ndarray:
        """bool (N,): entities with at least one divergence so far."""
        return (self.flags != 0).any(axis=0)

    def next_divergence(self, frame: int, columns=None, kind: str | None = None) -> int | None:
        """First frame after ``frame`` where a selected entity diverges (of ``kind``), or None."""
        hit = np.flatnonzero(self._selected(columns, kind)[frame + 1:])
        return int(frame + 1 + hit[0]) if len(hit) else None

    def previous_divergence(self, frame: int, columns=None, kind: str | None = None) -> int | None:
        """Last frame before ``frame`` where a selected entity diverges (of ``kind``), or None."""
        hit = np.flatnonzero(self._selected(columns, kind)[:max(0, frame)])
        return int(hit[-1]) if len(hit) else None
