"""Numba drivers: solve and classify many entity-frames in parallel.

Each row is independent and writes only its own output slots, so results are bit-identical
for any thread count and any row order. Rows are handed to threads in tasks of
``ROWS_PER_TASK``; each task owns its scratch (the walk's region stack), so nothing is allocated
per row, and the kernels called per row (``nb_jit.hot``) touch no shared reference counts.
"""
from __future__ import annotations

import numpy as np
from numba import prange

from resweep.core.check.kinds import (GROUNDED_MISMATCH, INVALID, KIND_COUNT, MISMATCH, PENETRATION, SNAG,
                                     START_OVERLAP, STEP_MISMATCH, TUNNELING)
from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.check.nb_model_kinds import model_kinds
from resweep.core.solve.nb_models import blocked_bits, solve_other, step_up
from resweep.core.solve.nb_slide import path_enters_solid, solve_row
from resweep.core.solve.settings import CLEAR, HIT, SLIDE, STARTED_INSIDE
from resweep.core.solve.nb_walk import STACK_ROWS
from resweep.core.world.nb_world import overlap_depth

ROWS_PER_TASK = 256


@kernel()  # called once per pass or row: not worth inlining (compile time)
def row_valid(s, m, e, h):
    """The rule of ``check/validity.py`` for one row (a test holds the two equal)."""
    for a in range(3):
        if not (np.isfinite(s[a]) and np.isfinite(m[a]) and np.isfinite(e[a]) and np.isfinite(h[a])):
            return False
        if not (h[a] > 0):
            return False
    return True


@kernel(inline="always")
def row3(a, i):
    """Row ``i`` of an (M, 3) array as a 3-tuple (no array view)."""
    return a[i, 0], a[i, 1], a[i, 2]


@kernel(inline="always")
def clear_passes(i, k0, t_out, n_out, v_out, type_out, cand_out, vs):
    """Passes ``k0`` and later of row ``i`` did not run: clear (t 1, no normal, voxel 0, type -1).
    Every output slot is written by the kernel, so callers may hand in uninitialised arrays."""
    for k in range(k0, t_out.shape[1]):
        t_out[i, k] = fl(vs, 1)
        type_out[i, k] = -1
        cand_out[i, k] = 0
        for a in range(3):
            n_out[i, k, a] = 0
            v_out[i, k, a] = 0


@kernel(inline="always")
def invalid_row(i, ref_end, npass, state, pts, flags, vs):
    """Row ``i`` is invalid (see kinds ``invalid``): no solve; NaN reference end and path."""
    flags[i] = 1 << INVALID
    npass[i] = 0
    state[i] = CLEAR
    for a in range(3):
        ref_end[i, a] = fl(vs, np.nan)
        for k in range(pts.shape[1]):
            pts[i, k, a] = fl(vs, np.nan)


@kernel(inline="always")
def start_flags(i, d0, hit, tol, state, err):
    """Row state from the start's overlap depth ``d0``, and the ``start_overlap`` bit."""
    if d0 > 0:
        state[i] = STARTED_INSIDE
    elif hit:
        state[i] = HIT
    else:
        state[i] = CLEAR
    if d0 > tol:
        err[i, START_OVERLAP] = d0
        return 1 << START_OVERLAP
    return 0


@kernel(inline="always")
def past_hit_faces(i, run, n_out, contact, e, h):
    """How far the recorded end ``e`` went past the reference's hit faces (kinds ``tunneling`` and
    ``penetration``): (sink, beyond). For each pass and axis with hit normal n = +-1, the recorded
    box's leading face lies ``n * (contact - e)`` past that face's plane (``contact``: the exact
    contact centre on that axis); ``sink`` is the largest such distance, ``beyond`` whether the
    whole box (2 h along the axis) passed some hit face's plane."""
    sink = contact[0] - contact[0]  # zero in the float type
    beyond = False
    for k in range(run):
        for a in range(3):
            n = n_out[i, k, a]
            if n != 0:
                past = (contact[a] - e[a]) if n > 0 else (e[a] - contact[a])
                sink = max(sink, past)
                if past >= h[a] + h[a]:
                    beyond = True
    return sink, beyond


