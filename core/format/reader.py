"""Reader of trace format v1 (see ``trace_format.md`` beside this module).

:func:`open_trace` validates every header, shape, dtype and range that can be checked without
reading the frames, then hands out frames in bounded blocks (:meth:`Trace.frames`), so memory
does not grow with trace length. Files are opened read-only and never modified.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from resweep.core.errors import TraceFormatError, printable
from resweep.core.format.datasets import FRAME_VECTORS, DatasetSpec, spec
from resweep.core.format.chunk_read import ChunkReader
from resweep.core.format.h5lite import Unsupported
from resweep.core.format.declared import H5_FAILURES
from resweep.core.format.lite_file import open_file, safe_file
from resweep.core.format.limits import Limits, current
from resweep.core.world.shapes import IMPLICIT_TYPES, BlockShapes, unit_cube_shapes
from resweep.core.world.voxel_world import VoxelWorld
from resweep.core.world.world_cache import WorldCache

if TYPE_CHECKING:  # annotations only: h5py loads when a file needs it (lite_file.safe_file)
    from resweep.core.format.h5safe import SafeFile

FORMAT_NAME = "resweep-trace"
FORMAT_VERSION = 1
UP_AXES = ("x", "y", "z")
#: Voxel coordinates must stay well inside int64 arithmetic and float64 exactness.
MAX_COORD = 1 << 40


@dataclass(frozen=True)
class FrameBlock:
    """Frames ``[f0, f1)`` of a trace.

    Attributes:
        start, motion, end: float (n, N, 3) in the file's frame dtype, world units.
        active: bool (n, N).
        half: float (n, N, 3) half extents in effect per row (per-frame override or entity table).
        grounded: int8 (n, N) the engine's on-ground flag after each frame (1, 0), or None when
            the trace does not record it.
    """

    f0: int
    f1: int
    start: np.ndarray
    motion: np.ndarray
    end: np.ndarray
    active: np.ndarray
    half: np.ndarray
    grounded: np.ndarray | None = None


class Trace:
    """An open, validated trace. Use as a context manager or call :meth:`close`.

    Attributes:
        path: str; voxel_size: float; up_axis: "x" | "y" | "z"; title, producer: str.
        frame_count F, entity_count N: int; frame_dtype: np.dtype (float32 or float64).
        time: float64 (F,) seconds. ids: int64 (N,). names: tuple of N str.
        half_extents: float64 (N, 3) entity table. shapes: BlockShapes.
        chunk_size: int; chunk_origin: int64 (C, 3); chunk_blocks: uint16 (C, S, S, S);
        edits: int64 (E, 5).
        problems: list of str, validation findings that do not stop a check (e.g. bad entity sizes).
        committed: None, or int64 (4,) ``/frames/committed`` of a recorder file [frames,
            entities, edits, closed]; only that prefix is read.
        ended_early: True for a recorder file whose writer did not close it (killed, crashed,
            or still recording); it is read up to the last flush.
    """

    def __init__(self, path, swmr: bool = False, limits: Limits | None = None, worlds: WorldCache | None = None):
        self.limits = current() if limits is None else limits
        self._worlds = worlds
        self._blocks_key = None
        self._f = open_file(path, swmr=swmr)
        self._chunks = ChunkReader(self._f)
        self.path = self._f.path
        try:
            try:
                self._load()
            except Unsupported:  # the file uses HDF5 beyond h5lite's subset: read it with h5py
                self._f.close()
                self._f = safe_file(path, swmr)
                self._chunks = ChunkReader(self._f)
                self._load()
        except H5_FAILURES as exc:
            # A corrupt header can fail in an h5py property read outside SafeFile's calls.
            self._f.close()
            raise TraceFormatError(self.path, None, f"cannot read (truncated or corrupt?): "
                                                    f"{type(exc).__name__}: {exc}") from None
        except BaseException:
            self._f.close()
            raise

    # -- loading -----------------------------------------------------------------------------
    def _load(self):
        f = self._f
        root = f.file
        fmt = _as_str(f.attr(root, "format"))
        if fmt is None:
            raise f.fail("/", "root attribute 'format' is missing (expected \"resweep-trace\")")
        if fmt != FORMAT_NAME:
            raise f.fail("/", f"root attribute 'format' is {fmt!r}, expected {FORMAT_NAME!r}")
        version = f.attr(root, "version")
        if version is None:
            raise f.fail("/", "root attribute 'version' is missing")
        if not _is_int(version):
            raise f.fail("/", f"root attribute 'version' must be an integer, found {version!r}")
        if int(version) != FORMAT_VERSION:
            raise f.fail("/", f"trace format version {int(version)} is not supported (this resweep reads "
                              f"version {FORMAT_VERSION})")
        vs = f.attr(root, "voxel_size", 1.0)
        if not _is_real(vs) or not np.isfinite(float(vs)) or float(vs) <= 0:
            raise f.fail("/", f"root attribute 'voxel_size' must be a finite number > 0, found {vs!r}")
        self.voxel_size = float(vs)
        up = _as_str(f.attr(root, "up_axis", "y"))
        if up not in UP_AXES:
            raise f.fail("/", f"root attribute 'up_axis' must be one of x, y, z, found {up!r}")
        self.up_axis = up
        self.title = printable(_as_str(f.attr(root, "title", "")) or "")
        self.producer = printable(_as_str(f.attr(root, "producer", "")) or "")
        self.problems: list[str] = []
        self._load_commit()
        self._load_blocks()
        self._load_world()
        self._load_entities()
        self._load_frames()

    def _load_commit(self):
        """The commit record of a recorder file (see ``recorder.py``): the prefix safe to read."""
        f = self._f
        cd = f.dataset("/frames/committed", required=False)
        self.committed = None
        self.ended_early = False
        if cd is None:
            return
        _check(f, cd, spec("/frames/committed"), {})
        f.refresh(cd)  # SWMR: the shared handle may hold an older record (no-op otherwise)
        c = f.read(cd).astype(np.int64)
        if (c[:3] < 0).any() or c[3] not in (0, 1):
            raise f.fail(cd.name, f"holds {c.tolist()}; expected [frames, entities, edits] >= 0 and closed 0 or 1")
        self.committed = c
        self.ended_early = not bool(c[3])

    def _dim(self, n: int):
        """Expected length of a committed axis: any length in recorder files (checked by _prefix)."""
        return None if self.committed is not None else n

    def _prefix(self, ds, axis_sizes: dict, why: str):
        """Committed rows: ``ds`` cut to the committed sizes ``{axis: rows}`` (refused if shorter)."""
        if self.committed is None:
            return ds
        if self._f.swmr and any(ds.shape[a] < n for a, n in axis_sizes.items()):
            self._f.refresh(ds)  # a dataset opened before the commit record was read
        for axis, n in axis_sizes.items():
            if ds.shape[axis] < n:
                raise self._f.fail(ds.name, f"has {ds.shape[axis]} rows on axis {axis} but {why} commits {n}")
        return ds

    def _load_blocks(self):
        f = self._f
        g = f.group("/blocks", required=False)
        if g is None:
            self.shapes = unit_cube_shapes()
            self.type_count = IMPLICIT_TYPES
            return
        bs = f.dataset("/blocks/box_start")
        bx = f.dataset("/blocks/boxes")
        _check(f, bs, spec("/blocks/box_start"), {})
        if bs.shape[0] < 2:
            raise f.fail(bs.name, "needs at least 2 entries (type 0 air plus one type)")
        box_start = f.read(bs).astype(np.int64)
        _check(f, bx, spec("/blocks/boxes"), {})
        boxes = f.read(bx).astype(np.float64)
        if box_start[0] != 0:
            raise f.fail(bs.name, f"first offset must be 0, found {box_start[0]}")
        if (np.diff(box_start) < 0).any():
            raise f.fail(bs.name, "offsets must be non-decreasing")
        if box_start[-1] != len(boxes):
            raise f.fail(bs.name, f"last offset is {box_start[-1]} but /blocks/boxes has {len(boxes)} rows")
        if box_start[1] != 0:
            raise f.fail(bs.name, "type 0 is air and must have no boxes")
        if not np.isfinite(boxes).all():
            raise f.fail(bx.name, "holds non-finite coordinates")
        if not (boxes[:, :3] < boxes[:, 3:]).all():
            bad = int(np.argmax(~(boxes[:, :3] < boxes[:, 3:]).all(axis=1)))
            raise f.fail(bx.name, f"row {bad}: min must be < max on every axis")
        if (boxes < -1).any() or (boxes > 2).any():
            raise f.fail(bx.name, "coordinates must lie within [-1, 2] voxel-local units")
        T = len(box_start) - 1
        names = None
        nd = f.dataset("/blocks/names", required=False)
        if nd is not None:
            _check(f, nd, spec("/blocks/names"), {"T": T})
            names = f.read_strings(nd)
        if names is None:
            names = ("air",) + tuple(f"type {t}" for t in range(1, T))
        self.shapes = BlockShapes(box_start, boxes, tuple(names))
        self.type_count = T

    def _load_world(self):
        f = self._f
        g = f.group("/world")
        S = f.attr(g, "chunk_size")
        if S is None:
            raise f.fail("/world", "attribute 'chunk_size' is missing")
        lim = self.limits
        if not _is_int(S) or int(S) < 1:
            raise f.fail("/world", f"attribute 'chunk_size' must be an integer >= 1, found {S!r}")
        S = int(S)
        if S > lim.chunk_size:
            raise f.fail("/world", f"chunk_size {S} is {lim.hint('chunk_size')}")
        od = f.dataset("/world/chunk_origin")
        _check(f, od, spec("/world/chunk_origin"), {})
        bd = f.dataset("/world/chunk_blocks", whole=False)
        C = od.shape[0]
        _check(f, bd, spec("/world/chunk_blocks"), {"C": C, "S": S}, " to match chunk_origin and chunk_size")
        _world_size(f, lim, C, 0, S)
        origin = f.read(od).astype(np.int64)
        if (np.abs(origin) > MAX_COORD).any():
            raise f.fail(od.name, f"coordinates beyond +-{MAX_COORD} voxels are refused")
        if (origin % S).any():
            bad = int(np.argmax((origin % S).any(axis=1)))
            raise f.fail(od.name, f"row {bad} {origin[bad].tolist()} is not a multiple of chunk_size {S}")
        if C > 1:  # sorted rows, neighbours compared (np.unique(axis=0) sorts row views, several times slower)
            rows = origin[np.lexsort(origin.T[::-1])]
            if (rows[1:] == rows[:-1]).all(axis=1).any():
                raise f.fail(od.name, "holds duplicate chunk origins")
        ed = f.dataset("/world/edits", required=False)
        edits = self._read_edits(ed, origin, S) if ed is not None else np.zeros((0, 5), np.int64)
        blocks, top = self._read_blocks(bd)
        if C and self.type_count < IMPLICIT_TYPES and top >= self.type_count:
            raise f.fail(bd.name, f"holds block type {top}, but /blocks defines only "
                                  f"{self.type_count} types")
        self.chunk_size = S
        self.chunk_origin = origin
        self.chunk_blocks = blocks
        self.edits = edits

    def _read_blocks(self, bd):
        """``(chunk_blocks, largest block type)``; with a world cache, a copy already decoded from
        identically stored bytes is shared instead of decompressing the dataset again (it is
        then read-only: worlds copy the blocks they edit)."""
        if self._worlds is None:
            blocks = self._f.read(bd)
            return blocks, int(blocks.max()) if blocks.size else 0
        key = self._f.stored_digest(bd)
        got = self._worlds.get(("blocks", key)) if key is not None else None
        if got is None:
            blocks = self._f.read(bd)
            blocks.flags.writeable = False
            got = blocks, int(blocks.max()) if blocks.size else 0
            if key is None:
                key = hashlib.blake2b(blocks.tobytes(), digest_size=20).digest()
            self._worlds.put(("blocks", key), got, blocks.nbytes)
        self._blocks_key = key
        return got

    def _read_edits(self, ed, origin, S):
        """The edits, after the edit-count limit and the world-size limit counting the chunks
        that edits outside the recorded ones add (the world makes an all-air chunk for each)."""
        f = self._f
        _check(f, ed, spec("/world/edits"), {})
        if ed.shape[0] > self.limits.edits:
            raise f.fail(ed.name, f"{ed.shape[0]:,} edits are {self.limits.hint('edits')}")
        if self.committed is not None:
            self._prefix(ed, {0: int(self.committed[2])}, "/frames/committed")
            edits = f.read(ed, np.s_[:int(self.committed[2])]).astype(np.int64)
        else:
            edits = f.read(ed).astype(np.int64)
        if (np.abs(edits[:, 1:4]) > MAX_COORD).any():
            raise f.fail(ed.name, f"voxel coordinates beyond +-{MAX_COORD} are refused")
        if len(edits) and (edits[:, 4].min() < 0 or edits[:, 4].max() >= self.type_count):
            raise f.fail(ed.name, f"block types must lie in 0..{self.type_count - 1}")
        extra = count_extra_chunks(origin, edits, S)
        _world_size(f, self.limits, len(origin), extra, S)
        return edits

    def _load_entities(self):
        f = self._f
        f.group("/entities")
        idd = f.dataset("/entities/id")
        _check(f, idd, spec("/entities/id"), {})
        rows = np.s_[:]
        if self.committed is not None:
            rows = np.s_[:int(self.committed[1])]
            self._prefix(idd, {0: int(self.committed[1])}, "/frames/committed")
        ids = f.read(idd, rows).astype(np.int64)
        if len(np.unique(ids)) != len(ids):
            raise f.fail(idd.name, "entity ids must be unique")
        N = len(ids)
        if N > self.limits.entities:
            raise f.fail(idd.name, f"{N:,} entities are {self.limits.hint('entities')}")
        hd = f.dataset("/entities/half_extents")
        _check(f, hd, spec("/entities/half_extents"), {"N": self._dim(N)}, " to match /entities/id")
        half = f.read(self._prefix(hd, {0: N}, "/frames/committed"), rows).astype(np.float64)
        _extent_limit(f, self.limits, hd.name, half, self.voxel_size)
        bad = ~(np.isfinite(half).all(axis=1) & (half > 0).all(axis=1))
        for i in np.flatnonzero(bad)[:5]:
            self.problems.append(f"/entities/half_extents: entity {ids[i]} has non-positive or non-finite half "
                                 f"extents {half[i].tolist()} (its rows are reported invalid)")
        nd = f.dataset("/entities/name", required=False)
        if nd is not None:
            _check(f, nd, spec("/entities/name"), {"N": self._dim(N)})
            self._prefix(nd, {0: N}, "/frames/committed")
        names = f.read_strings(nd)[:N] if nd is not None else tuple(f"entity {i}" for i in ids)
        self.ids = ids
        self.half_extents = half
        self.names = names
        self.entity_count = N

    @property
    def has_grounded(self) -> bool:
        """Whether the trace records the engine's on-ground flag (``/frames/grounded``)."""
        return self._ds["grounded"] is not None

    def _load_frames(self):
        f = self._f
        f.group("/frames")
        N = self.entity_count
        td = f.dataset("/frames/time")
        _check(f, td, spec("/frames/time"), {})
        F = td.shape[0] if self.committed is None else int(self.committed[0])
        self._prefix(td, {0: F}, "/frames/committed")
        dims = {"F": self._dim(F), "N": self._dim(N)}
        lim = self.limits
        if F > lim.frames:
            raise f.fail(td.name, f"{F:,} frames are {lim.hint('frames')}")
        if F * N > lim.rows:
            raise f.fail(td.name, f"{F:,} frames x {N:,} entities = {F * N:,} entity-frames are {lim.hint('rows')}")
        self._ds = {}
        dtype = None
        for name in FRAME_VECTORS:
            ds = f.dataset(f"/frames/{name}", whole=False)
            _check(f, ds, spec(f"/frames/{name}"), dims, " = (frames, entities, 3)")
            dtype = np.promote_types(dtype, ds.dtype) if dtype is not None else ds.dtype
            self._ds[name] = self._prefix(ds, {0: F, 1: N}, "/frames/committed")
        for key, name in (("active", "active"), ("grounded", "grounded")):
            ds = f.dataset(f"/frames/{name}", required=False, whole=False)
            if ds is not None:
                if ds.dtype != np.dtype("bool") and not (ds.dtype.kind in "iu" and ds.dtype.itemsize == 1):
                    raise f.fail(ds.name, f"dtype must be bool, found {ds.dtype}")
                _check(f, ds, spec(f"/frames/{name}"), dims, " = (frames, entities)")
                self._prefix(ds, {0: F, 1: N}, "/frames/committed")
            self._ds[key] = ds
        hov = f.dataset("/frames/half_extents", required=False, whole=False)
        if hov is not None:
            _check(f, hov, spec("/frames/half_extents"), dims, " = (frames, entities, 3)")
            self._prefix(hov, {0: F, 1: N}, "/frames/committed")
        self._ds["half"] = hov
        time = f.read(td, np.s_[:F])
        if not np.isfinite(time).all():
            raise f.fail(td.name, "holds non-finite times")
        if (np.diff(time) < 0).any():
            k = int(np.argmax(np.diff(time) < 0))
            raise f.fail(td.name, f"must be non-decreasing (frame {k + 1} is earlier than frame {k})")
        self.time = time
        self.frame_count = F
        self.frame_dtype = np.dtype(dtype)

    # -- access ------------------------------------------------------------------------------
    def world(self) -> VoxelWorld:
        """A world at the recorded chunks (no edits applied yet): a fresh one, or with a world
        cache (``open_trace(worlds=...)``) the cached world of every trace whose world is stored
        identically, rewound."""
        def build():
            return VoxelWorld(self.chunk_size, self.chunk_origin, self.chunk_blocks, self.shapes,
                              self.voxel_size, self.edits)
        if self._worlds is None:
            return build()
        return self._worlds.world(self.world_digest(), build)

    def world_digest(self) -> bytes:
        """Digest of everything that makes this trace's world: chunk size, origins, blocks, edits,
        block shapes and voxel size (blocks by their stored bytes when a world cache is in use)."""
        h = hashlib.blake2b(digest_size=20)
        blocks_key = self._blocks_key or hashlib.blake2b(np.ascontiguousarray(self.chunk_blocks).tobytes()).digest()
        shapes = b"implicit" if self.type_count == IMPLICIT_TYPES else b"".join(
            [self.shapes.box_start.tobytes(), self.shapes.boxes.tobytes(), repr(self.shapes.names).encode()])
        for part in (repr((self.chunk_size, self.voxel_size)).encode(), blocks_key, self.chunk_origin.tobytes(),
                     self.edits.tobytes(), shapes):
            h.update(len(part).to_bytes(8, "little"))
            h.update(part)
        return h.digest()

    def frames(self, f0: int, f1: int, check: bool = True) -> FrameBlock:
        """Frames ``[f0, f1)`` (clamped to the trace). ``check=False`` skips the limits on motion and
        half extents (:meth:`check_limits`), for a caller that checks the part it uses."""
        return self._decode(self._fetch(f0, f1), check)

    def decode_with_kernels(self, on: bool = True, min_bytes: int | None = None) -> None:
        """From now on decode compressed frame chunks on every solver thread (``chunk_read.py``)
        rather than through h5py on one. Off by default: it loads numba, which readers that do
        not solve (``resweep info``, the first-open vetting, exports) should not pay for; the
        check and the viewer turn it on. The frames read are the same either way. Reads of
        fewer than ``min_bytes`` decoded bytes (default ``chunk_read.MIN_KERNEL_BYTES``) still go
        through h5py, which is quicker for them."""
        self._chunks.kernels = bool(on)
        if min_bytes is not None:
            self._chunks.min_bytes = int(min_bytes)

    #: Frame datasets of a block, in fetch order; the flag datasets are read as bytes, then != 0.
    _BLOCK_DATASETS = ("start", "motion", "end", "half", "active", "grounded")
    _FLAG_DATASETS = ("active", "grounded")

    def _fetch(self, f0: int, f1: int):
        """First half of :meth:`frames`: the stored bytes of frames ``[f0, f1)`` (I/O only, no
        decoding; a prefetch thread runs it while the solver works). (f0, f1, names, Fetched)."""
        f0 = max(0, int(f0))
        f1 = min(self.frame_count, int(f1))
        f1 = max(f0, f1)
        # recorder files hold columns beyond the committed entities; other files end at N anyway
        names, requests = [], []
        for name in self._BLOCK_DATASETS:
            ds = self._ds[name]
            if ds is not None:
                names.append(name)
                requests.append((ds, ((f0, f1), (0, self.entity_count), *((0, n) for n in ds.shape[2:]))))
        return f0, f1, names, self._chunks.fetch(requests, flags=[n in self._FLAG_DATASETS for n in names])

    def _decode(self, fetched, check: bool) -> FrameBlock:
        """Second half of :meth:`frames`: decode (on every solver thread) and check limits."""
        f0, f1, names, got = fetched
        arrays = dict(zip(names, got.arrays()))
        n, N = f1 - f0, self.entity_count
        for name in self._FLAG_DATASETS:
            if name in arrays:  # the file's bytes as stored, != 0 (see SafeFile.read_flags)
                arrays[name] = arrays[name].view(np.uint8) != 0
        active = arrays["active"] if "active" in arrays else np.ones((n, N), bool)
        half = arrays["half"] if "half" in arrays else np.broadcast_to(self.half_extents[None], (n, N, 3))
        grounded = arrays["grounded"].astype(np.int8) if "grounded" in arrays else None
        blk = FrameBlock(f0, f1, arrays["start"], arrays["motion"], arrays["end"], active, half, grounded)
        if check:
            self.check_limits(blk)
        return blk

    def check_limits(self, blk: FrameBlock) -> None:
        """Refuse (TraceFormatError) an active row of ``blk`` whose motion or per-frame half
        extents are over the limits."""
        hov = self._ds["half"]
        if hov is not None:
            _extent_limit(self._f, self.limits, hov.name, blk.half, self.voxel_size, blk.active, blk.f0, self.ids)
        _motion_limit(self._f, self.limits, blk.motion, self.voxel_size, blk.active, blk.f0, self.ids)

    @property
    def frame_chunks(self) -> tuple | None:
        """Storage chunk shape of the frame datasets (frames, entities, 3), None when contiguous."""
        return self._ds["start"].chunks

    def block_frames(self, rows: int = 1 << 17) -> int:
        """Frames per streamed block so that one block holds about ``rows`` entity-frames.

        Rounded down to whole storage chunks of the frame datasets when a block spans several,
        so every compressed chunk is read and decompressed once.
        """
        step = max(1, min(4096, rows // max(1, self.entity_count)))
        chunks = self._ds["start"].chunks
        if chunks and step >= chunks[0]:
            step -= step % chunks[0]
        return step

    def iter_frames(self, rows: int = 1 << 17, f0: int = 0, f1: int | None = None, prefetch: bool = False):
        """Yield :class:`FrameBlock` s covering ``[f0, f1)`` in bounded blocks.

        With ``prefetch`` the next block is read on a background thread while the caller works
        on the current one (at most two blocks are held; read errors surface in the caller).
        """
        f1 = self.frame_count if f1 is None else min(f1, self.frame_count)
        step = self.block_frames(rows)
        firsts = range(f0, f1, step)
        if not prefetch or len(firsts) < 2:
            for a in firsts:
                yield self.frames(a, min(a + step, f1))
            return
        from concurrent.futures import ThreadPoolExecutor
        with ThreadPoolExecutor(1, thread_name_prefix="resweep-read") as pool:
            ahead = pool.submit(self._fetch, firsts[0], min(firsts[0] + step, f1))
            for a in firsts[1:]:
                fetched = ahead.result()
                ahead = pool.submit(self._fetch, a, min(a + step, f1))
                yield self._decode(fetched, True)
            yield self._decode(ahead.result(), True)

    @property
    def last_time(self) -> float | None:
        """Time of the last frame read (for a trace that ended early: the last flushed time)."""
        return float(self.time[-1]) if len(self.time) else None

    def ended_early_info(self) -> dict | None:
        """For a recorder file its writer has not closed (killed, crashed or still recording):
        ``{"frames_read": int, "last_flushed_time": float seconds or None}``, else None. The one
        definition behind ``ended_early`` in every report (info, check, the viewer)."""
        if not self.ended_early:
            return None
        return {"frames_read": int(self.frame_count), "last_flushed_time": self.last_time}

    def refresh(self) -> int:
        """Pick up frames a recorder committed since the trace was opened (or last refreshed).

        Only for recorder files opened in SWMR mode (``open_trace(path, swmr=True)``); other
        traces do not change. Returns the number of new frames.
        """
        if self.committed is None or not self._f.swmr:
            return 0
        before = self.frame_count
        self._f.refresh()
        self._load_commit()
        ed = self._f.dataset("/world/edits", required=False)
        self.edits = (self._read_edits(ed, self.chunk_origin, self.chunk_size) if ed is not None
                      else np.zeros((0, 5), np.int64))
        self._load_entities()
        self._load_frames()
        return self.frame_count - before

    def poll_committed(self):
        """(frames, closed) of the commit record as it is on disk now, or None when this is not
        a recorder file opened in SWMR mode. Changes nothing in this Trace (see :meth:`refresh`)."""
        if self.committed is None or not self._f.swmr:
            return None
        ds = self._f.dataset("/frames/committed")
        self._f.refresh(ds)
        c = self._f.read(ds)
        return int(c[0]), bool(c[3])

    def entity_index(self, entity_id: int) -> int:
        """Column of engine id ``entity_id``, or -1."""
        hit = np.flatnonzero(self.ids == int(entity_id))
        return int(hit[0]) if len(hit) else -1

    def world_bounds(self):
        """(lo, hi) int64 (3,) voxel bounds of all chunks, or None for an empty world."""
        if not len(self.chunk_origin):
            return None
        return self.chunk_origin.min(axis=0), self.chunk_origin.max(axis=0) + self.chunk_size

    def close(self):
        self._f.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def open_trace(path, swmr: bool = False, limits: Limits | None = None, worlds: WorldCache | None = None) -> Trace:
    """Open and validate a trace; raises :class:`TraceFormatError` with a one-line reason.

    ``swmr``: open in HDF5 SWMR read mode so :meth:`Trace.refresh` sees frames a recorder is
    still appending. ``limits`` default to :func:`resweep.core.format.limits.current`
    (``RESWEEP_MAX`` applied). ``worlds``: a world cache shared by the traces one thread opens
    in turn (farm workers), so traces stored with the same world decode and build it once; the
    trace's ``chunk_blocks`` may then be a read-only array shared with other traces.
    """
    return Trace(path, swmr=swmr, limits=limits, worlds=worlds)


def count_extra_chunks(origin: np.ndarray, edits: np.ndarray, S: int) -> int:
    """How many chunks edits touch outside the recorded ones (``origin`` int64 (C, 3) voxels)."""
    if not len(edits):
        return 0
    have = np.unique(origin // S, axis=0)
    touched = np.unique(edits[:, 1:4] // S, axis=0)
    both = np.concatenate([have, touched])
    return len(np.unique(both, axis=0)) - len(have)


def _world_size(f: SafeFile, lim: Limits, C: int, extra: int, S: int):
    """Refuse a world whose chunk count or voxel count is over the limits."""
    total = C + extra
    why = f"{C:,} recorded chunks" + (f" + {extra:,} made for edits outside them" if extra else "")
    if total > lim.chunks:
        raise f.fail("/world", f"{why} are {lim.hint('chunks')}")
    if total * S ** 3 > lim.voxels:
        raise f.fail("/world", f"{why} of {S}^3 voxels hold {total * S ** 3:,} voxels, {lim.hint('voxels')}")


def _first_over(big: np.ndarray, active: np.ndarray | None):
    """(frame, column) of the first True in ``big`` (n, N) among active rows, or None."""
    if active is not None:
        big = big & active
    if not big.any():
        return None
    return np.unravel_index(int(np.argmax(big)), big.shape)


def _all_within(a: np.ndarray, bound: float) -> bool:
    """True when every |a| <= ``bound`` (then no row can be over a limit): the largest and smallest
    value in the array's own dtype (widening to float64 is exact, so the test is the exact one),
    two reductions without the temporaries of the row-by-row test. False when some value is over
    or NaN (max and min propagate NaN): the caller then runs the row-by-row test."""
    if a.size == 0:
        return True
    with np.errstate(invalid="ignore"):
        return bool(float(a.max()) <= bound and -float(a.min()) <= bound)


def _extent_limit(f, lim, name, half, vs, active=None, f0=0, ids=None):
    """Refuse half extents over ``lim.extent`` voxels (non-finite ones are left to the check)."""
    if _all_within(half, lim.extent * vs):
        return
    with np.errstate(invalid="ignore"):
        big = (np.abs(np.asarray(half, np.float64)) > lim.extent * vs).any(-1)
    if half.ndim == 2:
        where = np.flatnonzero(big)
        if len(where):
            raise f.fail(name, f"row {int(where[0])}: half extents {half[where[0]].tolist()} (world units) are "
                               f"{lim.hint('extent')}")
        return
    hit = _first_over(big, active)
    if hit is not None:
        raise f.fail(name, f"frame {f0 + int(hit[0])}, entity {int(ids[hit[1]])}: half extents "
                           f"{np.asarray(half[hit]).tolist()} (world units) are {lim.hint('extent')}")


def _motion_limit(f, lim, motion, vs, active, f0, ids):
    """Refuse an active row whose motion along an axis is over ``lim.motion`` voxels."""
    if _all_within(motion, lim.motion * vs):
        return
    with np.errstate(invalid="ignore"):
        big = (np.abs(np.asarray(motion, np.float64)) > lim.motion * vs).any(-1)
    hit = _first_over(big, active)
    if hit is not None:
        raise f.fail("/frames/motion", f"frame {f0 + int(hit[0])}, entity {int(ids[hit[1]])}: motion "
                                       f"{np.asarray(motion[hit]).tolist()} (world units, per axis) is {lim.hint('motion')}")


def _as_str(v):
    if v is None:
        return None
    if isinstance(v, bytes):
        return v.decode("utf-8", "replace")
    if isinstance(v, np.ndarray) and v.shape == ():
        v = v[()]
        return _as_str(v)
    if isinstance(v, (str, np.str_)):
        return str(v)
    return repr(v)


def _is_int(v) -> bool:
    return isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_))


def _is_real(v) -> bool:
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))


