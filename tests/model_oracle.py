"""Exact-arithmetic oracles (fractions.Fraction) of the solver models, written from the rules the
issue documents (per-axis clipping, push-out with visit order, step-up, grounded), not from the
kernels. Used by tests/core/solve/test_models_oracle.py.

Solids are a list of exact boxes ((x, y, z), box index, lo 3-tuple, hi 3-tuple) in world units,
listed in ascending (x, y, z) voxel order and table order within a voxel (the push-out visit
order). Inputs are dyadic, so they reach float64 exactly. Where a float computation rounds (the
clip's back-off is a quotient; a substep divides the motion), later branches within 1e-9 of a tie
cannot be trusted: the oracle raises :class:`NearTie` and the caller discards the row.
"""
from __future__ import annotations

import math
from fractions import Fraction as Q

NEAR = Q(1, 10**9)


class NearTie(Exception):
    """A branch of a rule that float rounding could decide differently."""


def _f3(v):
    return tuple(Q(x) for x in v)


def solids_of(world_grid, shape_lists, vs=1):
    """Exact solid boxes of a dense grid (index [x, y, z] from voxel 0) in visit order."""
    out = []
    nx, ny, nz = world_grid.shape
    vs = Q(vs)
    for x in range(nx):
        for y in range(ny):
            for z in range(nz):
                t = int(world_grid[x, y, z])
                for b, box in enumerate(shape_lists[t]):
                    lo = tuple((c + Q(box[a])) * vs for a, c in enumerate((x, y, z)))
                    hi = tuple((c + Q(box[a + 3])) * vs for a, c in enumerate((x, y, z)))
                    out.append(((x, y, z), b, lo, hi))
    return out


class Guard:
    """Compares exact values; once the float path has rounded, a comparison within NEAR of a tie
    raises NearTie."""

    def __init__(self):
        self.rounded = False

    def lt(self, a, b):
        if self.rounded and abs(a - b) <= NEAR:
            raise NearTie
        return a < b

    def le(self, a, b):
        if self.rounded and abs(a - b) <= NEAR:
            raise NearTie
        return a <= b


def _open_overlap(g, lo1, hi1, lo2, hi2):
    return g.lt(lo1, hi2) and g.lt(lo2, hi1)


def axis_model(solids, s, m, h, skin, order, g=None):
    """Per-axis clipping (issue rule): returns (end, clipped axes set)."""
    g = g or Guard()
    p = list(_f3(s))
    m, h, skin = _f3(m), _f3(h), Q(skin)
    clipped = set()
    for a in order:
        d = m[a]
        if d == 0:
            continue
        others = [o for o in range(3) if o != a]
        limit = abs(d)
        for _v, _b, lo, hi in solids:
            if not all(_open_overlap(g, p[o] - h[o], p[o] + h[o], lo[o], hi[o]) for o in others):
                continue
            gap = lo[a] - (p[a] + h[a]) if d > 0 else (p[a] - h[a]) - hi[a]
            if g.lt(gap, 0):
                continue  # already overlapped along a
            if g.le(gap, abs(d)):  # not farther than |d|
                limit = min(limit, max(gap - skin, Q(0)))
        if limit < abs(d):
            clipped.add(a)
            g.rounded = True  # the kernel backs off through a quotient
        p[a] += limit if d > 0 else -limit
    return tuple(p), clipped


def _penetration(p, h, lo, hi, up):
    """(axis, signed push) of least penetration; ties: up axis, then x, y, z; equal sides push +."""
    best = None
    for a in [up] + [a for a in range(3) if a != up]:
        plus = hi[a] - (p[a] - h[a])
        minus = (p[a] + h[a]) - lo[a]
        pen = min(plus, minus)
        if best is None or pen < best[0]:
            best = (pen, a, plus if plus <= minus else -minus)
    return best[1], best[2]


