"""One open trace, frame by frame: frame states on demand, solved against the world as it stands
at that frame. The viewer, off-screen pictures and tests read frames through it.
"""
from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from resweep.core.check.kinds import BY_NAME, DISCONTINUITY, kinds_of
from resweep.core.errors import ResweepError
from resweep.core.check.rows import RowResults, solve_rows
from resweep.core.format.reader import FrameBlock, Trace, open_trace
from resweep.core.solve.settings import SolverSettings

CACHE_FRAMES = 32  # frame states kept; a scrub back and forth over a second of 60 Hz play stays warm
WINDOW_ROWS = 1 << 16  # entity-frames per cached window of decoded frames (about 3 MiB in float32)
CACHE_WINDOWS = 4  # windows kept: a scrub, the trail behind it and a jump back stay decoded
QUICK_ENTITIES = 4096  # a frame of at most this many entities solves in a few milliseconds


class ViewRequestError(ResweepError):
    """A frame or entity asked of a session does not exist (one line, names the trace)."""

    def __init__(self, path, reason: str):
        self.path = str(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")


@dataclass
class FrameState:
    """Everything drawn for one frame (N entity columns).

    Attributes:
        frame: frame index; time: seconds.
        active: bool (N,).
        start, motion, recorded_end, half: float64 (N, 3) world units, NaN where inactive.
        rows: RowResults for all N columns (inactive columns: flags 0, ref_end and points NaN,
            block -1).
        world_version: VoxelWorld.version after advancing to this frame.
    """

    frame: int
    time: float
    active: np.ndarray
    start: np.ndarray
    motion: np.ndarray
    recorded_end: np.ndarray
    half: np.ndarray
    rows: RowResults
    world_version: int

    def kinds(self, col: int) -> list[str]:
        """Divergence kind names of column ``col`` at this frame, in bit order."""
        return kinds_of(self.rows.flags[col])

    def errors(self, col: int) -> dict[str, float | None]:
        """kind -> error in world units (None where the kind has no error value, e.g. invalid)."""
        out = {}
        for k in self.kinds(col):
            e = float(self.rows.error[col, BY_NAME[k].bit])
            out[k] = e if np.isfinite(e) else None
        return out


class TraceSession:
    """An open trace, its world and the solver settings in use.

    Attributes:
        trace: the open Trace; path: str; settings: SolverSettings.
        world: VoxelWorld, advanced to the frame of the last :meth:`frame_state` call.
    """

    def __init__(self, path, settings: SolverSettings = SolverSettings()):
        self.trace: Trace = open_trace(path)  # raises TraceFormatError
        self.trace.decode_with_kernels()  # frames are solved here: numba is loaded anyway
        self.path = str(path)
        self.settings = settings
        self.world = self.trace.world()
        self._cache: OrderedDict[int, FrameState] = OrderedDict()
        self._windows: OrderedDict[int, FrameBlock] = OrderedDict()
        chunks = self.trace.frame_chunks
        rows = chunks[0] if chunks else 0
        # whole storage chunks when they are of a sensible size: each one is decompressed once
        fit = max(1, WINDOW_ROWS // max(1, self.trace.entity_count))
        self._window = rows if 0 < rows <= 4 * fit else fit

    @property
    def name(self) -> str:
        """The trace file's name without folders."""
        return Path(self.path).name

    def set_settings(self, settings: SolverSettings) -> None:
        self.settings = settings
        self._cache.clear()

    def check_frame(self, frame: int) -> int:
        """``frame`` as an int, or ViewRequestError naming the valid range."""
        F = self.trace.frame_count
        if not isinstance(frame, (int, np.integer)) or not 0 <= frame < F:
            valid = f"valid frames are 0..{F - 1}" if F else "the trace has no frames"
            raise ViewRequestError(self.path, f"frame {frame} is out of range ({valid})")
        return int(frame)

    def column_of(self, entity_id: int) -> int:
        """Column of engine id ``entity_id``, or ViewRequestError listing the ids."""
        col = self.trace.entity_index(entity_id)
        if col < 0:
            ids = ", ".join(str(int(i)) for i in self.trace.ids[:12])
            more = ", ..." if self.trace.entity_count > 12 else ""
            raise ViewRequestError(self.path, f"entity id {entity_id} is not in the trace (ids: {ids}{more})")
        return col

    def has_frame(self, frame: int) -> bool:
        """Whether :meth:`frame_state` of ``frame`` is cached (costs no solve)."""
        return int(frame) in self._cache

    def is_quick(self, frame: int) -> bool:
        """Whether :meth:`frame_state` of ``frame`` costs about a millisecond: cached, or no world
        edit to apply and at most QUICK_ENTITIES entities (a caller may then skip a thread)."""
        if int(frame) in self._cache:
            return True
        return self.trace.entity_count <= QUICK_ENTITIES and self.world.edits_before(frame) == 0

    def frame_state(self, frame: int) -> FrameState:
        """Read, advance the world to, and re-solve ``frame`` (cached, least recently used out)."""
        frame = self.check_frame(frame)
        self.world.advance_to(frame)
        hit = self._cache.get(frame)
        if hit is not None:
            self._cache.move_to_end(frame)
            if hit.world_version != self.world.version:
                hit = replace(hit, world_version=self.world.version)
                self._cache[frame] = hit
            return hit
        state = self._solve(frame)
        self._cache[frame] = state
        while len(self._cache) > CACHE_FRAMES:
            self._cache.popitem(last=False)
        return state

    def _solve(self, frame: int) -> FrameState:
        tr = self.trace
        f0 = max(0, frame - 1)
        blk = self.frames(f0, frame + 1)
        i = frame - f0
        active = np.asarray(blk.active[i], bool)
        arr = {}
        for name, src in (("start", blk.start), ("motion", blk.motion), ("end", blk.end), ("half", blk.half)):
            a = np.asarray(src[i], np.float64).copy()
            a[~active] = np.nan
            arr[name] = a
        N = tr.entity_count
        P = self.settings.passes
        rows = RowResults.empty(N, P, self.settings.dtype)
        rows.ref_end[:] = np.nan
        rows.points[:] = np.nan
        rows.error[:] = np.nan
        cols = np.flatnonzero(active)
        if len(cols):
            got = solve_rows(self.world, blk.start[i][cols], blk.motion[i][cols], blk.end[i][cols],
                             blk.half[i][cols], self.settings, up=tr.up_axis,
                             grounded=None if blk.grounded is None else blk.grounded[i][cols])
            for field in ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "candidates",
                          "points", "flags", "error", "raised", "climb"):
                getattr(rows, field)[cols] = getattr(got, field)
        if i == 1:  # the start should continue where the previous frame's recorded end left off
            tol = self.settings.tolerance * tr.voxel_size
            prev_end = np.asarray(blk.end[0], np.float64)
            with np.errstate(invalid="ignore", over="ignore"):
                gap = np.sqrt(((np.asarray(blk.start[1], np.float64) - prev_end) ** 2).sum(axis=-1))
            disc = np.asarray(blk.active[0], bool) & active & (gap > tol)
            rows.flags[disc] |= np.int32(1 << DISCONTINUITY)
            rows.error[disc, DISCONTINUITY] = gap[disc]
        return FrameState(frame, float(tr.time[frame]), active, arr["start"], arr["motion"], arr["end"],
                          arr["half"], rows, self.world.version)

    def frames(self, f0: int, f1: int) -> FrameBlock:
        """``trace.frames(f0, f1)`` (limits checked on these frames only) from decoded windows of
        whole frames kept between calls: stepping and scrubbing read a few frames at a time, and
        HDF5's cost per read (selection, chunk look-up) is several times the copy."""
        W = self._window
        f0 = max(0, int(f0))
        f1 = max(f0, min(self.trace.frame_count, int(f1)))
        if f1 - f0 > W or f1 == f0:
            return self.trace.frames(f0, f1)
        a, b = f0 // W, (f1 - 1) // W
        parts = [self._decoded(k) for k in range(a, b + 1)]
        blk = _cut(parts, f0, f1)
        self.trace.check_limits(blk)
        return blk

    def _decoded(self, k: int) -> FrameBlock:
        got = self._windows.get(k)
        if got is not None:
            self._windows.move_to_end(k)
            return got
        got = self.trace.frames(k * self._window, (k + 1) * self._window, check=False)
        for a in (got.start, got.motion, got.end, got.active, got.half, got.grounded):
            if a is not None and a.flags.writeable:
                a.flags.writeable = False  # shared by every later call: a caller's write would spread
        self._windows[k] = got
        while len(self._windows) > CACHE_WINDOWS:
            self._windows.popitem(last=False)
        return got

    def trail(self, frame: int, col: int, count: int) -> np.ndarray:
        """float64 (k, 3) recorded start centres of the up to ``count`` frames before ``frame``
        where column ``col`` is active, oldest first, world units."""
        frame = self.check_frame(frame)
        if count <= 0 or frame == 0:
            return np.zeros((0, 3))
        blk = self.frames(max(0, frame - int(count)), frame)
        pts = np.asarray(blk.start[:, col], np.float64)
        keep = np.asarray(blk.active[:, col], bool) & np.isfinite(pts).all(axis=1)
        return pts[keep]

    def nearest_position(self, frame: int, col: int, reach: int = 600):
        """float64 (3,) recorded start of column ``col`` at the active frame nearest ``frame``
        (looking up to ``reach`` frames each way, earlier first on ties), or None."""
        frame = self.check_frame(frame)
        blk = self.trace.frames(max(0, frame - reach), frame + reach + 1)
        pts = np.asarray(blk.start[:, col], np.float64)
        ok = np.flatnonzero(np.asarray(blk.active[:, col], bool) & np.isfinite(pts).all(axis=1))
        if not len(ok):
            return None
        return pts[ok[np.argmin(np.abs(ok + blk.f0 - frame))]]

    def default_column(self, frame: int) -> int:
        """First column with a divergence at ``frame``, else the first active one, else 0."""
        st = self.frame_state(frame)
        diverged = np.flatnonzero(st.rows.flags != 0)
        if len(diverged):
            return int(diverged[0])
        act = np.flatnonzero(st.active)
        return int(act[0]) if len(act) else 0

    def close(self) -> None:
        self._cache.clear()
        self.trace.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def _cut(parts: list[FrameBlock], f0: int, f1: int) -> FrameBlock:
    """Frames ``[f0, f1)`` of consecutive blocks ``parts`` (views when one block holds them)."""
    def field(name):
        arrs = [getattr(p, name) for p in parts]
        if arrs[0] is None:
            return None
        whole = arrs[0] if len(arrs) == 1 else np.concatenate(arrs)
        return whole[f0 - parts[0].f0:f1 - parts[0].f0]
    return FrameBlock(f0, f1, *(field(n) for n in ("start", "motion", "end", "active", "half", "grounded")))
