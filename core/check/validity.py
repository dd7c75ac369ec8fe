"""Which recorded rows can be re-solved at all, and what is wrong with those that cannot.

The one statement of the row-validity rule (numpy, no numba): a row is valid when every
component of its start, motion and recorded end is finite and every half extent is finite and
> 0, in the float type the solve runs in. The solver kernel's ``nb_rows.row_valid`` applies the
same rule row by row (a test holds them equal); ``check``, ``info``, the viewer and the reports
take the reason text from :func:`row_problems`.
"""
from __future__ import annotations

import numpy as np

#: The row fields the rule looks at, in the order problems are reported.
FIELDS = ("start", "motion", "end", "half_extents")
AXES = "xyz"


def valid_rows(start, motion, end, half, dtype=None) -> np.ndarray:
    """bool (M,): rows that can be re-solved.

    Args:
        start, motion, end, half: float (M, 3) (or (3,) for one row) world units.
        dtype: the float type of the solve (the values are converted first, as the solve does);
            None keeps the arrays' own type.
    """
    s, m, e, h = (_as(a, dtype) for a in (start, motion, end, half))
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(s).all(-1) & np.isfinite(m).all(-1) & np.isfinite(e).all(-1)
        return ok & np.isfinite(h).all(-1) & (h > 0).all(-1)


def row_problems(start, motion, end, half, dtype=None) -> list[str]:
    """What makes one row invalid, field by field: e.g. ``["motion.x is NaN"]``, ``["half_extents.y
    is -0.25 (must be > 0)"]``, ``["start.z is 3e+40, not finite in float32"]``; [] for a valid row.

    Args: as :func:`valid_rows`, one row of shape (3,) each.
    """
    out = []
    for name, raw in zip(FIELDS, (start, motion, end, half)):
        raw = np.asarray(raw, np.float64).reshape(3)
        conv = _as(np.asarray(raw), dtype).astype(np.float64)
        for a in range(3):
            v, c = float(raw[a]), float(conv[a])
            where = f"{name}.{AXES[a]}"
            if not np.isfinite(v):
                out.append(f"{where} is {_special(v)}")
            elif not np.isfinite(c):
                out.append(f"{where} is {v:.6g}, not finite in {np.dtype(dtype).name}")
            elif name == "half_extents" and not c > 0:
                shown = f"{v:.6g}" if v == c else f"{v:.6g} ({c:g} in {np.dtype(dtype).name})"
                out.append(f"{where} is {shown} (must be > 0)")
    return out


def reason(start, motion, end, half, dtype=None) -> str:
    """One line for an invalid row (problems joined by "; "), "" for a valid one."""
    return "; ".join(row_problems(start, motion, end, half, dtype))


def _as(a, dtype) -> np.ndarray:
    a = np.asarray(a)
    if dtype is None:
        return a
    with np.errstate(over="ignore"):
        return a.astype(dtype)


def _special(v: float) -> str:
    return "NaN" if np.isnan(v) else ("inf" if v > 0 else "-inf")
