"""Numba kernels that read the voxel world: chunk lookup, voxel ranges, cell scans, overlap depth.

The world reaches kernels as the named tuple :class:`resweep.core.world.kernel.KernelWorld`;
its float members set the float type every kernel computes in. Points and sizes travel as float
3-tuples (kept in registers, no array views).
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.world.chunk_hash import H1, H2, H3


@kernel(inline="always")
def chunk_lookup(keys, slot, cx, cy, cz):
    """Index of chunk (cx, cy, cz) or -1 (linear probing, see chunk_hash.build_hash)."""
    mask = slot.shape[0] - 1
    h = ((cx * H1) ^ (cy * H2) ^ (cz * H3)) & mask
    while slot[h] != -1:
        if keys[h, 0] == cx and keys[h, 1] == cy and keys[h, 2] == cz:
            return slot[h]
        h = (h + 1) & mask
    return -1


@kernel(inline="always")
def voxel_range(a, b, vs, reach, wlo, whi):
    """Inclusive voxel index range [i0, i1] whose cells can touch world interval [a, b] on one axis.

    ``a``, ``b`` must be finite (rows with non-finite values are rejected before any solve).

    ``reach`` widens by a voxel for shapes past their cell; the range is clamped to the world, so a
    hostile or huge motion never scans more than the chunks that exist. Empty when i0 > i1.
    """
    # Widen by a rounding margin so the broad phase is always a superset of what the narrow
    # phase (computed in the same float type) can accept, even far from the origin in float32.
    ua = a / vs
    ub = b / vs
    fa = np.floor(ua - (abs(ua) * fl(vs, 5e-7) + fl(vs, 1e-3)))
    fb = np.floor(ub + (abs(ub) * fl(vs, 5e-7) + fl(vs, 1e-3)))
    lo_f = fl(vs, wlo - reach)
    hi_f = fl(vs, whi - 1 + reach)
    if fa > hi_f or fb < lo_f:
        return np.int64(1), np.int64(0)
    if fa < lo_f:
        fa = lo_f
    if fb > hi_f:
        fb = hi_f
    i0 = max(np.int64(fa) - reach, wlo)
    i1 = min(np.int64(fb) + reach, whi - 1)
    return i0, i1


@kernel(inline="always")
def box_range(c, h, world):
    """Voxel ranges (i0, i1, j0, j1, k0, k1) of the box [c - h, c + h]; c, h float 3-tuples."""
    vs = world.voxel_size
    reach = world.reach
    wlo = world.lo
    whi = world.hi
    i0, i1 = voxel_range(c[0] - h[0], c[0] + h[0], vs, reach, wlo[0], whi[0])
    j0, j1 = voxel_range(c[1] - h[1], c[1] + h[1], vs, reach, wlo[1], whi[1])
    k0, k1 = voxel_range(c[2] - h[2], c[2] + h[2], vs, reach, wlo[2], whi[2])
    return i0, i1, j0, j1, k0, k1


@kernel(inline="always")
def sweep_range(p, r, h, world):
    """Voxel ranges of the swept bounding box of the box at p and at p + r (float 3-tuples)."""
    vs = world.voxel_size
    reach = world.reach
    wlo = world.lo
    whi = world.hi
    i0, i1 = voxel_range(min(p[0], p[0] + r[0]) - h[0], max(p[0], p[0] + r[0]) + h[0], vs, reach, wlo[0], whi[0])
    j0, j1 = voxel_range(min(p[1], p[1] + r[1]) - h[1], max(p[1], p[1] + r[1]) + h[1], vs, reach, wlo[1], whi[1])
    k0, k1 = voxel_range(min(p[2], p[2] + r[2]) - h[2], max(p[2], p[2] + r[2]) + h[2], vs, reach, wlo[2], whi[2])
    return i0, i1, j0, j1, k0, k1


@kernel(inline="always")
def box_corners(bboxes, b):
    """Row ``b`` of the (B, 6) box table as a 6-tuple (min xyz, max xyz; voxel-local)."""
    return bboxes[b, 0], bboxes[b, 1], bboxes[b, 2], bboxes[b, 3], bboxes[b, 4], bboxes[b, 5]


@kernel(inline="always")
def box_depth(c, h, v, bb, vs):
    """Least per-axis interior overlap of the box (c, h) with block box ``bb`` of voxel ``v``."""
    d = fl(vs, np.inf)
    for a in range(3):
        lo = (v[a] + bb[a]) * vs
        hi = (v[a] + bb[a + 3]) * vs
        o = min(c[a] + h[a], hi) - max(c[a] - h[a], lo)
        if o < d:
            d = o
    return d


@hot
def overlap_depth(c, h, world):
    """Deepest interior overlap of the box (centre c, half extents h) with solid.

    Args:
        c, h: float 3-tuples, world units.
    Returns:
        depth (float, world units): max over solid boxes of the least per-axis overlap; 0 when
        interiors are apart (touching faces do not count).
    """
    keys, slot, blocks, S = world.keys, world.slot, world.blocks, world.chunk_size
    bstart, bboxes = world.box_start, world.boxes
    vs = world.voxel_size
    best = fl(vs, 0)
    i0, i1, j0, j1, k0, k1 = box_range(c, h, world)
    if i0 > i1 or j0 > j1 or k0 > k1:
        return best
    for cx in range(i0 // S, i1 // S + 1):
        for cy in range(j0 // S, j1 // S + 1):
            for cz in range(k0 // S, k1 // S + 1):
                ci = chunk_lookup(keys, slot, cx, cy, cz)
                if ci < 0:
                    continue
                bx, by, bz = cx * S, cy * S, cz * S
                for x in range(max(i0, bx), min(i1, bx + S - 1) + 1):
                    for y in range(max(j0, by), min(j1, by + S - 1) + 1):
                        for z in range(max(k0, bz), min(k1, bz + S - 1) + 1):
                            t = blocks[ci, x - bx, y - by, z - bz]
                            if t == 0:
                                continue
                            v = (fl(vs, x), fl(vs, y), fl(vs, z))
                            for b in range(bstart[t], bstart[t + 1]):
                                d = box_depth(c, h, v, box_corners(bboxes, b), vs)
                                if d > best:
                                    best = d
    return best
