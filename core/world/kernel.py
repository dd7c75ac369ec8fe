"""The world as numba kernels read it: :class:`KernelWorld`, built once per world and float type."""
from __future__ import annotations

import weakref
from typing import NamedTuple

import numpy as np

from resweep.core.world.voxel_world import VoxelWorld


class KernelWorld(NamedTuple):
    """Arrays of a :class:`VoxelWorld` in the form the kernels take (numba passes named tuples).

    Attributes:
        keys: int64 (H, 3) chunk coordinates of the hash table; slot: int32 (H,) chunk index or -1.
        blocks: uint16 (C, S, S, S) block types (shared with the world, edited in place).
        chunk_size: int64 S; chunk_shift: int64 log2(S) when S is a power of two, else -1 (chunk
            coordinates are then a shift, not an integer division: see nb_world.chunk_of).
        lo, hi: int64 (3,) voxel bounds of all chunks (hi exclusive).
        box_start: int64 (T+1,) and boxes: float (B, 6): block shapes (CSR, voxel-local units).
        reach: int64, 1 when some shape reaches past its cell.
        voxel_size: float, world units per voxel edge. Its float type (with ``boxes`` and
            ``extent``) sets the float type every kernel computes in.
        extent: float (6,) least box min and greatest box max per axis (voxel-local units); the
            walk of long sweeps bounds every block shape by it.
        chunk_coord: int64 (C, 3) chunk coordinate of each chunk (origin // S).
        axis_keys: int64 (3, C) per axis, the chunks' coordinates on that axis, sorted;
        axis_chunks: int64 (3, C) the chunk index of each entry of ``axis_keys``. Scans of ranges
            spanning many chunk coordinates visit the chunks of the thinnest slab instead, so their
            cost is bounded by the chunks that exist (see nb_world.fewest_chunks_axis).
    """

    keys: np.ndarray
    slot: np.ndarray
    blocks: np.ndarray
    chunk_size: np.int64
    chunk_shift: np.int64
    lo: np.ndarray
    hi: np.ndarray
    box_start: np.ndarray
    boxes: np.ndarray
    reach: np.int64
    voxel_size: float
    extent: np.ndarray
    chunk_coord: np.ndarray
    axis_keys: np.ndarray
    axis_chunks: np.ndarray


_WORLDS: "weakref.WeakKeyDictionary[VoxelWorld, dict]" = weakref.WeakKeyDictionary()


def kernel_world(world: VoxelWorld, dtype) -> KernelWorld:
    """``world`` as a :class:`KernelWorld` with floats in ``dtype``.

    Cached per world and dtype: the arrays are shared with ``world`` (its blocks are edited in
    place, so the tuple follows :meth:`VoxelWorld.advance_to` without being rebuilt).
    """
    dt = np.dtype(dtype)
    shapes = world.shapes
    sources = (world.keys, world.slot, world.blocks, shapes)
    per = _WORLDS.setdefault(world, {})
    got = per.get(dt)
    if got is not None and all(x is y for x, y in zip(got[0], sources)):
        return got[1]
    ft = dt.type
    boxes = np.ascontiguousarray(shapes.boxes, dtype=dt).reshape(-1, 6)
    # Least box min and greatest box max per axis bound every block's shape (the walk relies on it).
    ext = boxes[:, :3].min(axis=0).tolist() + boxes[:, 3:].max(axis=0).tolist() if len(boxes) else [0, 0, 0, 1, 1, 1]
    coord = np.ascontiguousarray(np.asarray(world.chunk_origin, np.int64).reshape(-1, 3) // world.chunk_size)
    order = np.argsort(coord, axis=0, kind="stable").T.copy()  # (3, C)
    keys = np.take_along_axis(coord.T, order, axis=1).copy()
    S = int(world.chunk_size)
    shift = S.bit_length() - 1 if S & (S - 1) == 0 else -1
    kw = KernelWorld(world.keys, world.slot, world.blocks, np.int64(S), np.int64(shift),
                     np.asarray(world.lo, np.int64).copy(), np.asarray(world.hi, np.int64).copy(),
                     np.ascontiguousarray(shapes.box_start, np.int64), boxes, np.int64(shapes.reach),
                     ft(world.voxel_size), np.asarray(ext, dt), coord, keys, order.astype(np.int64))
    per[dt] = (sources, kw)
    return kw
