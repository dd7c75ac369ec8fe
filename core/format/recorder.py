"""Crash-safe recording of a trace while the game runs: frames appended to HDF5 in SWMR mode.

Why a recorder killed at any moment leaves a readable trace:

- every dataset exists before SWMR writing starts (an SWMR writer cannot add objects);
- frame and entity datasets are chunked, resizable on both the frame and the entity axis, and
  uncompressed: a chunk rewritten when later rows land in it keeps its size and file address,
  so rows already on disk are never moved;
- every ``flush_every`` frames the pending rows are written and the file flushed; only then is
  the commit record ``/frames/committed`` = [frames, entities, edits, closed] written and
  flushed. Readers use the committed prefix; whatever a kill interrupts lies beyond it;
- the file is built under a temporary name and renamed to ``path`` once its header and world
  are on disk, so ``path`` never names a file without them.

HDF5 SWMR needs the latest file format (``libver="latest"``); readers open such files with
``swmr=True`` (the reader does this by itself when a writer died holding the file).

Why memory stays flat over hours: HDF5's two caches are bounded by what appending needs (see
:data:`RAW_CACHE_BYTES` and :data:`METADATA_CACHE_BYTES`); left at their defaults they fill
slowly with chunks and index nodes that are never touched again (measured by
``tests/benchmarks/bench_recorder.py``).
"""
from __future__ import annotations

import os

import h5py
import numpy as np

from resweep.core.errors import RecordingError
from resweep.core.format.datasets import FRAME_VECTORS
from resweep.core.format.entity_rows import EntityTable, FrameRows, check_edit, frame_rows
from resweep.core.format.writer import remove_quietly, temp_path, write_header, write_world
from resweep.core.world.shapes import IMPLICIT_TYPES, BlockShapes

#: Frames and entities per storage chunk of the frame datasets (64 x 64 x 3 float64 = 96 KiB).
CHUNK_FRAMES = 64
CHUNK_ENTITIES = 64
#: HDF5 chunk cache per dataset: none. A flush writes whole frame rows of every storage chunk it
#: touches, and the file flush before each commit writes every cached chunk anyway, so a cache
#: would only hold memory: HDF5 2.0's default (8 MiB per dataset) fills chunk by chunk as the
#: recording grows, up to about 100 MiB for the dozen datasets of a trace.
RAW_CACHE_BYTES = 0
#: HDF5 metadata cache, fixed size (bytes as stored; in memory an entry takes several times more).
#: Appending touches only the newest path of each chunk index (a v2 B-tree once two axes are
#: resizable) and the object headers; the default cache grows adaptively up to 32 MiB of index
#: nodes that appending never reads again.
METADATA_CACHE_BYTES = 64 << 10
#: Entity names are stored as fixed-length UTF-8 (variable-length data and SWMR do not mix).
NAME_BYTES = 64


