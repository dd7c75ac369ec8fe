"""Traces for the farm tests: varied recorded runs in the demo quarry, and files broken on purpose."""
from __future__ import annotations

import h5py
import numpy as np

from resweep.core import write_trace
from resweep.core.demo.quarry import SHAPES, quarry_grid
from resweep.core.world.voxel_world import chunks_from_dense

#: Edits at the frames the range tests cut at (0, 12, 30) and just after (13, 31), and at the end.
EDIT_FRAMES = (0, 12, 13, 30, 31, 59)


def soak_run(path, seed: int, frames: int = 60, n: int = 7, edits: bool = True) -> str:
    """A bot-like run: boxes drifting over the quarry, some of them dragged straight through rock
    (the recorded end ignores solids), a few teleports (discontinuities) and idle rows, with voxel
    edits at :data:`EDIT_FRAMES` next to the boxes' paths. Entity ids are not sorted, so the
    column order and the id order differ."""
    rng = np.random.default_rng(seed)
    origin, blocks = chunks_from_dense(quarry_grid(), (0, 0, 0), 16)
    pos = rng.uniform([4, 5, 4], [60, 9, 44], (n, 3))
    start = np.empty((frames, n, 3))
    end = np.empty((frames, n, 3))
    motion = rng.normal(0, 0.35, (frames, n, 3))
    motion[..., 1] -= 0.2
    for f in range(frames):
        start[f] = pos
        jump = rng.random(n) < 0.05  # a teleport: this start is not the previous end
        start[f, jump] += rng.normal(0, 1.0, (int(jump.sum()), 3))
        end[f] = start[f] + motion[f] * rng.choice([1.0, 0.5], (n, 1), p=[0.8, 0.2])
        pos = end[f]
    rows = []
    for f in (f for f in EDIT_FRAMES if f < frames):  # dig the floor under one box and put stone in front of it
        x, y, z = np.floor(start[f, f % n]).astype(int)
        dx, dz = np.sign(motion[f, f % n, [0, 2]]).astype(int)
        rows += [[f, x, 3, z, 0], [f, x + dx, y, z + dz, 1], [f, x + dx, y + 1, z + dz, 1]]
    if not edits:
        rows = []
    write_trace(path, chunk_size=16, chunk_origin=origin, chunk_blocks=blocks, shapes=SHAPES,
                edits=np.array(rows, np.int64).reshape(-1, 5), entity_ids=rng.permutation(np.arange(500, 500 + n)),
                half_extents=np.tile([0.3, 0.8, 0.3], (n, 1)), time=np.arange(frames) / 30.0,
                start=start, motion=motion, end=end, active=rng.random((frames, n)) < 0.92,
                title="soak", producer="tests")
    return str(path)


def broken_files(folder) -> dict[str, str]:
    """Three bad traces in ``folder``: name -> a word their one-line reason must contain."""
    (folder / "notes.h5").write_text("not a trace\n")
    good = soak_run(folder / "tmp_good.h5", seed=99, frames=10, n=2)
    data = (folder / "tmp_good.h5").read_bytes()
    (folder / "cut.h5").write_bytes(data[: len(data) // 3])
    (folder / "tmp_good.h5").rename(folder / "future.h5")
    with h5py.File(folder / "future.h5", "r+") as f:
        f.attrs["version"] = np.int64(7)
    del good
    return {"notes.h5": "HDF5", "cut.h5": "truncated", "future.h5": "version"}