_KIND_LETTERS = {"integer": "i", "float": "f"}


def _check(f: SafeFile, ds, sp: DatasetSpec, dims: dict, why: str = ""):
    """Refuse ``ds`` unless its dtype and shape follow table row ``sp`` (symbols from ``dims``)."""
    kind_words = [d for d in sp.dtypes if d in _KIND_LETTERS]
    if kind_words:
        _need_dtype(f, ds, _KIND_LETTERS[kind_words[0]], kind_words[0])
    elif sp.dtypes != ("string",) and sp.dtypes != ("bool",) and str(ds.dtype) not in sp.dtypes:
        raise f.fail(ds.name, f"dtype must be {' or '.join(sp.dtypes)}, found {ds.dtype}")
    want = sp.resolve(dims)
    shape = ds.shape
    if len(shape) == len(want) and all(w is None or w == s for w, s in zip(want, shape)):
        return
    text = "(" + ", ".join(str(w) if w is not None else str(s) for w, s in zip(want, sp.shape)) + \
        ("," if len(want) == 1 else "") + ")"
    raise f.fail(ds.name, f"shape must be {text + why}, found {shape}")


def _need_dtype(f: SafeFile, ds, kinds: str, what: str):
    if ds.dtype.kind not in kinds:
        raise f.fail(ds.name, f"dtype must be {what}, found {ds.dtype}")
