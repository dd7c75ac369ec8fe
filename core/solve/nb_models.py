"""Solver models other than the plain slide, and step-up, as the row kernel calls them.

One runtime code (``ModelParams.model``) picks the model, so one compiled check kernel serves
every model: the row kernel (``check.nb_rows``) solves the slide model itself (``nb_slide.solve_row``
inlined: a call per row that passes the world and the outputs cost about as much as a short
solve), and calls :func:`solve_other` for per-axis clipping and push-out and :func:`step_up` for
step-up. Those two are compiled on their own (``nb_jit.hot``, no reference counting), not
inlined: each inlined copy of a model adds tens of seconds to the first compile.

The parameters travel as the named tuple :class:`ModelParams` (built by ``check.rows``).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_axis import axis_solve
from resweep.core.solve.nb_ground import grounded
from resweep.core.solve.nb_pushout import pushout_solve
from resweep.core.solve.nb_step import keeps_raised, raised_try
from resweep.core.solve.settings import AXIS, PUSHOUT, SLIDE  # noqa: F401  (codes, see settings.MODELS)


class ModelParams(NamedTuple):
    """Model settings as kernels take them (floats in the world's float type, world units).

    Attributes:
        model: SLIDE, AXIS or PUSHOUT; up: int64 up axis index (0, 1, 2).
        o0, o1, o2: int64 axis order of AXIS.
        substep: float, PUSHOUT substep length (0 = one move); iterations: int64 push-out rounds.
        step: float step height (0 = off).
    """

    model: np.int64
    up: np.int64
    o0: np.int64
    o1: np.int64
    o2: np.int64
    substep: float
    iterations: np.int64
    step: float


@hot
def write_one(i, s, end, tv, n, x, y, z, t, cand, ref_end, t_out, n_out, v_out, type_out, cand_out, pts):
    """Outputs of a model without passes, written as one pass: time ``tv``, normal ``n`` (int
    3-tuple), contact voxel (x, y, z) and type ``t`` (-1 none), ``cand`` boxes tested; the path
    points are the start, then the end."""
    for a in range(3):
        ref_end[i, a] = end[a]
        n_out[i, 0, a] = n[a]
    v_out[i, 0, 0] = x
    v_out[i, 0, 1] = y
    v_out[i, 0, 2] = z
    t_out[i, 0] = tv
    type_out[i, 0] = t
    cand_out[i, 0] = cand
    for k in range(pts.shape[1]):
        for a in range(3):
            pts[i, k, a] = s[a] if k == 0 else end[a]


@kernel(inline="always")
def stop_normal(bits, d):
    """Per axis: -sign(d) where ``bits`` marks the axis, else 0 (the face normal that stopped d)."""
    return (0 if not bits & 1 else (-1 if d[0] > 0 else 1), 0 if not bits & 2 else (-1 if d[1] > 0 else 1),
            0 if not bits & 4 else (-1 if d[2] > 0 else 1))


@kernel(inline="always")
def travelled(s, end, m, vs):
    """|end - s| / |m| capped at 1 (1 for no motion)."""
    want = m[0] * m[0] + m[1] * m[1] + m[2] * m[2]
    if want == 0:
        return fl(vs, 1)
    got = (end[0] - s[0]) ** 2 + (end[1] - s[1]) ** 2 + (end[2] - s[2]) ** 2
    return min(np.sqrt(got / want), fl(vs, 1))


@kernel(inline="always")
def blocked_bits(i, run, n_out):
    """Axes the passes 0 .. run - 1 of row ``i`` blocked (a nonzero hit normal component)."""
    bits = 0
    for k in range(run):
        for a in range(3):
            if n_out[i, k, a] != 0:
                bits |= 1 << a
    return bits


@hot
def solve_other(s, m, h, world, skin, mp, i, ref_end, t_out, n_out, v_out, type_out, cand_out, pts):
    """Solve row ``i`` with the AXIS or PUSHOUT model of ``mp``, written as one pass (outputs as
    ``nb_slide.solve_row``; the slide model is solved by the row kernel itself).

    Returns (passes_run, any_hit, end, blocked axes bitmask): the end is final (these models have
    no separate back-off).
    """
    vs = world.voxel_size
    if mp.model == AXIS:
        end, bits, x, y, z, t, cand = axis_solve(s, m, h, world, skin, mp.o0, mp.o1, mp.o2)
        tv = travelled(s, end, m, vs) if bits else fl(vs, 1)
        write_one(i, s, end, tv, stop_normal(bits, m), x, y, z, t, cand, ref_end, t_out, n_out, v_out, type_out,
                  cand_out, pts)
        return 1, bits != 0, end, bits
    end, pushes, x, y, z, t = pushout_solve(s, m, h, world, skin, mp.substep, mp.iterations, mp.up)
    # pushed axes: where the end differs from the unobstructed end; normal = push direction
    back = (s[0] + m[0] - end[0], s[1] + m[1] - end[1], s[2] + m[2] - end[2])
    bits = 0
    if pushes:
        bits = (1 if back[0] != 0 else 0) | (2 if back[1] != 0 else 0) | (4 if back[2] != 0 else 0)
    write_one(i, s, end, fl(vs, 1), stop_normal(bits, back), x, y, z, t, np.int64(pushes), ref_end,
              t_out, n_out, v_out, type_out, cand_out, pts)
    return 1, pushes > 0, end, bits


@hot
def step_up(s, m, h, world, skin, passes, broad, stack, mp, i, bits, ref_end, pts):
    """Step-up of row ``i`` after its plain solve (end in ``ref_end[i]``, ``bits`` the axes it
    blocked): when the model steps (``mp.step`` > 0, not PUSHOUT), a side axis was blocked and the
    start is grounded, the raised try (``nb_step.raised_try``), kept when it goes farther
    (``nb_step.keeps_raised``); a kept try is then the row's end (``ref_end[i]``) and path.

    Returns (kept, height climbed (0 when not kept), the end: the raised try's when kept).
    """
    vs = world.voxel_size
    up = mp.up
    plain = (ref_end[i, 0], ref_end[i, 1], ref_end[i, 2])
    if mp.step > 0 and mp.model != PUSHOUT and (bits & ~(1 << up)) and grounded(s, h, world, skin, up):
        end, climbed = raised_try(s, m, h, world, skin, passes, broad, stack, mp)
        if keeps_raised(s, plain, end, up, vs):
            for a in range(3):
                ref_end[i, a] = end[a]
            last = pts.shape[1] - 1
            for k in range(1, last + 1):
                for a in range(3):  # start, the top of the climb (when there is room), end
                    pts[i, k, a] = end[a] if k > 1 or k == last else (s[a] + climbed if a == up else s[a])
            return True, climbed, end
    return False, fl(vs, 0), plain