@kernel(inline="always")
def shortfall(s, m, e, r, tol):
    """(short, against): how far the recorded end ``e`` falls short of the reference end ``r``
    along the reference's direction of travel r - s (0 when the reference did not move), and
    whether the recorded displacement e - s goes against the reference displacement or the wanted
    motion ``m`` by more than ``tol`` on some axis (kind ``snag``)."""
    short = tol - tol
    travel2 = tol - tol
    against = False
    for a in range(3):
        travel2 += (r[a] - s[a]) * (r[a] - s[a])
        de = e[a] - s[a]
        dr = r[a] - s[a]
        if (dr > 0 and de < -tol) or (dr < 0 and de > tol) or (m[a] > 0 and de < -tol) or (m[a] < 0 and de > tol):
            against = True
    if travel2 > 0:
        travel = np.sqrt(travel2)
        for a in range(3):
            short += (r[a] - e[a]) * (r[a] - s[a])
        short = short / travel
    return short, against


@kernel(inline="always")
def classify_end(i, s, m, e, h, hit, run, contact, d0, world, tol, broad, stack, ref_end, n_out, err):
    """Flag bits of penetration, tunneling, snag and mismatch for a solved row (the tests are the
    ``test`` texts of kinds.TABLE); writes their error values."""
    vs = world.voxel_size
    r = row3(ref_end, i)
    dist2 = fl(vs, 0)
    for a in range(3):
        dist2 += (e[a] - r[a]) * (e[a] - r[a])
    dist = np.sqrt(dist2)
    # A recorded end within tolerance of an overlap-free reference cannot overlap deeper than
    # the tolerance, so the costlier queries run only for rows that differ.
    if dist > tol or d0 > 0:
        d1 = overlap_depth(e, h, world)
        if d1 > tol:
            err[i, PENETRATION] = d1
            return 1 << PENETRATION
    if not (dist > tol):
        return 0
    if hit:
        # The straight recorded path, with the box shrunk by the tolerance, entering solid while
        # the end is free: through the reference's hit face and out (tunneling), or a dip into it.
        dpath = (e[0] - s[0], e[1] - s[1], e[2] - s[2])
        hs = (max(h[0] - tol, h[0] * fl(vs, 0.5)), max(h[1] - tol, h[1] * fl(vs, 0.5)),
              max(h[2] - tol, h[2] * fl(vs, 0.5)))
        if path_enters_solid(s, dpath, hs, world, broad, stack):
            sink, beyond = past_hit_faces(i, run, n_out, contact, e, h)
            if beyond:
                err[i, TUNNELING] = dist
                return 1 << TUNNELING
            if sink > tol:
                err[i, PENETRATION] = sink
                return 1 << PENETRATION
    short, against = shortfall(s, m, e, r, tol)
    if short > tol and not against:
        err[i, SNAG] = short
        return 1 << SNAG
    err[i, MISMATCH] = dist
    return 1 << MISMATCH


@kernel(inline="always")
def check_row(i, o, start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground, stack,
              ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, raised_out, climb_out, flags, err):
    """Solve and classify input row ``i`` into output slot ``o`` (arguments as :func:`check_rows`).
    Inlined into the row loop (:func:`check_span`): a call with this many array arguments costs
    about as much as a short solve. For the same reason the slide model's solve is inlined here
    (the other models and step-up are calls, see nb_models), and the model kinds are called only
    when one can apply (measured: 200 -> 135 ns for a row that hits nothing)."""
    vs = world.voxel_size
    s = row3(start, i)
    m = row3(motion, i)
    e = row3(rec_end, i)
    h = row3(half, i)
    for k in range(KIND_COUNT):
        err[o, k] = fl(vs, np.nan)
    if not row_valid(s, m, e, h):
        invalid_row(o, ref_end, npass, state, pts, flags, vs)
        clear_passes(o, 0, t_out, n_out, v_out, type_out, cand_out, vs)
        raised_out[o] = False
        climb_out[o] = fl(vs, 0)
        return
    # the model is a runtime code (one compiled kernel for every model), see nb_models
    if mp.model == SLIDE:
        run, hit, contact, d0 = solve_row(s, m, h, world, skin, passes, broad, stack, o, ref_end, t_out, n_out,
                                          v_out, type_out, cand_out, pts)
        bits = blocked_bits(o, run, n_out) if mp.step > 0 else 0
    else:
        run, hit, contact, bits = solve_other(s, m, h, world, skin, mp, o, ref_end, t_out, n_out, v_out, type_out,
                                              cand_out, pts)
        d0 = fl(vs, -1)
    plain_up = ref_end[o, mp.up]
    raised = False
    climb = fl(vs, 0)
    if bits and mp.step > 0:
        raised, climb, end = step_up(s, m, h, world, skin, passes, broad, stack, mp, o, bits, ref_end, pts)
        if raised:
            contact = end
    raised_out[o] = raised
    climb_out[o] = climb
    clear_passes(o, run, t_out, n_out, v_out, type_out, cand_out, vs)
    npass[o] = run
    if d0 < 0:  # the first pass did not scan the start box (walked, or no motion)
        d0 = overlap_depth(s, h, world)
    f = start_flags(o, d0, hit, tol, state, err)
    f |= classify_end(o, s, m, e, h, hit, run, contact, d0, world, tol, broad, stack, ref_end, n_out, err)
    if ground[i] >= 0 or mp.step > 0:  # else no model kind applies (and the call is not free)
        mk, g_err, s_err = model_kinds(s, m, e, h, world, skin, tol, mp, ground[i], raised, plain_up)
        if mk:
            f |= mk
            err[o, GROUNDED_MISMATCH] = g_err
            err[o, STEP_MISMATCH] = s_err
    flags[o] = f