class Recorder:
    """Append frames to a new trace file; use as a context manager or call :meth:`close`.

    Args:
        path: the trace to create (replaced if it exists).
        chunk_size, chunk_origin int (C, 3), chunk_blocks uint8/uint16 (C, S, S, S), shapes:
            the world at the start of the recording (see :func:`write_trace`).
        frame_dtype: float64 (default) or float32 for start, motion, end and half extents.
        flush_every: frames between commits; a kill loses at most this many frames.
        atomic: keep the temporary name until :meth:`close` (importers: nothing appears at
            ``path`` unless the whole input was read; :meth:`abort` removes the temporary file).
    """

    def __init__(self, path, *, chunk_size: int, chunk_origin, chunk_blocks, shapes: BlockShapes | None = None,
                 voxel_size: float = 1.0, up_axis: str = "y", title: str = "", producer: str = "resweep recorder",
                 frame_dtype=np.float64, flush_every: int = 60, atomic: bool = False):
        if int(flush_every) < 1:
            raise RecordingError(path, f"flush_every must be >= 1, got {flush_every}")
        self.path = os.fspath(path)
        self.flush_every = int(flush_every)
        self.frame_dtype = np.dtype(frame_dtype)
        self.type_count = shapes.count if shapes is not None else IMPLICIT_TYPES
        self._atomic = bool(atomic)
        self._tmp = temp_path(self.path)
        self._entities = EntityTable(self.path)
        self._pending: list[FrameRows] = []
        self._edits: list[tuple] = []
        self._frames = 0      # frames on disk
        self._n_written = 0   # entity rows on disk
        self._e_written = 0   # edit rows on disk
        self._last_time = -np.inf
        self._closed = False
        self._f = h5py.File(self._tmp, "w", libver="latest", rdcc_nbytes=RAW_CACHE_BYTES)
        try:
            _fix_metadata_cache(self._f, METADATA_CACHE_BYTES)
            write_header(self._f, voxel_size=voxel_size, up_axis=up_axis, title=title, producer=producer)
            w = write_world(self._f, chunk_size, chunk_origin, chunk_blocks, shapes)
            self._create_datasets(w)
            self._f.swmr_mode = True
            self._f.flush()
            if not self._atomic:
                os.replace(self._tmp, self.path)
        except BaseException:
            self._f.close()
            remove_quietly(self._tmp)
            raise

    # -- layout ------------------------------------------------------------------------------
    def _create_datasets(self, world: h5py.Group):
        f = self._f
        dt = self.frame_dtype
        self._ds = {"edits": world.create_dataset("edits", shape=(0, 5), maxshape=(None, 5), chunks=(1024, 5),
                                                  dtype=np.int64)}
        e = f.create_group("entities")
        self._ds["id"] = e.create_dataset("id", shape=(0,), maxshape=(None,), chunks=(1024,), dtype=np.int64)
        self._ds["table_half"] = e.create_dataset("half_extents", shape=(0, 3), maxshape=(None, 3),
                                                  chunks=(1024, 3), dtype=np.float64)
        self._ds["name"] = e.create_dataset("name", shape=(0,), maxshape=(None,), chunks=(256,),
                                            dtype=h5py.string_dtype("utf-8", NAME_BYTES))
        fr = f.create_group("frames")
        self._ds["time"] = fr.create_dataset("time", shape=(0,), maxshape=(None,), chunks=(4096,), dtype=np.float64)
        for name in (*FRAME_VECTORS, "half_extents"):
            self._ds[name] = fr.create_dataset(name, shape=(0, 0, 3), maxshape=(None, None, 3),
                                               chunks=(CHUNK_FRAMES, CHUNK_ENTITIES, 3), dtype=dt, fillvalue=0)
        for name in ("active", "grounded"):
            # fill False: columns of entities that appear later read as inactive in earlier frames
            self._ds[name] = fr.create_dataset(name, shape=(0, 0), maxshape=(None, None),
                                               chunks=(CHUNK_FRAMES * 4, CHUNK_ENTITIES), dtype=bool,
                                               fillvalue=False)
        self._ds["committed"] = fr.create_dataset("committed", data=np.zeros(4, np.int64))

    # -- recording ---------------------------------------------------------------------------
    @property
    def frame_count(self) -> int:
        """Frames recorded so far (on disk or pending)."""
        return self._frames + len(self._pending)

    @property
    def entity_count(self) -> int:
        """Entities seen so far."""
        return len(self._entities)

    def frame(self, time: float, ids, start, motion, end, half_extents=None, active=None, grounded=None,
              names=None):
        """Record one frame.

        Args:
            time: seconds, not earlier than the previous frame.
            ids: int (n,) engine ids of the entities in this frame (unique). Ids not seen before
                add entities (inactive in earlier frames); known ids left out are inactive.
            start, motion, end: float (n, 3) world units.
            half_extents: float (n, 3) or None (each entity keeps its last size; required the
                first time an id appears).
            active: bool (n,) or None (all true); grounded: bool (n,) or None (all false).
            names: n strings or None, used when an id first appears.
        """
        self._need_open()
        t = float(time)
        if not np.isfinite(t) or t < self._last_time:
            raise RecordingError(self.path, f"frame {self.frame_count}: time {t!r} is not finite or earlier than "
                                            f"the previous frame's {self._last_time!r}")
        rows = frame_rows(self.path, self.frame_count, t, ids, start, motion, end, half_extents, active,
                          grounded, names, self._entities)
        self._last_time = t
        self._pending.append(rows)
        if len(self._pending) >= self.flush_every:
            self.flush()

    def frames(self, times, ids, start, motion, end, half_extents=None, active=None, grounded=None, names=None):
        """Record k frames of the same entities: times (k,), ids (n,), start/motion/end (k, n, 3),
        half_extents (k, n, 3) or None, active/grounded (k, n) or None."""
        for j, t in enumerate(np.asarray(times, np.float64).reshape(-1)):
            self.frame(t, ids, start[j], motion[j], end[j],
                       None if half_extents is None else half_extents[j],
                       None if active is None else active[j], None if grounded is None else grounded[j], names)

    def edit(self, x: int, y: int, z: int, block_type: int):
        """Voxel (x, y, z) becomes ``block_type`` before the next recorded frame is solved."""
        self._need_open()
        self._edits.append(check_edit(self.path, self.frame_count, x, y, z, block_type, self.type_count))

    # -- committing --------------------------------------------------------------------------
    def flush(self):
        """Write pending frames, entities and edits, then commit them (see the module docstring)."""
        self._need_open()
        k, N = len(self._pending), len(self._entities)
        if not k and N == self._n_written and not self._edits and not self._entities.dirty:
            return
        self._write_entities(N)
        if k:
            self._write_frames(k, N)
        if self._edits:
            ed = self._ds["edits"]
            ed.resize((self._e_written + len(self._edits), 5))
            ed[self._e_written:] = np.asarray(self._edits, np.int64)
            self._e_written += len(self._edits)
            self._edits.clear()
        self._f.flush()  # rows on disk before the commit record says they are
        self._commit(closed=False)

    def _write_entities(self, N: int):
        a = self._n_written
        ent = self._entities
        # An entity first stored while inactive gets its real size once active: that row is
        # rewritten in place (it has no active committed rows, so a torn write cannot matter).
        for c in sorted(c for c in ent.dirty if c < a):
            self._ds["table_half"][c] = ent.first_half[c]
        ent.dirty.clear()
        if N == a:
            return
        for key in ("id", "table_half", "name"):
            self._ds[key].resize((N,) + self._ds[key].shape[1:])
        self._ds["id"][a:N] = np.asarray(ent.ids[a:N], np.int64)
        self._ds["table_half"][a:N] = np.asarray(ent.first_half[a:N], np.float64)
        self._ds["name"][a:N] = [_fit_name(s) for s in ent.names[a:N]]
        self._n_written = N

    def _write_frames(self, k: int, N: int):
        F = self._frames
        dt = self.frame_dtype
        # Only the columns these frames touch are written: storage chunks of entities that left
        # stay unallocated (they read as the fill value, inactive), so churn does not fill the disk.
        lo = min((int(r.cols.min()) for r in self._pending if len(r.cols)), default=N)
        hi = max((int(r.cols.max()) + 1 for r in self._pending if len(r.cols)), default=N)
        lo = min(lo, hi)
        vec = {name: np.zeros((k, hi - lo, 3), dt) for name in (*FRAME_VECTORS, "half_extents")}
        flag = {name: np.zeros((k, hi - lo), bool) for name in ("active", "grounded")}
        for j, r in enumerate(self._pending):
            c = r.cols - lo
            vec["start"][j, c], vec["motion"][j, c], vec["end"][j, c] = r.start, r.motion, r.end
            vec["half_extents"][j, c] = r.half
            flag["active"][j, c], flag["grounded"][j, c] = r.active, r.grounded
        for name, arr in (*vec.items(), *flag.items()):
            ds = self._ds[name]
            ds.resize((F + k, N) + ds.shape[2:])
            if hi > lo:
                ds[F:F + k, lo:hi] = arr
        ts = self._ds["time"]
        ts.resize((F + k,))
        ts[F:] = [r.time for r in self._pending]
        self._frames = F + k
        self._pending.clear()

    def _commit(self, closed: bool):
        self._ds["committed"][...] = [self._frames, self._n_written, self._e_written, int(closed)]
        self._f.flush()

    # -- ending ------------------------------------------------------------------------------
    def close(self):
        """Commit everything, mark the trace complete and close it (renaming it in atomic mode)."""
        if self._closed:
            return
        self.flush()
        self._commit(closed=True)
        self._closed = True
        self._f.close()
        if self._atomic:
            os.replace(self._tmp, self.path)

    def abort(self):
        """Stop without completing: atomic mode removes the temporary file; otherwise the
        trace stays as last committed (read as ended early)."""
        if self._closed:
            return
        self._closed = True
        try:
            self._f.close()
        finally:
            if self._atomic:
                remove_quietly(self._tmp)

    def _need_open(self):
        if self._closed:
            raise RecordingError(self.path, "the recorder is closed")

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None and self._atomic:
            self.abort()
        else:
            self.close()
        return False


def _fix_metadata_cache(f: h5py.File, nbytes: int):
    """Give ``f`` a metadata cache of ``nbytes`` that never resizes itself."""
    cfg = f.id.get_mdc_config()
    cfg.set_initial_size = True
    cfg.initial_size = cfg.min_size = cfg.max_size = int(nbytes)
    # 0 is "off" in HDF5's H5C_cache_incr_mode, H5C_cache_flash_incr_mode and H5C_cache_decr_mode
    # (H5Cpublic.h); h5py does not name them.
    cfg.incr_mode = cfg.flash_incr_mode = cfg.decr_mode = 0
    f.id.set_mdc_config(cfg)


def _fit_name(name: str) -> bytes:
    """UTF-8 bytes of ``name`` cut at a character boundary to fit :data:`NAME_BYTES`."""
    raw = str(name).encode("utf-8")[:NAME_BYTES]
    return raw.decode("utf-8", "ignore").encode("utf-8")
