"""Numba kernel of the kinds the solver models add: ``grounded_mismatch`` and ``step_mismatch``
(definitions in ``kinds.py``; the grounded rule in ``solve.nb_ground``)."""
from __future__ import annotations

import numpy as np

from resweep.core.check.kinds import GROUNDED_MISMATCH, STEP_MISMATCH
from resweep.core.jit.nb_float import fl
from resweep.core.jit.nb_jit import hot
from resweep.core.solve.nb_ground import grounded, support_gap


@hot
def model_kinds(s, m, e, h, world, skin, tol, mp, flag, raised, plain_up):
    """Flag bits and errors of the model kinds for one valid row.

    Args:
        s, m, e, h: float 3-tuples start, motion, recorded end, half extents (world units).
        skin, tol: world units; mp: ModelParams; flag: int8 recorded on-ground flag after the frame
            (1 grounded, 0 airborne, -1 not recorded).
        raised: whether the reference kept step-up's raised try; plain_up: up coordinate of the
            reference's plain solve.
    Returns:
        (bits, grounded error, step error): errors NaN where the kind does not apply.
    """
    vs = world.voxel_size
    up = mp.up
    bits = 0
    g_err = fl(vs, np.nan)
    s_err = fl(vs, np.nan)
    if flag >= 0:
        # the grounded rule, read with the tolerance in the recording's favour: "grounded" is wrong
        # only when the floor is more than 2 skin + tol below (or none within a voxel), "airborne"
        # only when a floor lies within 2 skin below (or up to tol inside the box)
        gap = support_gap(e, h, world, up, tol)
        wrong = not (gap <= 2 * skin + tol) if flag == 1 else gap <= 2 * skin
        if wrong:
            bits |= 1 << GROUNDED_MISMATCH
            if np.isfinite(gap):
                g_err = gap
    if mp.step > 0:
        rise = e[up] - s[up]
        over = e[up] - plain_up
        stepped = over > tol and grounded(s, h, world, skin, up)
        if rise > mp.step + max(m[up], fl(vs, 0)) + tol or stepped != raised:
            bits |= 1 << STEP_MISMATCH
            s_err = over
    return bits, g_err, s_err
