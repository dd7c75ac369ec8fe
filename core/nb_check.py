"""Numba drivers: solve and classify many entity-frames in parallel.

Each row is independent and writes only its own output slots, so results are bit-identical
for any thread count and any row order.
"""
from __future__ import annotations

import numpy as np
from numba import njit, prange

from .nb_float import fl
from .nb_sweep import CLEAR, HIT, STARTED_INSIDE, path_enters_solid, solve_row
from .nb_world import overlap_depth

# Bit positions of the per-row kinds (discontinuity is found across rows, outside the kernel).
INVALID, START_OVERLAP, PENETRATION, TUNNELING, SNAG, MISMATCH, DISCONTINUITY = range(7)


@njit(cache=True, inline="always")
def row_valid(s, m, e, h):
    for a in range(3):
        if not (np.isfinite(s[a]) and np.isfinite(m[a]) and np.isfinite(e[a]) and np.isfinite(h[a])):
            return False
        if not (h[a] > 0):
            return False
    return True


@njit(cache=True, parallel=True, nogil=True)
def check_rows(start, motion, rec_end, half, world, skin, passes, tol,
               ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, flags, err):
    """Re-solve rows and classify the recorded end against the reference.

    Args:
        start, motion, rec_end, half: float (M, 3) world units, all of the world's float type.
        skin, tol: float world units; passes: int.
    Outputs (preallocated, written per row):
        ref_end float (M, 3); npass int8 (M,) passes run; state int8 (M,) CLEAR/HIT/STARTED_INSIDE;
        t_out float (M, P); n_out int8 (M, P, 3); v_out int64 (M, P, 3); type_out int32 (M, P);
        cand_out int32 (M, P); pts float (M, P+1, 3) slide path points; flags int32 (M,) bit k set when kind k applies;
        err float (M, 7) error value per kind (world units; NaN where it does not apply).
    """
    vs = world[9]
    M = start.shape[0]
    for i in prange(M):
        s = start[i]
        m = motion[i]
        e = rec_end[i]
        h = half[i]
        for k in range(7):
            err[i, k] = fl(vs, np.nan)
        if not row_valid(s, m, e, h):
            flags[i] = 1 << INVALID
            npass[i] = 0
            state[i] = CLEAR
            for a in range(3):
                ref_end[i, a] = fl(vs, np.nan)
                for k in range(pts.shape[1]):
                    pts[i, k, a] = fl(vs, np.nan)
            continue
        run, hit = solve_row(s, m, h, world, skin, passes, ref_end[i], t_out[i], n_out[i],
                             v_out[i], type_out[i], cand_out[i], pts[i])
        npass[i] = run
        f = 0
        d0 = overlap_depth(s, h, world)
        if d0 > 0:
            state[i] = STARTED_INSIDE
        elif hit:
            state[i] = HIT
        else:
            state[i] = CLEAR
        if d0 > tol:
            f |= 1 << START_OVERLAP
            err[i, START_OVERLAP] = d0
        r = ref_end[i]
        dist2 = fl(vs, 0)
        for a in range(3):
            dist2 += (e[a] - r[a]) * (e[a] - r[a])
        dist = np.sqrt(dist2)
        # A recorded end within tolerance of an overlap-free reference cannot overlap deeper than
        # the tolerance, so the costlier queries run only for rows that differ.
        if dist > tol or d0 > 0:
            d1 = overlap_depth(e, h, world)
            if d1 > tol:
                f |= 1 << PENETRATION
                err[i, PENETRATION] = d1
        if dist > tol:
            tunnel = False
            if hit and not (f & (1 << PENETRATION)):
                # The straight recorded path, with the box shrunk by the tolerance, entering solid
                # while the end is free means the recorded motion went through something.
                dpath = np.empty(3, dtype=start.dtype)
                hs = np.empty(3, dtype=start.dtype)
                for a in range(3):
                    dpath[a] = e[a] - s[a]
                    hs[a] = max(h[a] - tol, h[a] * fl(vs, 0.5))
                tunnel = path_enters_solid(s, dpath, hs, world)
            if tunnel:
                f |= 1 << TUNNELING
                err[i, TUNNELING] = dist
            short = fl(vs, 0)
            travel2 = fl(vs, 0)
            for a in range(3):
                travel2 += (r[a] - s[a]) * (r[a] - s[a])
            if travel2 > 0:
                travel = np.sqrt(travel2)
                for a in range(3):
                    short += (r[a] - e[a]) * (r[a] - s[a])
                short = short / travel
            if not (f & (1 << PENETRATION)) and not tunnel and short > tol:
                f |= 1 << SNAG
                err[i, SNAG] = short
            if not (f & ((1 << PENETRATION) | (1 << TUNNELING) | (1 << SNAG))):
                f |= 1 << MISMATCH
                err[i, MISMATCH] = dist
        flags[i] = f


@njit(cache=True, parallel=True, nogil=True)
def depth_rows(centre, half, world, out):
    """Overlap depth of many boxes: centre, half float (M, 3) -> out float (M,), world units."""
    for i in prange(centre.shape[0]):
        out[i] = overlap_depth(centre[i], half[i], world)
