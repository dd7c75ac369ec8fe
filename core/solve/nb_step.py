"""Numba kernels of step-up (``step_height`` > 0, models ``slide`` and ``axis``).

Common practice in voxel games (no single source): a grounded walker climbs blocks up to about
0.5 to 0.6 voxel high without jumping. Rule: when the box is grounded at frame start
(``nb_ground``) and the plain solve blocked or clipped a horizontal axis, also solve the raised
try: move up by H (clipped by ceilings, like any motion), then the wanted horizontal motion from
there, then down by the height actually climbed plus any wanted downward motion (clipped by the
floor), each leg with the same model. Keep the raised try if its horizontal displacement is longer
than the plain solve's by more than 1e-6 voxel.
"""
from __future__ import annotations

import numpy as np

from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot, kernel
from resweep.core.solve.nb_axis import along, axis_solve
from resweep.core.solve.nb_narrow import FIRST_HIT, blocked_axes
from resweep.core.solve.nb_slide import backed_off_end, search, slide_axis
from resweep.core.solve.settings import SLIDE

#: Voxels by which the raised try's horizontal displacement must exceed the plain one's.
STEP_GAIN = 1e-6


@hot
def slide_end(p, r, h, world, skin, passes, broad, stack):
    """End of the sweep-and-slide solve of ``nb_slide.solve_row`` without its per-pass outputs:
    (end 3-tuple, OR of the blocked axes over all passes). Same skin rule: passes move to the exact
    contact, the back-off is applied once at the end (``nb_slide.backed_off_end``)."""
    vs = world.voxel_size
    bits = 0
    bk = p
    for _ in range(passes):
        if r[0] == 0 and r[1] == 0 and r[2] == 0:
            break
        tmin, axes, hx, hy, hz, hb, htype, cand = search(p, r, h, world, broad, FIRST_HIT, stack)
        if axes == 0:
            p = (p[0] + r[0], p[1] + r[1], p[2] + r[2])
            break
        axes = blocked_axes(axes)
        rest = fl(vs, 1) - tmin
        q0, r0, _, b0 = slide_axis(p[0], r[0], tmin, rest, skin, axes & 1)
        q1, r1, _, b1 = slide_axis(p[1], r[1], tmin, rest, skin, axes & 2)
        q2, r2, _, b2 = slide_axis(p[2], r[2], tmin, rest, skin, axes & 4)
        bk = (b0 if axes & 1 else bk[0], b1 if axes & 2 else bk[1], b2 if axes & 4 else bk[2])
        bits |= axes
        p = (q0, q1, q2)
        r = (r0, r1, r2)
    if bits != 0:
        back = (bk[0] if bits & 1 else p[0], bk[1] if bits & 2 else p[1], bk[2] if bits & 4 else p[2])
        p = backed_off_end(p, back, h, world, broad, stack)
    return p, bits


@kernel(inline="always")
def leg(model, p, r, h, world, skin, passes, broad, stack, mp):
    """End of one leg of the raised try, solved with ``model`` (SLIDE or AXIS)."""
    if model == SLIDE:
        return slide_end(p, r, h, world, skin, passes, broad, stack)[0]
    return axis_solve(p, r, h, world, skin, mp.o0, mp.o1, mp.o2)[0]


@kernel(inline="always")
def horizontal_length(a, b, up):
    """Length of b - a over the two axes other than ``up``."""
    d2 = a[0] * 0
    for k in range(3):
        if k != up:
            d2 += (b[k] - a[k]) * (b[k] - a[k])
    return np.sqrt(d2)


@hot
def raised_try(s, m, h, world, skin, passes, broad, stack, mp):
    """The raised try from ``s`` with wanted motion ``m``: (end 3-tuple, height climbed), world units."""
    vs = world.voxel_size
    up = mp.up
    zero = fl(vs, 0)
    top = leg(mp.model, s, along(up, mp.step, zero), h, world, skin, passes, broad, stack, mp)
    climbed = top[up] - s[up]
    flat = (m[0] if up != 0 else zero, m[1] if up != 1 else zero, m[2] if up != 2 else zero)
    over = leg(mp.model, top, flat, h, world, skin, passes, broad, stack, mp)
    down = climbed + max(-m[up], zero)
    end = over
    if down > 0:
        end = leg(mp.model, over, along(up, -down, zero), h, world, skin, passes, broad, stack, mp)
    return end, climbed


@kernel(inline="always")
def keeps_raised(s, plain, raised, up, vs):
    """True when the raised try moved farther horizontally than the plain solve by > STEP_GAIN voxel."""
    return horizontal_length(s, raised, up) > horizontal_length(s, plain, up) + fl(vs, STEP_GAIN) * vs
