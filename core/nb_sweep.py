"""Numba kernels of the reference swept-AABB solve.

Method (published, common practice in games):
- broad phase: every solid block box whose voxel lies in the swept bounding box of the pass
  (box at pass start union box at pass end), widened by a voxel when shapes reach past their cell;
- narrow phase: the moving box against each static box as a ray from the box centre against the
  static box expanded by the half extents (Minkowski sum), intersected slab by slab: the
  moving-AABB interval test of Ericson, *Real-Time Collision Detection* (2005), sec. 5.5;
- the minimum entry time over all candidates; move there, stop ``skin`` short of the hit face,
  remove the motion along the hit normal and repeat for the rest of the motion (slide), at most
  ``passes`` times.

Contact needs overlap of open interiors, so boxes that only touch never collide: a box sliding
on a floor of many blocks never catches on the seams. Faces entered at exactly the same time all
block their axes and the reported hit voxel is the lexicographically smallest among them, so the
result never depends on the order candidates are visited in.
"""
from __future__ import annotations

import numpy as np
from numba import njit

from .nb_float import fl
from .nb_world import chunk_lookup, sweep_range

#: Row states written by the solve.
CLEAR, HIT, STARTED_INSIDE = 0, 1, 2


@njit(cache=True, inline="always")
def box_interval(p, r, h, v, world, b):
    """Slab test of the moving box against block box ``b`` of voxel ``v`` (Ericson 2005, sec. 5.5).

    Returns (te, tx, entry_axes): the open time interval of interior overlap along the ray
    ``p + t r`` against the expanded box, and a bitmask of the axes whose slab is entered last.
    te >= tx means the interiors never overlap.
    """
    bboxes = world[7]
    vs = world[9]
    te = fl(vs, -np.inf)
    tx = fl(vs, np.inf)
    axes = 0
    for a in range(3):
        lo = (v[a] + bboxes[b, a]) * vs - h[a]
        hi = (v[a] + bboxes[b, a + 3]) * vs + h[a]
        if r[a] == 0:
            if not (lo < p[a] and p[a] < hi):
                return fl(vs, 1), fl(vs, 0), 0  # parallel and outside the slab: never overlaps
            continue
        t1 = (lo - p[a]) / r[a]
        t2 = (hi - p[a]) / r[a]
        if t1 > t2:
            t1, t2 = t2, t1
        if t1 > te:
            te = t1
            axes = 1 << a
        elif t1 == te:
            axes |= 1 << a
        if t2 < tx:
            tx = t2
    return te, tx, axes


@njit(cache=True, inline="always")
def inside_axis(p, r, h, v, world, b):
    """For a box the sweep starts inside: the least-penetration axis bit if the motion digs deeper
    along it (the contact then blocks that axis at t = 0), else 0 (the motion is leaving)."""
    bboxes = world[7]
    vs = world[9]
    best = fl(vs, np.inf)
    axis = -1
    sign = 0
    for a in range(3):
        lo = (v[a] + bboxes[b, a]) * vs - h[a]
        hi = (v[a] + bboxes[b, a + 3]) * vs + h[a]
        dlo = p[a] - lo
        dhi = hi - p[a]
        d = min(dlo, dhi)
        if d < best:
            best = d
            axis = a
            sign = 1 if dhi < dlo else -1  # outward normal of the nearer face
    if axis >= 0 and r[axis] * sign < 0:
        return 1 << axis
    return 0


