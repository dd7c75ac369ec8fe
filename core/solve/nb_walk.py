"""Broad phase for long motions: visit only the voxels the moving box can reach, nearest first.

Scanning the swept bounding box of a motion of n voxels per axis costs ~n^3 cells; the moving box
touches only ~n cells. The walk instead subdivides the swept range front to back along the
motion, the way a voxel traversal steps through the cells a ray crosses in order of entry time
(Amanatides & Woo 1987, "A Fast Voxel Traversal Algorithm for Ray Tracing", Eurographics), but
with regions instead of single cells, so a box wider than a voxel (and shapes that reach past
their cell) are covered without special cases:

- a region (a box of voxels) is tested as one slab test of the centre ray against the region's
  bounds expanded by the half extents (the narrow phase's own Minkowski-sum slab test, Ericson
  2005, sec. 5.5); a region the narrow phase would reject as a box, or that is entered only after
  the best hit so far, is dropped whole;
- a surviving region is split in two across its longest axis at the coarsest power-of-two voxel
  boundary inside it (an implicit octree over absolute coordinates: the regions, and so the
  boxes tested, do not depend on how the world is cut into chunks), and the half the motion
  enters first is visited first; a region that no existing chunk meets is dropped (one hash
  lookup per chunk coordinate for small regions, the chunk lists of the thinnest slab for large
  ones, see ``nb_world.any_chunk``), so a long ray through empty space costs a few splits near
  each chunk it passes, not one per chunk coordinate along it; small regions end the descent and
  their boxes go through the ordinary narrow phase.

Why the result is bit-identical to scanning the whole swept box: the region bounds are computed
with the very float operations of the narrow phase, from a voxel index no greater (no smaller)
than any in the region and the least (greatest) box corner of any block shape. Correctly rounded
+, -, *, / are monotone, so every box in the region gets a computed entry time >= the region's
and a computed exit time <= the region's. A dropped region therefore holds no box the narrow
phase would accept with an entry time <= the best one, and the minimum, its ties (OR-ed axes,
least voxel) and the "enters solid" answer come out the same. Only the number of boxes the narrow
phase tested (``candidates``) is smaller.
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_narrow import ENTERS, box_interval, no_box, scan_cells, scan_chunk
from resweep.core.world.nb_world import any_chunk, chunk_lookup, chunk_of

#: Regions of at most this many voxels are scanned directly.
LEAF_CELLS = 24
#: Rows of the per-thread region stack: each split adds one entry and lowers the highest bit in
#: which the region's bounds differ on the split axis; voxel coordinates stay within +-2^41, so
#: a path has at most 3 * 43 splits and 160 rows never overflow. If they did, the region would
#: be scanned whole (still correct).
STACK_ROWS = 160


@kernel(inline="always")
def region_interval(p, r, h, world, x0, x1, y0, y1, z0, z1):
    """(te, tx): slab test of the centre ray against the voxels [x0, x1] x [y0, y1] x [z0, z1]
    holding the least and greatest box corners of any block shape (``world.extent``), expanded by h.
    Every block box of the region has a computed te no smaller and tx no greater."""
    ext = world.extent
    vs = world.voxel_size
    te, tx, _ = box_interval(p, r, h, (fl(vs, x0), fl(vs, y0), fl(vs, z0)), (fl(vs, x1), fl(vs, y1), fl(vs, z1)),
                             (ext[0], ext[1], ext[2], ext[3], ext[4], ext[5]), vs)
    return te, tx


@kernel(inline="always")
def split_point(c0, c1):
    """Last voxel before the coarsest power-of-two boundary in (c0, c1] (c0 < c1): the split of
    an implicit octree over absolute voxel coordinates, so the regions visited do not depend on
    the chunk size."""
    if c0 < 0 and c1 >= 0:
        return np.int64(-1)
    x = c0 ^ c1  # same sign here, so positive: its highest bit is where c0 and c1 part
    p = np.int64(1)
    while p <= (x >> 1):
        p <<= 1
    return (c1 & -p) - 1


@kernel(inline="always")
def push_halves(stack, n, r, x0, x1, y0, y1, z0, z1):
    """Split the region across its longest axis (see :func:`split_point`) and push both halves,
    the one the motion enters first on top. Returns the new stack size."""
    nx, ny, nz = x1 - x0, y1 - y0, z1 - z0
    a = 0 if nx >= ny and nx >= nz else (1 if ny >= nz else 2)
    c0, c1 = (x0, x1) if a == 0 else ((y0, y1) if a == 1 else (z0, z1))
    mid = split_point(c0, c1)
    for half in range(2):
        lower = (half == 0) == (r[a] < 0)  # the far half goes first, under the near one
        lo_c, hi_c = (c0, mid) if lower else (mid + 1, c1)
        stack[n, 0], stack[n, 1] = (lo_c, hi_c) if a == 0 else (x0, x1)
        stack[n, 2], stack[n, 3] = (lo_c, hi_c) if a == 1 else (y0, y1)
        stack[n, 4], stack[n, 5] = (lo_c, hi_c) if a == 2 else (z0, z1)
        n += 1
    return n


@hot
def walk_cells(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode, stack):
    """Same result as ``scan_cells`` over [i0, i1] x [j0, j1] x [k0, k1], visiting fewer voxels.

    Args:
        p, r, h: float 3-tuples (centre, motion, half extents; world units); r not all zero.
        d: touch margins (nb_narrow.touch_margin); regions are tested without them (a superset).
        best: search state (see nb_sweep); mode: FIRST_HIT or ENTERS.
        stack: int64 (STACK_ROWS, 6) scratch, one per thread.
    Returns:
        the updated search state.
    """
    keys, slot, S = world.keys, world.slot, world.chunk_size
    stack[0, 0], stack[0, 1], stack[0, 2] = i0, i1, j0
    stack[0, 3], stack[0, 4], stack[0, 5] = j1, k0, k1
    n = 1
    while n > 0:
        n -= 1
        x0, x1, y0, y1, z0, z1 = stack[n, 0], stack[n, 1], stack[n, 2], stack[n, 3], stack[n, 4], stack[n, 5]
        te, tx = region_interval(p, r, h, world, x0, x1, y0, y1, z0, z1)
        # The narrow phase's own rejection, applied to the region's bounds, then "entered after
        # the best hit so far" (ties at the same time must still be visited).
        if not (te < tx) or tx <= 0 or te >= 1:
            continue
        if mode != ENTERS and best.axes != 0 and te > best.tmin:
            continue
        cx0, cy0, cz0 = chunk_of(x0, world), chunk_of(y0, world), chunk_of(z0, world)
        cx1, cy1, cz1 = chunk_of(x1, world), chunk_of(y1, world), chunk_of(z1, world)
        one_chunk = cx0 == cx1 and cy0 == cy1 and cz0 == cz1
        ci = chunk_lookup(keys, slot, cx0, cy0, cz0) if one_chunk else -1
        if one_chunk and ci < 0:
            continue  # all air
        if not one_chunk and not any_chunk(world, (cx0, cy0, cz0), (cx1, cy1, cz1)):
            continue  # meets no chunk: all air
        nx, ny, nz = x1 - x0 + 1, y1 - y0 + 1, z1 - z0 + 1
        small = nx <= LEAF_CELLS and ny <= LEAF_CELLS and nz <= LEAF_CELLS and nx * ny * nz <= LEAF_CELLS
        if not small and n + 2 <= stack.shape[0]:
            n = push_halves(stack, n, r, x0, x1, y0, y1, z0, z1)
            continue
        # A leaf (the stack bound is never reached, see STACK_ROWS; scanning stays correct).
        if one_chunk:
            best = scan_chunk(p, r, h, d, world, ci, cx0 * S, cy0 * S, cz0 * S,
                              x0, x1, y0, y1, z0, z1, best, mode, no_box())[0]
        else:
            best = scan_cells(p, r, h, d, world, x0, x1, y0, y1, z0, z1, best, mode)
        if mode == ENTERS and best.axes != 0:
            return best
    return best
