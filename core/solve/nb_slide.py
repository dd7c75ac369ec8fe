"""Numba kernels of one entity-frame's reference solve: sweep, slide, repeat, then the skin.

Semantics (the README's "The reference solver" states the same):
- each pass finds the earliest contact of the remaining motion (``nb_narrow``: touching is not
  contact, see its tie rules; broad phase chosen by ``broad``), moves to the exact contact,
  removes the motion along the hit normal and carries the rest, scaled by 1 - t, into the next
  pass (slide), up to ``passes`` passes;
- the skin is applied once, to the end: every axis blocked in some pass backs off ``skin`` from
  its hit face, against the motion, but never behind the start of the pass that blocked it; and
  the whole back-off is capped at half the free clearance behind the box: if the box moving along
  the back-off would come into contact with solid at fraction t_b < 1 of it (by the same contact
  rule, so a box inside solid is not backed off deeper into it), it goes only t_b / 2 of the way.
  So the back-off never creates a contact the exact solve does not have: a box that fits a gap to
  within less than a skin slides through it, and one exactly as tall as a tunnel is not backed off.
"""
from __future__ import annotations

import numpy as np


from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.settings import AUTO, SCAN
from resweep.core.solve.nb_narrow import ENTERS, FIRST_HIT, blocked_axes, no_box, scan_region, start_best, touch_margin
from resweep.core.solve.nb_walk import walk_cells
from resweep.core.world.nb_world import box_range, sweep_range

#: In AUTO, swept boxes of more voxels than this are walked (measured crossover on a floor with
#: pillars: from ~140 voxels the walk wins when the sweep hits something, from ~1000 when not).
AUTO_CELLS = 128


@kernel(inline="always")
def search(p, r, h, world, broad, mode, stack):
    """Search state (see nb_narrow.Search) of the straight motion p -> p + r against the world."""
    return search_depth(p, r, h, world, broad, mode, stack, False)[0]


@kernel(inline="always")
def search_depth(p, r, h, world, broad, mode, stack, want_depth):
    """(:func:`search`, depth): with ``want_depth``, ``depth`` is the overlap depth of the box at
    the start p with solid (``nb_world.overlap_depth``, same bits) when the scan of the swept box
    covered it, else -1 (the walk, or a start range outside the swept one: ask overlap_depth)."""
    best = start_best(world.voxel_size)
    # A run-time int, not the caller's literal: one compiled walk and scan serve both modes
    # (numba would otherwise compile each for every literal mode, doubling compile time).
    mode = np.int64(mode)
    dep = fl(world.voxel_size, -1)
    dbox = no_box()
    if want_depth:
        dbox = box_range(p, h, world)
        if dbox[0] > dbox[1] or dbox[2] > dbox[3] or dbox[4] > dbox[5]:
            dep = fl(world.voxel_size, 0)  # no voxel near the start box: overlap_depth's answer
            dbox = no_box()
    i0, i1, j0, j1, k0, k1 = sweep_range(p, r, h, world)
    if i0 > i1 or j0 > j1 or k0 > k1:
        return best, dep
    d = touch_margin(p, r, h, world.voxel_size)
    if broad == SCAN or (broad == AUTO and float(i1 - i0 + 1) * float(j1 - j0 + 1) * float(k1 - k0 + 1)
                         <= AUTO_CELLS):
        inside = (dbox[0] <= dbox[1] and i0 <= dbox[0] and dbox[1] <= i1 and j0 <= dbox[2] and dbox[3] <= j1
                  and k0 <= dbox[4] and dbox[5] <= k1)
        best, dd = scan_region(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode, dbox if inside else no_box())
        return best, dd if inside else dep
    return walk_cells(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode, stack), dep


@kernel()  # called once per pass or row: not worth inlining (compile time)
def slide_axis(pa, ra, tmin, rest, skin, blocked):
    """One axis of the move to the contact: (contact centre, remaining motion, hit normal
    component, backed-off centre). The backed-off centre is ``skin`` short of the contact
    against the motion, but never behind the pass start ``pa``; it is applied only at the end of
    the solve (see :func:`backed_off_end`). Unblocked axes keep the contact centre."""
    q = pa + ra * tmin
    if not blocked:
        return q, ra * rest, 0, q
    if ra > 0:
        n = -1
        b = q - skin
    else:
        n = 1
        b = q + skin
    if (b - pa) * ra < 0:  # never back off behind the pass start
        b = pa
    return q, fl(ra, 0), n, b


@hot
def backed_off_end(p, back, h, world, broad, stack):
    """End centre: the exact-contact end ``p`` moved to the backed-off centre ``back`` (both float
    3-tuples), unless the box would come into contact with solid on the way; it then goes half the
    way to that contact (the back-off is capped at half the free clearance behind the box)."""
    b = (back[0] - p[0], back[1] - p[1], back[2] - p[2])
    if b[0] == 0 and b[1] == 0 and b[2] == 0:
        return back
    tb = search(p, b, h, world, broad, FIRST_HIT, stack).tmin
    if tb >= 1:
        return back
    s = tb * fl(tb, 0.5)
    return (p[0] + b[0] * s, p[1] + b[1] * s, p[2] + b[2] * s)


