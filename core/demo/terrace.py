"""Demo scenario "terrace": a stone yard with slabs, a ledge, a wall, pillars, a low beam and
posts, recorded by the toy engines of ``toy_models.py`` (our own invented scenario).

- ``terrace_axis.h5``: the per-axis stepper (up axis first, 0.6 step, on-ground flag); its
  step-up forgets the ceiling check, so the ducker pokes into the beam (penetration, step_mismatch).
- ``terrace_pushout.h5``: the substep pusher (0.5-voxel substeps); its on-ground flag lags a
  frame, so each jump and landing shows as grounded_mismatch.
"""
from __future__ import annotations

import numpy as np

from resweep.core.demo.toy_models import AxisStepper, SubstepPusher
from resweep.core.world.shapes import shapes_from_lists
from resweep.core.world.voxel_world import VoxelWorld, chunks_from_dense

STONE, SLAB, LEDGE, POST = 1, 2, 3, 4
NAMES = ("air", "stone", "slab", "ledge", "post")
SHAPES = shapes_from_lists([
    [], [(0.0, 0.0, 0.0, 1.0, 1.0, 1.0)],
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0)],            # slab: 0.5 high
    [(0.0, 0.0, 0.0, 1.0, 0.5625, 1.0)],         # ledge: 9/16 high (a 0.6 step climbs it, 0.5 does not)
    [(0.375, 0.0, 0.375, 0.625, 1.0, 0.625)],    # post: a quarter voxel thick
], NAMES)
FPS = 60.0
GRAVITY = 30.0      # voxels / s^2
STICK = 0.05        # voxels pushed down each grounded frame
HALF = (0.3, 0.9, 0.3)


def terrace_grid() -> np.ndarray:
    """Block types uint16 (32, 10, 32) index [x, y, z], y up; the yard floor's top is y = 2."""
    g = np.zeros((32, 10, 32), np.uint16)
    g[:, 0:2, :] = STONE
    g[6, 2, 2:10] = SLAB
    g[10, 2, 2:10] = LEDGE
    g[14, 2, 2:10] = STONE                          # a one-voxel wall: only a 1.0 step climbs it
    g[10, 2, 14:20] = LEDGE                         # the same ledge...
    g[9, 4, 14:20] = STONE                          # ...behind a low beam (bottom at y = 4)
    for x, z in ((20, 4), (23, 7), (26, 10), (20, 12), (24, 16)):
        g[x, 2:4, z] = STONE                        # pillars: corners for diagonal walkers
    g[20, 2:5, 22:30] = STONE                       # a thin wall for the runner
    for z in range(22, 30, 3):
        g[8, 2, z] = POST
    return g


def _world():
    origin, blocks = chunks_from_dense(terrace_grid(), (0, 0, 0), 16)
    return origin, blocks, VoxelWorld(16, origin, blocks, SHAPES, 1.0)


def _axis_actors():
    """(id, name, start, controller(frame) -> (vx, vz) or ("jump", vy, vx, vz))."""
    return [
        (201, "stepper", (2.5, 2.901, 5.5), lambda f: (4.0, 0.0)),
        (202, "diagonal", (17.5, 2.901, 1.5), lambda f: (2.0, 2.0) if f % 160 < 80 else (-2.0, 2.2)),
        (203, "ducker", (7.5, 2.901, 17.0), lambda f: (2.0, 0.0)),
        (204, "jumper", (4.5, 2.901, 28.0), lambda f: ("jump", 8.0, 1.5, -1.0) if f % 45 == 5 else (1.5, -1.0)),
    ]


def _pushout_actors():
    return [
        (301, "runner", (12.5, 2.901, 25.5), lambda f: (72.0, 0.0) if f % 60 < 30 else (-72.0, 0.0)),
        (302, "weaver", (3.5, 2.901, 22.55), lambda f: (24.0, 0.0) if f % 80 < 40 else (-24.0, 0.0)),
        (303, "hopper", (4.5, 2.901, 12.5), lambda f: ("jump", 9.0, 0.0, 2.0) if f % 40 == 3 else (0.0, 2.0)),
        (304, "drifter", (17.5, 2.901, 2.5), lambda f: (2.5, 2.5) if f % 100 < 50 else (-2.5, -2.0)),
    ]


def _wanted(cmd, v, on_ground, dt):
    """Motion (3-list) of one frame from a controller command and the vertical speed ``v[1]``."""
    if isinstance(cmd[0], str):
        v[1] = cmd[1] if on_ground else v[1]
        vx, vz = cmd[2], cmd[3]
    else:
        vx, vz = cmd
    v[1] -= GRAVITY * dt
    my = -STICK if on_ground and v[1] <= 0 else v[1] * dt
    return [vx * dt, my, vz * dt]


def simulate(engine: str, frames: int = 240) -> dict:
    """Run the toy engine ``"axis"`` or ``"pushout"`` on the terrace; keyword arguments of write_trace."""
    origin, blocks, world = _world()
    actors = _axis_actors() if engine == "axis" else _pushout_actors()
    eng = AxisStepper() if engine == "axis" else SubstepPusher()
    N = len(actors)
    out = {k: np.zeros((frames, N, 3)) for k in ("start", "motion", "end")}
    flags = np.zeros((frames, N), bool)
    pos = [list(a[2]) for a in actors]
    vel = [[0.0, 0.0, 0.0] for _ in actors]
    ground = [True] * N  # what the engine itself believes (the lagging flag is only what it records)
    from resweep.core.demo.toy_models import grounded
    for f in range(frames):
        for n, (_, _, _, ctl) in enumerate(actors):
            m = _wanted(ctl(f), vel[n], ground[n], 1 / FPS)
            if engine == "axis":
                end, flag = eng.move(world, pos[n], m, HALF)
            else:
                end, flag = eng.move(world, pos[n], m, HALF, key=n)
            out["start"][f, n], out["motion"][f, n], out["end"][f, n] = pos[n], m, end
            flags[f, n] = flag
            ground[n] = grounded(world, end, HALF, eng.skin, 1)
            if ground[n] and vel[n][1] < 0:
                vel[n][1] = 0.0
            pos[n] = list(end)
    return dict(chunk_size=16, chunk_origin=origin, chunk_blocks=blocks.astype(np.uint8), shapes=SHAPES,
                entity_ids=np.array([a[0] for a in actors], np.int64), entity_names=[a[1] for a in actors],
                half_extents=np.tile(HALF, (N, 1)), time=np.arange(frames) / FPS, grounded=flags, **out)


TERRACE_FILES = {
    "terrace_axis.h5": dict(engine="axis", title="Terrace: per-axis stepper (y first, 0.6 step), ceiling check missing",
                            producer="resweep toy per-axis engine"),
    "terrace_pushout.h5": dict(engine="pushout", title="Terrace: substep pusher (0.5 voxel), on-ground flag lags",
                               producer="resweep toy substep push-out engine"),
}
