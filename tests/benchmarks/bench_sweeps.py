"""Long sweeps: cost per entity-frame of diagonal motions of 4, 16 and 64 voxels (run on demand).

    python tests/benchmarks/bench_sweeps.py [--rows 20000] [--repeat 5]

A floor with scattered pillars; each entity starts just above the floor and dashes diagonally
(slightly downward), recorded as if the engine ignored collision, so the check also walks the
recorded path. The kernel runs in this process with the default broad phase (scan short motions'
swept boxes, walk long ones) and with the swept-box scan alone. The swept box of a 64-voxel
diagonal holds ~40x the voxels of a 16-voxel one; the walk visits only those along the path
(target: 16 -> 64 voxels costs at most 6x per entity-frame). Results are checked identical.
"""
from __future__ import annotations

import sys

import numpy as np

from _bench import Row, common_args, median_call, print_table

from resweep.core import SolverSettings, VoxelWorld, chunks_from_dense, solve_rows, unit_cube_shapes
from resweep.core.check.rows import warm_up

LENGTHS = (4, 16, 64)
FIELDS = ("ref_end", "npass", "state", "toi", "normal", "voxel", "block", "points", "flags", "error")


def pillar_world(n=384, seed=1):
    """Unit-cube floor y in [0, 1) of n x n voxels, 1 column in 50 a pillar 1..8 voxels tall."""
    rng = np.random.default_rng(seed)
    g = np.zeros((n, 16, n), np.uint16)
    g[:, 0, :] = 1
    for x, z in rng.integers(0, n, (n * n // 50, 2)):
        g[x, 1:1 + rng.integers(1, 9), z] = 2
    origin, blocks = chunks_from_dense(g, (0, 0, 0), 16)
    return VoxelWorld(16, origin, blocks, unit_cube_shapes(), 1.0)


def rows(count, length, n=384, seed=2):
    rng = np.random.default_rng(seed)
    h = np.tile([0.3, 0.9, 0.3], (count, 1))
    s = np.column_stack([rng.uniform(96, n - 96, count), np.full(count, 1.0 + 0.9 + 0.05),
                         rng.uniform(96, n - 96, count)])
    d = np.column_stack([rng.choice([-1.0, 1.0], count), np.full(count, -0.05), rng.choice([-1.0, 1.0], count)])
    m = d / np.linalg.norm(d, axis=1, keepdims=True) * length
    return s, m, s + m, h


def run(args) -> list[Row]:
    warm_up()
    world = pillar_world()
    st = SolverSettings()
    cost = {}
    out = []
    for L in LENGTHS:
        s, m, e, h = rows(args.rows, L)
        got = {}
        for broad in ("auto", "scan"):
            got[broad] = solve_rows(world, s, m, e, h, st, broad=broad)
            cost[broad, L] = median_call(lambda: solve_rows(world, s, m, e, h, st, broad=broad), args.repeat) / args.rows
        same = all(np.array_equal(getattr(got["auto"], f), getattr(got["scan"], f), equal_nan=True) for f in FIELDS)
        tested = {b: got[b].candidates.sum() / args.rows for b in got}
        out.append(Row(f"{L:>2}-voxel diagonal: default / scan only", f"{cost['auto', L] * 1e6:.2f} / "
                       f"{cost['scan', L] * 1e6:.2f} us per entity-frame (boxes tested {tested['auto']:.0f} / "
                       f"{tested['scan']:.0f}; results {'identical' if same else 'DIFFER'})"))
    for broad, label in (("auto", "default"), ("scan", "scan only")):
        out.append(Row(f"16 -> 64 voxels cost ratio, {label}", f"{cost[broad, 64] / cost[broad, 16]:.2f}",
                       "<= 6" if broad == "auto" else ""))
    return out


def main(argv=None) -> int:
    ap = common_args(__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=20000)
    ap.set_defaults(repeat=5)
    args = ap.parse_args(argv)
    print_table("long sweeps through scattered pillars", run(args))
    return 0


if __name__ == "__main__":
    sys.exit(main())
