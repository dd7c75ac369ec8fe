"""Numba kernels of the reference swept-AABB test: narrow phase and the simple broad phase.

Method (published, common practice in games):
- broad phase: every solid block box whose voxel lies in the swept bounding box of the pass
  (box at pass start union box at pass end), widened by a voxel when shapes reach past their cell
  (:func:`scan_cells` over :func:`nb_world.sweep_range`). Long motions instead walk only the cells
  the moving box can reach (``nb_walk``); both give the same result;
- narrow phase: the moving box against each static box as a ray from the box centre against the
  static box expanded by the half extents (Minkowski sum), intersected slab by slab: the
  moving-AABB interval test of Ericson, *Real-Time Collision Detection* (2005), sec. 5.5;
- the minimum entry time over all candidates (``nb_slide`` then moves there, removes the motion
  along the hit normal and repeats: slide; the skin is applied once at the end, see nb_slide).

Documented tie rules (the semantics tests state independently):
- touching is not contact: a box is a contact only when the moving box, shrunk by the touch
  margin delta on every side, overlaps its open interior at some time in [0, 1) (:func:`narrow`).
  delta, per axis, = ``TOUCH_ULPS`` (4) machine epsilons of |p| + |r| + h on that axis
  (:func:`touch_margin`): ~1e-15 relative in float64, ~5e-7 in float32.
  So exact touches, grazes (entry exactly at the exit time), boxes exactly as wide as a gap and
  motions exactly along a face are never contacts, whatever the rounding; overlaps thinner than
  delta count as touches. The contact time is the unshrunk entry time; the box's entry axes are
  the axes whose slab it enters within delta (in distance) of that time (:func:`entry_axes`), so
  an edge or corner reached exactly is an edge or corner entry whatever the rounding;
- a box the sweep starts inside (entry time < 0) blocks its least-penetration axis at t = 0 when
  the motion digs deeper along it, else it is ignored (:func:`inside_axis`). Depth ties between
  axes go to the lowest axis (x, then y, then z); a box centred on an axis counts the lower face
  of that axis as the nearer one (outward normal -1);
- faces entered at exactly the same time all block their axes (an edge entry only when no face
  entry at that instant covers one of its axes, see ``blocked_axes``) and the reported hit voxel is
  the lexicographically smallest (x, y, z, box index) among them, so the result never depends on
  the order candidates are visited in.

The search state travels as the named tuple :class:`Search` (see its fields).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from resweep.core.jit.nb_float import eps_of, fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.settings import CLEAR, HIT, STARTED_INSIDE  # noqa: F401  (row states, re-exported)
from resweep.core.world.nb_world import box_corners, box_depth, chunk_in_box, chunk_lookup, chunk_of, use_slab



class Search(NamedTuple):
    """State of one search for the earliest contact (a numba named tuple, kept in registers).

    Attributes:
        tmin: float, entry time in [0, 1] (1 while clear).
        axes: int64, entry axes of the boxes tied at ``tmin``, packed by :func:`pack_entry` (0
            while clear; :func:`blocked_axes` turns them into the axes to block).
        hx, hy, hz: int64 hit voxel; hb: int64 box index; htype: int64 block type (-1 while clear).
        cand: int64, boxes the narrow phase tested.
    """

    tmin: float
    axes: np.int64
    hx: np.int64
    hy: np.int64
    hz: np.int64
    hb: np.int64
    htype: np.int64
    cand: np.int64


#: Touch margin in machine epsilons of each axis's coordinate magnitude (see touch_margin): 2 to 4
#: ulps; float rounding of p + r t and of a slab time stays within about 2.
TOUCH_ULPS = 4.0

#: Search modes: the earliest hit of a pass, or only whether the path enters any box at t in [0, 1).
FIRST_HIT, ENTERS = 0, 1


@kernel(inline="always")
def box_interval(p, r, h, vlo, vhi, bb, vs):
    """Slab test of the moving box against a static box (Ericson 2005, sec. 5.5).

    The static box spans ``(vlo + bb[:3]) * vs`` to ``(vhi + bb[3:]) * vs`` per axis: a block box
    ``bb`` (float 6-tuple, voxel-local min then max) of voxel ``vlo = vhi`` (float 3-tuple), or
    the bounds of a whole region of voxels (see nb_traverse).

    Returns (te, tx, entry_axes): the open time interval of interior overlap along the ray
    ``p + t r`` against the expanded box, and a bitmask of the axes whose slab is entered last.
    te >= tx means the interiors never overlap. A NaN leaves te low and tx high.
    """
    te = fl(vs, -np.inf)
    tx = fl(vs, np.inf)
    axes = 0
    for a in range(3):
        lo = (vlo[a] + bb[a]) * vs - h[a]
        hi = (vhi[a] + bb[a + 3]) * vs + h[a]
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


@kernel(inline="always")
def inside_axis(p, r, h, v, bb, vs):
    """For a box the sweep starts inside: the least-penetration axis bit if the motion digs deeper
    along it (the contact then blocks that axis at t = 0), else 0 (the motion is leaving)."""
    best = fl(vs, np.inf)
    axis = -1
    sign = 0
    for a in range(3):
        lo = (v[a] + bb[a]) * vs - h[a]
        hi = (v[a] + bb[a + 3]) * vs + h[a]
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


@kernel()  # called once per pass or row: not worth inlining (compile time)
def start_best(vs):
    """The search state before any box is tested."""
    zero = np.int64(0)
    return Search(fl(vs, 1), zero, zero, zero, zero, np.int64(-1), np.int64(-1), zero)


@kernel(inline="always")
def pack_entry(eax):
    """Search-state form of one box's entry axes: a face entry (one slab entered last) keeps its
    axis bit (bits 0..2); an edge or corner entry (several slabs entered at the same instant) is
    recorded as the flag bit ``8 << eax`` so :func:`blocked_axes` can tell the two apart."""
    if eax == 1 or eax == 2 or eax == 4:
        return np.int64(eax)
    return np.int64(8) << eax


@kernel()  # called once per pass or row: not worth inlining (compile time)
def blocked_axes(packed):
    """Axes a pass blocks, from the OR of ``pack_entry`` over every box tied at the minimum time.

    Face contacts block their axes. An edge or corner contact blocks its axes only when no face
    contact at the same instant already blocks one of them: blocking that axis alone stops the
    motion that would enter the edge's box (the box then only touches it), which is what keeps a
    box resting on a floor of many blocks from catching on the seams between them. Both sets are
    ORs over all tied boxes, so the result never depends on visiting order.
    """
    faces = packed & 7
    out = faces
    for m in (3, 5, 6, 7):
        if packed & (np.int64(8) << m) and not (m & faces):
            out |= m
    return out


@kernel(inline="always")
def entry_axes(p, r, h, v, bb, vs, te, d):
    """Bitmask of the axes whose slab the box enters within the touch margin ``d`` of the entry
    time ``te`` (in distance along the axis: (te - t_a) |r_a| <= d_a), with the slab times computed
    by the same operations as :func:`box_interval`. A box reaching an edge or corner is then an
    edge or corner entry even when rounding puts one face's entry an ulp earlier."""
    axes = 0
    for a in range(3):
        if r[a] == 0:
            continue
        near = (v[a] + bb[a]) * vs - h[a] if r[a] > 0 else (v[a] + bb[a + 3]) * vs + h[a]
        t1 = (near - p[a]) / r[a]
        if (te - t1) * abs(r[a]) <= d[a]:
            axes |= 1 << a
    return axes


