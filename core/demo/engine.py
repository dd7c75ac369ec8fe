"""The toy engine that records the demo traces: deliberately flawed the way quick voxel engines
often are (common practice, described from memory). It moves the box by the whole motion, then
pushes it out of overlapping blocks one at a time along the axis of least penetration, with no
sweep, and treats every block as a unit cube (so slabs and fence posts are wrong).
"""
from __future__ import annotations

import numpy as np

from resweep.core.world.voxel_world import VoxelWorld

AIR = 0


def push_out_step(world: VoxelWorld, p, m, h, dtype):
    """One flawed push-out step of the box (centre ``p``, half extents ``h``, float (3,) in ``dtype``)
    by motion ``m``: returns (end float (3,), pushed axes bool (3,))."""
    q = (p + m).astype(dtype)
    pushed = np.zeros(3, bool)
    for _ in range(4):
        lo = np.floor(q - h).astype(np.int64)
        hi = np.floor(q + h).astype(np.int64)
        hit = None
        for x in range(lo[0], hi[0] + 1):
            for y in range(lo[1], hi[1] + 1):
                for z in range(lo[2], hi[2] + 1):
                    if hit is None and world.block_at(x, y, z) != AIR:
                        v = np.array([x, y, z], dtype)
                        over = np.minimum(q + h, v + 1) - np.maximum(q - h, v)
                        if (over > 0).all():
                            hit = (v, over)
        if hit is None:
            break
        v, over = hit
        a = int(np.argmin(over))
        side = 1 if q[a] > v[a] + dtype(0.5) else -1
        q[a] = q[a] + dtype(side) * over[a]
        pushed[a] = True
    return q, pushed
