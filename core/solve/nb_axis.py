"""Numba kernels of the per-axis clipping model (``model="axis"``).

Common practice in voxel engines (many open-source engines, no single source): clip the wanted
motion one axis at a time in a fixed order, commonly the up axis first. For each axis ``a`` of
the order, from the position reached so far: ``d`` = the wanted motion along ``a``; every solid
box whose open interior overlaps the entity box's open interior on the other two axes and which
lies entirely ahead along ``a`` (near face at or beyond the box's leading face) limits ``|d|`` to
at most the gap minus ``skin`` (never below zero, never reversing ``d``; boxes farther than
``|d|`` do not change it); then the box moves by ``d``. Boxes already overlapped along ``a`` are
ignored. An axis is *clipped* when some box reduced ``|d|``. The result depends on the order on
purpose.
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_ground import NO_MEMO, apart_across, block_cached, box_bounds
from resweep.core.solve.nb_slide import slide_axis
from resweep.core.world.nb_world import box_corners, sweep_range


@kernel(inline="always")
def along(a, d, zero):
    """The 3-tuple with ``d`` on axis ``a`` and ``zero`` elsewhere."""
    return (d if a == 0 else zero, d if a == 1 else zero, d if a == 2 else zero)


@kernel(inline="always")
def voxel_of(a, u, s1, s2):
    """Voxel (x, y, z) with coordinate ``u`` on axis ``a`` and ``s1``, ``s2`` on the other two axes
    in x, y, z order."""
    if a == 0:
        return u, s1, s2
    if a == 1:
        return s1, u, s2
    return s1, s2, u


@hot
def nearest_ahead(p, h, world, a, d):
    """Nearest solid box ahead of the box (p, h) along axis ``a`` within the sweep by ``d`` != 0.

    Returns (gap, x, y, z, type, tested): the gap in world units (inf when none; ties keep the
    smallest (x, y, z, box index), so the visit order does not matter), its voxel and block type
    (-1 when none) and the number of boxes tested.

    Voxel layers across ``a`` are visited nearest first; a box of layer ``u`` lies at least
    ``u * voxel_size`` (``(u + 1) * voxel_size`` going down) from the leading face, and float
    rounding is monotonic, so once that bound exceeds the best gap no later layer can beat or tie
    it and the scan stops: a clipped axis costs the layers up to its contact, not its whole motion.
    """
    vs = world.voxel_size
    rng = sweep_range(p, along(a, d, fl(vs, 0)), h, world)
    o1 = 1 if a == 0 else 0
    o2 = 1 if a == 2 else 2
    u0, u1 = rng[2 * a], rng[2 * a + 1]
    lo1, hi1, lo2, hi2 = rng[2 * o1], rng[2 * o1 + 1], rng[2 * o2], rng[2 * o2 + 1]
    lead = p[a] + h[a] if d > 0 else p[a] - h[a]
    best = fl(vs, np.inf)
    hx, hy, hz, hb, ht, tested = np.int64(0), np.int64(0), np.int64(0), np.int64(-1), np.int64(-1), np.int64(0)
    memo = NO_MEMO
    bstart = world.box_start
    for k in range(u1 - u0 + 1):
        u = u0 + k if d > 0 else u1 - k
        near = fl(vs, u) * vs - lead if d > 0 else lead - (fl(vs, u) + fl(vs, 1)) * vs
        if near > best:
            break
        # A layer wholly behind the leading face holds only boxes with gap < 0 (ignored).
        far = (fl(vs, u) + fl(vs, 1)) * vs - lead if d > 0 else lead - fl(vs, u) * vs
        if far < 0:
            continue
        for s1 in range(lo1, hi1 + 1):
            for s2 in range(lo2, hi2 + 1):
                x, y, z = voxel_of(a, u, s1, s2)
                t, memo = block_cached(world, x, y, z, memo)
                if t == 0:
                    continue
                v = (fl(vs, x), fl(vs, y), fl(vs, z))
                for b in range(bstart[t], bstart[t + 1]):
                    tested += 1
                    bb = box_corners(world.boxes, b)
                    if apart_across(p, h, v, bb, vs, a):
                        continue
                    lo, hi = box_bounds(v, bb, a, vs)
                    g = lo - lead if d > 0 else lead - hi
                    if g < 0:
                        continue  # already overlapped along a (or behind): ignored
                    if g < best or (g == best and (x, y, z, b) < (hx, hy, hz, hb)):
                        best, hx, hy, hz, hb, ht = g, np.int64(x), np.int64(y), np.int64(z), np.int64(b), np.int64(t)
    return best, hx, hy, hz, ht, tested


@kernel(inline="always")
def clip_axis(p, h, world, a, d, skin):
    """One axis step of the model: (moved distance along ``a``, clipped, x, y, z, type, tested)."""
    vs = world.voxel_size
    g, x, y, z, t, tested = nearest_ahead(p, h, world, a, d)
    if not (g <= abs(d)):
        return d, False, x, y, z, np.int64(-1), tested
    # Stop at the box, then back off by skin with the sweep-and-slide rule (shared, so one skin rule
    # holds for every model): never behind the step's start.
    _, _, _, q = slide_axis(p[a], d, g / abs(d), fl(vs, 0), skin, True)  # the backed-off centre
    nd = q - p[a]
    if abs(nd) > abs(d):
        nd = d
    return nd, abs(nd) < abs(d), x, y, z, t, tested


@hot
def axis_solve(s, m, h, world, skin, o0, o1, o2):
    """Per-axis clipping of motion ``m`` from ``s`` (float 3-tuples, world units) in the order
    (o0, o1, o2) (axis indices).

    Returns (end 3-tuple, clipped axes bitmask, x, y, z, type of the box that clipped the last
    clipped axis (type -1 when none), boxes tested).
    """
    vs = world.voxel_size
    p = s
    bits = 0
    hx, hy, hz, ht, tested = np.int64(0), np.int64(0), np.int64(0), np.int64(-1), np.int64(0)
    for j in range(3):
        a = o0 if j == 0 else (o1 if j == 1 else o2)
        d = m[a]
        if d == 0:
            continue
        nd, clipped, x, y, z, t, n = clip_axis(p, h, world, a, d, skin)
        tested += n
        if clipped:
            bits |= 1 << a
            hx, hy, hz, ht = x, y, z, t
        step = along(a, nd, fl(vs, 0))
        p = (p[0] + step[0], p[1] + step[1], p[2] + step[2])
    return p, bits, hx, hy, hz, ht, tested