@kernel(inline="always")
def touch_margin(p, r, h, vs):
    """The touch margins delta of one sweep, per axis (float 3-tuple, world units):
    ``TOUCH_ULPS`` machine epsilons of that axis's coordinate magnitude |p| + |r| + h.

    Float rounding of a position and of a slab time is a few ulps of these coordinates, so
    interiors that overlap by no more than delta on an axis are treated as touching (see
    :func:`narrow`)."""
    e = fl(vs, TOUCH_ULPS) * eps_of(vs)
    return ((abs(p[0]) + abs(r[0]) + h[0]) * e, (abs(p[1]) + abs(r[1]) + h[1]) * e,
            (abs(p[2]) + abs(r[2]) + h[2]) * e)


@kernel(inline="always")
def narrow(p, r, h, d, v, bb, x, y, z, t, b, vs, best, mode):
    """Test block box ``b`` (type ``t``, corners ``bb``) of voxel (x, y, z) (``v`` its float
    corner) and fold the result into the :class:`Search` ``best``. ``d`` are the touch margins
    per axis (:func:`touch_margin`). In ``ENTERS`` mode ``axes`` becomes 1 once the path enters a box.

    A box is a contact only when the moving box shrunk by ``d`` on each axis still overlaps its
    interior at some time in [0, 1): a graze or a touch that float rounding turns into an overlap
    of a few ulps is no contact. The contact time itself is the unshrunk entry time.
    """
    tmin, axes, hx, hy, hz, hb, htype, cand = best
    cand += 1
    te, tx, eax = box_interval(p, r, h, v, v, bb, vs)
    if not (te < tx) or tx <= 0 or te >= 1:
        return Search(tmin, axes, hx, hy, hz, hb, htype, cand)
    # The shrunk box's interval lies inside the unshrunk one (monotone rounding), so the cheap
    # unshrunk rejection above never drops a box the shrunk test would keep.
    ts, txs, _ = box_interval(p, r, (h[0] - d[0], h[1] - d[1], h[2] - d[2]), v, v, bb, vs)
    if not (ts < txs) or txs <= 0 or ts >= 1:
        return Search(tmin, axes, hx, hy, hz, hb, htype, cand)
    if mode == ENTERS:
        if ts >= 0:
            axes = 1
        return Search(tmin, axes, hx, hy, hz, hb, htype, cand)
    if te < 0:
        eax = inside_axis(p, r, h, v, bb, vs)
        if eax == 0:
            return Search(tmin, axes, hx, hy, hz, hb, htype, cand)
        te = fl(vs, 0)
    else:
        eax = entry_axes(p, r, h, v, bb, vs, te, d)
    if axes == 0 or te < tmin:
        return Search(te, pack_entry(eax), np.int64(x), np.int64(y), np.int64(z), np.int64(b), np.int64(t), cand)
    if te == tmin:
        axes |= pack_entry(eax)
        if (x, y, z, b) < (hx, hy, hz, hb):
            return Search(tmin, axes, np.int64(x), np.int64(y), np.int64(z), np.int64(b), np.int64(t), cand)
    return Search(tmin, axes, hx, hy, hz, hb, htype, cand)


