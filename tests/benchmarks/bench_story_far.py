"""Picture of a far-apart pair (on demand): a box tunnels 1,000 voxels along a long floor.

    python tests/benchmarks/bench_story_far.py [--repeat 5]

Prints the median time of ``render_picture`` (the first call, which meshes the chunks, timed on
its own), the chunks meshed against the world's chunk count, and the same for a near pair. The
world is a floor 2,048 x 1 x 32 voxels (chunk size 16): 256 chunks, of which only those along the
path and around the two ends should be meshed.
"""
from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


def make_trace(path: Path, reach: float) -> None:
    from resweep.core import chunks_from_dense, write_trace
    g = np.zeros((2048, 16, 32), np.uint16)
    g[:, 0, :] = 1
    g[20, 1:4, :] = 2  # a wall the reference stops at
    origin, blocks = chunks_from_dense(g, (0, 0, 0), 16)
    start = np.array([[[10.0, 1.6, 16.0]]])
    motion = np.array([[[reach, 0.0, 0.0]]])
    write_trace(path, chunk_size=16, chunk_origin=origin, chunk_blocks=blocks, entity_ids=np.array([1]),
                half_extents=np.full((1, 3), 0.5), time=np.zeros(1), start=start, motion=motion,
                end=start + motion, compression=None)


def run(path: Path, repeat: int) -> tuple[float, float, int, int]:
    import pyvista as pv
    from resweep.app.scene.picture import render_picture
    from resweep.app.scene.viewport import Viewport
    from resweep.core.analysis.frames import TraceSession
    with TraceSession(path) as s:
        s.frame_state(0)
        t = time.perf_counter()
        render_picture(s, 0, 1, size=(960, 540))
        first = time.perf_counter() - t
        times = []
        for _ in range(repeat):
            t = time.perf_counter()
            render_picture(s, 0, 1, size=(960, 540))
            times.append(time.perf_counter() - t)
        p = pv.Plotter(off_screen=True, window_size=(960, 540))
        vp = Viewport(p)
        vp.set_session(s)
        vp.show(s.frame_state(0), 0)
        vp.set_camera("story")
        built = vp.chunk_builds
        p.close()
        return first, statistics.median(times), built, len(s.world.chunk_origin)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as d:
        for name, reach in (("near pair (3 voxels)", 3.0), ("far pair (1,000 voxels)", 1000.0)):
            path = Path(d) / f"{int(reach)}.h5"
            make_trace(path, reach)
            first, med, built, total = run(path, args.repeat)
            print(f"{name:26s} first {first:6.2f} s   median {med:6.2f} s   chunks meshed {built}/{total}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
