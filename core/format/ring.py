"""Ring-buffer recording: the last N seconds in memory, written as a trace on demand.

A game keeps a :class:`RingRecorder` always on and calls :meth:`RingRecorder.dump` when a player
files a report. Memory is bounded by the window: frames older than ``seconds`` before the newest
are dropped, and the edits made before the first kept frame are applied to a copy of the world,
so a dump holds the world as it stands at its first frame, then the frames and later edits.
"""
from __future__ import annotations

import os
from collections import deque

import numpy as np

from resweep.core.format.entity_rows import EntityTable, FrameRows, check_edit, frame_rows
from resweep.core.format.writer import write_trace
from resweep.core.world.shapes import IMPLICIT_TYPES, BlockShapes


class RingRecorder:
    """Keep the last ``seconds`` of frames (by frame time) and the world as it stands at the first.

    Arguments as :class:`~resweep.core.format.recorder.Recorder` (world up front), plus
    ``seconds`` > 0, the window length. Frames are kept while ``time >= newest - seconds``.
    """

    def __init__(self, seconds: float, *, chunk_size: int, chunk_origin, chunk_blocks,
                 shapes: BlockShapes | None = None, voxel_size: float = 1.0, up_axis: str = "y",
                 title: str = "", producer: str = "resweep ring recorder"):
        if not float(seconds) > 0:
            raise ValueError(f"seconds must be > 0, got {seconds!r}")
        self.seconds = float(seconds)
        self.shapes = shapes
        self.type_count = shapes.count if shapes is not None else IMPLICIT_TYPES
        self._meta = dict(voxel_size=voxel_size, up_axis=up_axis, title=title, producer=producer)
        S = int(chunk_size)
        self.chunk_size = S
        blocks = np.asarray(chunk_blocks).reshape(-1, S, S, S)
        self._dtype = blocks.dtype if blocks.dtype in (np.uint8, np.uint16) else np.uint16
        #: chunk coordinate -> (S, S, S) blocks: the world before frame ``self._first``
        self._base = {tuple(o): blocks[c].astype(np.uint16, copy=True)
                      for c, o in enumerate((np.asarray(chunk_origin, np.int64).reshape(-1, 3) // S).tolist())}
        self._entities = EntityTable("<ring buffer>")
        self._frames: deque[FrameRows] = deque()
        self._edits: deque[tuple] = deque()
        self._first = 0   # global index of the first kept frame
        self._count = 0   # frames recorded in all

    @property
    def frame_count(self) -> int:
        """Frames recorded since the start (kept or dropped)."""
        return self._count

    @property
    def first_kept(self) -> int:
        """Global index of the first frame in memory."""
        return self._first

    def frame(self, time: float, ids, start, motion, end, half_extents=None, active=None, grounded=None,
              names=None):
        """Record one frame (arguments as ``Recorder.frame``) and drop frames older than the window."""
        t = float(time)
        if not np.isfinite(t) or (self._frames and t < self._frames[-1].time):
            raise ValueError(f"frame {self._count}: time {t!r} is not finite or goes backwards")
        self._frames.append(frame_rows("<ring buffer>", self._count, t, ids, start, motion, end, half_extents,
                                       active, grounded, names, self._entities))
        self._count += 1
        while self._frames[0].time < t - self.seconds:
            self._frames.popleft()
            self._first += 1
        # edits made before the first kept frame is solved become part of the kept world
        while self._edits and self._edits[0][0] <= self._first:
            self._apply(self._edits.popleft())

    def edit(self, x: int, y: int, z: int, block_type: int):
        """Voxel (x, y, z) becomes ``block_type`` before the next recorded frame is solved."""
        row = check_edit("<ring buffer>", self._count, x, y, z, block_type, self.type_count)
        if not self._frames:  # nothing kept yet: the edit is part of the starting world
            self._apply(row)
        else:
            self._edits.append(row)

    def _apply(self, row):
        S = self.chunk_size
        _, x, y, z, t = row
        key = (x // S, y // S, z // S)
        blocks = self._base.get(key)
        if blocks is None:  # outside every chunk: an air chunk keeps the world dense and explicit
            blocks = self._base[key] = np.zeros((S, S, S), np.uint16)
        blocks[x - key[0] * S, y - key[1] * S, z - key[2] * S] = t

    def world(self):
        """(chunk_origin int64 (C, 3), chunk_blocks (C, S, S, S)) as the world stands at the first kept frame."""
        S = self.chunk_size
        keys = sorted(self._base)
        origin = np.asarray(keys, np.int64).reshape(-1, 3) * S
        dtype = np.uint8 if self._dtype == np.uint8 and all(b.max(initial=0) < 256 for b in self._base.values()) \
            else np.uint16
        blocks = np.stack([self._base[k] for k in keys]).astype(dtype) if keys else np.zeros((0, S, S, S), dtype)
        return origin, blocks

    def dump(self, path, frame_dtype=np.float64, compression: str | None = "gzip"):
        """Write the kept frames as a trace at ``path`` (atomically). Returns the frames written.

        Entities are those active or present in the kept frames, in order of first appearance;
        edits are rebased so frame 0 of the dump is the first kept frame.
        """
        frames = list(self._frames)
        seen = {}
        for r in frames:
            for eid, c in zip(r.ids.tolist(), r.cols.tolist()):
                seen.setdefault(c, eid)
        cols = list(seen)
        local = {c: j for j, c in enumerate(cols)}
        k, N = len(frames), len(cols)
        vec = {n: np.zeros((k, N, 3), np.float64) for n in ("start", "motion", "end", "half")}
        active, grounded = np.zeros((k, N), bool), np.zeros((k, N), bool)
        table_half = np.ones((N, 3), np.float64)
        filled = np.zeros(N, bool)
        for j, r in enumerate(frames):
            lc = np.asarray([local[c] for c in r.cols.tolist()], np.int64)
            vec["start"][j, lc], vec["motion"][j, lc], vec["end"][j, lc] = r.start, r.motion, r.end
            vec["half"][j, lc] = r.half
            active[j, lc], grounded[j, lc] = r.active, r.grounded
            new = lc[~filled[lc] & r.active]  # table size: the first active row's (as Recorder)
            table_half[new] = vec["half"][j, new]
            filled[new] = True
        if not filled.all() and k:  # never active in the window: the size of the first row held
            first_row = (vec["half"] != 0).any(-1).argmax(axis=0)
            table_half[~filled] = vec["half"][first_row, np.arange(N)][~filled]
        edits = np.asarray(list(self._edits), np.int64).reshape(-1, 5)
        edits[:, 0] -= self._first
        origin, blocks = self.world()
        names = [self._entities.names[c] for c in cols]
        write_trace(os.fspath(path), chunk_size=self.chunk_size, chunk_origin=origin, chunk_blocks=blocks,
                    entity_ids=np.asarray([seen[c] for c in cols], np.int64), half_extents=table_half,
                    entity_names=names, time=np.asarray([r.time for r in frames], np.float64),
                    start=vec["start"], motion=vec["motion"], end=vec["end"], active=active,
                    frame_half_extents=vec["half"], grounded=grounded, shapes=self.shapes, edits=edits,
                    frame_dtype=frame_dtype, compression=compression, atomic=True, **self._meta)
        return k
