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
def chunk_of(x, world):
    """Chunk coordinate of voxel coordinate ``x`` (int64): floor(x / S). An arithmetic shift when S
    is a power of two (floor division of negative numbers included): an integer division costs
    tens of cycles, and the broad phases take six per query."""
    if world.chunk_shift >= 0:
        return x >> world.chunk_shift
    return x // world.chunk_size


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


#: Ranges of at most this many chunk coordinates are visited coordinate by coordinate (hash
#: lookups); larger ones through the chunk lists of the thinnest slab (see fewest_chunks_axis).
DIRECT_CHUNKS = 64
#: A region test that finds more chunks than this in its thinnest slab answers "maybe occupied".
SLAB_PROBE = 32


@kernel(inline="always")
def coord_count(c0, c1):
    """Number of chunk coordinates in the box [c0, c1] (int 3-tuples), as a float (no overflow)."""
    return float(c1[0] - c0[0] + 1) * float(c1[1] - c0[1] + 1) * float(c1[2] - c0[2] + 1)


@kernel(inline="always")
def fewest_chunks_axis(world, c0, c1):
    """(axis, a, b): the axis whose slab [c0[axis], c1[axis]] of chunk coordinates holds the
    fewest chunks, and that slab as entries [a, b) of ``world.axis_keys[axis]``."""
    best_ax, best_a, best_b = 0, np.int64(0), np.int64(world.axis_keys.shape[1])
    for ax in range(3):
        keys = world.axis_keys[ax]
        a = np.int64(np.searchsorted(keys, c0[ax], side="left"))
        b = np.int64(np.searchsorted(keys, c1[ax], side="right"))
        if b - a < best_b - best_a:
            best_ax, best_a, best_b = ax, a, b
    return best_ax, best_a, best_b


@kernel(inline="always")
def chunk_in_box(world, ci, c0, c1):
    """Whether chunk ``ci`` lies in the box [c0, c1] of chunk coordinates."""
    cc = world.chunk_coord
    return (c0[0] <= cc[ci, 0] <= c1[0]) and (c0[1] <= cc[ci, 1] <= c1[1]) and (c0[2] <= cc[ci, 2] <= c1[2])


@kernel(inline="always")
def use_slab(world, c0, c1):
    """(ax, a, b, yes): ``yes`` when visiting the chunks of the thinnest slab is cheaper than
    visiting every chunk coordinate of the box [c0, c1]; then entries [a, b) of
    ``world.axis_chunks[ax]`` hold every chunk of the box (and others, filtered by chunk_in_box)."""
    n = coord_count(c0, c1)
    if n <= DIRECT_CHUNKS:
        return 0, np.int64(0), np.int64(0), False
    ax, a, b = fewest_chunks_axis(world, c0, c1)
    return ax, a, b, float(b - a) < n


@kernel(inline="always")
def any_chunk(world, c0, c1):
    """False only when no chunk lies in the box [c0, c1] of chunk coordinates (True = maybe).

    Exact for boxes of few coordinates or with a thin slab; a box whose thinnest slab holds more
    than SLAB_PROBE chunks answers True, and callers split it further."""
    if coord_count(c0, c1) <= 8:
        for cx in range(c0[0], c1[0] + 1):
            for cy in range(c0[1], c1[1] + 1):
                for cz in range(c0[2], c1[2] + 1):
                    if chunk_lookup(world.keys, world.slot, cx, cy, cz) >= 0:
                        return True
        return False
    ax, a, b = fewest_chunks_axis(world, c0, c1)
    if b - a > SLAB_PROBE:
        return True
    for q in range(a, b):
        if chunk_in_box(world, world.axis_chunks[ax, q], c0, c1):
            return True
    return False


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
    keys, slot = world.keys, world.slot
    vs = world.voxel_size
    best = fl(vs, 0)
    i0, i1, j0, j1, k0, k1 = box_range(c, h, world)
    if i0 > i1 or j0 > j1 or k0 > k1:
        return best
    c0 = (chunk_of(i0, world), chunk_of(j0, world), chunk_of(k0, world))
    c1 = (chunk_of(i1, world), chunk_of(j1, world), chunk_of(k1, world))
    ax, a, b, slab = use_slab(world, c0, c1)
    if slab:  # a huge box: visit the chunks that exist, not every coordinate (max is order-free)
        for q in range(a, b):
            ci = world.axis_chunks[ax, q]
            if chunk_in_box(world, ci, c0, c1):
                cc = world.chunk_coord
                best = max(best, chunk_depth(c, h, world, ci, cc[ci, 0], cc[ci, 1], cc[ci, 2], i0, i1, j0, j1, k0, k1))
        return best
    for cx in range(c0[0], c1[0] + 1):
        for cy in range(c0[1], c1[1] + 1):
            for cz in range(c0[2], c1[2] + 1):
                ci = chunk_lookup(keys, slot, cx, cy, cz)
                if ci >= 0:
                    best = max(best, chunk_depth(c, h, world, ci, cx, cy, cz, i0, i1, j0, j1, k0, k1))
    return best


@kernel(inline="always")
def chunk_depth(c, h, world, ci, cx, cy, cz, i0, i1, j0, j1, k0, k1):
    """Deepest overlap (>= 0) of the box (c, h) with the solid boxes of the voxels of chunk ``ci``
    (at chunk coordinate cx, cy, cz) inside [i0, i1] x [j0, j1] x [k0, k1]."""
    blocks, bstart, bboxes, S = world.blocks, world.box_start, world.boxes, world.chunk_size
    vs = world.voxel_size
    best = fl(vs, 0)
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
