"""The world part of a lines log: header, chunk and single-voxel records, gathered before frames.

Chunks are ``chunk_size`` cubes given as a flat list of block types in [x][y][z] order
(index ``(x * S + y) * S + z``) or as a run-length list ``[[count, type], ...]`` in that order.
"""
from __future__ import annotations

import numpy as np

from resweep.core.format.importers.records import MAX_TYPE, Fields
from resweep.core.world.shapes import BlockShapes, shapes_from_lists

DEFAULT_CHUNK_SIZE = 16
UP_AXES = ("x", "y", "z")
FRAME_DTYPES = ("float64", "float32")


class WorldBuilder:
    """Collects header, chunk and voxel records (in memory: the world is written up front)."""

    def __init__(self):
        self.chunk_size = DEFAULT_CHUNK_SIZE
        self.meta = {"voxel_size": 1.0, "up_axis": "y", "title": "", "producer": "resweep import"}
        self.frame_rate = 60.0
        self.frame_dtype = "float64"
        self.shapes: BlockShapes | None = None
        self.chunks: dict[tuple, np.ndarray] = {}
        self._chunk_line: dict[tuple, int] = {}
        self._header_seen = False

    @property
    def type_count(self) -> int:
        return self.shapes.count if self.shapes is not None else MAX_TYPE + 1

    def header(self, f: Fields):
        if self.chunks or self._header_seen:
            raise f.fail("order", "the header must come once, before any chunk or voxel record")
        self._header_seen = True
        self.chunk_size = f.int("chunk_size", required=False, lo=1, hi=1024) or DEFAULT_CHUNK_SIZE
        vs = f.float("voxel_size", required=False)
        if vs is not None and vs <= 0:
            raise f.fail("range", f"`voxel_size` must be > 0, got {vs!r}", "voxel_size")
        self.meta["voxel_size"] = vs or 1.0
        up = f.str("up_axis") or "y"
        if up not in UP_AXES:
            raise f.fail("range", f"`up_axis` must be x, y or z, got {up!r}", "up_axis")
        self.meta["up_axis"] = up
        for key in ("title", "producer"):
            self.meta[key] = f.str(key) or self.meta[key]
        rate = f.float("frame_rate", required=False)
        if rate is not None and rate <= 0:
            raise f.fail("range", f"`frame_rate` must be > 0, got {rate!r}", "frame_rate")
        self.frame_rate = rate or 60.0
        prec = f.str("precision") or "float64"
        if prec not in FRAME_DTYPES:
            raise f.fail("range", f"`precision` must be float64 or float32, got {prec!r}", "precision")
        self.frame_dtype = prec
        if f.has("blocks"):
            self.shapes = _shapes(f)

    def chunk(self, f: Fields):
        S = self.chunk_size
        origin = f.vec("origin", integer=True)
        if any(o % S for o in origin):
            raise f.fail("range", f"`origin` {list(origin)} is not a multiple of chunk_size {S}", "origin")
        key = tuple(o // S for o in origin)
        if key in self._chunk_line:
            raise f.fail("duplicate", f"chunk at {list(origin)} was already given on line {self._chunk_line[key]}",
                         "origin")
        if f.has("blocks") == f.has("rle"):
            raise f.fail("missing", "a chunk needs exactly one of `blocks` and `rle`", "blocks")
        flat = self._flat(f) if f.has("blocks") else self._rle(f)
        if len(flat) and (flat.min() < 0 or flat.max() >= self.type_count):
            bad = int(flat[(flat < 0) | (flat >= self.type_count)][0])
            raise f.fail("range", f"block type {bad} is not in 0..{self.type_count - 1}",
                         "blocks" if f.has("blocks") else "rle")
        self.chunks[key] = flat.astype(np.uint16).reshape(S, S, S)
        self._chunk_line[key] = f.line

    def _flat(self, f: Fields) -> np.ndarray:
        n = self.chunk_size ** 3
        v = f.rec["blocks"]
        if not isinstance(v, list) or len(v) != n:
            got = len(v) if isinstance(v, list) else "no list"
            raise f.fail("count", f"`blocks` needs {n} numbers (chunk_size {self.chunk_size} cubed), got {got}",
                         "blocks")
        return _int_array(f, "blocks", v)

    def _rle(self, f: Fields) -> np.ndarray:
        n = self.chunk_size ** 3
        v = f.rec["rle"]
        if not isinstance(v, list) or not all(isinstance(p, list) and len(p) == 2 for p in v):
            raise f.fail("count", "`rle` must be a list of [count, type] pairs", "rle")
        pairs = _int_array(f, "rle", v).reshape(-1, 2)
        if (pairs[:, 0] < 0).any():
            raise f.fail("range", "`rle` counts must be >= 0", "rle")
        if int(pairs[:, 0].sum()) != n:
            raise f.fail("count", f"`rle` covers {int(pairs[:, 0].sum())} voxels, needs {n} (chunk_size "
                                  f"{self.chunk_size} cubed)", "rle")
        return np.repeat(pairs[:, 1], pairs[:, 0])

    def voxel(self, f: Fields):
        x, y, z = f.vec("at", integer=True)
        t = f.int("block", lo=0, hi=self.type_count - 1)
        S = self.chunk_size
        key = (x // S, y // S, z // S)
        if key not in self.chunks:  # outside the given chunks: an air chunk holds it
            self.chunks[key] = np.zeros((S, S, S), np.uint16)
        self.chunks[key][x - key[0] * S, y - key[1] * S, z - key[2] * S] = t

    def arrays(self):
        """(chunk_origin int64 (C, 3), chunk_blocks uint16 (C, S, S, S)) sorted by origin."""
        S = self.chunk_size
        keys = sorted(self.chunks)
        origin = np.asarray(keys, np.int64).reshape(-1, 3) * S
        blocks = np.stack([self.chunks[k] for k in keys]) if keys else np.zeros((0, S, S, S), np.uint16)
        return origin, blocks


def _int_array(f: Fields, key: str, v) -> np.ndarray:
    try:
        a = np.asarray(v)
    except ValueError:
        raise f.fail("number", f"`{key}` must hold integers", key) from None
    if a.dtype.kind not in "iu":
        if a.dtype.kind == "f" and np.isfinite(a).all() and (a == np.round(a)).all():
            return a.astype(np.int64)
        raise f.fail("integer", f"`{key}` must hold integers", key)
    return a.astype(np.int64)


def _shapes(f: Fields) -> BlockShapes:
    """``blocks``: a list, one entry per type from 1 on, of {"name", "boxes": [[6 numbers], ...]}."""
    v = f.rec["blocks"]
    if not isinstance(v, list):
        raise f.fail("count", "`blocks` must be a list of block types", "blocks")
    shapes, names = [[]], ["air"]
    for j, b in enumerate(v, start=1):
        if not isinstance(b, dict) or not isinstance(b.get("boxes"), list):
            raise f.fail("count", f"`blocks` entry {j} needs `boxes`, a list of [min xyz, max xyz]", "blocks")
        boxes = []
        for box in b["boxes"]:
            if not isinstance(box, list) or len(box) != 6 or not all(
                    isinstance(x, (int, float)) and not isinstance(x, bool) for x in box):
                raise f.fail("count", f"`blocks` entry {j}: each box needs 6 numbers", "blocks")
            if not all(-1 <= x <= 2 for x in box) or not all(box[a] < box[a + 3] for a in range(3)):
                raise f.fail("range", f"`blocks` entry {j}: box {box} needs min < max within [-1, 2]", "blocks")
            boxes.append(tuple(float(x) for x in box))
        shapes.append(boxes)
        names.append(str(b.get("name", f"type {j}")))
    return shapes_from_lists(shapes, names)
