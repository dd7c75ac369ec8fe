"""The re-solve kernel against a straightforward pure-numpy version of the same solve (on demand).

    python tests/benchmarks/bench_numpy.py [--frames 1000] [--repeat 3]

The numpy version below is written for this comparison only: vectorised over rows, it follows the
reference solve step by step (swept-box broad phase with the same rounding margins, Ericson's
slab test against the Minkowski-expanded voxel, minimum entry time with tied faces OR-ed and the
least voxel reported, edge entries blocking only when no face entry covers their axes, skin
back-off, slide, 3 passes, started-inside state). It handles the yardstick's worlds only: every
solid voxel a unit cube, one box per block type. Both run on the same rows of the yardstick
trace in this process; the kernel's results are checked equal to numpy's.
"""
from __future__ import annotations

import sys

import numpy as np

from _bench import Row, common_args, median_call, print_table, rate, yardstick_trace

from resweep.core import SolverSettings, open_trace, solve_rows
from resweep.core.check.rows import warm_up


def dense_grid(world):
    """Block types uint16 (nx, ny, nz) of the whole world and its first voxel."""
    S, lo = world.chunk_size, world.lo
    grid = np.zeros(tuple(world.hi - lo), np.uint16)
    for o, b in zip(world.chunk_origin, world.blocks):
        x, y, z = o - lo
        grid[x:x + S, y:y + S, z:z + S] = b
    return grid, lo


def voxel_range(a, b, vs, wlo, whi):
    """Inclusive voxel ranges touching [a, b] per row (the kernel's rounding margins), clamped."""
    ua, ub = a / vs, b / vs
    fa = np.floor(ua - (np.abs(ua) * 5e-7 + 1e-3))
    fb = np.floor(ub + (np.abs(ub) * 5e-7 + 1e-3))
    return np.maximum(np.clip(fa, wlo, whi - 1).astype(np.int64), wlo), np.minimum(np.clip(fb, wlo, whi - 1).astype(np.int64), whi - 1), (fa > whi - 1) | (fb < wlo)