@kernel(inline="always")
def solve_row(p0, m, h, world, skin, passes, broad, stack, i, ref_end, t_out, n_out, v_out, type_out,
              cand_out, pts):
    """Solve entity-frame ``i``: up to ``passes`` sweep-and-slide passes from ``p0`` along ``m``,
    then the skin back-off.

    Each pass moves to the exact contact (no skin), so a later pass never meets a face the
    back-off would have pushed the box into. Every axis blocked in some pass is then backed off
    ``skin`` from its hit face at once (never behind the start of the pass that blocked it), and
    the whole back-off is capped at half the free clearance behind the box (:func:`backed_off_end`):
    the back-off never creates a contact.

    Args:
        p0, m, h: float 3-tuples: start centre, wanted motion, half extents (world units).
        skin: float, world units kept between the box and a hit face when there is room.
        broad: SCAN, WALK or AUTO; stack: int64 (STACK_ROWS, 6) per-thread scratch of the walk.
    Outputs, row ``i`` written (P = passes):
        ref_end float (M, 3) reference end centre;
        t_out float (M, P) time of impact per pass as a fraction of that pass's motion (1 = clear);
        n_out int8 (M, P, 3) hit normal per pass (a unit axis, or several if faces tied);
        v_out int64 (M, P, 3) hit voxel; type_out int32 (M, P) block type or -1 if clear;
        cand_out int32 (M, P) solid boxes the narrow phase tested;
        pts float (M, P+1, 3) the slide path for display: centre at the start of each pass with
            the axes blocked so far shown at their backed-off place (the pass itself starts from
            the exact contact), then the end; entries after the last pass repeat the end. Per
            axis the path moves only toward the wanted displacement.
    Returns:
        (passes_run, any_hit, contact, start_depth): ``contact`` is the end before the back-off
        (float 3-tuple): on every blocked axis the exact contact centre of that axis's hit face;
        ``start_depth`` the overlap depth of the box at ``p0`` found by the first pass's scan
        (``nb_world.overlap_depth``), -1 when that pass did not scan it (see :func:`search_depth`).

    Inlined into its caller (one call site): passing this many arrays costs more than a pass.
    """
    vs = world.voxel_size
    p = p0
    r = m
    bk = p0  # backed-off centre of the axes blocked so far (bits of ``blk``)
    blk = 0
    any_hit = False
    run = 0
    d0 = fl(vs, -1)
    for k in range(passes):
        pts[i, k, 0] = bk[0] if blk & 1 else p[0]
        pts[i, k, 1] = bk[1] if blk & 2 else p[1]
        pts[i, k, 2] = bk[2] if blk & 4 else p[2]
        if r[0] == 0 and r[1] == 0 and r[2] == 0:
            break
        found, dk = search_depth(p, r, h, world, broad, FIRST_HIT, stack, k == 0)
        if k == 0:
            d0 = dk
        tmin, axes, hx, hy, hz, hb, htype, cand = found
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
        q0, r0, n0, b0 = slide_axis(p[0], r[0], tmin, rest, skin, axes & 1)
        q1, r1, n1, b1 = slide_axis(p[1], r[1], tmin, rest, skin, axes & 2)
        q2, r2, n2, b2 = slide_axis(p[2], r[2], tmin, rest, skin, axes & 4)
        n_out[i, k, 0] = n0
        n_out[i, k, 1] = n1
        n_out[i, k, 2] = n2
        # An axis is blocked at most once (its motion is then zero), so its backed-off centre is final.
        bk = (b0 if axes & 1 else bk[0], b1 if axes & 2 else bk[1], b2 if axes & 4 else bk[2])
        blk |= axes
        p = (q0, q1, q2)
        r = (r0, r1, r2)
    contact = p
    if blk != 0:
        back = (bk[0] if blk & 1 else p[0], bk[1] if blk & 2 else p[1], bk[2] if blk & 4 else p[2])
        p = backed_off_end(p, back, h, world, broad, stack)
    for a in range(3):
        ref_end[i, a] = p[a]
    for k in range(run, passes + 1):
        for a in range(3):
            pts[i, k, a] = p[a]
    return run, any_hit, contact, d0


@hot
def path_enters_solid(p, d, h, world, broad, stack):
    """True if the box moving straight along ``p -> p + d`` enters the interior of a solid box it
    did not start in (entry time in [0, 1)). Used on recorded paths with ``h`` shrunk by the
    tolerance, so grazing a corner by less than the tolerance does not count."""
    return search(p, d, h, world, broad, ENTERS, stack).axes != 0
