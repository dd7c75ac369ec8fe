"""Our own demo scenario, a block quarry, recorded with the toy engine (``engine.py``).

Its traces hold real divergences: a dash through a one-block wall tunnels, walking against the
block order snags on floor seams, a diagonal push against a wall loses its slide, and a post
clips into a raised fence.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from resweep.core.world.shapes import shapes_from_lists
from resweep.core.world.voxel_world import VoxelWorld, chunks_from_dense
from resweep.core.demo.engine import AIR, push_out_step
from resweep.core.format.writer import write_trace

STONE, DIRT, SLAB, FENCE, PLANK, GRAVEL = range(1, 7)
BLOCK_NAMES = ("air", "stone", "dirt", "slab", "fence post", "plank wall", "gravel")
CUBE = (0.0, 0.0, 0.0, 1.0, 1.0, 1.0)
SHAPES = shapes_from_lists([
    [], [CUBE], [CUBE],
    [(0.0, 0.0, 0.0, 1.0, 0.5, 1.0)],               # slab: lower half
    [(0.375, 0.0, 0.375, 0.625, 1.5, 0.625)],       # fence post: reaches half a voxel above its cell
    [CUBE], [CUBE],
], BLOCK_NAMES)

FPS = 60.0
GRAVITY = 30.0  # voxels / s^2
GROUND_STICK = 0.05  # voxels pushed down each grounded frame to stay glued to the floor


def quarry_grid() -> np.ndarray:
    """Block types, uint16 (64, 24, 48) index [x, y, z], origin (0, 0, 0), y up."""
    g = np.zeros((64, 24, 48), np.uint16)
    g[:, 0:3, :] = STONE
    g[:, 3, :] = DIRT                                   # long floor of many blocks, top at y = 4
    g[36:56, 1:4, 8:32] = AIR                           # the quarry pit, floor top at y = 1
    g[36:56, 0, 8:32] = GRAVEL
    for s in range(3):                                  # staircase down the pit's west side
        g[36 + s, 1:4 - s, 8:32] = STONE
    g[20, 4:8, 0:20] = PLANK                            # one-block-thick wall
    g[4:12, 4, 30:34] = SLAB                            # a row of slabs
    g[4:16, 4, 40] = FENCE                              # a fence line, 1.5 voxels tall
    return g


class _Actor:
    def __init__(self, eid, name, pos, half, script):
        self.id, self.name, self.half, self.script = eid, name, np.asarray(half, float), script
        self.p = np.asarray(pos, float)
        self.v = np.zeros(3)
        self.grounded = False


def _scripts():
    """Per-actor controllers: f(frame, actor) -> wanted horizontal velocity (vx, vz) in voxels/s,
    plus optional events. Returns the actor list."""

    def walker(f, a):  # walks -z along the long floor, against the engine's block order: snags
        return (0.0, -4.0)

    def dasher(f, a):  # walks toward the thin wall, dashes 50 voxels in one frame at frame 40
        if f == 40:
            return ("dash", np.array([50.0, 0.0, 0.0]))
        return (2.0, 0.0)

    def climber(f, a):  # pushes diagonally into the quarry stairs
        return (3.0, 1.5)

    def crate(f, a):  # dropped into the pit, slides toward the slabs... then rests
        return (0.0, 0.0)

    def hopper(f, a):  # walks into the fence, jumping
        if a.grounded and f % 50 == 10:
            return ("jump", 9.0)
        return (0.0, 2.5)

    return [
        _Actor(101, "walker", (8.5, 4.9, 28.0), (0.3, 0.9, 0.3), walker),
        _Actor(102, "dasher", (14.0, 4.9, 10.5), (0.3, 0.9, 0.3), dasher),
        _Actor(103, "climber", (30.0, 4.9, 16.0), (0.3, 0.9, 0.3), climber),
        _Actor(104, "crate", (46.5, 9.0, 20.5), (0.45, 0.45, 0.45), crate),
        _Actor(105, "hopper", (10.5, 4.9, 36.0), (0.3, 0.9, 0.3), hopper),
    ]


def _scripted_size(a: _Actor, f: int, off) -> np.ndarray:
    """Half extents of actor ``a`` at frame ``f``; moves the walker when it crouches, stands up or
    respawns (a respawn is a discontinuity on purpose)."""
    h = a.half.copy()
    if a.name == "walker" and 120 <= f < 160:
        h[1] = 0.6  # crouching
        if f == 120:
            a.p[1] -= 0.3
    if a.name == "walker" and f == 160:
        a.p[1] += 0.3
    if a.name == "walker" and f == 200:
        a.p = np.array([8.5, 4.9 + 2.0, 28.0]) + off  # respawn: a discontinuity
    return h


def _wanted_motion(a: _Actor, f: int, dt: float) -> np.ndarray:
    """float64 (3,) motion actor ``a`` wants at frame ``f`` (its script, gravity, ground stick)."""
    cmd = a.script(f, a)
    if isinstance(cmd[0], str) and cmd[0] == "dash":
        m = cmd[1].copy()
    else:
        if isinstance(cmd[0], str) and cmd[0] == "jump":
            a.v[1] = cmd[1]
        else:
            a.v[0], a.v[2] = cmd
        a.v[1] -= GRAVITY * dt
        m = a.v * dt
        if a.grounded and a.v[1] <= 0:
            m[1] = -GROUND_STICK
    if a.name == "hopper" and f == 77:
        m = np.array([np.nan, 0.0, 0.0])  # an engine bug: a division by zero upstream
    return m


def _engine_frame(world: VoxelWorld, a: _Actor, p, m, h, dtype) -> np.ndarray:
    """Run the toy engine for actor ``a`` from ``p`` by ``m`` and update its state; returns the end."""
    if not np.isfinite(m).all():
        return p
    q, pushed = push_out_step(world, p, m.astype(dtype), h.astype(dtype), dtype)
    a.grounded = bool(pushed[1] and m[1] < 0)
    if pushed[1]:
        a.v[1] = 0.0
    if pushed[0] and pushed[2]:
        a.v[0] = a.v[2] = 0.0  # flawed: a corner push kills the whole slide
    a.p = q.astype(float)
    return q


def simulate(frames: int = 240, offset=(0, 0, 0), dtype=np.float64):
    """Run the toy engine on the quarry; returns the keyword arguments of :func:`write_trace`.

    ``offset`` (voxels, multiples of 16) moves the whole scenario, e.g. far from the origin to show
    float32 precision loss; ``dtype`` is the engine's float type.
    """
    offset = np.asarray(offset, np.int64)
    origin, blocks = chunks_from_dense(quarry_grid(), offset, 16)
    edits = np.array([[90, 20, 4, 12, AIR], [90, 20, 5, 12, AIR],      # a doorway opens in the wall
                      [150, 9, 4, 22, PLANK]], np.int64)                 # a crate-sized block appears
    edits[:, 1:4] += offset
    world = VoxelWorld(16, origin, blocks, SHAPES, 1.0, edits)
    actors = _scripts()
    off = offset.astype(float)
    for a in actors:
        a.p = a.p + off
    N = len(actors)
    start = np.zeros((frames, N, 3), dtype)
    motion = np.zeros((frames, N, 3), dtype)
    end = np.zeros((frames, N, 3), dtype)
    active = np.ones((frames, N), bool)
    half = np.zeros((frames, N, 3), dtype)
    dt = 1.0 / FPS
    for f in range(frames):
        world.advance_to(f)
        for n, a in enumerate(actors):
            if a.name == "crate" and f < 20:
                active[f, n] = False  # spawned at frame 20
                start[f, n] = end[f, n] = np.nan  # never read: the row is inactive
                continue
            h = _scripted_size(a, f, off)
            m = _wanted_motion(a, f, dt)
            p = a.p.astype(dtype)
            start[f, n], motion[f, n], half[f, n] = p, m.astype(dtype), h.astype(dtype)
            end[f, n] = _engine_frame(world, a, p, m, h, dtype)
    ids = np.array([a.id for a in actors], np.int64)
    return dict(chunk_size=16, chunk_origin=origin, chunk_blocks=blocks.astype(np.uint8), shapes=SHAPES,
                edits=edits, entity_ids=ids, entity_names=[a.name for a in actors],
                half_extents=np.array([a.half for a in actors]), time=np.arange(frames) / FPS,
                start=start, motion=motion, end=end, active=active, frame_half_extents=half,
                frame_dtype=dtype)


DEMO_FILES = {
    "quarry.h5": dict(offset=(0, 0, 0), dtype=np.float64,
                      title="Quarry: walker, dasher, climber, crate and hopper (toy push-out engine)"),
    "quarry_far_f32.h5": dict(offset=(65536, 0, -65536), dtype=np.float32,
                              title="Quarry moved 65536 voxels from the origin, engine in float32"),
}


def write_demo_traces(folder) -> list[Path]:
    """Write the bundled demo traces into ``folder``; returns their paths."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for name, spec in DEMO_FILES.items():
        kw = simulate(offset=spec["offset"], dtype=spec["dtype"])
        path = folder / name
        write_trace(path, title=spec["title"], producer="resweep toy push-out engine", **kw)
        out.append(path)
    return out
