"""Numba kernels of the grounded rule and the voxel-order box visits the solver models share.

Grounded (one rule, used by step-up gating and by the ``grounded_mismatch`` kind): a box is
grounded when a solid box's top face lies within ``2 * skin`` below the box's bottom face (gap in
[0, 2 skin]) and their footprints' open interiors overlap (the two axes other than up).
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.world.nb_world import box_corners, box_range, chunk_lookup, chunk_of


@kernel(inline="always")
def block_at(world, x, y, z):
    """Block type of voxel (x, y, z), 0 where no chunk holds it (voxel-order visits look up per
    voxel: the models scan a handful of voxels, and their order is part of their definition)."""
    S = world.chunk_size
    cx, cy, cz = chunk_of(x, world), chunk_of(y, world), chunk_of(z, world)
    ci = chunk_lookup(world.keys, world.slot, cx, cy, cz)
    if ci < 0:
        return 0
    return world.blocks[ci, x - cx * S, y - cy * S, z - cz * S]


@kernel(inline="always")
def block_cached(world, x, y, z, memo):
    """:func:`block_at` remembering the chunk of the previous call: ``memo`` = (cx, cy, cz, index)
    (index -2 before the first call; start with :data:`NO_MEMO`). Neighbouring voxels of a scan
    share a chunk, so most calls skip the hash lookup. Returns (type, memo)."""
    S = world.chunk_size
    cx, cy, cz = chunk_of(x, world), chunk_of(y, world), chunk_of(z, world)
    ci = memo[3]
    if ci == -2 or cx != memo[0] or cy != memo[1] or cz != memo[2]:
        ci = np.int64(chunk_lookup(world.keys, world.slot, cx, cy, cz))
        memo = (np.int64(cx), np.int64(cy), np.int64(cz), ci)
    if ci < 0:
        return 0, memo
    return world.blocks[ci, x - cx * S, y - cy * S, z - cz * S], memo


#: The empty memo of :func:`block_cached`.
NO_MEMO = (np.int64(0), np.int64(0), np.int64(0), np.int64(-2))


@kernel(inline="always")
def next_box(world, rng, x, y, z, b):
    """The solid box after box ``b`` of voxel (x, y, z) in ascending (x, y, z) voxel order, table
    order within a voxel, inside the inclusive voxel ranges ``rng`` = (i0, i1, j0, j1, k0, k1).

    Start from (i0, j0, k0, -1). Returns (x, y, z, b, type); type 0 when no box is left. One walk
    shared by the models whose definition fixes this order (and by the grounded rule).
    """
    i0, i1, j0, j1, k0, k1 = rng
    if i0 > i1 or j0 > j1 or k0 > k1:
        return i1 + 1, y, z, b, 0
    bstart = world.box_start
    while x <= i1:
        t = block_at(world, x, y, z)
        if t != 0:
            b = max(b + 1, bstart[t])
            if b < bstart[t + 1]:
                return x, y, z, b, t
        b = np.int64(-1)
        z += 1
        if z > k1:
            z = k0
            y += 1
            if y > j1:
                y = j0
                x += 1
    return x, y, z, b, 0


@kernel(inline="always")
def box_bounds(v, bb, a, vs):
    """World interval (lo, hi) on axis ``a`` of block box ``bb`` (voxel-local 6-tuple) of voxel ``v``."""
    return (v[a] + bb[a]) * vs, (v[a] + bb[a + 3]) * vs


@kernel(inline="always")
def apart_across(c, h, v, bb, vs, a):
    """True unless the box (c, h) and block box ``bb`` overlap in open interior on both axes other
    than ``a``."""
    for o in range(3):
        if o == a:
            continue
        lo, hi = box_bounds(v, bb, o, vs)
        if not (lo < c[o] + h[o] and c[o] - h[o] < hi):
            return True
    return False


@hot
def support_gap(c, h, world, up, slack):
    """Least gap (world units, >= -slack) from the bottom face of the box (c, h) down to the top
    face of a solid box whose footprint overlaps the box's in open interior and whose top lies at
    most ``slack`` above that bottom, searching one voxel down; inf when there is none."""
    vs = world.voxel_size
    bottom = c[up] - h[up]
    # the box range of the slab [bottom - 1 voxel, bottom] under the footprint
    mid = (c[0] if up != 0 else bottom - vs * fl(vs, 0.5), c[1] if up != 1 else bottom - vs * fl(vs, 0.5),
           c[2] if up != 2 else bottom - vs * fl(vs, 0.5))
    hh = (h[0] if up != 0 else vs * fl(vs, 0.5), h[1] if up != 1 else vs * fl(vs, 0.5),
          h[2] if up != 2 else vs * fl(vs, 0.5))
    rng = box_range(mid, hh, world)
    best = fl(vs, np.inf)
    x, y, z, b = rng[0], rng[2], rng[4], np.int64(-1)
    while True:
        x, y, z, b, t = next_box(world, rng, x, y, z, b)
        if t == 0:
            break
        v = (fl(vs, x), fl(vs, y), fl(vs, z))
        bb = box_corners(world.boxes, b)
        if apart_across(c, h, v, bb, vs, up):
            continue
        g = bottom - box_bounds(v, bb, up, vs)[1]
        if g >= -slack and g < best:
            best = g
    return best


@kernel(inline="always")
def grounded(c, h, world, skin, up):
    """The grounded rule (module docstring) for the box (c, h); skin in world units."""
    return support_gap(c, h, world, up, fl(world.voxel_size, 0)) <= 2 * skin
