"""Numba kernel over one streamed frame block: gather the active rows, measure frame-to-frame gaps.

Doing this in numpy (fancy indexing of four (n, N, 3) arrays, float64 copies for the gaps) is
serial and costs about as much as the parallel re-solve it feeds; here every row is independent
and written once, so the result does not depend on the thread count.
"""
from __future__ import annotations

import numpy as np
from numba import prange

from resweep.core.jit.nb_jit import kernel



@kernel(parallel=True, nogil=True)
def gather_rows(start, motion, end, active, prev_end, prev_active, has_prev, fr, col, tol,
                s_out, m_out, e_out, gap, disc):
    """Rows (fr[i], col[i]) of a frame block, converted to the output float type, and their gaps.

    Args:
        start, motion, end: float (n, N, 3) frames of the block (the file's dtype), world units.
        active: bool (n, N). prev_end: float64 (N, 3) recorded end of the frame before the block
            and prev_active: bool (N,) its active flags, used when ``has_prev``.
        fr, col: int64 (M,) frame (relative to the block) and entity column of each row.
        tol: float, world units.
    Outputs:
        s_out, m_out, e_out: float (M, 3) start, motion, recorded end of each row.
        gap: float64 (M,) distance from the previous frame's recorded end to this start (NaN when
            there is no previous frame); disc: bool (M,) previous frame active and gap > tol.
    """
    for i in prange(fr.shape[0]):
        f = fr[i]
        c = col[i]
        for a in range(3):
            s_out[i, a] = start[f, c, a]
            m_out[i, a] = motion[f, c, a]
            e_out[i, a] = end[f, c, a]
        if f == 0 and not has_prev:
            gap[i] = np.nan
            disc[i] = False
            continue
        if f == 0:
            pa = prev_active[c]
            p0, p1, p2 = prev_end[c, 0], prev_end[c, 1], prev_end[c, 2]
        else:
            pa = active[f - 1, c]
            p0, p1, p2 = np.float64(end[f - 1, c, 0]), np.float64(end[f - 1, c, 1]), np.float64(end[f - 1, c, 2])
        d0 = np.float64(start[f, c, 0]) - p0
        d1 = np.float64(start[f, c, 1]) - p1
        d2 = np.float64(start[f, c, 2]) - p2
        g = np.sqrt((d0 * d0 + d1 * d1) + d2 * d2)  # numpy's order for a sum over 3 values
        gap[i] = g
        disc[i] = pa and g > tol