@hot
def check_span(r0, r1, start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground, stack,
               ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, raised, climb, flags, err,
               one, flags_all):
    """Rows ``r0`` to ``r1 - 1`` of :func:`check_rows` (one task), ``stack`` its scratch. With
    ``one`` every row is written to slot 0 of the outputs (one row of scratch) and only its flags
    are kept, in ``flags_all``.

    The row loop lives in a function compiled without reference counting: in the parallel kernel
    (which counts references, it allocates the scratch) every array taken out of the world tuple
    and every call with arrays updated their shared counts per row, atomically (measured: more
    than half the kernel's time on one thread, and the two threads contend for those counts).
    """
    for i in range(r0, r1):
        o = 0 if one else i
        check_row(i, o, start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground, stack,
                  ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, raised, climb, flags, err)
        if one:
            flags_all[i] = flags[0]


@kernel(parallel=True, nogil=True)
def check_rows(start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground,
               ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, raised, climb, flags, err,
               flags_only):
    """Re-solve rows and classify the recorded end against the reference.

    Args:
        start, motion, rec_end, half: float (M, 3) world units, all of the world's float type.
        skin, tol: float world units; passes: int; broad: nb_solve.SCAN, WALK or AUTO.
        mp: nb_models.ModelParams (model code, up axis, axis order, push-out and step-up settings).
        ground: int8 (M,) recorded on-ground flag after the frame (1, 0, or -1 when not recorded).
        flags_only: bool; True writes only ``flags`` (the other outputs may then hold any number
            of rows, even none): a check reads the rest only for the few rows that diverge, and
            writing ~300 bytes per row it never reads costs memory traffic.
    Outputs (preallocated, every slot written; may be uninitialised):
        ref_end float (M, 3); npass int8 (M,) passes run; state int8 (M,) CLEAR/HIT/STARTED_INSIDE;
        t_out float (M, P); n_out int8 (M, P, 3); v_out int64 (M, P, 3); type_out int32 (M, P);
        cand_out int32 (M, P) boxes the narrow phase tested; pts float (M, P+1, 3) slide path
        points; raised bool (M,) step-up kept the raised try; climb float (M,) height it climbed;
        flags int32 (M,) bit k set when kind k applies;
        err float (M, KIND_COUNT) error value per kind (world units; NaN where it does not apply).
    """
    M = start.shape[0]
    tasks = (M + ROWS_PER_TASK - 1) // ROWS_PER_TASK
    for task in prange(tasks):
        stack = np.empty((STACK_ROWS, 6), np.int64)
        r0, r1 = task * ROWS_PER_TASK, min(M, (task + 1) * ROWS_PER_TASK)
        if flags_only:
            P = t_out.shape[1]
            check_span(r0, r1, start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground, stack,
                       np.empty((1, 3), ref_end.dtype), np.empty(1, np.int8), np.empty(1, np.int8),
                       np.empty((1, P), t_out.dtype), np.empty((1, P, 3), np.int8), np.empty((1, P, 3), np.int64),
                       np.empty((1, P), np.int32), np.empty((1, P), np.int32), np.empty((1, P + 1, 3), pts.dtype),
                       np.empty(1, np.bool_), np.empty(1, climb.dtype), np.empty(1, np.int32),
                       np.empty((1, err.shape[1]), err.dtype), True, flags)
        else:
            check_span(r0, r1, start, motion, rec_end, half, world, skin, passes, tol, broad, mp, ground, stack,
                       ref_end, npass, state, t_out, n_out, v_out, type_out, cand_out, pts, raised, climb, flags,
                       err, False, flags)


@kernel(parallel=True, nogil=True)
def depth_rows(centre, half, world, out):
    """Overlap depth of many boxes: centre, half float (M, 3) -> out float (M,), world units."""
    for i in prange(centre.shape[0]):
        out[i] = overlap_depth(row3(centre, i), row3(half, i), world)
