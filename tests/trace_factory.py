"""Small purpose-built traces for tests: a flat floor world and helpers to write rows."""
from __future__ import annotations

import numpy as np

from resweep.core import chunks_from_dense, write_trace


def floor_world(nx=16, nz=16, wall_x=8, wall_len=16):
    """Grid (nx, 4, nz): floor y in [0, 1) of unit cubes; a one-voxel wall at x = wall_x, y 1..3,
    z 0..wall_len-1. Returns (chunk_origin, chunk_blocks) with chunk size 8."""
    g = np.zeros((nx, 8, nz), np.uint16)
    g[:, 0, :] = 1
    if wall_x is not None:
        g[wall_x, 1:4, :wall_len] = 2
    return chunks_from_dense(g, (0, 0, 0), 8)


def write_rows(path, start, motion, end, active=None, half=0.5, world=None, **kw):
    """Write a trace with F frames and N entities from (F, N, 3) arrays; cubes of ``half``."""
    start = np.asarray(start, float)
    F, N = start.shape[:2]
    origin, blocks = world if world is not None else floor_world()
    write_trace(path, chunk_size=8, chunk_origin=origin, chunk_blocks=blocks,
                entity_ids=np.arange(1, N + 1) * 10, half_extents=np.full((N, 3), half),
                time=np.arange(F) / 60.0, start=start, motion=np.asarray(motion, float),
                end=np.asarray(end, float), active=active, **kw)
    return path