def _overlaps(g, p, h, lo, hi):
    return all(_open_overlap(g, p[a] - h[a], p[a] + h[a], lo[a], hi[a]) for a in range(3))


def pushout_model(solids, s, m, h, skin, substep, iterations, up, g=None):
    """Push-out (issue rule): returns (end, number of pushes)."""
    g = g or Guard()
    p = list(_f3(s))
    m, h, skin = _f3(m), _f3(h), Q(skin)
    n = 1
    if substep:
        length = math.sqrt(sum(float(x) ** 2 for x in m))
        n = max(1, math.ceil(length / float(substep)))
        ratio = length / float(substep)
        if abs(ratio - round(ratio)) < 1e-9 and ratio > 0.5:
            raise NearTie  # ceil of an exact integer: float sqrt may land either side
        if n & (n - 1):
            g.rounded = True  # m / n is not a dyadic number
    pushes = 0
    for _ in range(n):
        p = [p[a] + m[a] / n for a in range(3)]
        for _it in range(iterations):
            listed = [(lo, hi) for _v, _b, lo, hi in solids if _overlaps(g, p, h, lo, hi)]
            done = 0
            for lo, hi in listed:
                if not _overlaps(g, p, h, lo, hi):
                    continue
                if g.rounded:  # ties between axes or sides decided on rounded values
                    sides = [v for a in range(3) for v in (hi[a] - (p[a] - h[a]), (p[a] + h[a]) - lo[a])]
                    if any(abs(x - y) <= NEAR for i, x in enumerate(sides) for y in sides[i + 1:]):
                        raise NearTie
                a, push = _penetration(p, h, lo, hi, up)
                p[a] += push + skin if push >= 0 else push - skin
                done += 1
            pushes += done
            if not done:
                break
    return tuple(p), pushes


def support_gap(solids, c, h, up):
    """Least gap >= 0 from the box's bottom down to a footprint-overlapping solid top (None: none
    within one voxel of unit size)."""
    c, h = _f3(c), _f3(h)
    bottom = c[up] - h[up]
    best = None
    for _v, _b, lo, hi in solids:
        if not all(lo[o] < c[o] + h[o] and c[o] - h[o] < hi[o] for o in range(3) if o != up):
            continue
        gap = bottom - hi[up]
        if gap >= 0 and (best is None or gap < best):
            best = gap
    return best


def grounded(solids, c, h, skin, up):
    """The grounded rule: a solid top within 2 * skin below the bottom, footprints overlapping."""
    gap = support_gap(solids, c, h, up)
    return gap is not None and gap <= 2 * Q(skin)


def step_axis_model(solids, s, m, h, skin, order, height, up):
    """Per-axis clipping with step-up (issue rule). Returns (end, raised kept, climbed)."""
    g = Guard()
    plain, clipped = axis_model(solids, s, m, h, skin, order, g)
    if not height or not grounded(solids, s, h, skin, up) or not (clipped - {up}):
        return plain, False, Q(0)
    rise = tuple(Q(height) if a == up else Q(0) for a in range(3))
    top, _ = axis_model(solids, s, rise, h, skin, order, g)
    climbed = top[up] - Q(s[up])
    flat = tuple(Q(0) if a == up else Q(m[a]) for a in range(3))
    over, _ = axis_model(solids, top, flat, h, skin, order, g)
    down = climbed + max(-Q(m[up]), Q(0))
    end = over
    if down > 0:
        end, _ = axis_model(solids, over, tuple(-down if a == up else Q(0) for a in range(3)), h, skin, order, g)

    def horiz(e):
        return math.sqrt(float(sum((e[a] - Q(s[a])) ** 2 for a in range(3) if a != up)))
    # |raised| > |plain| + 1e-6 voxel (unit voxels here)
    margin = horiz(end) - horiz(plain) - 1e-6
    if abs(margin) < 1e-9:
        raise NearTie
    return (end, True, climbed) if margin > 0 else (plain, False, Q(0))