@kernel(inline="always")
def no_box():
    """An empty voxel range (i0, i1, j0, j1, k0, k1): no overlap depth wanted from a scan."""
    return np.int64(1), np.int64(0), np.int64(1), np.int64(0), np.int64(1), np.int64(0)


@kernel(inline="always")
def scan_chunk(p, r, h, d, world, ci, bx, by, bz, x0, x1, y0, y1, z0, z1, best, mode, dbox):
    """Narrow phase against the solid boxes of the voxels [x0, x1] x [y0, y1] x [z0, z1], all in
    chunk ``ci`` whose first voxel is (bx, by, bz). Arguments and result as :func:`scan_region`."""
    blocks, bstart, bboxes, vs = world.blocks, world.box_start, world.boxes, world.voxel_size
    dep = fl(vs, 0)
    for x in range(x0, x1 + 1):
        for y in range(y0, y1 + 1):
            for z in range(z0, z1 + 1):
                t = blocks[ci, x - bx, y - by, z - bz]
                if t == 0:
                    continue
                v = (fl(vs, x), fl(vs, y), fl(vs, z))
                for b in range(bstart[t], bstart[t + 1]):
                    best = narrow(p, r, h, d, v, box_corners(bboxes, b), x, y, z, t, b, vs, best, mode)
                if dbox[0] <= x <= dbox[1] and dbox[2] <= y <= dbox[3] and dbox[4] <= z <= dbox[5]:
                    for b in range(bstart[t], bstart[t + 1]):  # the start overlap, as nb_world.chunk_depth
                        dd = box_depth(p, h, v, box_corners(bboxes, b), vs)
                        if dd > dep:
                            dep = dd
                if mode == ENTERS and best.axes != 0:
                    return best, dep
    return best, dep


