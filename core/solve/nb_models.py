"""Dispatch of the solver models: one runtime code picks slide, axis or push-out (one compiled
kernel for all models), then step-up (``nb_step``) for the models that step.

The parameters travel as the named tuple :class:`ModelParams` (built by ``check.rows``).
:func:`solve_model` is compiled on its own, not inlined into the row loop: inlined, the first
compile of the check kernel took 65 s of CPU instead of 43 s (measured; the slide-only kernel
takes 35 s), and without reference counting (``nb_jit.hot``) the call costs little per row.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_axis import axis_solve
from resweep.core.solve.nb_ground import grounded
from resweep.core.solve.nb_pushout import pushout_solve
from resweep.core.solve.nb_slide import solve_row
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


@hot
def solve_model(s, m, h, world, skin, passes, broad, stack, mp, i, ref_end, t_out, n_out, v_out, type_out,
                cand_out, pts):
    """Solve row ``i`` with the model of ``mp`` (outputs as ``nb_slide.solve_row``).

    Returns (passes_run, any_hit, contact, raised, climbed, plain_up, start_depth): the end before
    any skin back-off (float 3-tuple; the models without a back-off, and a kept raised try, give
    their end), whether the raised try of step-up was kept, the height it climbed (0 when not
    kept), the up coordinate of the plain solve's end, and the start's overlap depth when the
    sweep found it on the way (else -1, see ``nb_slide.search_depth``).
    """
    up = mp.up
    vs = world.voxel_size
    d0 = fl(vs, -1)
    if mp.model == SLIDE:
        run, hit, contact, d0 = solve_row(s, m, h, world, skin, passes, broad, stack, i, ref_end, t_out, n_out,
                                          v_out, type_out, cand_out, pts)
        bits = 0
        for k in range(run):
            for a in range(3):
                if n_out[i, k, a] != 0:
                    bits |= 1 << a
    elif mp.model == AXIS:
        end, bits, x, y, z, t, cand = axis_solve(s, m, h, world, skin, mp.o0, mp.o1, mp.o2)
        tv = travelled(s, end, m, vs) if bits else fl(vs, 1)
        write_one(i, s, end, tv, stop_normal(bits, m), x, y, z, t, cand, ref_end, t_out, n_out, v_out, type_out,
                  cand_out, pts)
        run, hit = 1, bits != 0
        contact = end
    else:
        end, pushes, x, y, z, t = pushout_solve(s, m, h, world, skin, mp.substep, mp.iterations, up)
        # pushed axes: where the end differs from the unobstructed end; normal = push direction
        back = (s[0] + m[0] - end[0], s[1] + m[1] - end[1], s[2] + m[2] - end[2])
        bits = 0
        if pushes:
            bits = (1 if back[0] != 0 else 0) | (2 if back[1] != 0 else 0) | (4 if back[2] != 0 else 0)
        write_one(i, s, end, fl(vs, 1), stop_normal(bits, back), x, y, z, t, np.int64(pushes), ref_end,
                  t_out, n_out, v_out, type_out, cand_out, pts)
        run, hit = 1, pushes > 0
        contact = end
    plain_up = ref_end[i, up]
    if mp.step > 0 and mp.model != PUSHOUT and (bits & ~(1 << up)) and grounded(s, h, world, skin, up):
        plain = (ref_end[i, 0], ref_end[i, 1], ref_end[i, 2])
        end, climbed = raised_try(s, m, h, world, skin, passes, broad, stack, mp)
        if keeps_raised(s, plain, end, up, vs):
            for a in range(3):
                ref_end[i, a] = end[a]
            last = pts.shape[1] - 1
            for k in range(1, last + 1):
                for a in range(3):  # start, the top of the climb (when there is room), end
                    pts[i, k, a] = end[a] if k > 1 or k == last else (s[a] + climbed if a == up else s[a])
            return run, hit, end, True, climbed, plain_up, d0
    return run, hit, contact, False, fl(vs, 0), plain_up, d0
