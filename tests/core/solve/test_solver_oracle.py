"""The float64 reference solve against an exact-arithmetic oracle written here with fractions.Fraction.

The oracle implements the published method (Ericson 2005, Real-Time Collision Detection, sec. 5.5
and the slab test of sec. 5.3.3; sweep-and-slide is common practice) as the solver documents it
(core/nb_sweep.py):
- every solid block box is a candidate (no broad phase needed in exact arithmetic);
- the moving box is a ray from its centre against each box grown by the half extents; contact needs
  overlap of open interiors: entry te < exit tx, tx > 0, te < 1;
- a box the sweep starts inside (te < 0) blocks its least-penetration axis at t = 0 when the motion
  digs deeper along it, and is ignored when the motion leaves it (nb_sweep.inside_axis; its tie
  rules, which the docstring leaves open, are read from the code: the lowest axis wins a tie of
  depths, and a centred box counts its lower face as the nearer one);
- the minimum entry time wins; candidates tied at it entering one slab (a face) block that axis,
  those entering several slabs at once (an edge or corner) block them only when no tied face
  already blocks one of them; the hit voxel is the smallest (x, y, z, box index);
- the box moves to the contact, stops ``skin`` short along each blocked axis but never behind the
  pass start, the blocked components are removed, the rest of the motion is scaled by 1 - t and the
  next pass runs, up to ``passes`` passes.

Inputs lie on a dyadic grid (multiples of 1/16 voxel, dyadic voxel sizes and skins), so they reach
float64 exactly and every face coordinate is exact. Float rounding then enters only through slab
times (a quotient) and the positions computed from them.

Discard rule. Each oracle value carries how float64 would hold it: EXACT (float64 equals it),
ROUNDED (the correctly rounded result of one operation on EXACT operands) or INEXACT. A comparison
the method branches on is trusted when both sides are EXACT; when they are exactly equal and both
at most ROUNDED (correct rounding maps equal values to equal floats) or are the same slab time of
the same pass (same float operands); and when they differ by more than 1e-9 (relative to their
size, at least 1). Any other comparison is a tie or near-tie float rounding could flip: the row is
discarded and counted. The discards must stay a minority.
"""
from __future__ import annotations

from collections import Counter
from fractions import Fraction

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from solver_helpers import NTYPES, SHAPE_LISTS, solve, world_from_grid

EXACT, ROUNDED, INEXACT = 0, 1, 2
EPS = Fraction(1, 10**9)
TOL = 1e-9  # world units / fractions of a pass, for float-vs-exact agreement


class NearTie(Exception):
    """A branch of the method that float rounding could decide differently."""


def _exact(q: Fraction) -> bool:
    return Fraction(float(q)) == q  # float(Fraction) rounds correctly (integer true division)


class X:
    """An exact value with the float64 status of the same computation (see module docstring)."""

    __slots__ = ("q", "st", "key")

    def __init__(self, q, st=EXACT, key=None):
        self.q, self.st, self.key = Fraction(q), st, key

    def _op(self, other, q):
        if self.st == EXACT and other.st == EXACT:
            return X(q, EXACT if _exact(q) else ROUNDED)
        return X(q, INEXACT)

    def __add__(self, o):
        return self._op(o, self.q + o.q)

    def __sub__(self, o):
        return self._op(o, self.q - o.q)

    def __mul__(self, o):
        return self._op(o, self.q * o.q)

    def __truediv__(self, o):
        return self._op(o, self.q / o.q)


ZERO, ONE = X(0), X(1)


def cmp(a: X, b: X) -> int:
    """Sign of a - b, or NearTie when float64 could see it differently."""
    d = a.q - b.q
    sign = (d > 0) - (d < 0)
    if a.st == EXACT and b.st == EXACT:
        return sign
    if d == 0:
        if (a.key is not None and a.key == b.key) or (a.st <= ROUNDED and b.st <= ROUNDED):
            return 0
        raise NearTie
    if abs(d) <= EPS * max(1, abs(a.q), abs(b.q)):
        raise NearTie
    return sign