@njit(cache=True)
def sweep_pass(p, r, h, world):
    """One pass of the broad and narrow phase.

    Args:
        p, r, h: float (3,) centre, remaining motion, half extents, world units.
    Returns:
        (tmin, axes, hx, hy, hz, htype, candidates, inside): entry time in [0, 1] (1 if clear),
        bitmask of blocked axes (0 if clear), hit voxel and block type (-1 if clear), solid
        boxes tested, and whether the box started inside any of them.
    """
    keys, slot, blocks, S, wlo, whi, bstart, bboxes, reach, vs = world
    i0, i1, j0, j1, k0, k1 = sweep_range(p, r, h, world)
    tmin = fl(vs, 1)
    axes = 0
    hx = hy = hz = np.int64(0)
    hb = np.int64(-1)
    htype = np.int64(-1)
    cand = 0
    inside = False
    if i0 > i1 or j0 > j1 or k0 > k1:
        return tmin, axes, hx, hy, hz, htype, cand, inside
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
                                cand += 1
                                te, tx, eax = box_interval(p, r, h, v, world, b)
                                if not (te < tx) or tx <= 0 or te >= 1:
                                    continue
                                if te < 0:
                                    inside = True
                                    eax = inside_axis(p, r, h, v, world, b)
                                    if eax == 0:
                                        continue
                                    te = fl(vs, 0)
                                if axes == 0 or te < tmin:
                                    tmin = te
                                    axes = eax
                                    hx, hy, hz, hb, htype = x, y, z, b, np.int64(t)
                                elif te == tmin:
                                    axes |= eax
                                    if (x, y, z, b) < (hx, hy, hz, hb):
                                        hx, hy, hz, hb, htype = x, y, z, b, np.int64(t)
    return tmin, axes, hx, hy, hz, htype, cand, inside


@njit(cache=True)
def solve_row(p0, m, h, world, skin, passes, end, t_out, n_out, v_out, type_out, cand_out, pts):
    """Solve one entity-frame: up to ``passes`` sweep-and-slide passes from ``p0`` along ``m``.

    Args:
        p0, m, h: float (3,) start centre, wanted motion, half extents (world units).
        skin: float, world units kept between the box and a hit face.
        end: float (3,) out, reference end centre.
        t_out: float (P,) out, time of impact per pass as a fraction of that pass's motion (1 = clear).
        n_out: int8 (P, 3) out, hit normal per pass (a unit axis, or several if faces tied).
        v_out: int64 (P, 3) out, hit voxel; type_out int32 (P,) block type or -1 if clear;
        cand_out: int32 (P,) solid boxes tested.
        pts: float (P+1, 3) out, centre at the start of each pass and at the end; rows after the
            last pass repeat the end (the slide path).
    Returns:
        (passes_run, any_hit)
    """
    vs = world[9]
    p = p0.copy()
    r = m.copy()
    any_hit = False
    run = 0
    for k in range(passes):
        for a in range(3):
            pts[k, a] = p[a]
        if r[0] == 0 and r[1] == 0 and r[2] == 0:
            break
        tmin, axes, hx, hy, hz, htype, cand, inside = sweep_pass(p, r, h, world)
        run += 1
        t_out[k] = tmin + fl(vs, 0)  # no negative zero in reports
        v_out[k, 0] = hx
        v_out[k, 1] = hy
        v_out[k, 2] = hz
        type_out[k] = htype
        cand_out[k] = cand
        for a in range(3):
            n_out[k, a] = 0
        if axes == 0:
            for a in range(3):
                p[a] = p[a] + r[a]
                r[a] = fl(vs, 0)
            break
        any_hit = True
        rest = fl(vs, 1) - tmin
        for a in range(3):
            q = p[a] + r[a] * tmin
            if axes & (1 << a):
                if r[a] > 0:
                    n_out[k, a] = -1
                    q = q - skin
                else:
                    n_out[k, a] = 1
                    q = q + skin
                if (q - p[a]) * r[a] < 0:  # never back off behind the pass start
                    q = p[a]
                r[a] = fl(vs, 0)
            else:
                r[a] = r[a] * rest
            p[a] = q
    for a in range(3):
        end[a] = p[a]
    for k in range(run + 1, passes + 1):
        for a in range(3):
            pts[k, a] = p[a]
    for a in range(3):
        pts[run, a] = p[a]
    return run, any_hit


@njit(cache=True)
def path_enters_solid(p, d, h, world):
    """True if the box moving straight along ``p -> p + d`` enters the interior of a solid box it
    did not start in (entry time in [0, 1)). Used on recorded paths with ``h`` shrunk by the
    tolerance, so grazing a corner by less than the tolerance does not count."""
    keys, slot, blocks, S, wlo, whi, bstart, bboxes, reach, vs = world
    i0, i1, j0, j1, k0, k1 = sweep_range(p, d, h, world)
    if i0 > i1 or j0 > j1 or k0 > k1:
        return False
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
                                te, tx, eax = box_interval(p, d, h, v, world, b)
                                if te < tx and te >= 0 and te < 1:
                                    return True
    return False