@kernel(inline="always")
def scan_cells(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode):
    """:func:`scan_region` without the overlap depth: the updated search state."""
    return scan_region(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode, no_box())[0]


@hot
def scan_region(p, r, h, d, world, i0, i1, j0, j1, k0, k1, best, mode, dbox):
    """Narrow phase against every solid box of the voxels [i0, i1] x [j0, j1] x [k0, k1].

    Args:
        p, r, h: float 3-tuples: centre, motion, half extents (world units).
        d: touch margins of the sweep per axis (:func:`touch_margin`), world units.
        best: search state to continue from; mode: FIRST_HIT or ENTERS (stops at the first entry).
        dbox: int64 6-tuple, the voxel ranges of the box (p, h) (``nb_world.box_range``), inside
            the scanned ones, or :func:`no_box`. The start-overlap query visits a subset of the
            voxels the sweep's first pass visits, so the scan also folds in the overlap depth of
            the box at p (the same operations and maximum as ``nb_world.overlap_depth``).
    Returns:
        (the updated search state, that depth: 0 when dbox is empty or in ENTERS mode).

    A range spanning many chunk coordinates (a huge box or motion in a sparse world) visits the
    chunks of its thinnest slab instead of every coordinate, so the cost is bounded by the chunks
    that exist; the result does not depend on the visiting order (see the module docstring).
    """
    keys, slot = world.keys, world.slot
    c0 = (chunk_of(i0, world), chunk_of(j0, world), chunk_of(k0, world))
    c1 = (chunk_of(i1, world), chunk_of(j1, world), chunk_of(k1, world))
    dep = fl(world.voxel_size, 0)
    ax, a, b, slab = use_slab(world, c0, c1)
    if slab:
        cc = world.chunk_coord
        for q in range(a, b):
            ci = world.axis_chunks[ax, q]
            if not chunk_in_box(world, ci, c0, c1):
                continue
            best, dd = scan_clipped(p, r, h, d, world, ci, cc[ci, 0], cc[ci, 1], cc[ci, 2], i0, i1, j0, j1, k0, k1,
                                    best, mode, dbox)
            dep = max(dep, dd)
            if mode == ENTERS and best.axes != 0:
                return best, dep
        return best, dep
    for cx in range(c0[0], c1[0] + 1):
        for cy in range(c0[1], c1[1] + 1):
            for cz in range(c0[2], c1[2] + 1):
                ci = chunk_lookup(keys, slot, cx, cy, cz)
                if ci < 0:
                    continue
                best, dd = scan_clipped(p, r, h, d, world, ci, cx, cy, cz, i0, i1, j0, j1, k0, k1, best, mode, dbox)
                dep = max(dep, dd)
                if mode == ENTERS and best.axes != 0:
                    return best, dep
    return best, dep


@kernel(inline="always")
def scan_clipped(p, r, h, d, world, ci, cx, cy, cz, i0, i1, j0, j1, k0, k1, best, mode, dbox):
    """:func:`scan_chunk` over the part of [i0, i1] x [j0, j1] x [k0, k1] inside chunk ``ci``
    (chunk coordinate cx, cy, cz)."""
    S = world.chunk_size
    bx, by, bz = cx * S, cy * S, cz * S
    return scan_chunk(p, r, h, d, world, ci, bx, by, bz, max(i0, bx), min(i1, bx + S - 1),
                      max(j0, by), min(j1, by + S - 1), max(k0, bz), min(k1, bz + S - 1), best, mode, dbox)