def _extreme(vals, sign):
    """Largest (sign 1) or smallest (sign -1) value; a near-tie for the extreme whose float order is
    unknown makes the result INEXACT (its value is still right to far below 1e-9)."""
    best = max(vals, key=lambda v: sign * v.q)
    for v in vals:
        if v is not best:
            try:
                cmp(v, best)
            except NearTie:
                return X(best.q, INEXACT)
    return best


class Oracle:
    """Exact solve of one world: solids is a list of (x, y, z, block type)."""

    def __init__(self, solids, vs, skin_voxels, passes):
        self.vs = X(vs)
        self.skin = X(Fraction(skin_voxels) * Fraction(vs))
        assert self.skin.st == EXACT and _exact(self.skin.q)
        self.passes = passes
        self.boxes = []  # (x, y, z, global box index, type, box corners)
        first = np.cumsum([0] + [len(s) for s in SHAPE_LISTS])
        for x, y, z, t in solids:
            for j, b in enumerate(SHAPE_LISTS[t]):
                self.boxes.append((x, y, z, int(first[t]) + j, t, [Fraction(c) for c in b]))

    def _grown(self, h):
        """Each candidate with its Minkowski-grown box, world units."""
        out = []
        for x, y, z, bi, t, c in self.boxes:
            v = (x, y, z)
            lo = [(X(v[a]) + X(c[a])) * self.vs - h[a] for a in range(3)]
            hi = [(X(v[a]) + X(c[a + 3])) * self.vs + h[a] for a in range(3)]
            assert all(e.st == EXACT for e in lo + hi)
            out.append(((x, y, z, bi), t, lo, hi))
        return out

    @staticmethod
    def _inside_axis(p, r, lo, hi):
        """Blocked-axis bit for a box the pass starts inside, or 0 when the motion leaves it."""
        best = axis = None
        for a in range(3):
            dlo, dhi = p[a] - lo[a], hi[a] - p[a]
            up = cmp(dhi, dlo) < 0  # the upper face is the nearer one
            d = dhi if up else dlo
            if best is None or cmp(d, best) < 0:
                best, axis, outward = d, a, (1 if up else -1)
        return (1 << axis) if r[axis].q * outward < 0 else 0

    def _sweep(self, p, r, grown):
        """One pass: (tmin, blocked axes, hit voxel, hit type); axes 0 when clear."""
        hits = []
        for key, t, lo, hi in grown:
            entry, exits, never = [], [], False
            for a in range(3):
                if r[a].q == 0:
                    if not (cmp(lo[a], p[a]) < 0 and cmp(p[a], hi[a]) < 0):
                        never = True
                        break
                    continue
                t_lo = lo[a] - p[a]
                t_lo = t_lo / r[a]
                t_hi = (hi[a] - p[a]) / r[a]
                t_lo.key, t_hi.key = (a, lo[a].q), (a, hi[a].q)
                near, far = (t_lo, t_hi) if r[a].q > 0 else (t_hi, t_lo)
                entry.append((a, near))
                exits.append(far)
            if never:
                continue
            te = _extreme([e for _, e in entry], 1)
            tx = _extreme(exits, -1)
            if cmp(te, tx) >= 0 or cmp(tx, ZERO) <= 0 or cmp(te, ONE) >= 0:
                continue
            if cmp(te, ZERO) < 0:
                axes = self._inside_axis(p, r, lo, hi)
                if not axes:
                    continue
                te = ZERO
            else:
                axes = sum(1 << a for a, e in entry if cmp(e, te) == 0)
            hits.append((te, axes, key, t))
        if not hits:
            return ONE, 0, None, -1
        tmin = min(hits, key=lambda h: h[0].q)[0]
        tied = [h for h in hits if cmp(h[0], tmin) == 0]
        # Face entries (one slab entered last) block their axis. An edge or corner entry (several
        # slabs at the same instant) blocks its axes only if no face entry at that instant blocks
        # one of them: blocking that axis alone leaves the box only touching the edge's block.
        faces = 0
        for h in tied:
            if bin(h[1]).count("1") == 1:
                faces |= h[1]
        axes = faces
        for h in tied:
            if bin(h[1]).count("1") > 1 and not h[1] & faces:
                axes |= h[1]
        first = min(tied, key=lambda h: h[2])
        return tmin, axes, first[2][:3], first[3]

    def started_inside(self, p, h):
        return any(all(cmp(lo[a], p[a]) < 0 and cmp(p[a], hi[a]) < 0 for a in range(3))
                   for _, _, lo, hi in self._grown(h))

    def solve(self, p0, m, half):
        """Exact solve of one row (world units). Returns a dict shaped like one RowResults row."""
        P = self.passes
        h = [X(c) for c in half]
        p = [X(c) for c in p0]
        r = [X(c) for c in m]
        grown = self._grown(h)
        out = {"toi": [Fraction(1)] * P, "normal": [[0, 0, 0] for _ in range(P)], "voxel": [None] * P,
               "block": [-1] * P, "points": [None] * (P + 1)}
        hit = False
        run = 0
        for k in range(P):
            out["points"][k] = [c.q for c in p]
            if all(c.q == 0 for c in r):
                break
            run += 1
            tmin, axes, vox, btype = self._sweep(p, r, grown)
            out["toi"][k] = tmin.q
            if not axes:
                p = [p[a] + r[a] for a in range(3)]
                break
            hit = True
            out["voxel"][k], out["block"][k] = vox, btype
            rest = ONE - tmin
            for a in range(3):
                q = p[a] + r[a] * tmin
                if axes & (1 << a):
                    out["normal"][k][a] = -1 if r[a].q > 0 else 1
                    q = q - self.skin if r[a].q > 0 else q + self.skin
                    if cmp(q, p[a]) * (1 if r[a].q > 0 else -1) < 0:  # never behind the pass start
                        q = p[a]
                    r[a] = ZERO
                else:
                    r[a] = r[a] * rest
                p[a] = q
        for k in range(run, P + 1):
            out["points"][k] = [c.q for c in p]
        out["npass"] = run
        out["end"] = [c.q for c in p]
        out["state"] = 2 if self.started_inside([X(c) for c in p0], h) else (1 if hit else 0)
        return out


