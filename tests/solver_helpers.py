"""Shared helpers for the reference-solver tests: small worlds, block shapes and a one-call solve.

Every box in ``SHAPE_LISTS`` has corners on multiples of 1/8 voxel, so with a dyadic voxel size
all face coordinates are exact in float64 (and float32), which the exact oracle relies on.
"""
from __future__ import annotations

import numpy as np

from resweep.core import SolverSettings, VoxelWorld, chunks_from_dense, shapes_from_lists, solve_rows

CUBE = (0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
#: Block types, voxel-local boxes (x0, y0, z0, x1, y1, z1); type 0 is air.
SHAPE_LISTS = [
    [],                                                      # 0 air
    [CUBE],                                                  # 1 full cube
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0)],                        # 2 bottom half slab
    [(0.375, 0.0, 0.375, 0.625, 1.5, 0.625)],                # 3 post reaching half a voxel up
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0), (0.0, 0.5, 0.5, 1.0, 1.0, 1.0)],  # 4 step: two boxes
    [(0.25, -0.5, 0.25, 0.75, 1.0, 0.75)],                   # 5 hanging block reaching below
]
NTYPES = len(SHAPE_LISTS)


def shape_table(lists=None):
    return shapes_from_lists(SHAPE_LISTS if lists is None else lists)


def world_from_grid(grid, origin=(0, 0, 0), chunk_size=8, voxel_size=1.0, shapes=None,
                    chunk_order=None) -> VoxelWorld:
    """VoxelWorld of a dense grid of block types (index [x, y, z]); ``grid[0, 0, 0]`` sits at voxel
    ``origin`` (multiple of ``chunk_size``). ``chunk_order`` permutes the chunk list."""
    co, cb = chunks_from_dense(np.asarray(grid, np.uint16), origin, chunk_size)
    if chunk_order is not None:
        co, cb = co[chunk_order], cb[chunk_order]
    return VoxelWorld(chunk_size, co, cb, shape_table() if shapes is None else shapes, voxel_size)


def one_block_world(box, voxel, voxel_size=1.0, chunk_size=8) -> VoxelWorld:
    """World holding a single solid block at integer ``voxel`` whose shape is one local ``box``."""
    v = np.asarray(voxel, np.int64)
    S = int(chunk_size)
    origin = (v // S) * S
    blocks = np.zeros((1, S, S, S), np.uint16)
    lx, ly, lz = v - origin
    blocks[0, lx, ly, lz] = 1
    return VoxelWorld(S, origin[None, :], blocks, shapes_from_lists([[], [tuple(box)]]), voxel_size)


def solve(world, start, motion, half, skin=0.0, passes=1, precision="float64"):
    """Reference solve of rows (recorded end = start + motion); skin in voxels."""
    start = np.asarray(start, float).reshape(-1, 3)
    motion = np.asarray(motion, float).reshape(-1, 3)
    half = np.broadcast_to(np.asarray(half, float), start.shape)
    st = SolverSettings(skin=skin, passes=passes, precision=precision)
    return solve_rows(world, start, motion, start + motion, half, st)


def random_grid(rng, shape, density, types=range(1, NTYPES)):
    """Dense grid with each cell solid with probability ``density``, type drawn from ``types``."""
    types = np.asarray(list(types), np.uint16)
    solid = rng.random(shape) < density
    return np.where(solid, rng.choice(types, size=shape), 0).astype(np.uint16)
