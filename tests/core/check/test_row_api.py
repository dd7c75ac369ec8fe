"""The row API (core/check/rows.solve_rows) with inputs as callers hand them in."""
from __future__ import annotations

import numpy as np

from resweep.core import SolverSettings
from resweep.core.check import nb_rows
from resweep.core.check.rows import solve_rows
from resweep.core.world.shapes import unit_cube_shapes
from resweep.core.world.voxel_world import VoxelWorld


def test_read_only_inputs_reuse_the_loaded_kernels():
    # One block at voxel (0, 0, 0); a box of half 0.25 falls onto it from y = 2 (worked by hand:
    # block top y = 1, centre stops 0.25 + skin 0.001 above it, at y = 1.251).
    w = VoxelWorld(1, np.zeros((1, 3), np.int64), np.ones((1, 1, 1, 1), np.uint16), unit_cube_shapes(2))
    start = np.array([[0.5, 2.0, 0.5]])
    motion = np.array([[0.0, -2.0, 0.0]])
    half = np.broadcast_to(np.full(3, 0.25), (1, 3))  # read-only, as broadcast views are
    assert not half.flags.writeable
    solve_rows(w, start, motion, start + motion, np.full((1, 3), 0.25), SolverSettings())  # writable: loaded
    before = set(nb_rows.check_rows.signatures)
    res = solve_rows(w, start, motion, start + motion, half, SolverSettings())
    assert set(nb_rows.check_rows.signatures) == before  # no second specialisation compiled
    assert res.ref_end[0].tolist() == [0.5, 1.251, 0.5]
