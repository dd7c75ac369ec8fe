"""Numba kernels of one entity-frame's reference solve: sweep, slide, repeat (up to ``passes``).

Each pass finds the earliest contact of the remaining motion (``nb_sweep`` narrow phase, broad
phase chosen by ``broad``), moves there, stops ``skin`` short of the hit face, removes the motion
along the hit normal and carries the rest into the next pass (slide).
"""
from __future__ import annotations

import numpy as np


from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.settings import AUTO, SCAN
from resweep.core.solve.nb_narrow import ENTERS, FIRST_HIT, blocked_axes, scan_cells, start_best
from resweep.core.solve.nb_walk import walk_cells
from resweep.core.world.nb_world import sweep_range

#: In AUTO, swept boxes of more voxels than this are walked (measured crossover on a floor with
#: pillars: from ~140 voxels the walk wins when the sweep hits something, from ~1000 when not).
AUTO_CELLS = 128


@kernel(inline="always")
def search(p, r, h, world, broad, mode, stack):
    """Search state (see nb_sweep) of the straight motion p -> p + r against the world."""
    best = start_best(world.voxel_size)
    # A run-time int, not the caller's literal: one compiled walk and scan serve both modes
    # (numba would otherwise compile each for every literal mode, doubling compile time).
    mode = np.int64(mode)
    i0, i1, j0, j1, k0, k1 = sweep_range(p, r, h, world)
    if i0 > i1 or j0 > j1 or k0 > k1:
        return best
    if broad == SCAN or (broad == AUTO and float(i1 - i0 + 1) * float(j1 - j0 + 1) * float(k1 - k0 + 1)
                         <= AUTO_CELLS):
        return scan_cells(p, r, h, world, i0, i1, j0, j1, k0, k1, best, mode)
    return walk_cells(p, r, h, world, i0, i1, j0, j1, k0, k1, best, mode, stack)


@kernel()  # called once per pass or row: not worth inlining (compile time)
def slide_axis(pa, ra, tmin, rest, skin, blocked):
    """One axis of the move to the contact: (new centre, remaining motion, hit normal component)."""
    q = pa + ra * tmin
    if not blocked:
        return q, ra * rest, 0
    if ra > 0:
        n = -1
        q = q - skin
    else:
        n = 1
        q = q + skin
    if (q - pa) * ra < 0:  # never back off behind the pass start
        q = pa
    return q, fl(ra, 0), n


@kernel(inline="always")
def solve_row(p0, m, h, world, skin, passes, broad, stack, i, ref_end, t_out, n_out, v_out, type_out,
              cand_out, pts):
    """Solve entity-frame ``i``: up to ``passes`` sweep-and-slide passes from ``p0`` along ``m``.

    Args:
        p0, m, h: float 3-tuples: start centre, wanted motion, half extents (world units).
        skin: float, world units kept between the box and a hit face.
        broad: SCAN, WALK or AUTO; stack: int64 (STACK_ROWS, 6) per-thread scratch of the walk.
    Outputs, row ``i`` written (P = passes):
        ref_end float (M, 3) reference end centre;
        t_out float (M, P) time of impact per pass as a fraction of that pass's motion (1 = clear);
        n_out int8 (M, P, 3) hit normal per pass (a unit axis, or several if faces tied);
        v_out int64 (M, P, 3) hit voxel; type_out int32 (M, P) block type or -1 if clear;
        cand_out int32 (M, P) solid boxes the narrow phase tested;
        pts float (M, P+1, 3) centre at the start of each pass and at the end; entries after the
            last pass repeat the end (the slide path).
    Returns:
        (passes_run, any_hit)

    Inlined into its caller (one call site): passing this many arrays costs more than a pass.
    """
    vs = world.voxel_size
    p = p0
    r = m
    any_hit = False
    run = 0
    for k in range(passes):
        for a in range(3):
            pts[i, k, a] = p[a]
        if r[0] == 0 and r[1] == 0 and r[2] == 0:
            break
        tmin, axes, hx, hy, hz, hb, htype, cand = search(p, r, h, world, broad, FIRST_HIT, stack)
        run += 1
        t_out[i, k] = tmin + fl(vs, 0)  # no negative zero in reports
        v_out[i, k, 0] = hx
        v_out[i, k, 1] = hy
        v_out[i, k, 2] = hz
        type_out[i, k] = htype
        cand_out[i, k] = cand
        if axes == 0:
            for a in range(3):
                n_out[i, k, a] = 0
            p = (p[0] + r[0], p[1] + r[1], p[2] + r[2])
            r = (fl(vs, 0), fl(vs, 0), fl(vs, 0))
            break
        any_hit = True
        axes = blocked_axes(axes)
        rest = fl(vs, 1) - tmin
        q0, r0, n0 = slide_axis(p[0], r[0], tmin, rest, skin, axes & 1)
        q1, r1, n1 = slide_axis(p[1], r[1], tmin, rest, skin, axes & 2)
        q2, r2, n2 = slide_axis(p[2], r[2], tmin, rest, skin, axes & 4)
        n_out[i, k, 0] = n0
        n_out[i, k, 1] = n1
        n_out[i, k, 2] = n2
        p = (q0, q1, q2)
        r = (r0, r1, r2)
    for a in range(3):
        ref_end[i, a] = p[a]
    for k in range(run, passes + 1):
        for a in range(3):
            pts[i, k, a] = p[a]
    return run, any_hit


@hot
def path_enters_solid(p, d, h, world, broad, stack):
    """True if the box moving straight along ``p -> p + d`` enters the interior of a solid box it
    did not start in (entry time in [0, 1)). Used on recorded paths with ``h`` shrunk by the
    tolerance, so grazing a corner by less than the tolerance does not count."""
    return search(p, d, h, world, broad, ENTERS, stack).axes != 0