def _compare(res, i, want):
    """Assert row i of RowResults equals the oracle's answer."""
    ctx = f"row {i}: oracle {want}"
    assert res.state[i] == want["state"], ctx
    assert res.npass[i] == want["npass"], ctx
    assert np.allclose(res.toi[i], [float(t) for t in want["toi"]], rtol=0, atol=TOL), ctx
    assert res.normal[i].tolist() == want["normal"], ctx
    assert res.block[i].tolist() == want["block"], ctx
    for k, v in enumerate(want["voxel"]):
        if v is not None:
            assert res.voxel[i, k].tolist() == list(v), ctx
    pts = np.array([[float(c) for c in pt] for pt in want["points"]])
    assert np.allclose(res.points[i], pts, rtol=0, atol=TOL), ctx
    assert np.allclose(res.ref_end[i], [float(c) for c in want["end"]], rtol=0, atol=TOL), ctx


@st.composite
def scenes(draw):
    """A small world of a few solid voxels plus rows aimed around them (all inputs dyadic)."""
    S = draw(st.sampled_from([2, 4, 8]))
    n = [draw(st.integers(2, 5)) for _ in range(3)]
    origin = [draw(st.integers(-1, 0)) * S for _ in range(3)]
    types = st.sampled_from([1, 1, 1] + list(range(2, NTYPES)))
    cells = draw(st.lists(st.tuples(st.integers(0, n[0] - 1), st.integers(0, n[1] - 1),
                                    st.integers(0, n[2] - 1), types),
                          min_size=1, max_size=10, unique_by=lambda c: c[:3]))
    vs = draw(st.sampled_from([1.0, 1.0, 0.5, 2.0]))
    skin = draw(st.sampled_from([2.0**-10, 2.0**-6, 0.0]))
    passes = draw(st.integers(1, 4))
    rows = []
    for _ in range(8):
        ax, ay, az, _t = draw(st.sampled_from(cells))
        a16 = [(ax + origin[0]) * 16, (ay + origin[1]) * 16, (az + origin[2]) * 16]
        h16 = [draw(st.integers(1, 8)) for _ in range(3)]
        mode = draw(st.sampled_from(["free", "aim", "aim", "corner", "touch", "embedded"]))
        s16 = [a16[a] + draw(st.integers(-32, 48)) for a in range(3)]
        if mode == "touch":  # a face of the box touches a face of the anchor cell
            a = draw(st.integers(0, 2))
            s16[a] = a16[a] - h16[a] if draw(st.booleans()) else a16[a] + 16 + h16[a]
        elif mode == "embedded":  # starts inside the anchor, often exactly centred on some axes
            s16 = [a16[a] + 8 + draw(st.integers(-2, 2)) for a in range(3)]
        if mode in ("aim", "corner"):
            # Aim at a point of the anchor cell, or exactly at a corner of the cell grown by the
            # half extents (the motion then grazes an edge or ends touching).
            if mode == "aim":
                target = [a16[a] + draw(st.integers(0, 16)) for a in range(3)]
            else:
                target = [a16[a] + draw(st.sampled_from([-h16[a], 16 + h16[a]])) for a in range(3)]
            k = draw(st.sampled_from([2, 3, 4] if mode == "aim" else [2, 4]))
            m16 = [(target[a] - s16[a]) * k // 2 for a in range(3)]
        else:
            m16 = [draw(st.integers(-48, 48)) for _ in range(3)]
        m16 = [0 if draw(st.integers(0, 5)) == 0 else c for c in m16]
        rows.append(([c / 16 * vs for c in s16], [c / 16 * vs for c in m16], [c / 16 * vs for c in h16]))
    return S, n, origin, cells, vs, skin, passes, rows


def test_float64_solve_matches_exact_oracle():
    stats = Counter()

    @settings(max_examples=200, deadline=None, database=None, derandomize=True,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
    @given(scenes())
    def check(scene):
        S, n, origin, cells, vs, skin, passes, rows = scene
        grid = np.zeros(n, np.uint16)
        for x, y, z, t in cells:
            grid[x, y, z] = t
        world = world_from_grid(grid, origin, S, vs)
        start, motion, half = (np.array([row[j] for row in rows]) for j in range(3))
        res = solve(world, start, motion, half, skin=skin, passes=passes)
        oracle = Oracle([(x + origin[0], y + origin[1], z + origin[2], t) for x, y, z, t in cells],
                        vs, skin, passes)
        for i, (s, m, h) in enumerate(rows):
            try:
                want = oracle.solve(s, m, h)
            except NearTie:
                stats["discarded"] += 1
                continue
            _compare(res, i, want)
            stats["compared"] += 1
            stats[("state", want["state"])] += 1
            stats["slid"] += int(want["npass"] >= 2 and want["block"][0] >= 0)

    check()
    total = stats["compared"] + stats["discarded"]
    print(dict(stats))
    assert stats["discarded"] <= 0.15 * total, dict(stats)
    # Each behaviour is exercised: clear rows, hits, starts inside solid and slides.
    assert min(stats[("state", 0)], stats[("state", 1)], stats[("state", 2)]) >= 100, dict(stats)
    assert stats["slid"] >= 100, dict(stats)