def cells(lo3, hi3, empty):
    """Candidate voxels of each row's range: int64 (M, K, 3) and a validity mask (M, K)."""
    n = np.where(empty[:, None], 0, hi3 - lo3 + 1)
    k = n.prod(axis=1)
    K = max(int(k.max()), 1)
    idx = np.arange(K)[None, :]
    nz, ny = np.maximum(n[:, 2:3], 1), np.maximum(n[:, 1:2], 1)
    dz, dy, dx = idx % nz, (idx // nz) % ny, idx // (nz * ny)
    return lo3[:, None, :] + np.stack([dx, dy, dz], -1), idx < k[:, None]


def lookup(grid, glo, xyz, valid):
    inside = valid & (xyz >= glo).all(-1) & (xyz < glo + np.array(grid.shape)).all(-1)
    g = np.where(inside[..., None], xyz - glo, 0)
    return np.where(inside, grid[g[..., 0], g[..., 1], g[..., 2]], 0)


def numpy_solve(world, s, m, h, skin, passes=3, batch=16384):
    """The reference solve of M rows in numpy (unit-cube worlds, float64), in batches of rows so
    the (rows x candidate voxels) arrays stay small."""
    grid = dense_grid(world)
    parts = [_solve_batch(world, grid, s[a:a + batch], m[a:a + batch], h[a:a + batch], skin, passes)
             for a in range(0, len(s), batch)]
    return {k: np.concatenate([q[k] for q in parts]) for k in parts[0]}


def _solve_batch(world, dense, s, m, h, skin, passes):
    vs = world.voxel_size
    grid, glo = dense
    wlo, whi = world.lo, world.hi
    M = len(s)
    p, r = s.copy(), m.copy()
    toi = np.ones((M, passes))
    normal = np.zeros((M, passes, 3), np.int8)
    voxel = np.zeros((M, passes, 3), np.int64)
    block = np.full((M, passes), -1, np.int32)
    npass = np.zeros(M, np.int8)
    live = np.ones(M, bool)
    for k in range(passes):
        live &= (r != 0).any(axis=1)
        i = np.flatnonzero(live)
        if not len(i):
            break
        pk, rk, hk = p[i], r[i], h[i]
        a, b = np.minimum(pk, pk + rk) - hk, np.maximum(pk, pk + rk) + hk
        lo3, hi3, out3 = zip(*(voxel_range(a[:, q], b[:, q], vs, wlo[q], whi[q]) for q in range(3)))
        lo3, hi3 = np.stack(lo3, 1), np.stack(hi3, 1)
        xyz, valid = cells(lo3, hi3, np.any(np.stack(out3, 1), axis=1) | (hi3 < lo3).any(axis=1))
        t = lookup(grid, glo, xyz, valid)
        P, R, H = pk[:, None, :], rk[:, None, :], hk[:, None, :]
        blo = (xyz + 0.0) * vs - H
        bhi = (xyz + 1.0) * vs + H
        te = np.full(t.shape, -np.inf)
        tx = np.full(t.shape, np.inf)
        eax = np.zeros(t.shape, np.int64)
        ok = t != 0
        with np.errstate(divide="ignore", invalid="ignore"):
            for q in range(3):
                still = R[..., q] == 0
                ok &= ~still | ((blo[..., q] < P[..., q]) & (P[..., q] < bhi[..., q]))
                t1 = (blo[..., q] - P[..., q]) / R[..., q]
                t2 = (bhi[..., q] - P[..., q]) / R[..., q]
                t1, t2 = np.minimum(t1, t2), np.maximum(t1, t2)
                later = ~still & (t1 > te)
                tie = ~still & ~later & (t1 == te)
                eax = np.where(later, 1 << q, np.where(tie, eax | (1 << q), eax))
                te = np.where(later, t1, te)
                tx = np.where(~still & (t2 < tx), t2, tx)
        ok &= (te < tx) & (tx > 0) & (te < 1)
        # Started inside the box: block the least-penetration axis if the motion digs deeper.
        dlo, dhi = P - blo, bhi - P
        d = np.minimum(dlo, dhi)
        axis = np.argmin(d, axis=-1)  # first minimum, as the kernel's strict "<"
        sign = np.where(np.take_along_axis(dhi < dlo, axis[..., None], -1)[..., 0], 1, -1)
        digs = np.take_along_axis(np.broadcast_to(R, d.shape), axis[..., None], -1)[..., 0] * sign < 0
        inside = ok & (te < 0)
        ok &= ~inside | digs
        eax = np.where(inside, 1 << axis, eax)
        te = np.where(inside, 0.0, te)
        te = np.where(ok, te, np.inf)
        tmin = te.min(axis=1)
        hit = np.isfinite(tmin)
        tied = ok & (te == tmin[:, None])
        packed = np.where(tied, np.where(np.isin(eax, (1, 2, 4)), eax, 8 << eax), 0)
        packed = np.bitwise_or.reduce(packed, axis=1)
        faces = packed & 7
        axes = faces.copy()
        for mm in (3, 5, 6, 7):
            axes |= np.where((packed & (8 << mm) != 0) & (mm & faces == 0), mm, 0)
        key = np.where(tied, (xyz[..., 0] - wlo[0]) * 2**42 + (xyz[..., 1] - wlo[1]) * 2**21 + (xyz[..., 2] - wlo[2]), 2**62)
        first = key.argmin(axis=1)
        rows = np.arange(len(i))
        tm = np.where(hit, tmin, 1.0)
        toi[i, k] = tm + 0.0
        voxel[i[hit], k] = xyz[rows[hit], first[hit]]
        block[i[hit], k] = t[rows[hit], first[hit]]
        npass[i] += 1
        rest = 1.0 - tm
        newp = pk + rk * tm[:, None]
        blocked = (axes[:, None] >> np.arange(3)) & 1 == 1
        blocked &= hit[:, None]
        back = np.where(rk > 0, newp - skin, newp + skin)
        back = np.where((back - pk) * rk < 0, pk, back)
        normal[i, k] = np.where(blocked, np.where(rk > 0, -1, 1), 0)
        p[i] = np.where(hit[:, None], np.where(blocked, back, newp), pk + rk)
        r[i] = np.where(hit[:, None], np.where(blocked, 0.0, rk * rest[:, None]), 0.0)
        live[i] = hit
    # Started inside: deepest interior overlap of the start box with a solid voxel.
    lo3, hi3, out3 = zip(*(voxel_range(s[:, q] - h[:, q], s[:, q] + h[:, q], vs, wlo[q], whi[q]) for q in range(3)))
    lo3, hi3 = np.stack(lo3, 1), np.stack(hi3, 1)
    xyz, valid = cells(lo3, hi3, np.any(np.stack(out3, 1), axis=1) | (hi3 < lo3).any(axis=1))
    t = lookup(grid, glo, xyz, valid)
    C, H = s[:, None, :], h[:, None, :]
    over = np.minimum(C + H, (xyz + 1.0) * vs) - np.maximum(C - H, (xyz + 0.0) * vs)
    depth = np.where(t != 0, over.min(axis=-1), 0.0).max(axis=1, initial=0.0)
    state = np.where(depth > 0, 2, np.where((block >= 0).any(axis=1), 1, 0)).astype(np.int8)
    return dict(ref_end=p, npass=npass, state=state, toi=toi, normal=normal, voxel=voxel, block=block)


def run(args) -> list[Row]:
    warm_up("float64", "float32")
    path = yardstick_trace(args)
    with open_trace(path) as tr:
        blk = tr.frames(0, args.frames)
        world = tr.world()
    fr, col = np.nonzero(blk.active)
    s, m, h = (np.ascontiguousarray(a[fr, col], np.float64) for a in (blk.start, blk.motion, blk.half))
    st = SolverSettings()
    ref = solve_rows(world, s, m, s + m, h, st)
    e = ref.ref_end.copy()  # recorded = reference: the check's classification adds no queries
    got = numpy_solve(world, s, m, h, st.skin * world.voxel_size)
    diff = [k for k, v in got.items() if not np.array_equal(getattr(ref, k), v)]
    t_kernel = median_call(lambda: solve_rows(world, s, m, e, h, st), args.repeat)
    t_numpy = median_call(lambda: numpy_solve(world, s, m, h, st.skin * world.voxel_size), args.repeat)
    n = len(s)
    return [Row("kernel (solve_rows, all threads)", f"{t_kernel:.3f} s  ({rate(n, t_kernel)})"),
            Row("pure numpy, vectorised over rows", f"{t_numpy:.3f} s  ({rate(n, t_numpy)})"),
            Row("speed-up kernel / numpy", f"{t_numpy / t_kernel:.1f}x"),
            Row("numpy results equal the kernel's", "yes" if not diff else f"NO ({', '.join(diff)})")]


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=1000)
    args = ap.parse_args(argv)
    print_table(f"kernel vs pure numpy ({args.frames} frames x 200 entities)", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
