"""Numba kernels of the push-out model (``model="pushout"``): move, then push out of overlaps.

The discrete approach (common practice in simple engines): move by the whole motion, or, when
``substep`` L > 0, in n = ceil(|motion| / L) equal substeps (|motion| Euclidean; n at most
``settings.MAX_SUBSTEPS``). After the move (after each substep), up to ``iterations`` times: list
the solid boxes that overlap the entity box's open interior in ascending (x, y, z) voxel order,
block boxes in table order; visit them in that order, skip a box that no longer overlaps when its
turn comes, and push the entity out of it along its axis of least penetration by that
penetration plus ``skin``. Per axis the penetration is the smaller of the two distances that would
separate the boxes (equal distances push towards +); ties between axes go to the up axis, then x,
y, z. Stop early when an iteration pushed nothing. It tunnels and depends on the visit order on
purpose. Unlike the sweep models' skin back-off, the push past the face by ``skin`` may create an
overlap with the block on the far side of a tight gap (the next iteration pushes back): the model
reproduces the discrete step with its flaws, it does not repair it.
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_ground import NO_MEMO, block_cached, box_bounds
from resweep.core.solve.settings import MAX_SUBSTEPS
from resweep.core.world.nb_world import box_corners, box_range


@kernel(inline="always")
def overlaps(c, h, v, bb, vs):
    """True when the box (c, h) and block box ``bb`` of voxel ``v`` overlap in open interior."""
    for a in range(3):
        lo, hi = box_bounds(v, bb, a, vs)
        if not (lo < c[a] + h[a] and c[a] - h[a] < hi):
            return False
    return True


@kernel(inline="always")
def least_penetration(c, h, v, bb, vs, up):
    """(axis, signed push) out of block box ``bb``: the axis of least penetration (ties: up axis,
    then x, y, z) and the distance along it, + or - (equal distances push towards +)."""
    best = fl(vs, np.inf)
    axis = up
    push = fl(vs, 0)
    for j in range(4):
        a = up if j == 0 else j - 1
        if j > 0 and a == up:
            continue
        lo, hi = box_bounds(v, bb, a, vs)
        plus = hi - (c[a] - h[a])
        minus = (c[a] + h[a]) - lo
        pen = min(plus, minus)
        if pen < best:
            best = pen
            axis = a
            push = plus if plus <= minus else -minus
    return axis, push


@hot
def push_round(p, h, world, skin, up):
    """One iteration: push the box at ``p`` out of the boxes it overlaps at the round's start, in
    voxel order. Returns (new centre, pushes made, first pushed voxel x, y, z and type or -1)."""
    vs = world.voxel_size
    p0 = p
    rng = box_range(p0, h, world)
    pushes = 0
    fx, fy, fz, ft = np.int64(0), np.int64(0), np.int64(0), np.int64(-1)
    bstart = world.box_start
    memo = NO_MEMO
    for x in range(rng[0], rng[1] + 1):  # ascending (x, y, z), boxes in table order
        for y in range(rng[2], rng[3] + 1):
            for z in range(rng[4], rng[5] + 1):
                t, memo = block_cached(world, x, y, z, memo)
                if t == 0:
                    continue
                v = (fl(vs, x), fl(vs, y), fl(vs, z))
                for b in range(bstart[t], bstart[t + 1]):
                    bb = box_corners(world.boxes, b)
                    if not overlaps(p0, h, v, bb, vs) or not overlaps(p, h, v, bb, vs):
                        continue  # not listed at the round's start, or no longer overlapping
                    a, push = least_penetration(p, h, v, bb, vs, up)
                    d = push + skin if push >= 0 else push - skin
                    p = (p[0] + d if a == 0 else p[0], p[1] + d if a == 1 else p[1], p[2] + d if a == 2 else p[2])
                    if pushes == 0:
                        fx, fy, fz, ft = np.int64(x), np.int64(y), np.int64(z), np.int64(t)
                    pushes += 1
    return p, pushes, fx, fy, fz, ft


@hot
def pushout_solve(s, m, h, world, skin, substep, iterations, up):
    """Push-out model from ``s`` along ``m`` (float 3-tuples, world units; ``substep`` world units,
    0 = one move).

    Returns (end 3-tuple, pushes made, first pushed voxel x, y, z and type (-1 when none)).
    """
    vs = world.voxel_size
    n = 1
    if substep > 0:
        length = np.sqrt(m[0] * m[0] + m[1] * m[1] + m[2] * m[2])
        k = np.ceil(length / substep)
        n = max(1, int(min(k, fl(vs, MAX_SUBSTEPS))))
    nf = fl(vs, n)
    step = (m[0] / nf, m[1] / nf, m[2] / nf)
    p = s
    total = 0
    fx, fy, fz, ft = np.int64(0), np.int64(0), np.int64(0), np.int64(-1)
    for _ in range(n):
        p = (p[0] + step[0], p[1] + step[1], p[2] + step[2])
        for _it in range(iterations):
            p, pushes, x, y, z, t = push_round(p, h, world, skin, up)
            if pushes == 0:
                break
            if total == 0:
                fx, fy, fz, ft = x, y, z, t
            total += pushes
    return p, total, fx, fy, fz, ft
